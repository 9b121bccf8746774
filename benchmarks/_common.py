"""Shared helpers of the benchmark scripts: machine record, repeated timing, result files.

Every figure is written together with the machine it was measured on and
the load average during the run; comparisons are ratios of two quantities
measured in the same run (medians of several repeats), because the machine
is shared.
"""

from __future__ import annotations

import json
import os
import platform
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RESULTS = ROOT / "results" / "perf"

if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def machine() -> dict:
    """CPU model, cores, versions, BLAS threads, load average now."""
    import numpy as np

    info = {"cpu": cpu_model(), "cores": os.cpu_count(), "python": platform.python_version(),
            "numpy": np.__version__, "platform": platform.platform(),
            "OPENBLAS_NUM_THREADS": os.environ.get("OPENBLAS_NUM_THREADS"),
            "loadavg_start": list(os.getloadavg())}
    try:
        import scipy
        info["scipy"] = scipy.__version__
    except ImportError:
        pass
    if "jax" in sys.modules:
        import jax
        info["jax"] = jax.__version__
    return info


def timed(fn, repeats: int = 5, warmup: int = 0):
    """Median wall seconds of ``fn()`` over ``repeats`` runs, all the samples, and the last result."""
    out = None
    for _ in range(warmup):
        out = fn()
    samples = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        samples.append(time.perf_counter() - t0)
    return statistics.median(samples), samples, out


def timed_cpu(fn, repeats: int = 5):
    """Medians of wall seconds and of this process's CPU seconds over ``repeats`` runs of ``fn()``.

    On a machine shared with other jobs a single-threaded run's CPU seconds are
    close to what it would take on an idle core; wall seconds depend on the load.
    """
    walls, cpus = [], []
    for _ in range(repeats):
        c0, w0 = time.process_time(), time.perf_counter()
        fn()
        walls.append(time.perf_counter() - w0)
        cpus.append(time.process_time() - c0)
    return statistics.median(walls), statistics.median(cpus)


def write_results(name: str, payload: dict, table: list[dict], notes: str = "", quick: bool = False) -> Path:
    """Write results/perf/<name>.json and .md (``<name>.quick.*`` for --quick runs) and print the table."""
    import numpy as np

    info = payload.setdefault("machine", machine())
    info["loadavg_end"] = list(os.getloadavg())
    try:
        import jax
        info["jax"] = jax.__version__
    except ImportError:
        pass
    info["numpy"] = np.__version__
    payload["quick"] = bool(quick)
    payload["finished_utc"] = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
    payload["table"] = table
    RESULTS.mkdir(parents=True, exist_ok=True)
    stem = f"{name}.quick" if quick else name
    jpath = RESULTS / f"{stem}.json"
    jpath.write_text(json.dumps(payload, indent=2, default=_default) + "\n")
    md = _markdown(name, table, info, notes, quick)
    (RESULTS / f"{stem}.md").write_text(md)
    print(md)
    print(f"wrote {jpath.relative_to(ROOT)} and .md")
    return jpath


def _default(o):
    import numpy as np

    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    return str(o)


def _fmt(v) -> str:
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        if v == 0 or 1e-3 <= abs(v) < 1e5:
            return f"{v:.4g}"
        return f"{v:.3e}"
    return str(v)


def _markdown(name, table, info, notes, quick) -> str:
    lines = [f"# {name}{' (quick run)' if quick else ''}", ""]
    if table:
        cols = list(dict.fromkeys(k for row in table for k in row))
        lines.append("| " + " | ".join(cols) + " |")
        lines.append("|" + "---|" * len(cols))
        for row in table:
            lines.append("| " + " | ".join(_fmt(row.get(c, "")) for c in cols) + " |")
        lines.append("")
    la0, la1 = info.get("loadavg_start"), info.get("loadavg_end")
    lines.append(f"Machine: {info.get('cpu')}, {info.get('cores')} cores; Python {info.get('python')}, "
                 f"numpy {info.get('numpy')}, scipy {info.get('scipy')}, jax {info.get('jax')}; "
                 f"load average (1/5/15 min) at start {fmt_load(la0)}, at end {fmt_load(la1)}.")
    if notes:
        lines += ["", notes.strip()]
    return "\n".join(lines) + "\n"


def fmt_load(la) -> str:
    return "/".join(f"{x:.1f}" for x in la) if la else "?"


def lorenz63_samples(n: int, dt: float, *, seed: int, tol: float):
    """``(t, y, system)``: ``n`` Lorenz-63 states ``dt`` apart from a start on the attractor (scipy DOP853)."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from suite.systems import get_system

    s = get_system("lorenz63")
    y0 = s.initial_conditions(1, seed=seed)[0]
    f, p = s.rhs(), s.params
    t = dt * np.arange(n)
    sol = solve_ivp(lambda t_, y: f(t_, y, p), (0.0, t[-1]), y0, method="DOP853", t_eval=t, rtol=tol, atol=tol)
    assert sol.success, sol.message
    return t, sol.y.T, s
