"""Helpers shared by the subcommands: JSON output, atomic writes, parameter parsing."""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import tempfile
from pathlib import Path

from suite.cli import UsageError

__all__ = ["print_json", "atomic_output", "parse_assignments", "check_output_path", "positive_float", "positive_int",
           "non_negative_int"]


def _clean(obj):
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "tolist"):
        return _clean(obj.tolist())
    return obj


def print_json(obj) -> None:
    json.dump(_clean(obj), sys.stdout, indent=2)
    sys.stdout.write("\n")


def positive_float(text: str) -> float:
    """argparse type: a finite number > 0."""
    try:
        v = float(text)
    except ValueError:
        raise UsageError(f"expected a number, got {text!r}") from None
    if not math.isfinite(v) or v <= 0:
        raise UsageError(f"expected a positive number, got {text!r}")
    return v


def _int_at_least(text: str, low: int, what: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected {what}, got {text!r}") from None
    if v < low:
        raise argparse.ArgumentTypeError(f"expected {what}, got {text!r}")
    return v


def positive_int(text: str) -> int:
    """argparse type: an integer >= 1 (argparse names the option in its one-line error)."""
    return _int_at_least(text, 1, "a positive integer")


def non_negative_int(text: str) -> int:
    """argparse type: an integer >= 0."""
    return _int_at_least(text, 0, "an integer >= 0")


def parse_assignments(items, what="--param") -> dict[str, float]:
    """``["rho=28", "sigma=10"]`` -> ``{"rho": 28.0, "sigma": 10.0}``."""
    out: dict[str, float] = {}
    for item in items or ():
        name, sep, value = item.partition("=")
        if not sep or not name:
            raise UsageError(f"{what} expects NAME=VALUE, got {item!r}")
        try:
            out[name.strip()] = float(value)
        except ValueError:
            raise UsageError(f"{what} {name}: value {value!r} is not a number") from None
        if not math.isfinite(out[name.strip()]):
            raise UsageError(f"{what} {name}: value {value!r} is not finite")
    return out


def check_output_path(path: str, suffixes: tuple[str, ...]) -> Path:
    """Validate an output file path before any work is done."""
    p = Path(path)
    if p.suffix.lower() not in suffixes:
        raise UsageError(f"output {path!r} must end in one of {', '.join(suffixes)}")
    if p.is_dir():
        raise UsageError(f"output {path!r} is a folder, expected a file")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise UsageError(f"folder of output {path!r} does not exist")
    if not os.access(parent, os.W_OK):
        raise UsageError(f"folder of output {path!r} is not writable")
    return p


class atomic_output:
    """Context manager yielding a temporary path beside ``path``; renamed onto it on success.

    On any exception the temporary file is removed, so no partial file is left behind.
    """

    def __init__(self, path: Path):
        self.path = Path(path)

    def __enter__(self) -> Path:
        fd, tmp = tempfile.mkstemp(prefix=f".{self.path.name}.", suffix=".tmp", dir=self.path.parent or ".")
        os.close(fd)
        self.tmp = Path(tmp)
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            os.replace(self.tmp, self.path)
        else:
            self.tmp.unlink(missing_ok=True)
        return False
