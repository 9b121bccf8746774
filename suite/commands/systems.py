"""``lyapbench systems``: list the registered dynamical systems."""

from __future__ import annotations

from suite.commands._common import print_json


def register(sub) -> None:
    p = sub.add_parser("systems", help="list the dynamical systems",
                       description="List every registered system with its dimension, parameters, "
                                   "largest Lyapunov exponent and the sources of its published values.")
    p.add_argument("--json", action="store_true", help="print a JSON list")
    p.set_defaults(func=run)


def entries() -> list[dict]:
    from suite.systems import available_systems, get_system
    from suite.systems.registry import system_source

    out = []
    for name in available_systems():
        d = get_system(name).describe()
        d["source"] = system_source(name)
        out.append(d)
    return out


def run(args) -> int:
    rows = entries()
    if args.json:
        print_json(rows)
        return 0
    head = f"{'name':<22} {'dim':>4} {'lambda_max':>11} {'t_lyap':>8}  params"
    print(head)
    print("-" * len(head))
    for d in rows:
        lam = "-" if d["lyapunov_exponent"] is None else f"{d['lyapunov_exponent']:.4g}"
        lt = "-" if d["lyapunov_time"] is None else f"{d['lyapunov_time']:.3g}"
        ps = ", ".join(f"{k}={v:g}" for k, v in d["params"].items())
        print(f"{d['name']:<22} {d['dim']:>4} {lam:>11} {lt:>8}  {ps}")
    return 0
