"""``lyapbench solve``: integrate one system and write its trajectory."""

from __future__ import annotations

import math

import numpy as np

from suite.cli import UsageError
from suite.commands._common import atomic_output, check_output_path, parse_assignments, positive_float, print_json


def register(sub) -> None:
    p = sub.add_parser("solve", help="integrate a system and write the trajectory",
                       description="Integrate SYSTEM from its default (or a given) initial state and write "
                                   "columns t and the state names. The reference horizon (the time up to "
                                   "which two tight integrations agree) is reported with the result.")
    p.add_argument("system", help="system name (see `lyapbench systems`)")
    p.add_argument("--t-end", required=True, type=positive_float, help="end time (> 0)")
    p.add_argument("--dt-out", type=positive_float, default=None,
                   help="output spacing (default: the system's sampling step)")
    p.add_argument("--method", default="DOP853", help="integrator (default DOP853; see --help of the methods below)")
    p.add_argument("--rtol", type=positive_float, default=1e-9, help="relative tolerance of adaptive methods")
    p.add_argument("--atol", type=positive_float, default=1e-12, help="absolute tolerance of adaptive methods")
    p.add_argument("--step", type=positive_float, default=None, help="step size of fixed-step methods")
    p.add_argument("--param", action="append", metavar="NAME=VALUE", help="parameter override (repeatable)")
    p.add_argument("--y0", default=None, help="initial state, comma-separated")
    p.add_argument("--out", default=None, help="write the trajectory to FILE.csv or FILE.parquet")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    p.set_defaults(func=run)


def _parse_y0(text: str, dim: int) -> np.ndarray:
    try:
        vals = [float(v) for v in text.split(",")]
    except ValueError:
        raise UsageError(f"--y0 must be {dim} comma-separated numbers, got {text!r}") from None
    if len(vals) != dim:
        raise UsageError(f"--y0 has {len(vals)} values, the system has dimension {dim}")
    if not all(math.isfinite(v) for v in vals):
        raise UsageError("--y0 values must be finite")
    return np.array(vals)


def run(args) -> int:
    import pandas as pd

    from suite.solver_methods import SOLVER_METHODS, solve_system
    from suite.systems import UnknownNameError, get_system
    from suite.systems.reference import reference_solution

    params = parse_assignments(args.param)
    system = get_system(args.system, **params)
    if args.method not in SOLVER_METHODS:
        raise UnknownNameError("method", args.method, SOLVER_METHODS)
    y0 = _parse_y0(args.y0, system.dim) if args.y0 is not None else np.asarray(system.default_y0(), float)
    out = check_output_path(args.out, (".csv", ".parquet")) if args.out else None
    dt_out = args.dt_out or system.sample_dt
    if dt_out > args.t_end:
        raise UsageError(f"--dt-out {dt_out:g} is longer than --t-end {args.t_end:g}")
    n = int(round(args.t_end / dt_out))
    t_eval = np.linspace(0.0, n * dt_out, n + 1)
    kind = SOLVER_METHODS[args.method].kind
    accuracy = args.rtol if kind == "adaptive" else (args.step or dt_out / 10)
    sol = solve_system(system, args.method, t_eval, y0=y0, accuracy=accuracy, atol=args.atol)
    ref = reference_solution(system, float(t_eval[-1]), y0=y0, dt_out=dt_out)
    horizon = float(ref.extra.get("reference_horizon", float("nan")))
    y = np.asarray(sol.y)
    if out is not None and sol.success:
        frame = pd.DataFrame(y, columns=list(system.state_names))
        frame.insert(0, "t", np.asarray(sol.t))
        with atomic_output(out) as tmp:
            if out.suffix.lower() == ".csv":
                frame.to_csv(tmp, index=False)
            else:
                frame.to_parquet(tmp, index=False)
    summary = {
        "system": system.name,
        "params": system.params,
        "method": args.method,
        "status": sol.status,
        "message": sol.message,
        "n_steps": int(sol.n_steps),
        "nfev": int(sol.nfev),
        "seconds": float(sol.seconds),
        "compile_seconds": float(sol.compile_seconds),
        "t_end": float(t_eval[-1]),
        "n_out": int(len(t_eval)),
        "reference_horizon": horizon,
        "lyapunov_time": system.lyapunov_time,
        "out": str(out) if out else None,
    }
    if args.json:
        print_json(summary)
    else:
        print(f"{system.name}: {args.method} {sol.status}, {sol.n_steps} steps, {sol.nfev} evaluations, "
              f"{sol.seconds:.3g} s; reference horizon {horizon:.4g} time units"
              + (f" ({horizon / system.lyapunov_time:.3g} Lyapunov times)" if system.lyapunov_time else ""))
        if out:
            print(f"wrote {out}")
    if not sol.success:
        print(f"error: integration failed: {sol.message}", file=__import__("sys").stderr)
        return 1
    return 0
