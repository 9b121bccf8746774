"""What a run was made with: versions, machine, source revision, grid hash, seeds.

One manifest is stored per ``run`` invocation (table ``manifests`` of the
store) and every cell it finished points to it, so a table can be traced to
the software and machine that produced each row.
"""

from __future__ import annotations

import os
import platform
import subprocess
import sys
from datetime import datetime, timezone
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

__all__ = ["build_manifest", "package_versions", "cpu_model", "git_revision", "PACKAGES"]

PACKAGES = ("lyapbench", "numpy", "scipy", "jax", "jaxlib", "optax", "pandas", "pyarrow",
            "dask", "distributed", "matplotlib", "mpmath", "tqdm", "psutil")


def package_versions(names=PACKAGES) -> dict[str, str | None]:
    """Installed version of each distribution (None where not installed)."""
    out = {}
    for name in names:
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = None
    return out


def cpu_model() -> str:
    """The CPU model name from ``/proc/cpuinfo`` (Linux), else :func:`platform.processor`."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                key, _, value = line.partition(":")
                if key.strip() in ("model name", "Model", "cpu model"):
                    return value.strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def git_revision(path=None) -> dict | None:
    """``{"commit", "dirty"}`` of the git checkout holding ``path`` (default: this package), or None."""
    where = Path(path) if path is not None else Path(__file__).resolve().parent
    try:
        commit = subprocess.run(["git", "rev-parse", "HEAD"], cwd=where, capture_output=True,
                                text=True, timeout=10)
        if commit.returncode != 0:
            return None
        status = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"], cwd=where,
                                capture_output=True, text=True, timeout=10)
    except (OSError, subprocess.TimeoutExpired):
        return None
    return {"commit": commit.stdout.strip(), "dirty": bool(status.stdout.strip())}


def build_manifest(grid=None, **extra) -> dict:
    """A JSON-ready manifest of this run.

    Parameters
    ----------
    grid : suite.grid.Grid, optional
        Adds the grid's name, path, sha256 and seeds.
    **extra
        Further fields (executor, workers, ...).
    """
    m = {
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "python": sys.version.split()[0],
        "python_implementation": platform.python_implementation(),
        "platform": platform.platform(),
        "machine": platform.machine(),
        "cpu_model": cpu_model(),
        "cpu_count": os.cpu_count(),
        "packages": package_versions(),
        "git": git_revision(),
        "argv": list(sys.argv),
    }
    if grid is not None:
        m["grid"] = {"name": grid.name, "path": str(grid.path), "sha256": grid.sha256,
                     "seeds": list(grid.seeds), "n_cells": grid.n_cells}
    m.update(extra)
    return m
