"""Re-run the cells of a published tidy table and compare the accuracy figures.

A published table (the output of ``lyapbench export``, CSV or Parquet, or the
store itself) names every cell by its spec columns. :func:`verify_table`
rebuilds each cell's :class:`~suite.cell.CellSpec` from them, checks that the
rebuilt key equals the table's ``cell`` column, runs the cells through the
runner (:func:`suite.runner.run_grid`) into a store, and compares

* the status of every cell (they must be equal), and
* every accuracy figure (``kind == "accuracy"``) of the cells that are ``ok``
  in both, matched on ``(metric, horizon)``, within ``rtol``/``atol``
  (``|reproduced - published| <= atol + rtol * |published|``; NaN equals NaN).

Cost figures (timings, memory, parameter counts) are never compared.

Budgets
    A cell's key hashes its wall-clock and iteration budgets, which the tidy
    table has no columns for. They are taken, in this order, from
    ``budget_seconds``/``budget_iterations`` columns when a table has them;
    from the store's own specs when the input is a store (``.sqlite``); else
    from the first candidate that reproduces the published key: the budgets
    given by the caller, then those of the grids shipped with lyapbench
    (``suite/grids/**/*.toml``), then the grid default. When none reproduces
    the key, the cell runs with the caller's budgets or the generous default
    (:data:`~suite.grid.DEFAULT_SECONDS_PER_CELL` seconds, no iteration
    limit) and the key mismatch is reported.

Key mismatch
    A rebuilt key differs from the published one when the table was made by
    another lyapbench version (the key hashes the version) or with a budget
    or spec that the table does not carry. It is reported (one line per
    cell) but is not by itself a failure: the figures decide.

Tolerances
    The same key gives the same accuracy numbers on the same machine, so the
    defaults are tight (``rtol=1e-6``, ``atol=1e-9``). Across machines,
    chaotic rollouts may drift in the last bits and grow; loosen the
    tolerances there.
"""

from __future__ import annotations

import json
import math
import shutil
import tempfile
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from suite.cell import STATUSES, CellSpec
from suite.grid import DEFAULT_SECONDS_PER_CELL, Grid

__all__ = ["verify_table", "read_published", "VerifyResult", "VerifyInputError", "REQUIRED_COLUMNS",
           "DEFAULT_RTOL", "DEFAULT_ATOL"]

DEFAULT_RTOL = 1e-6
DEFAULT_ATOL = 1e-9

#: Columns a published table must have (extra columns are ignored).
REQUIRED_COLUMNS = ("cell", "system", "task", "learner", "learner_params", "system_params", "task_options",
                    "fraction", "noise", "physics", "seed", "status", "kind", "metric", "horizon", "value")
_STRING_COLUMNS = ("cell", "system", "task", "learner", "learner_params", "system_params", "task_options",
                   "physics", "status", "error", "kind", "metric")
_JSON_COLUMNS = ("learner_params", "system_params", "task_options")
_NUMERIC_COLUMNS = ("fraction", "noise", "seed", "horizon", "value")


class VerifyInputError(ValueError):
    """A published table that cannot be verified; the message is one line."""


# ------------------------------------------------------------------------------ reading
def read_published(source) -> tuple[pd.DataFrame, dict]:
    """Read and check a published table.

    Parameters
    ----------
    source : path or DataFrame
        ``.csv``, ``.parquet``, a lyapbench store (``.sqlite``/``.db``), or a
        DataFrame with the tidy columns.

    Returns
    -------
    table : DataFrame
    budgets : dict
        cell key -> ``(budget_seconds, budget_iterations)`` known exactly
        (from a store's specs or budget columns); empty otherwise.

    Raises
    ------
    VerifyInputError
        Missing columns (all named in one line), wrong types, no rows, or a
        file that is not a table.
    """
    budgets: dict = {}
    if isinstance(source, pd.DataFrame):
        df, label = source.copy(), "table"
    else:
        path = Path(source)
        label = str(path)
        if path.is_dir():
            raise VerifyInputError(f"{label}: is a folder, expected a .csv or .parquet table")
        if not path.exists():
            raise VerifyInputError(f"{label}: file does not exist")
        suffix = path.suffix.lower()
        if suffix == ".csv":
            df = _read_csv(path)
        elif suffix == ".parquet":
            try:
                df = pd.read_parquet(path)
            except Exception as exc:  # pyarrow raises several types for a bad file
                raise VerifyInputError(f"{label}: not a readable Parquet file "
                                       f"({' '.join(str(exc).split())[:200]})") from None
        elif suffix in (".sqlite", ".db"):
            df, budgets = _read_store(path)
        else:
            raise VerifyInputError(f"{label}: expected a .csv or .parquet table (or a .sqlite store), "
                                   f"got {suffix or 'no suffix'}")
    missing = [c for c in REQUIRED_COLUMNS if c not in df.columns]
    if missing:
        raise VerifyInputError(f"{label}: missing column{'s' if len(missing) > 1 else ''} "
                               f"{', '.join(missing)}")
    if len(df) == 0:
        raise VerifyInputError(f"{label}: the table has no rows")
    df = _check_types(df, label)
    if "budget_seconds" in df.columns:
        for key, g in df.groupby("cell", sort=False):
            s = pd.to_numeric(g["budget_seconds"], errors="coerce").iloc[0]
            it = (pd.to_numeric(g["budget_iterations"], errors="coerce").iloc[0]
                  if "budget_iterations" in g else math.nan)
            budgets.setdefault(key, (None if pd.isna(s) else float(s), None if pd.isna(it) else int(it)))
    return df, budgets


def _read_csv(path: Path) -> pd.DataFrame:
    try:
        head = pd.read_csv(path, nrows=0)
    except pd.errors.EmptyDataError:
        raise VerifyInputError(f"{path}: the file is empty") from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        raise VerifyInputError(f"{path}: not a readable CSV table ({' '.join(str(exc).split())[:200]})") from None
    dtypes = {c: "string" for c in _STRING_COLUMNS if c in head.columns}
    try:
        # keys are hex strings that may look like numbers: read the text columns as text
        return pd.read_csv(path, dtype=dtypes, keep_default_na=True)
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
        raise VerifyInputError(f"{path}: not a readable CSV table ({' '.join(str(exc).split())[:200]})") from None


def _read_store(path: Path) -> tuple[pd.DataFrame, dict]:
    from suite.export import tidy_table
    from suite.store import Store, StoreError

    try:
        with Store.open(path, readonly=True) as st:
            df = tidy_table(st)
            budgets = {c["key"]: (c["spec"].get("budget_seconds"), c["spec"].get("budget_iterations"))
                       for c in st.cells()}
    except StoreError as exc:
        raise VerifyInputError(str(exc)) from None
    return df, budgets


def _check_types(df: pd.DataFrame, label: str) -> pd.DataFrame:
    df = df.reset_index(drop=True)
    for col in _NUMERIC_COLUMNS:
        conv = pd.to_numeric(df[col], errors="coerce")
        bad = conv.isna() & df[col].notna() & (df[col].astype("string").str.strip() != "")
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise VerifyInputError(f"{label}: column {col}: expected numbers, got {df[col].iloc[i]!r} "
                                   f"(row {i + 1})")
        df[col] = conv.astype("float64")
    for col in ("fraction", "noise", "seed"):
        if df[col].isna().any():
            i = int(np.flatnonzero(df[col].isna().to_numpy())[0])
            raise VerifyInputError(f"{label}: column {col}: empty value (row {i + 1})")
    seeds = df["seed"].to_numpy()
    if not np.all(np.isfinite(seeds)) or np.any(seeds != np.round(seeds)) or np.any(seeds < 0):
        raise VerifyInputError(f"{label}: column seed: expected non-negative integers")
    for col in ("cell", "system", "task", "learner", "physics", "status"):
        s = df[col]
        if s.isna().any():
            i = int(np.flatnonzero(s.isna().to_numpy())[0])
            raise VerifyInputError(f"{label}: column {col}: empty value (row {i + 1})")
        df[col] = s.astype(str)
    bad_status = sorted(set(df["status"]) - set(STATUSES))
    if bad_status:
        raise VerifyInputError(f"{label}: column status: unknown status {bad_status[0]!r} "
                               f"(valid: {', '.join(STATUSES)})")
    for col in ("kind", "metric"):
        df[col] = df[col].astype("string")
    for col in _JSON_COLUMNS:
        parsed = []
        for i, text in enumerate(df[col]):
            if text is None or (isinstance(text, float) and math.isnan(text)) or text is pd.NA:
                value = {}
            elif isinstance(text, dict):
                value = text
            else:
                try:
                    value = json.loads(str(text))
                except json.JSONDecodeError:
                    raise VerifyInputError(f"{label}: column {col}: not a JSON object: {str(text)[:80]!r} "
                                           f"(row {i + 1})") from None
                if not isinstance(value, dict):
                    raise VerifyInputError(f"{label}: column {col}: not a JSON object: {str(text)[:80]!r} "
                                           f"(row {i + 1})")
            parsed.append(value)
        df[col] = parsed
    return df


# ------------------------------------------------------------------------------ budgets
def _shipped_grid_budgets() -> list[tuple]:
    """``(seconds, iterations)`` of every grid file shipped in ``suite/grids`` (read as plain TOML)."""
    out = []
    for path in sorted((Path(__file__).parent / "grids").rglob("*.toml")):
        try:
            doc = tomllib.loads(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
            continue
        b = doc.get("budget", {}) if isinstance(doc.get("budget", {}), dict) else {}
        s = b.get("seconds_per_cell", DEFAULT_SECONDS_PER_CELL)
        it = b.get("iterations_per_cell")
        if isinstance(s, (int, float)) and not isinstance(s, bool):
            out.append((float(s), it if isinstance(it, int) and not isinstance(it, bool) else None))
    return out


def _spec(row, seconds, iterations) -> CellSpec:
    return CellSpec(system=row["system"], task=row["task"], learner=row["learner"],
                    fraction=float(row["fraction"]), noise=float(row["noise"]), physics=row["physics"],
                    seed=int(row["seed"]), system_params=dict(row["system_params"]),
                    learner_params=dict(row["learner_params"]),
                    budget_seconds=None if seconds is None else float(seconds),
                    budget_iterations=None if iterations is None else int(iterations),
                    task_options=dict(row["task_options"]))


def _rebuild(row, known: tuple | None, candidates: list[tuple], fallback: tuple) -> tuple[CellSpec, bool]:
    """The cell's spec and whether its key equals the published one."""
    published = row["cell"]
    if known is not None:
        spec = _spec(row, *known)
        return spec, spec.key() == published
    for seconds, iterations in candidates:
        spec = _spec(row, seconds, iterations)
        if spec.key() == published:
            return spec, True
    return _spec(row, *fallback), False


# ------------------------------------------------------------------------------ result
@dataclass
class VerifyResult:
    """What :func:`verify_table` found.

    Attributes
    ----------
    comparisons : DataFrame
        One row per compared figure: ``cell`` (published key), ``rebuilt_cell``,
        ``system``, ``task``, ``learner``, ``fraction``, ``noise``, ``physics``,
        ``seed``, ``metric`` (``"status"`` for the status check),
        ``horizon``, ``published``, ``reproduced`` (floats; NaN for a status
        row or a missing figure), ``published_text``, ``reproduced_text``
        (status strings, or ``"missing"``), ``match`` (bool).
    cells : DataFrame
        One row per verified cell: ``cell``, ``rebuilt_cell``, ``key_match``,
        ``published_status``, ``reproduced_status``.
    rtol, atol : float
    store : str
        The store the cells ran into (removed afterwards when it was a temporary one).
    n_published_cells : int
        Cells in the published table (``len(cells)`` is fewer with ``sample``).
    """

    comparisons: pd.DataFrame
    cells: pd.DataFrame
    rtol: float
    atol: float
    store: str
    n_published_cells: int
    run_seconds: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def mismatches(self) -> pd.DataFrame:
        return self.comparisons[~self.comparisons["match"]]

    @property
    def n_cells(self) -> int:
        return len(self.cells)

    @property
    def n_metrics(self) -> int:
        """Accuracy figures compared (status checks not counted)."""
        return int((self.comparisons["metric"] != "status").sum())

    @property
    def n_mismatches(self) -> int:
        return int((~self.comparisons["match"]).sum())

    @property
    def n_key_mismatches(self) -> int:
        return int((~self.cells["key_match"]).sum())

    @property
    def ok(self) -> bool:
        return self.n_mismatches == 0

    def summary(self) -> dict:
        return {"cells": self.n_cells, "published_cells": self.n_published_cells,
                "metrics_compared": self.n_metrics, "mismatches": self.n_mismatches,
                "key_mismatches": self.n_key_mismatches, "rtol": self.rtol, "atol": self.atol,
                "ok": self.ok}

    def summary_line(self) -> str:
        of = "" if self.n_cells == self.n_published_cells else f" (a sample of {self.n_published_cells})"
        keys = f", {self.n_key_mismatches} rebuilt keys differ" if self.n_key_mismatches else ""
        verdict = "all match" if self.ok else "MISMATCH"
        return (f"{verdict}: {self.n_cells} cells{of}, {self.n_metrics} metrics compared, "
                f"{self.n_mismatches} mismatches{keys} (rtol {self.rtol:g}, atol {self.atol:g})")

    def mismatch_lines(self) -> list[str]:
        lines = []
        for r in self.mismatches.itertuples(index=False):
            h = "" if pd.isna(r.horizon) else f" horizon={r.horizon:g}"
            pub = r.published_text if r.published_text else f"{r.published:.17g}"
            rep = r.reproduced_text if r.reproduced_text else f"{r.reproduced:.17g}"
            lines.append(f"mismatch: cell {r.cell} system={r.system} task={r.task} learner={r.learner} "
                         f"fraction={r.fraction:g} noise={r.noise:g} physics={r.physics} seed={r.seed} "
                         f"metric={r.metric}{h} published={pub} reproduced={rep}")
        return lines

    def key_lines(self) -> list[str]:
        return [f"key mismatch: cell {r.cell} rebuilds as {r.rebuilt_cell} (the table was made by another "
                f"lyapbench version, or with a budget or spec it does not record); compared anyway"
                for r in self.cells[~self.cells["key_match"]].itertuples(index=False)]


# ------------------------------------------------------------------------------ running
@dataclass(frozen=True)
class _CellList(Grid):
    """A grid whose cells are an explicit list (the runner takes any :class:`Grid`)."""

    listed: tuple = ()

    @property
    def n_cells(self) -> int:
        return len(self.listed)

    def cells(self) -> list[CellSpec]:
        return list(self.listed)


def verify_table(source, *, store=None, rtol: float = DEFAULT_RTOL, atol: float = DEFAULT_ATOL,
                 sample: int | None = None, seed: int = 0, executor: str = "local",
                 workers: int | None = None, scheduler: str | None = None,
                 budget_seconds: float | None = None, budget_iterations: int | None = None,
                 cells_per_worker: int = 0, progress=False) -> VerifyResult:
    """Re-run the cells of a published table and compare their accuracy figures.

    Parameters
    ----------
    source : path or DataFrame
        A tidy table (``.csv``/``.parquet``, see :mod:`suite.export`), a
        store, or the DataFrame itself.
    store : path, optional
        Store to run into (kept; an existing one is resumed). Default: a
        temporary store, removed afterwards.
    rtol, atol : float
        Tolerances of the comparison (see the module docstring).
    sample : int, optional
        Verify a random sample of this many cells (all when None or larger).
    seed : int
        Seed of the sample.
    executor, workers, scheduler, cells_per_worker :
        Passed to :func:`suite.runner.run_grid`.
    budget_seconds, budget_iterations : optional
        Budgets to use (and to try first when matching keys) where the table
        has none; see the module docstring.
    progress : None, bool or "bar"
        The runner's progress output (default silent).

    Returns
    -------
    VerifyResult

    Raises
    ------
    VerifyInputError
        The table cannot be verified (missing columns, wrong types, no rows,
        unknown file type).
    """
    from suite.export import tidy_table
    from suite.runner import run_grid

    if not (rtol >= 0 and atol >= 0 and math.isfinite(rtol) and math.isfinite(atol)):
        raise VerifyInputError(f"tolerances must be finite and >= 0, got rtol={rtol!r} atol={atol!r}")
    if sample is not None and int(sample) < 1:
        raise VerifyInputError(f"sample must be a positive number of cells, got {sample!r}")
    df, known_budgets = read_published(source)

    first = df.drop_duplicates("cell", keep="first").reset_index(drop=True)
    n_published = len(first)
    if sample is not None and int(sample) < n_published:
        rng = np.random.default_rng(int(seed))
        pick = np.sort(rng.choice(n_published, size=int(sample), replace=False))
        first = first.iloc[pick].reset_index(drop=True)

    given = (budget_seconds, budget_iterations)
    candidates = []
    if budget_seconds is not None or budget_iterations is not None:
        candidates.append(given)
    for c in _shipped_grid_budgets() + [(DEFAULT_SECONDS_PER_CELL, None)]:
        if c not in candidates:
            candidates.append(c)
    fallback = (budget_seconds if budget_seconds is not None else DEFAULT_SECONDS_PER_CELL, budget_iterations)

    specs, rebuilt, key_ok = [], [], []
    for _, row in first.iterrows():
        try:
            spec, same = _rebuild(row, known_budgets.get(row["cell"]), candidates, fallback)
        except (TypeError, ValueError) as exc:
            raise VerifyInputError(f"cell {row['cell']}: cannot rebuild its spec ({exc})") from None
        specs.append(spec)
        rebuilt.append(spec.key())
        key_ok.append(same)

    unique = {}
    for k, s in zip(rebuilt, specs):
        unique.setdefault(k, s)
    grid = _CellList(name="verify", path="<published table>", sha256="", systems=(), tasks=(),
                     learners=(), listed=tuple(unique.values()))

    tmpdir = None
    if store is None:
        tmpdir = tempfile.mkdtemp(prefix="lyapbench-verify-")
        store_path = Path(tmpdir) / "verify.sqlite"
    else:
        store_path = Path(store)
    try:
        summary = run_grid(grid, store_path, executor=executor, workers=workers, scheduler=scheduler,
                           cells_per_worker=cells_per_worker, progress=progress)
        reproduced = tidy_table(store_path)
    finally:
        if tmpdir is not None:
            shutil.rmtree(tmpdir, ignore_errors=True)

    comparisons, cells = _compare(df, first, rebuilt, key_ok, reproduced, rtol, atol)
    return VerifyResult(comparisons=comparisons, cells=cells, rtol=float(rtol), atol=float(atol),
                        store=str(store_path), n_published_cells=n_published,
                        run_seconds=summary.wall_seconds)


def _accuracy(rows: pd.DataFrame) -> dict:
    acc = rows[rows["kind"] == "accuracy"]
    out = {}
    for m, h, v in zip(acc["metric"], acc["horizon"], acc["value"]):
        h = None if pd.isna(h) else float(h)
        out[(str(m), h)] = float(v) if not pd.isna(v) else math.nan
    return out


def _close(a: float, b: float, rtol: float, atol: float) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    if math.isinf(a) or math.isinf(b):
        return a == b
    return abs(b - a) <= atol + rtol * abs(a)


def _compare(df, first, rebuilt, key_ok, reproduced, rtol, atol):
    pub_by_cell = dict(tuple(df.groupby("cell", sort=False)))
    rep_by_cell = dict(tuple(reproduced.groupby("cell", sort=False))) if len(reproduced) else {}
    comp_rows, cell_rows = [], []
    for (_, row), new_key, same in zip(first.iterrows(), rebuilt, key_ok):
        pub = pub_by_cell[row["cell"]]
        rep = rep_by_cell.get(new_key)
        pub_status = str(pub["status"].iloc[0])
        rep_status = "missing" if rep is None else str(rep["status"].iloc[0])
        cell_rows.append({"cell": row["cell"], "rebuilt_cell": new_key, "key_match": bool(same),
                          "system": row["system"], "task": row["task"], "learner": row["learner"],
                          "published_status": pub_status, "reproduced_status": rep_status})
        base = {"cell": row["cell"], "rebuilt_cell": new_key, "system": row["system"], "task": row["task"],
                "learner": row["learner"], "fraction": float(row["fraction"]), "noise": float(row["noise"]),
                "physics": row["physics"], "seed": int(row["seed"])}
        comp_rows.append({**base, "metric": "status", "horizon": math.nan, "published": math.nan,
                          "reproduced": math.nan, "published_text": pub_status, "reproduced_text": rep_status,
                          "match": pub_status == rep_status})
        if pub_status != "ok" or rep_status != "ok":
            continue
        a, b = _accuracy(pub), _accuracy(rep)
        for key in list(a) + [k for k in b if k not in a]:
            m, h = key
            pv, rv = a.get(key, math.nan), b.get(key, math.nan)
            missing_p, missing_r = key not in a, key not in b
            comp_rows.append({**base, "metric": m, "horizon": math.nan if h is None else h,
                              "published": pv, "reproduced": rv,
                              "published_text": "missing" if missing_p else "",
                              "reproduced_text": "missing" if missing_r else "",
                              "match": (not missing_p and not missing_r and _close(pv, rv, rtol, atol))})
    columns = ["cell", "rebuilt_cell", "system", "task", "learner", "fraction", "noise", "physics", "seed",
               "metric", "horizon", "published", "reproduced", "published_text", "reproduced_text", "match"]
    comparisons = pd.DataFrame(comp_rows, columns=columns)
    comparisons["match"] = comparisons["match"].astype(bool)
    cells = pd.DataFrame(cell_rows, columns=["cell", "rebuilt_cell", "key_match", "system", "task", "learner",
                                             "published_status", "reproduced_status"])
    cells["key_match"] = cells["key_match"].astype(bool)
    return comparisons, cells
