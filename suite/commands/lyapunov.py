"""``lyapbench lyapunov``: the Lyapunov spectrum of a system."""

from __future__ import annotations

from suite.commands._common import parse_assignments, positive_float, print_json


def register(sub) -> None:
    p = sub.add_parser("lyapunov", help="compute the Lyapunov spectrum of a system",
                       description="Full Lyapunov spectrum by tangent-space propagation with periodic QR "
                                   "re-orthonormalisation (Benettin et al. 1980), and the Kaplan–Yorke dimension.")
    p.add_argument("system", help="system name (see `lyapbench systems`)")
    p.add_argument("--param", action="append", metavar="NAME=VALUE", help="parameter override (repeatable)")
    p.add_argument("--t-end", type=positive_float, default=None, help="averaging time after the transient (default per system)")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    p.set_defaults(func=run)


def run(args) -> int:
    from suite.systems import get_system
    from suite.systems.spectrum import system_lyapunov_spectrum

    system = get_system(args.system, **parse_assignments(args.param))
    res = system_lyapunov_spectrum(system, t_end=args.t_end)
    out = {
        "system": system.name,
        "params": system.params,
        "exponents": [float(x) for x in res.exponents],
        "kaplan_yorke_dimension": float(res.kaplan_yorke_dimension),
        "seconds": float(res.seconds),
        "n_steps": int(res.n_steps),
        "published": [{"quantity": pv.quantity, "value": pv.value, "source": pv.source}
                      for pv in system.published if "lyapunov" in pv.quantity],
    }
    if args.json:
        print_json(out)
    else:
        ex = ", ".join(f"{x:.4f}" for x in res.exponents)
        print(f"{system.name}: exponents ({ex}); Kaplan–Yorke dimension {res.kaplan_yorke_dimension:.4f}; "
              f"{res.seconds:.2f} s")
        if not system.chaotic:
            print(f"  note: {system.name} is not chaotic at its default parameters; finite-time exponents "
                  "of a regular orbit decay towards zero only slowly (like 1/t)")
        for pv in out["published"]:
            print(f"  published {pv['quantity']}: {pv['value']} ({pv['source']})")
    return 0
