"""The ``lyapbench`` command line.

Each subcommand lives in its own module under :mod:`suite.commands` and
exposes ``register(subparsers)``; the module list below is the only place
that names them. Bad input raises :class:`UsageError` (or a ``ValueError``
from validation) and becomes one line on stderr and exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

__all__ = ["main", "UsageError", "build_parser"]

COMMANDS = (
    "systems",
    "learners",
    "solve",
    "lyapunov",
    "check_learner",
    "run",
    "export",
    "report",
    "verify",
    "demo",
)


class UsageError(Exception):
    """Bad input from the user: printed as one line, exit code 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2 (argparse's code), no usage dump
        raise UsageError(f"{self.prog}: {message}")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="lyapbench",
        description="Benchmark learned surrogate models against numerical solvers on chaotic systems.",
    )
    from suite import __version__

    parser.add_argument("--version", action="version", version=f"lyapbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"suite.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"suite.commands.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv=None) -> int:
    from suite.systems import UnknownNameError

    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        code = args.func(args)
        return int(code or 0)
    except UsageError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except (UnknownNameError, ValueError, FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
