"""``lyapbench report``: files, figures, the speed-up column, rank-test wording, bad input.

The store is built by recording hand-made cell outcomes (fast and
deterministic); the learner names need not be registered for a report.
"""

from __future__ import annotations

import json
import math

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

from suite.cell import CellOutcome, CellSpec, MetricRow
from suite.cli import main
from suite.report import build_tables, cell_frame, cell_speedups, forecast_ladders, rank_tests, write_report
from suite.store import Store
from suite.export import tidy_table

# tiny forecast options so that a real solver ladder is cheap
OPTS = {"horizon_lyapunov_times": 1.0, "n_starts": 2, "history_steps": 3}
# the learners' error curves end at 3.1 Lyapunov times (alpha's median VPT there: censored)
HORIZONS = np.linspace(0.0, 3.1, 5)
# per learner: (nrmse_mean, VPT base in Lyapunov times, inference s/LT, train s); alpha best, gamma worst
LEARNERS = {"alpha": (0.05, 3.0, 1e-4, 100.0), "beta": (0.06, 2.8, 2e-4, 1.0), "gamma": (0.5, 0.5, 1e-3, 0.1)}
# a hand-made solver ladder: error against seconds per Lyapunov time
LADDER = pd.DataFrame({
    "problem": "lorenz63 " + json.dumps(OPTS, sort_keys=True), "system": "lorenz63", "method": "DOP853",
    "kind": "adaptive", "accuracy": [1e-2, 1e-4, 1e-6], "error": [0.5, 0.1, 0.01], "seconds": 1.0,
    "seconds_per_lyapunov_time": [1e-3, 1e-2, 1e-1], "nfev": 100.0, "status": "success", "n_starts": 2,
    "seed": 0, "horizon": 1.0})


def _record(st, spec, outcome):
    st.record(spec.key(), spec, outcome)


def _forecast_outcome(name, seed, fraction, noise):
    err, vpt, inf, train = LEARNERS[name]
    # deterministic spread over seeds and settings; the order alpha > beta > gamma holds in every block
    shift = 0.05 * seed - 0.2 * (1 - fraction) - 2.0 * noise
    starts = [vpt + shift + 0.1 * k for k in range(2)]
    rows = [MetricRow("nrmse", float(err * (1 + 10 * h)), float(h)) for h in HORIZONS]
    rows += [MetricRow("nrmse_mean", err), MetricRow("valid_prediction_time", float(np.median(starts))),
             MetricRow("valid_prediction_time_iqr", 0.05), MetricRow("reference_horizon", 14.0)]
    rows += [MetricRow(f"valid_prediction_time_start_{k}", v) for k, v in enumerate(starts)]
    return CellOutcome("ok", rows, {"train_seconds": train, "inference_seconds_per_lyapunov_time": inf,
                                    "n_parameters": 10})


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    path = tmp_path_factory.mktemp("store") / "hand.sqlite"
    with Store.open(path, create=True) as st:
        st.add_manifest({"grid": "hand-made", "seeds": [0, 1, 2]})
        for fraction in (1.0, 0.5):
            for noise in (0.0, 0.05):
                for seed in (0, 1, 2):
                    for name in LEARNERS:
                        spec = CellSpec("lorenz63", "forecast", name, fraction, noise, "none", seed,
                                        task_options=OPTS)
                        if name == "gamma" and seed == 2 and fraction == 0.5:
                            out = CellOutcome("diverged", error="DivergedError: rollout output holds 7 "
                                                                "non-finite values")
                        else:
                            out = _forecast_outcome(name, seed, fraction, noise)
                        _record(st, spec, out)
                    spec = CellSpec("lorenz63", "forecast", "spline", fraction, noise, "none", seed,
                                    task_options=OPTS)
                    _record(st, spec, CellOutcome("not_applicable", error="the learner does not do task forecast"))
        for seed in (0, 1):  # reconstruct cells, one failed
            for name, v in (("alpha", 0.01), ("beta", 0.02)):
                spec = CellSpec("lorenz63", "reconstruct", name, 1.0, 0.0, "none", seed)
                out = (CellOutcome("failed", error="ValueError: singular matrix") if name == "beta" and seed == 1
                       else CellOutcome("ok", [MetricRow("relative_l2", v + 0.001 * seed)],
                                        {"train_seconds": 0.1, "inference_seconds_per_lyapunov_time": 1e-5}))
                _record(st, spec, out)
    return path


@pytest.fixture(scope="module")
def cells(store):
    return cell_frame(tidy_table(store))


@pytest.fixture(scope="module")
def report(store, tmp_path_factory):
    out = tmp_path_factory.mktemp("report") / "out"
    return write_report(store, out, ladder=LADDER, queries=100, keep_figures=True)


def test_every_file_is_written(report):
    names = set(report) - {"_figures"}
    for required in ("summary.md", "summary.tex", "tables.parquet", "tables.csv", "manifest.json",
                     "solver_ladder.csv"):
        assert required in names
        assert report[required].stat().st_size > 0
    pngs = sorted(n for n in names if n.endswith(".png"))
    stems = {n[:-4] for n in pngs}
    for prefix in ("error_vs_horizon_lorenz63", "sparsity_lorenz63_forecast", "noise_lorenz63_forecast",
                   "work_precision_lorenz63", "critical_difference_forecast"):
        assert any(s.startswith(prefix) for s in stems), prefix
        assert any(n.startswith(prefix) and n.endswith(".svg") for n in names), prefix
    for n in pngs:
        img = mpimg.imread(report[n])
        assert img.ndim == 3 and img.shape[0] > 100 and img.shape[1] > 100
    manifest = json.loads(report["manifest.json"].read_text())
    assert manifest["store_manifests"][0]["grid"] == "hand-made"
    assert manifest["lyapbench_version"] and manifest["report_created"] and manifest["queries"] == 100
    table = pd.read_parquet(report["tables.parquet"])
    assert table["cell"].nunique() == 4 * 3 * 4 + 4  # every cell once, failed ones included


def test_figures_have_labelled_axes(report):
    figs = report["_figures"]
    by_prefix = lambda p: next(f for k, f in figs.items() if k.startswith(p))  # noqa: E731
    ax = by_prefix("error_vs_horizon").axes[0]
    assert ax.get_xlabel() == "forecast horizon (Lyapunov times)"
    assert "normalised RMSE" in ax.get_ylabel()
    assert any("threshold 0.4" in t.get_text() for t in ax.texts)  # default vpt_threshold (Pathak et al. 2018)
    assert {t.get_text().split(" (")[0] for t in ax.get_legend().get_texts()} == {"alpha", "beta", "gamma"}
    ax = by_prefix("sparsity").axes[0]
    assert ax.get_xlabel() == "fraction of training samples kept"
    assert ax.get_ylabel() == "valid prediction time (Lyapunov times)"
    assert by_prefix("noise").axes[0].get_xlabel() == "noise level (attractor std)"
    ax = by_prefix("work_precision").axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert ax.get_ylabel() == "seconds per trajectory per Lyapunov time"
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "solver DOP853" in labels and any(lab.startswith("learner alpha") for lab in labels)
    assert by_prefix("critical_difference").axes[0].get_xlabel() == "average rank (1 = best)"


def test_speedup_column_on_a_hand_made_ladder(cells):
    speed = cell_speedups(cells, LADDER, queries=100)
    tables = build_tables(cells, speed, queries=100)
    t = next(t for t in tables if t.task == "forecast" and t.fraction == 1.0 and t.noise == 0.0)
    rows = {r.learner: r for r in t.rows}
    # alpha: error 0.05 -> cheapest rung with error <= 0.05 costs 0.1 s/LT; 0.1 / 1e-4 = 1000 (closed form)
    assert rows["alpha"].speedup == pytest.approx(1000.0)
    # with training: 1e-4 + 100 s / 100 queries / 3.1 Lyapunov times per query -> 0.1 / that
    assert rows["alpha"].speedup_with_training == pytest.approx(0.1 / (1e-4 + 1.0 / 3.1))
    # gamma: error 0.5 -> rung 1e-3 s/LT; 1e-3 / 1e-3 = 1
    assert rows["gamma"].speedup == pytest.approx(1.0)
    assert rows["spline"].counts["not_applicable"] == 3 and math.isnan(rows["spline"].speedup)
    assert any("just run the solver" not in n and "training is shared over 100" in n and "alpha" in n
               for n in t.notes)
    assert any("below one Lyapunov time" in n and "gamma" in n and "not ranked" in n for n in t.notes)
    # a forecaster wrong within one Lyapunov time never wins the speed-up column, however cheap
    from suite.report.tables import _best, table_markdown
    gamma = [r.learner for r in t.rows].index("gamma")
    assert _best(t)["speedup"] != gamma
    assert "1× †" in table_markdown(t)
    assert any("end of the forecast horizon (3.1 Lyapunov times) for alpha:" in n and "censored" in n
               for n in t.notes)


def test_summary_states_failures_and_non_significant_differences(report):
    md = report["summary.md"].read_text()
    tex = report["summary.tex"].read_text()
    assert "1 diverged of 3 cells" in md and "non-finite values" in md
    assert "beta: 1 failed of 2 cells" in md and "singular matrix" in md
    assert "3 not applicable of 3 cells" in md
    # the best column entry is bold in both formats
    assert "**1e+03×**" in md and r"\textbf{1e+03$\times$}" in tex
    # rank test: 4 settings, alpha > beta > gamma everywhere: Friedman significant, but the Nemenyi
    # critical difference (1.66 for k=3, N=4; Demsar 2006 eq. for CD) does not separate neighbours
    assert "Not significantly different from each other: {alpha, beta}" in md
    assert "{beta, gamma}" in md
    assert "Valid prediction time below one Lyapunov time (no useful forecast): gamma" in md
    assert "Resting on a single seed" in md  # the reconstruct beta row has one ok seed
    assert "sparsity curve of lorenz63 · reconstruct: not drawn" in md
    assert r"\begin{tabular}" in tex and r"\end{document}" in tex


def test_rank_tests_per_task(cells):
    tests = rank_tests(cells)
    t = tests["forecast"]
    assert t.n_blocks == 4 and set(t.learners) == {"alpha", "beta", "gamma"}
    assert dict(zip(t.learners, t.average_ranks)) == {"alpha": 1.0, "beta": 2.0, "gamma": 3.0}
    assert "reconstruct" in tests and tests["reconstruct"].n_blocks == 1


def test_real_solver_ladder_on_the_forecast_problem(cells):
    lad, notes = forecast_ladders(cells, n_starts=2, methods=("DOP853",),
                                  ladders={"adaptive": (1e-3, 1e-8), "fixed": (1.0,)})
    assert notes == []
    assert list(lad["method"]) == ["DOP853", "DOP853"] and (lad["n_starts"] == 2).all()
    assert lad["horizon"].iloc[0] == pytest.approx(1.0, abs=0.05)
    err = dict(zip(lad["accuracy"], lad["error"]))
    # tighter tolerance, smaller error against the trusted reference (common practice: a work-precision ladder)
    assert err[1e-8] < err[1e-3] and err[1e-8] < 1e-5
    assert (lad["seconds_per_lyapunov_time"] > 0).all()


def test_cli_bad_input_exits_2(tmp_path, capsys, store):
    assert main(["report", str(tmp_path / "missing.sqlite"), "--out", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert "does not exist" in err and len(err.strip().splitlines()) == 1
    bogus = tmp_path / "bogus.sqlite"
    bogus.write_text("not a database")
    assert main(["report", str(bogus), "--out", str(tmp_path / "r")]) == 2
    assert "not a lyapbench store" in capsys.readouterr().err
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    assert main(["report", str(store), "--out", str(blocker)]) == 2
    assert "not a folder" in capsys.readouterr().err
    assert main(["report", str(store), "--out", str(tmp_path / "no" / "such" / "dir")]) == 2
    assert main(["report", str(store), "--out", str(tmp_path / "r"), "--queries", "0"]) == 2


@pytest.fixture
def timeout_store(tmp_path):
    path = tmp_path / "bad.sqlite"
    with Store.open(path, create=True) as st:
        spec = CellSpec("lorenz63", "forecast", "alpha", task_options=OPTS)
        _record(st, spec, CellOutcome("timeout", error="OverBudgetError: fit ran past 5 s"))
    return path


def test_a_store_of_failures_only_still_reports(tmp_path, timeout_store):
    written = write_report(timeout_store, tmp_path / "r", ladder=False)
    md = written["summary.md"].read_text()
    assert "timeout 1" in md and "1 timeout of 1 cells" in md and "fit ran past 5 s" in md
    assert "error against horizon: not drawn (no successful forecast cell)" in md
    assert not any(n.endswith(".png") for n in written)


def test_cli_writes_a_report(tmp_path, timeout_store, capsys):
    out = tmp_path / "r"
    out.mkdir()
    (out / "sparsity_old_forecast.png").write_bytes(b"stale")  # a figure of an earlier report
    assert main(["report", str(timeout_store), "--out", str(out), "--no-solvers", "--queries", "7"]) == 0
    assert "wrote" in capsys.readouterr().out
    assert json.loads((out / "manifest.json").read_text())["queries"] == 7
    assert (out / "summary.md").exists() and (out / "tables.csv").exists()
    assert not (out / "sparsity_old_forecast.png").exists()
    assert not list(out.glob(".*"))  # no temporary folder left behind


def test_fourteen_learners_get_fourteen_distinguishable_scatter_styles():
    # one learner per series in the work-precision scatter, where there are no lines to tell
    # a repeated colour apart: face and edge colour together must differ for every pair
    from suite.report.style import series_style

    styles = [series_style(i) for i in range(14)]
    assert len({(s["facecolor"], s["edgecolor"]) for s in styles}) == 14
    assert len({(s["color"], s["linestyle"]) for s in styles}) == 14  # and the lines of the curve figures


def test_the_standard_studys_data_settings_get_distinct_markers():
    # the work-precision figure of a system draws one marker per data setting (fraction, noise, physics)
    from pathlib import Path

    from suite.grid import load_grid
    from suite.report.style import MARKERS

    grid = load_grid(Path(__file__).resolve().parents[1] / "suite" / "grids" / "standard.toml")
    per_system = {}
    for c in grid.cells():
        if c.task == "forecast":
            per_system.setdefault(c.system, set()).add((c.fraction, c.noise, c.physics))
    most = max(len(v) for v in per_system.values())
    assert most >= 9 and len(set(MARKERS)) == len(MARKERS) >= most
