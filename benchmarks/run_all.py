"""Run every benchmark script in turn (``benchmarks/bench_*.py``), each in its own process.

Usage: ``python benchmarks/run_all.py [--quick] [--only NAME ...] [--skip NAME ...]``.
``--quick`` passes ``--quick`` to every script (a smoke run of each). Results
go to ``results/perf/<name>.json`` and ``.md`` (``<name>.quick.*`` for quick
runs). The exit status is non-zero if any script failed; the others still run.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def names() -> list[str]:
    return sorted(p.stem[len("bench_"):] for p in HERE.glob("bench_*.py"))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="pass --quick to every benchmark")
    ap.add_argument("--only", nargs="+", metavar="NAME", choices=names(), help="run only these")
    ap.add_argument("--skip", nargs="+", metavar="NAME", choices=names(), default=[], help="skip these")
    a = ap.parse_args(argv)
    todo = [n for n in (a.only or names()) if n not in a.skip]
    env = dict(os.environ)
    env.setdefault("OPENBLAS_NUM_THREADS", "1")
    failed = []
    for name in todo:
        cmd = [sys.executable, str(HERE / f"bench_{name}.py")] + (["--quick"] if a.quick else [])
        print(f"== {name}: {' '.join(cmd[1:])}", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call(cmd, cwd=HERE.parent, env=env)
        print(f"== {name}: exit {rc} after {time.perf_counter() - t0:.0f} s", flush=True)
        if rc:
            failed.append(name)
    if failed:
        print(f"failed: {', '.join(failed)}", file=sys.stderr)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
