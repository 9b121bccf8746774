"""The Python API of the harness: the CLI's operations as functions returning pandas DataFrames.

Example
-------
>>> from suite import api
>>> table = api.run("suite/grids/smoke.toml", store="results/smoke.sqlite")  # doctest: +SKIP
>>> table.query("metric == 'valid_prediction_time'")  # doctest: +SKIP
"""

from __future__ import annotations

import pandas as pd

from suite.export import tidy_table
from suite.grid import load_grid
from suite.runner import DEFAULT_CELL_FUNCTION, RunSummary, default_store_path, run_grid
from suite.store import Store

__all__ = ["run", "export_table", "grid_cells", "store_manifests", "RunSummary"]


def grid_cells(grid_path) -> pd.DataFrame:
    """The cells a grid file expands to, one row each (with its key), after full validation."""
    grid = load_grid(grid_path)
    rows = []
    for spec in grid.cells():
        d = spec.canonical()
        d["cell"] = spec.key()
        rows.append(d)
    cols = ["cell"] + [c for c in (rows[0] if rows else {}) if c != "cell"]
    return pd.DataFrame(rows, columns=cols)


def run(grid_path, store=None, *, executor: str = "local", workers: int | None = None,
        scheduler: str | None = None, retries: int = 1, cells_per_worker: int = 0,
        function=DEFAULT_CELL_FUNCTION, grace: float | None = None, progress=False) -> pd.DataFrame:
    """Run the missing cells of a grid into ``store`` and return the store's tidy table.

    See :func:`suite.runner.run_grid` for the parameters and
    :mod:`suite.export` for the table's columns. Scripts that call this with
    ``executor="dask"`` and no scheduler start a local cluster and need an
    ``if __name__ == "__main__":`` guard.
    """
    grid = load_grid(grid_path)
    store = store if store is not None else default_store_path(grid)
    run_grid(grid, store, executor=executor, workers=workers, scheduler=scheduler, retries=retries,
             cells_per_worker=cells_per_worker, function=function, grace=grace, progress=progress)
    return tidy_table(store)


def export_table(store) -> pd.DataFrame:
    """The tidy long table of a store (see :mod:`suite.export`)."""
    return tidy_table(store)


def store_manifests(store) -> pd.DataFrame:
    """One row per run recorded in a store: when, with which versions, grid hash and machine."""
    with Store.open(store, readonly=True) as st:
        return pd.json_normalize(st.manifests())
