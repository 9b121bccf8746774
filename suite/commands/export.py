"""``lyapbench export``: a store as one tidy long table (Parquet or CSV)."""

from __future__ import annotations

from suite.commands._common import atomic_output, check_output_path


def register(sub) -> None:
    p = sub.add_parser(
        "export", help="write a store as one tidy table (Parquet or CSV)",
        description="Write one row per cell x metric x horizon: cell, system, task, learner, "
                    "learner_params, system_params, task_options, fraction, noise, physics, seed, "
                    "status, error, kind (accuracy|cost), metric, horizon (Lyapunov times, empty where "
                    "not a curve), value. Cells whose status is not ok (failed, diverged, timeout, "
                    "not_applicable) appear as one row with the metric empty. The file is written atomically.")
    p.add_argument("store", metavar="STORE", help="SQLite store written by `lyapbench run`")
    p.add_argument("--out", required=True, metavar="FILE", help="FILE.parquet or FILE.csv")
    p.set_defaults(func=run)


def run(args) -> int:
    from suite.export import EXPORT_SUFFIXES, tidy_table

    out = check_output_path(args.out, EXPORT_SUFFIXES)
    df = tidy_table(args.store)
    with atomic_output(out) as tmp:
        if out.suffix.lower() == ".parquet":
            df.to_parquet(tmp, index=False)
        else:
            df.to_csv(tmp, index=False)
    n_cells = df["cell"].nunique() if len(df) else 0
    print(f"wrote {len(df)} rows ({n_cells} cells) to {out}")
    return 0
