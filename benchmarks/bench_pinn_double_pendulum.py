"""Physics-informed network on the double pendulum: reconstruction from 1 % of the samples.

Setup: unit masses and lengths, g = 9.81, both angles 45 degrees, at rest;
window 0–10 s; reference sampled every 0.001 s (10,000 points, scipy DOP853,
rtol = atol = 1e-12). The learner sees a uniform random 1 % (100 points,
fixed seed) and the full equations; the score is the relative L2 error
``||Y_hat - Y||_F / ||Y||_F`` over the held-out 99 % (all four state
variables). Target: 1e-3.

Also reported on the same data: the data-only network (``mlp``), a cubic
spline through the samples (scipy ``CubicSpline``), the PINN at 0.1 % and
10 % of the samples, and a forecast 2 s past the window (the PINN's
``rollout``), which is poor by construction.

Run: ``python benchmarks/bench_pinn_double_pendulum.py`` (about half an hour
on a loaded 2-core machine); ``--quick`` for a short smoke run. Writes
``results/perf/pinn_double_pendulum.json`` and ``.md``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import jax  # noqa: E402
import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402
from scipy.interpolate import CubicSpline  # noqa: E402

import solvers  # noqa: E402,F401  (float64)
from surrogates.data import Budget, Physics, TrainingData  # noqa: E402
from surrogates.mlp import DataOnlyNetwork  # noqa: E402
from surrogates.pinn import PINN  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
TARGET = 1e-3
DT, N_REF = 0.001, 10_000
PARAMS = {"m1": 1.0, "m2": 1.0, "l1": 1.0, "l2": 1.0, "g": 9.81}
Y0 = np.array([np.pi / 4, np.pi / 4, 0.0, 0.0])


def double_pendulum():
    """The system's vector field and parameters, from the suite's registry when present."""
    try:
        from suite.systems import get_system
        system = get_system("double_pendulum")
        if isinstance(system, type):
            system = system()
        return system.rhs(), dict(system.params), "suite.systems double_pendulum"
    except Exception:   # the system is not registered yet: the standard equations, written here
        return _local_rhs, dict(PARAMS), "local equations (benchmark script)"


def _local_rhs(t, y, p):
    """Double pendulum, angles from the vertical (Lagrangian equations solved for the accelerations)."""
    xp = jax.numpy if isinstance(y, jax.Array) or "jax" in type(y).__module__ else np
    th1, th2, w1, w2 = y[0], y[1], y[2], y[3]
    m1, m2, l1, l2, g = p["m1"], p["m2"], p["l1"], p["l2"], p["g"]
    d = th2 - th1
    den1 = (m1 + m2) * l1 - m2 * l1 * xp.cos(d) ** 2
    den2 = (l2 / l1) * den1
    a1 = (m2 * l1 * w1 ** 2 * xp.sin(d) * xp.cos(d) + m2 * g * xp.sin(th2) * xp.cos(d)
          + m2 * l2 * w2 ** 2 * xp.sin(d) - (m1 + m2) * g * xp.sin(th1)) / den1
    a2 = (-m2 * l2 * w2 ** 2 * xp.sin(d) * xp.cos(d)
          + (m1 + m2) * (g * xp.sin(th1) * xp.cos(d) - l1 * w1 ** 2 * xp.sin(d) - g * xp.sin(th2))) / den2
    return xp.stack([w1, w2, a1, a2])


def reference(f, p, t_end):
    t = DT * np.arange(int(round(t_end / DT)))
    sol = solve_ivp(lambda s, y: np.asarray(f(s, y, p)), (0.0, t[-1]), Y0, method="DOP853",
                    t_eval=t, rtol=1e-12, atol=1e-12)
    assert sol.success, sol.message
    return t, sol.y.T


def rel_l2(pred, ref):
    return float(np.linalg.norm(pred - ref) / np.linalg.norm(ref))


def machine_info():
    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {"platform": platform.platform(), "python": sys.version.split()[0],
            "cpu_model": model, "cores": os.cpu_count(), "jax": jax.__version__,
            "load_average_at_start": list(os.getloadavg())}


def sample(n_ref, fraction, seed=0):
    rng = np.random.default_rng(seed)
    n = max(4, int(round(fraction * n_ref)))
    idx = np.sort(rng.choice(n_ref, size=n, replace=False))
    held = np.ones(n_ref, bool)
    held[idx] = False
    return idx, held


def run_network(learner, t, y, idx, held, physics, label):
    """Fit on the samples ``idx``; record held-out error after every compiled chunk."""
    curve = []
    cpu0 = time.process_time()

    def monitor(steps, seconds, phase, evaluate):
        err = rel_l2(evaluate(t[held]), y[held])
        curve.append({"iterations": int(steps), "wall_s": round(seconds, 2),
                      "cpu_s": round(time.process_time() - cpu0, 2), "phase": phase, "rel_l2": err})
        print(f"  {label:>12s} {phase:5s} it={steps:6d} wall={seconds:7.1f}s rel_l2={err:.3e}", flush=True)

    learner._monitor = monitor
    data = TrainingData.from_arrays(t[idx], y[idx], state_names=("theta1", "theta2", "omega1", "omega2"))
    wall0 = time.perf_counter()
    learner.fit(data, physics, Budget(), seed=0)
    wall = time.perf_counter() - wall0
    cpu = time.process_time() - cpu0
    err = rel_l2(learner.predict(t[held]), y[held])
    reached = next((c for c in curve if c["rel_l2"] <= TARGET), None)
    return {"learner": label, "n_samples": int(idx.size), "rel_l2_heldout": err,
            "iterations": learner.n_iterations_, "best_step": learner.best_step_,
            "stop_reason": learner.stop_reason_, "train_wall_s": round(wall, 1), "train_cpu_s": round(cpu, 1),
            "iterations_to_target": reached["iterations"] if reached else None,
            "cpu_s_to_target": reached["cpu_s"] if reached else None,
            "n_parameters": learner.n_parameters(), "hyper_parameters": learner.get_params(),
            "curve": curve}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="short smoke run (small budgets)")
    ap.add_argument("--only", default="all", help="comma list of: pinn,mlp,spline,sparse,dense,forecast")
    ap.add_argument("--adam", type=int, default=3000)
    ap.add_argument("--lbfgs", type=int, default=1500)
    ap.add_argument("--fourier", type=int, default=8)
    ap.add_argument("--colloc", type=int, default=1000)
    ap.add_argument("--physics-weight", type=float, default=0.01)
    ap.add_argument("--causal", type=float, default=0.0)
    ap.add_argument("--out", default=str(ROOT / "results" / "perf" / "pinn_double_pendulum"))
    args = ap.parse_args(argv)
    if args.quick:
        args.adam, args.lbfgs, args.colloc = 500, 100, 500
    parts = {"pinn", "mlp", "spline", "sparse", "dense", "forecast"} if args.only == "all" \
        else set(args.only.split(","))

    f, p, source = double_pendulum()
    t_all, y_all = reference(f, p, 12.0)
    t, y = t_all[:N_REF], y_all[:N_REF]
    physics = Physics(level="full", vector_field=f, params=p)
    idx, held = sample(N_REF, 0.01)
    hp = dict(fourier_features=args.fourier, n_collocation=args.colloc, adam_steps=args.adam,
              lbfgs_steps=args.lbfgs, physics_weight=args.physics_weight, causal_epsilon=args.causal)
    rows, pinn = [], None
    print(f"double pendulum ({source}); {idx.size} samples of {N_REF}; target rel. L2 {TARGET:g}")
    if "pinn" in parts or "forecast" in parts:
        pinn = PINN(**hp)
        rows.append(run_network(pinn, t, y, idx, held, physics, "pinn 1%"))
    if "mlp" in parts:
        mlp_hp = {k: v for k, v in hp.items() if k in DataOnlyNetwork._param_names()}
        rows.append(run_network(DataOnlyNetwork(**mlp_hp), t, y, idx, held, Physics(), "mlp 1%"))
    if "spline" in parts:
        cpu0 = time.process_time()
        spline = CubicSpline(t[idx], y[idx])
        rows.append({"learner": "spline 1%", "n_samples": int(idx.size),
                     "rel_l2_heldout": rel_l2(spline(t[held]), y[held]),
                     "train_cpu_s": round(time.process_time() - cpu0, 3)})
    for frac, name in ((0.001, "sparse"), (0.1, "dense")):
        if name in parts:
            i2, h2 = sample(N_REF, frac)
            rows.append(run_network(PINN(**hp), t, y, i2, h2, physics, f"pinn {frac:.1%}"))
            sp = CubicSpline(t[i2], y[i2])
            rows.append({"learner": f"spline {frac:.1%}", "n_samples": int(i2.size),
                         "rel_l2_heldout": rel_l2(sp(t[h2]), y[h2])})
    forecast = None
    if "forecast" in parts and pinn is not None:
        # start at the last reference state of the window, run 2 s past it
        k0 = N_REF - 1
        tf = t_all[k0:]
        ref = y_all[k0:]
        horizons = (0.1, 0.5, 1.0, 2.0)
        at = [min(len(tf) - 1, int(round(h / DT))) for h in horizons]

        def errs_at(pred):
            e = np.linalg.norm(pred - ref, axis=1) / np.linalg.norm(ref, axis=1)
            return [float(e[i]) for i in at]

        t_star = float(pinn.matched_times(y_all[k0][None, :])[0])
        roll = pinn.rollout(y_all[k0][None, :], tf)[0]
        extrap = pinn.predict(tf)       # the network at absolute times past its window
        forecast = {"start_time": float(tf[0]), "horizons_s": list(horizons),
                    "rollout_relative_error": errs_at(roll), "rollout_replay_from_t": t_star,
                    "extrapolation_relative_error": errs_at(extrap),
                    "note": ("rollout = replay of the learned trajectory from the time where it passes "
                             "closest to the start state, network extrapolation once past the window; "
                             "extrapolation = the network evaluated at absolute times after the window")}
        print(f"rollout (replay from t*={t_star:.3f} s) relative error at +0.1, +0.5, +1, +2 s:",
              ", ".join(f"{e:.2e}" for e in forecast["rollout_relative_error"]))
        print("network extrapolation relative error at +0.1, +0.5, +1, +2 s:",
              ", ".join(f"{e:.2e}" for e in forecast["extrapolation_relative_error"]))

    out = Path(args.out)
    if args.only != "all" and not args.quick and out.with_suffix(".json").exists():
        # a partial rerun replaces its own rows and keeps the others of the last full run
        old = json.loads(out.with_suffix(".json").read_text())
        mine = {r["learner"] for r in rows}
        rows = [r for r in old.get("rows", []) if r["learner"] not in mine] + rows
        order = ["pinn 1%", "mlp 1%", "spline 1%", "pinn 0.1%", "spline 0.1%", "pinn 10.0%", "spline 10.0%"]
        rows.sort(key=lambda r: order.index(r["learner"]) if r["learner"] in order else len(order))
        if forecast is None:
            forecast = old.get("forecast")

    result = {"benchmark": "pinn_double_pendulum", "system_source": source, "params": p,
              "y0": Y0.tolist(), "window_s": [float(t[0]), float(t[-1])], "reference_dt": DT,
              "reference_points": N_REF, "target_rel_l2": TARGET, "machine": machine_info(),
              "rows": rows, "forecast": forecast,
              "date_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())}
    lines = ["| learner | samples | held-out rel. L2 | iterations | to 1e-3: iterations | to 1e-3: CPU s | train CPU s |",
             "| --- | --- | --- | --- | --- | --- | --- |"]
    for r in rows:
        lines.append(f"| {r['learner']} | {r['n_samples']} | {r['rel_l2_heldout']:.2e} | {r.get('iterations', '-')} "
                     f"| {r.get('iterations_to_target') or '-'} | {r.get('cpu_s_to_target') or '-'} "
                     f"| {r.get('train_cpu_s', '-')} |")
    table = "\n".join(lines)
    print(table)
    if not args.quick:
        out.parent.mkdir(parents=True, exist_ok=True)
        out.with_suffix(".json").write_text(json.dumps(result, indent=1, default=str) + "\n")
        md = [f"# PINN on the double pendulum ({result['date_utc']})", "",
              f"Machine: {result['machine']['cpu_model']}, {result['machine']['cores']} cores "
              f"(load average at start {result['machine']['load_average_at_start'][0]:.1f}); "
              f"{result['machine']['platform']}.", "",
              f"System: {source}; y0 = (pi/4, pi/4, 0, 0); window {t[0]:g}–{t[-1]:g} s, reference every {DT} s "
              f"(DOP853 rtol 1e-12); held-out relative L2 over all four variables; target {TARGET:g}.", "",
              table, "",
              "Iterations are Adam steps then L-BFGS steps (one per L-BFGS update, whatever its line search "
              "costs); the error is read every 500 steps, so \"to 1e-3\" is the first reading at or below "
              "the target. CPU seconds are the process's CPU time, JIT compilation included, on a machine "
              "shared with other jobs (see the load average). Network: 4x64 tanh, 8 Fourier harmonics, "
              "1,000 collocation points, physics weight 0.01, 10 % of the samples held out for early "
              "stopping; no causal weighting (hyper-parameters in the JSON file). The spline wins when the "
              "samples are dense (10 %): the PINN's error floor there is set by the optimiser, not the data.",
              ""]
        if forecast and "rollout_relative_error" in forecast:
            hs = forecast["horizons_s"]
            md.append("Forecast past the window (pinn 1 %, from the reference state at the window end; "
                      "relative error of the state):")
            md.append("")
            md.append("| | " + " | ".join(f"+{h:g} s" for h in hs) + " |")
            md.append("| --- |" + " --- |" * len(hs))
            md.append(f"| rollout (replays its trajectory from t* = {forecast['rollout_replay_from_t']:.3f} s) | "
                      + " | ".join(f"{e:.2e}" for e in forecast["rollout_relative_error"]) + " |")
            md.append("| network extrapolated past the window | "
                      + " | ".join(f"{e:.2e}" for e in forecast["extrapolation_relative_error"]) + " |")
            md.append("")
            md.append("The rollout is only as good as the recurrence it finds: this orbit (45°/45° at rest) "
                      "comes back close to its end state inside the window, so the replay tracks for a while; "
                      "the network's own extrapolation is what a PINN offers past its data.")
        out.with_suffix(".md").write_text("\n".join(md) + "\n")
    return result


if __name__ == "__main__":
    main()
