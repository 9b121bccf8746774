"""``lyapbench learners``: list the registered surrogate learners."""

from __future__ import annotations

from suite.commands._common import print_json


def register(sub) -> None:
    p = sub.add_parser("learners", help="list the surrogate learners",
                       description="List every registered learner (built-in and plugins) with its tasks, "
                                   "physics levels, source distribution and reference. A learner whose "
                                   "module fails to import is listed with its error.")
    p.add_argument("--json", action="store_true", help="print a JSON list")
    p.set_defaults(func=run)


def entries() -> list[dict]:
    from surrogates.registry import list_learners

    return list_learners()


def _short(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"


def run(args) -> int:
    rows = entries()
    if args.json:
        print_json(rows)
        return 0
    head = f"{'name':<12} {'tasks':<34} {'physics':<18} {'source':<26} reference"
    print(head)
    print("-" * len(head))
    for d in rows:
        if "error" in d:
            print(f"{d['name']:<12} {'(not loadable)':<34} {'-':<18} {d['source']:<26} {_short(d['error'], 90)}")
            continue
        tasks = ",".join(d["tasks"]) or "-"
        physics = ",".join(d["physics"]) or "-"
        print(f"{d['name']:<12} {tasks:<34} {physics:<18} {_short(d['source'], 26):<26} "
              f"{_short(d['reference'], 90)}")
    return 0
