"""A store as one tidy long table: one row per cell × metric × horizon.

Columns (in this order): ``cell`` (key), ``system``, ``task``, ``learner``,
``learner_params``, ``system_params``, ``task_options`` (JSON strings of the
overrides), ``fraction``, ``noise``, ``physics``, ``seed``, ``status``,
``error``, ``kind`` (``accuracy`` or ``cost``), ``metric``, ``horizon``
(Lyapunov times; empty where the figure is not a curve), ``value``.

Cost figures of a cell (``train_seconds``, ``train_cpu_seconds``,
``inference_seconds_per_lyapunov_time``, ``peak_memory_mb``,
``n_parameters``, whatever numbers the cell function reported) are rows of
kind ``cost``. A cell with a non-``ok`` status (failed, diverged, timeout,
not_applicable) appears as exactly one row with its status and error and
``kind``, ``metric``, ``horizon`` and ``value`` empty, so that every cell of
the store is in the table once and no partial figure of a broken cell is
mistaken for a result (the store keeps whatever such a cell reported).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pandas as pd

from suite.store import Store

__all__ = ["tidy_table", "write_table", "COLUMNS", "EXPORT_SUFFIXES"]

COLUMNS = ("cell", "system", "task", "learner", "learner_params", "system_params", "task_options",
           "fraction", "noise", "physics", "seed", "status", "error", "kind", "metric", "horizon",
           "value")
EXPORT_SUFFIXES = (".parquet", ".csv")


def _cost_value(v):
    if isinstance(v, bool) or v is None:
        return None
    if isinstance(v, (int, float)):
        return float(v)
    if isinstance(v, str):  # NaN and infinities are stored as their repr in JSON
        try:
            return float(v)
        except ValueError:
            return None
    return None


def tidy_table(store) -> pd.DataFrame:
    """The tidy long table of a store (a path or an open :class:`~suite.store.Store`)."""
    if isinstance(store, Store):
        return _table(store)
    with Store.open(store, readonly=True) as st:
        return _table(st)


def _table(st: Store) -> pd.DataFrame:
    by_cell: dict[str, list] = {}
    for cell, metric, horizon, value in st.metrics():
        by_cell.setdefault(cell, []).append(("accuracy", metric, horizon, value))
    rows = []
    for c in st.cells():
        spec = c["spec"]
        base = (c["key"], c["system"], c["task"], c["learner"],
                json.dumps(spec.get("learner_params", {}), sort_keys=True),
                json.dumps(spec.get("system_params", {}), sort_keys=True),
                json.dumps(spec.get("task_options", {}), sort_keys=True),
                float(c["fraction"]), float(c["noise"]), c["physics"], int(c["seed"]), c["status"],
                c["error"] or "")
        figures = []
        if c["status"] == "ok":
            figures = list(by_cell.get(c["key"], []))
            for name, v in sorted(c["cost"].items()):
                v = _cost_value(v)
                if v is not None:
                    figures.append(("cost", name, None, v))
        if not figures:
            rows.append(base + (None, None, None, math.nan))
            continue
        for kind, metric, horizon, value in figures:
            rows.append(base + (kind, metric, horizon, value))
    df = pd.DataFrame(rows, columns=list(COLUMNS))
    df["seed"] = df["seed"].astype("int64")
    for col in ("fraction", "noise", "horizon", "value"):
        df[col] = pd.to_numeric(df[col], errors="coerce").astype("float64")
    for col in ("kind", "metric"):
        df[col] = df[col].astype("string")
    return df


def write_table(df: pd.DataFrame, path) -> Path:
    """Write ``df`` to ``path`` (``.parquet`` or ``.csv``) atomically: a temporary file, then a rename."""
    import os
    import tempfile

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in EXPORT_SUFFIXES:
        raise ValueError(f"output {str(path)!r} must end in one of {', '.join(EXPORT_SUFFIXES)}")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or ".")
    os.close(fd)
    try:
        if suffix == ".parquet":
            df.to_parquet(tmp, index=False)
        else:
            df.to_csv(tmp, index=False)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
