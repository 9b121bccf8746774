"""Echo state network (1,000 nodes) on Lorenz-63: training seconds and valid prediction time.

Data: one long Lorenz-63 trajectory on the attractor (scipy DOP853,
rtol = atol = 1e-10), sampled every 0.02. The first 10,000 samples train
the network; after a gap, 10 test segments follow (and, in the full run,
5 validation segments before them, on which a small grid of settings is
chosen; the test segments are never used for that choice). Each segment
gives the network 200 samples of history (its warm-up) and is then rolled
out for 25 time units (22.6 Lyapunov times).

Score: valid prediction time — the first time the normalised RMS error
(per-variable attractor standard deviation) exceeds 0.4 — in Lyapunov times
``1 / 0.9056`` (Sprott 2003), median over the 10 test segments.

Usage: ``python benchmarks/bench_esn.py [--quick]``.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import lorenz63_samples, machine, write_results  # noqa: E402

import numpy as np  # noqa: E402

DT = 0.02
LAMBDA1 = 0.9056  # Sprott (2003)
N_TRAIN = 10_000
HISTORY = 200
HORIZON = 25.0


def trajectory(n_samples: int):
    return lorenz63_samples(n_samples, DT, seed=0, tol=1e-10)[:2]


def segments(y, start, n, stride):
    m = int(round(HORIZON / DT))
    out = []
    for i in range(n):
        a = start + i * stride
        out.append((y[a - HISTORY:a + 1], y[a:a + m + 1]))
    return out


def score(model, segs, scale):
    from suite.metrics import nrmse_curve, valid_prediction_time

    hist = np.stack([h for h, _ in segs])
    truth = np.stack([tr for _, tr in segs])
    t = DT * np.arange(truth.shape[1])
    pred = model.rollout(truth[:, 0], t, history=hist)
    vpt = [valid_prediction_time(t, nrmse_curve(pred[i], truth[i], scale)) * LAMBDA1 for i in range(len(segs))]
    return np.array(vpt)


def main(quick: bool) -> None:
    from surrogates import TrainingData
    from surrogates.esn import EchoStateNetwork

    info = machine()
    m = int(round(HORIZON / DT))
    stride = m + HISTORY + 50
    n_val = 0 if quick else 5
    n_test = 10
    n_total = N_TRAIN + 500 + (n_val + n_test + 1) * stride + m
    t, y = trajectory(n_total)
    scale = y.std(axis=0)
    data = TrainingData.from_arrays(t[:N_TRAIN], y[:N_TRAIN], state_names=("x", "y", "z"), scale=scale)
    val = segments(y, N_TRAIN + 500 + HISTORY, n_val, stride)
    test = segments(y, N_TRAIN + 500 + HISTORY + n_val * stride, n_test, stride)

    grid = [{}] if quick else [{}, {"spectral_radius": 0.8}, {"ridge": 1e-7}, {"input_scaling": 0.2},
                               {"spectral_radius": 0.8, "ridge": 1e-7}]
    table = []
    best = None
    for params in grid:
        model = EchoStateNetwork(n_nodes=1000, **params)
        c0, w0 = time.process_time(), time.perf_counter()
        model.fit(data, seed=0)
        train_s, train_cpu = time.perf_counter() - w0, time.process_time() - c0
        v = score(model, val, scale) if val else np.array([np.nan])
        te = score(model, test, scale)
        row = {"settings": ", ".join(f"{k}={v_}" for k, v_ in params.items()) or "defaults",
               "train_s": train_s, "train_cpu_s": train_cpu, "val_median_LT": float(np.median(v)),
               "test_median_LT": float(np.median(te)), "test_min_LT": float(te.min()), "test_max_LT": float(te.max())}
        table.append(row)
        print(row, flush=True)
        if best is None or (n_val and row["val_median_LT"] > best["val_median_LT"]):
            best = row
    targets = {"chosen_on_validation": best["settings"], "median_vpt_LT": best["test_median_LT"],
               "median_vpt_ge_10_LT": best["test_median_LT"] >= 10.0, "train_s": best["train_s"],
               "train_le_5s": best["train_s"] <= 5.0}
    notes = (f"1,000 nodes, {N_TRAIN} training samples at dt {DT}; 10 test segments of {HORIZON:g} time units "
             f"with {HISTORY} samples of warm-up each; LT = Lyapunov time 1/{LAMBDA1} (Sprott 2003); threshold 0.4 "
             "(Pathak et al. 2018). Settings chosen by median validation VPT on 5 separate segments "
             f"(full run only): {best['settings']}; test median {best['test_median_LT']:.2f} LT, training "
             f"{best['train_s']:.2f} s.")
    write_results("esn", {"machine": info, "targets": targets}, table, notes, quick)


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="default settings only (smoke run)")
    main(ap.parse_args().quick)
