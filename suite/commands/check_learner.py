"""``lyapbench check-learner``: run the conformance kit on one learner."""

from __future__ import annotations

from suite.commands._common import print_json


def register(sub) -> None:
    p = sub.add_parser("check-learner", help="run the conformance checks on a learner",
                       description="Run the conformance kit (surrogates.conformance) on a registered learner "
                                   "or a module:Class path, with its tiny-budget arguments from "
                                   "surrogates.testing.TINY_PARAMS. Prints PASS, SKIP or FAIL per check; "
                                   "exit code 0 when every check passes, 1 when one fails, 2 for an unknown "
                                   "learner.")
    p.add_argument("learner", metavar="NAME|module:Class", help="registered name or import path")
    p.add_argument("--json", action="store_true", help="print a JSON list of check results")
    p.set_defaults(func=run)


def run(args) -> int:
    from surrogates.conformance import check_learner
    from surrogates.registry import learner_class

    learner_class(args.learner)  # an unknown or broken learner: one line, exit 2
    results = check_learner(args.learner)
    if args.json:
        print_json([{"check": r.name, "passed": r.passed, "skipped": r.skipped, "reason": r.reason}
                    for r in results])
    else:
        for r in results:
            status = "SKIP" if r.skipped else ("PASS" if r.passed else "FAIL")
            print(f"{status} {r.name}" + (f": {r.reason}" if r.reason else ""))
        failed = sum(not r.passed for r in results)
        print(f"{args.learner}: {len(results) - failed} of {len(results)} checks passed"
              + (f", {failed} failed" if failed else ""))
    return 1 if any(not r.passed for r in results) else 0
