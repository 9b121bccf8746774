"""The committed baseline (results/baseline/) is the report of the standard grid as shipped.

The slow test re-runs a random sample of its cells from a fresh cache and
compares every accuracy figure (``lyapbench verify``): this is how a reader
reproduces the published table.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pandas as pd
import pytest

from suite.cli import main
from suite.grid import load_grid

ROOT = Path(__file__).resolve().parents[1]
BASELINE = ROOT / "results" / "baseline"
GRID = ROOT / "suite" / "grids" / "standard.toml"


def _store_manifests() -> list[dict]:
    return json.loads((BASELINE / "manifest.json").read_text())["store_manifests"]


def test_baseline_was_made_from_the_shipped_standard_grid():
    sha = hashlib.sha256(GRID.read_bytes()).hexdigest()
    grids = [m["manifest"]["grid"] if "manifest" in m else m["grid"] for m in _store_manifests()]
    assert grids and all(g["sha256"] == sha for g in grids), "results/baseline/ is stale: re-run the study"
    assert (BASELINE / "standard.toml").read_bytes() == GRID.read_bytes()


def test_baseline_table_holds_every_cell_of_the_grid_once():
    table = pd.read_parquet(BASELINE / "tables.parquet")
    keys = {c.key() for c in load_grid(GRID).cells()}
    assert set(table["cell"]) == keys
    statuses = table.drop_duplicates("cell")["status"].value_counts().to_dict()
    manifest = json.loads((BASELINE / "manifest.json").read_text())
    assert statuses == manifest["status_counts"] and statuses.get("ok", 0) > 0


def test_readme_shows_the_baseline_summary_as_committed():
    """The README's baseline table is copied from results/baseline/summary.md, not typed in."""
    readme = (ROOT / "README.md").read_text()
    start = readme.index("<!-- baseline-table -->")
    end = readme.index("<!-- /baseline-table -->")
    shown = [ln for ln in readme[start:end].splitlines() if ln.startswith("|")]
    summary = (BASELINE / "summary.md").read_text().splitlines()
    assert shown and all(ln in summary for ln in shown)


@pytest.mark.slow
def test_sampled_verify_of_the_baseline_passes(tmp_path, capsys):
    rc = main(["verify", str(BASELINE / "tables.parquet"), "--sample", "4", "--seed", "3", "--quiet",
               "--store", str(tmp_path / "verify.sqlite")])
    out = capsys.readouterr().out
    assert rc == 0, out
