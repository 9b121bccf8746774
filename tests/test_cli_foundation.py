"""The first three commands as a user runs them: systems, solve, lyapunov."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from suite.cli import main

REQUIRED_SYSTEMS = {"lorenz63", "rossler", "lorenz96", "double_pendulum", "pendulum", "duffing", "henon_heiles",
                    "three_body", "arenstorf", "kepler", "chua", "kuramoto_sivashinsky"}


def _json(capsys, argv):
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def test_systems_json_lists_every_required_system_with_its_fields(capsys):
    rows = {d["name"]: d for d in _json(capsys, ["systems", "--json"])}
    assert REQUIRED_SYSTEMS <= set(rows)
    for d in rows.values():
        assert {"name", "dim", "params", "lyapunov_exponent", "lyapunov_time", "sources"} <= set(d)
        assert isinstance(d["params"], dict) and isinstance(d["sources"], list)
    assert rows["lorenz63"]["lyapunov_exponent"] == pytest.approx(0.9056)  # Sprott 2003
    assert rows["kepler"]["lyapunov_exponent"] is None  # integrable: no positive exponent


def test_solve_writes_the_trajectory_and_reports_the_reference_horizon(capsys, tmp_path):
    out = tmp_path / "l63.csv"
    summary = _json(capsys, ["solve", "lorenz63", "--t-end", "3", "--dt-out", "0.01", "--out", str(out), "--json"])
    assert {"system", "method", "n_steps", "nfev", "seconds", "reference_horizon"} <= set(summary)
    assert summary["n_steps"] > 0 and summary["nfev"] > summary["n_steps"]
    assert 0 < summary["reference_horizon"] <= 3.0
    frame = pd.read_csv(out)
    assert list(frame.columns) == ["t", "x", "y", "z"] and len(frame) == 301
    # the first row is the default initial state (1, 1, 1) of the system
    np.testing.assert_allclose(frame.iloc[0].to_numpy(), [0.0, 1.0, 1.0, 1.0])


def test_solve_methods_agree_inside_the_horizon(capsys, tmp_path):
    # scipy DOP853 and the JAX adaptive Dormand–Prince, both at tight tolerance, over 1 time unit
    paths = []
    for method in ("DOP853", "dopri5"):
        p = tmp_path / f"{method}.csv"
        _json(capsys, ["solve", "rossler", "--t-end", "1", "--method", method, "--rtol", "1e-10",
                       "--out", str(p), "--json"])
        paths.append(pd.read_csv(p).to_numpy())
    np.testing.assert_allclose(paths[0], paths[1], rtol=1e-6, atol=1e-8)


def test_lyapunov_json_matches_sprott_and_the_trace(capsys):
    res = _json(capsys, ["lyapunov", "lorenz63", "--t-end", "3000", "--json"])
    ex = np.array(res["exponents"])
    assert np.all(np.diff(ex) <= 0)  # sorted, descending
    # Sprott, Chaos and Time-Series Analysis (2003): (0.9056, 0, -14.5723), D_KY = 2.062;
    # 3,000 time units leave ~1-2 % of finite-time scatter in lambda_1 (measured), hence 3 %.
    assert ex[0] == pytest.approx(0.9056, rel=0.03)
    assert abs(ex[1]) < 0.01
    assert ex[2] == pytest.approx(-14.5723, rel=0.01)
    assert ex.sum() == pytest.approx(-(10 + 1 + 8 / 3), abs=1e-3)  # trace of the Jacobian
    assert res["kaplan_yorke_dimension"] == pytest.approx(2.062, abs=0.005)
    assert res["seconds"] > 0


def test_bad_input_is_one_line_and_exit_2(capsys, tmp_path):
    cases = [
        ["solve", "lorenz6", "--t-end", "1"],
        ["solve", "lorenz63", "--t-end", "0"],
        ["solve", "lorenz63", "--t-end", "1", "--y0", "1,2"],
        ["solve", "lorenz63", "--t-end", "1", "--param", "rho=abc"],
        ["solve", "lorenz63", "--t-end", "1", "--method", "dopri"],
        ["solve", "lorenz63", "--t-end", "1", "--atol", "-1"],
        ["solve", "lorenz63", "--t-end", "1", "--out", str(tmp_path / "missing" / "x.csv")],
        ["lyapunov", "lorenz63", "--param", "sigma=-1"],
    ]
    for argv in cases:
        assert main(argv) == 2, argv
        err = capsys.readouterr().err.strip()
        assert err.startswith("error:") and "\n" not in err and "Traceback" not in err, (argv, err)
    assert not any(tmp_path.iterdir())  # no partial file left behind
