"""Lyapunov spectra: Lorenz-63 and Lorenz-96 (N=40, F=8), ours against plain numpy.

Ours: :func:`solvers.lyapunov_spectrum` (RK4 map, re-orthonormalised every 10
steps, compiled once). Its default ``tangent="auto"`` pushes Lorenz-63's 3
vectors by a vmapped ``jax.linearize`` of the step ("jvp") and Lorenz-96's 40
vectors through the Jacobian matrix of the field at each Runge–Kutta stage
("matrix"); Lorenz-96 is also timed on the "jvp" path, for comparison.
Plain numpy: the same method written the way a user would — RK4 on the
state and, stage by stage, on the tangent vectors through the hand-written
Jacobian–vector product, ``numpy.linalg.qr`` every 10 steps — timed on a
shorter run (its cost per step does not depend on the run length) and
compared per tangent vector per step.

Checks beside each spectrum: the sum of the exponents equals the mean trace
of the Jacobian, a closed form for both systems (Lorenz-63:
``-(sigma + 1 + beta) = -13.6667``; Lorenz-96: ``-N = -40``).

Published values: Lorenz-63 ``(0.9056, 0, -14.5723)`` (J. C. Sprott,
*Chaos and Time-Series Analysis*, Oxford University Press, 2003);
Lorenz-96 N=40, F=8 largest exponent ~1.68 (from memory, as recorded in
``suite/systems/lorenz96.py``).

Times: wall seconds and CPU seconds of this process (``time.process_time``)
— on a machine shared by other jobs the CPU seconds are the better guide to
what an idle machine would take.

Usage: ``python benchmarks/bench_lyapunov.py [--quick]``.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine, write_results  # noqa: E402

import numpy as np  # noqa: E402

SPROTT_L63 = np.array([0.9056, 0.0, -14.5723])


# ---------------------------------------------------------------- plain numpy Benettin + QR
def l63_f(y, p):
    x, yy, z = y
    return np.array([p["sigma"] * (yy - x), x * (p["rho"] - z) - yy, x * yy - p["beta"] * z])


def l63_jvp(y, V, p):
    """J(y) @ V for a (3, k) block V."""
    x, yy, z = y
    J = np.array([[-p["sigma"], p["sigma"], 0.0], [p["rho"] - z, -1.0, -x], [yy, x, -p["beta"]]])
    return J @ V


def l96_f(y, p):
    return (np.roll(y, -1) - np.roll(y, 2)) * np.roll(y, 1) - y + p["F"]


def l96_jvp(y, V, p):
    """J(y) @ V for an (N, k) block V, from d/dx of (x_{i+1} - x_{i-2}) x_{i-1} - x_i + F."""
    r = lambda a, s: np.roll(a, s, axis=0)  # noqa: E731
    yc = y[:, None]
    return (r(V, -1) - r(V, 2)) * r(yc, 1) + (r(yc, -1) - r(yc, 2)) * r(V, 1) - V


def numpy_benettin(f, jvp, y0, p, dt, n_transient, n_steps, renorm_every=10, k=None):
    """Benettin's method with RK4 on state and tangents and Householder QR (numpy.linalg.qr)."""
    y = np.asarray(y0, float).copy()
    d = y.size
    k = d if k is None else k
    h2, h6 = dt / 2.0, dt / 6.0

    def rk4(y):
        k1 = f(y, p)
        k2 = f(y + h2 * k1, p)
        k3 = f(y + h2 * k2, p)
        k4 = f(y + dt * k3, p)
        return y + h6 * (k1 + 2 * k2 + 2 * k3 + k4)

    for _ in range(n_transient):
        y = rk4(y)
    V = np.eye(d, k)
    acc = np.zeros(k)
    for i in range(n_steps):
        # RK4 of the combined system (y, V): the tangent stages use the Jacobian at the state stages
        k1 = f(y, p)
        K1 = jvp(y, V, p)
        y2 = y + h2 * k1
        k2 = f(y2, p)
        K2 = jvp(y2, V + h2 * K1, p)
        y3 = y + h2 * k2
        k3 = f(y3, p)
        K3 = jvp(y3, V + h2 * K2, p)
        y4 = y + dt * k3
        k4 = f(y4, p)
        K4 = jvp(y4, V + dt * K3, p)
        y = y + h6 * (k1 + 2 * k2 + 2 * k3 + k4)
        V = V + h6 * (K1 + 2 * K2 + 2 * K3 + K4)
        if (i + 1) % renorm_every == 0:
            Q, R = np.linalg.qr(V)
            acc += np.log(np.abs(np.diag(R)))
            V = Q
    return np.sort(acc / (n_steps * dt))[::-1]


# ---------------------------------------------------------------- runs
def ours(system, dt, t_avg, transient, **kw):
    import solvers

    def once():
        c0, w0 = time.process_time(), time.perf_counter()
        r = solvers.lyapunov_spectrum(system.rhs(), system.default_y0(), system.params, dt=dt,
                                      t_end=transient + t_avg, transient=transient, **kw)
        return r, time.perf_counter() - w0, time.process_time() - c0

    first = once()
    again = once()  # compiled already: run only
    return first + (again[2],)


def main(quick: bool) -> None:
    import jax

    from suite.systems import get_system

    info = machine()
    info["jax"] = jax.__version__
    table, runs = [], {}

    # ---- Lorenz-63
    s63 = get_system("lorenz63")
    p63 = {k: float(v) for k, v in s63.params.items()}
    trace63 = -(p63["sigma"] + 1.0 + p63["beta"])
    configs = [(0.01, 1000.0)] if quick else [(0.01, 1000.0), (0.01, 10000.0), (0.02, 10000.0)]
    for dt, T in configs:
        r, wall, cpu, cpu_run = ours(s63, dt, T, 100.0)
        rel = (r.exponents[0] / SPROTT_L63[0] - 1.0) * 100
        row = {"system": "lorenz63", "impl": "ours", "tangent": r.tangent, "dt": dt, "t_avg": T,
               "exponents": np.round(r.exponents, 4).tolist(),
               "lambda1_rel_err_pct": rel, "sum_minus_trace": float(r.exponents.sum() - trace63),
               "run_s": r.seconds, "compile_s": r.compile_seconds, "wall_incl_compile_s": wall,
               "cpu_incl_compile_s": cpu, "us_per_vector_step": r.seconds / (r.n_steps * 3) * 1e6,
               "cpu_us_per_vector_step": cpu_run / (r.n_steps * 3) * 1e6}
        table.append(row)
        print(row, flush=True)
    ours63 = next(row for row in table if row["t_avg"] == configs[0][1] and row["dt"] == 0.01)
    n_np = 3000 if quick else 20000
    c0, w0 = time.process_time(), time.perf_counter()
    lam = numpy_benettin(l63_f, l63_jvp, s63.default_y0(), p63, 0.01, 1000, n_np)
    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
    np63 = {"system": "lorenz63", "impl": "numpy", "dt": 0.01, "t_avg": n_np * 0.01,
            "exponents": np.round(lam, 4).tolist(), "lambda1_rel_err_pct": (lam[0] / SPROTT_L63[0] - 1) * 100,
            "sum_minus_trace": float(lam.sum() - trace63), "run_s": wall, "cpu_incl_compile_s": cpu,
            "us_per_vector_step": wall / ((n_np + 1000) * 3) * 1e6,
            "cpu_us_per_vector_step": cpu / ((n_np + 1000) * 3) * 1e6}
    table.append(np63)
    print(np63, flush=True)
    runs["lorenz63_speedup_per_vector_step"] = np63["us_per_vector_step"] / ours63["us_per_vector_step"]
    runs["lorenz63_speedup_cpu"] = np63["cpu_us_per_vector_step"] / ours63["cpu_us_per_vector_step"]

    # ---- Lorenz-96, N = 40, F = 8
    s96 = get_system("lorenz96", N=40, F=8.0)
    n = s96.dim
    T96 = 50.0 if quick else 200.0
    rows96 = []
    for tangent in ("auto", "jvp"):
        r, wall, cpu, cpu_run = ours(s96, 0.01, T96, 50.0, tangent=tangent)
        row = {"system": "lorenz96 N=40 F=8", "impl": "ours" if tangent == "auto" else "ours (jvp path)",
               "tangent": r.tangent, "dt": 0.01, "t_avg": T96,
               "exponents": np.round(r.exponents[:3], 4).tolist() + ["..."],
               "lambda1": float(r.exponents[0]), "kaplan_yorke": r.kaplan_yorke_dimension,
               "sum_minus_trace": float(r.exponents.sum() + n), "run_s": r.seconds, "compile_s": r.compile_seconds,
               "wall_incl_compile_s": wall, "cpu_incl_compile_s": cpu,
               "us_per_vector_step": r.seconds / (r.n_steps * n) * 1e6,
               "cpu_us_per_vector_step": cpu_run / (r.n_steps * n) * 1e6}
        rows96.append(row)
        table.append(row)
        print(row, flush=True)
    row96 = rows96[0]
    p96 = {"F": 8.0}
    n_np96 = 1000 if quick else 5000
    c0, w0 = time.process_time(), time.perf_counter()
    lam96 = numpy_benettin(l96_f, l96_jvp, s96.default_y0(), p96, 0.01, 500, n_np96)
    wall, cpu = time.perf_counter() - w0, time.process_time() - c0
    np96 = {"system": "lorenz96 N=40 F=8", "impl": "numpy", "dt": 0.01, "t_avg": n_np96 * 0.01,
            "exponents": np.round(lam96[:3], 4).tolist() + ["..."], "lambda1": float(lam96[0]),
            "sum_minus_trace": float(lam96.sum() + n), "run_s": wall, "cpu_incl_compile_s": cpu,
            "us_per_vector_step": wall / ((n_np96 + 500) * n) * 1e6,
            "cpu_us_per_vector_step": cpu / ((n_np96 + 500) * n) * 1e6}
    table.append(np96)
    print(np96, flush=True)
    runs["lorenz96_speedup_per_vector_step"] = np96["us_per_vector_step"] / row96["us_per_vector_step"]
    runs["lorenz96_speedup_cpu"] = np96["cpu_us_per_vector_step"] / row96["cpu_us_per_vector_step"]
    runs["lorenz96_matrix_over_jvp_path"] = rows96[1]["us_per_vector_step"] / row96["us_per_vector_step"]

    within = [row for row in table if row["system"] == "lorenz63" and row["impl"] == "ours"
              and abs(row["lambda1_rel_err_pct"]) <= 0.2]
    best = min(within, key=lambda row: row["wall_incl_compile_s"]) if within else None
    targets = {
        "l63_within_1pct": any(abs(row["lambda1_rel_err_pct"]) <= 1.0 for row in table
                               if row["system"] == "lorenz63" and row["impl"] == "ours"),
        "l63_within_0.2pct_fastest": best,
        "l63_within_0.2pct_le_2s_incl_compile": bool(best and best["wall_incl_compile_s"] <= 2.0),
        "speedup_vs_numpy_ge_20": {"lorenz63_wall": runs["lorenz63_speedup_per_vector_step"],
                                   "lorenz96_wall": runs["lorenz96_speedup_per_vector_step"],
                                   "lorenz63_cpu": runs["lorenz63_speedup_cpu"],
                                   "lorenz96_cpu": runs["lorenz96_speedup_cpu"]},
    }
    notes = ("us_per_vector_step = run seconds / (steps x tangent vectors), transient steps included, compile "
             "excluded. Speed-up per tangent vector per step vs plain numpy (same run): "
             f"Lorenz-63 {runs['lorenz63_speedup_per_vector_step']:.0f}x, "
             f"Lorenz-96 {runs['lorenz96_speedup_per_vector_step']:.0f}x (by CPU seconds: "
             f"{runs['lorenz63_speedup_cpu']:.0f}x and {runs['lorenz96_speedup_cpu']:.0f}x); Lorenz-96's matrix path is "
             f"{runs['lorenz96_matrix_over_jvp_path']:.1f}x faster than its jvp path. lambda1_rel_err_pct is against Sprott "
             "(2003) 0.9056; sum_minus_trace checks the exponents' sum against the Jacobian's trace (closed form). "
             "Lorenz-63 is timed from a fresh compile each configuration (counts are static).")
    write_results("lyapunov", {"machine": info, "targets": targets, "speedups": runs}, table, notes, quick)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="short runs (smoke test)")
    main(ap.parse_args().quick)
