"""Report figures; each function returns a :class:`matplotlib.figure.Figure` (Agg backend).

* :func:`error_vs_horizon` — normalised error against forecast horizon, one line
  per learner (median over seeds, band from the lowest to the highest seed),
  with the valid-prediction threshold.
* :func:`sweep_curve` — the headline metric against data fraction (sparsity
  curve) or noise level, one line per learner with the spread over seeds.
* :func:`work_precision` — error against seconds per Lyapunov time, log–log:
  solvers as lines along their accuracy ladders, learners as points
  (Hairer, Nørsett and Wanner 1993, section II.10).
* :func:`critical_difference` — average ranks with the Nemenyi critical
  difference and bars joining learners that are not significantly
  different (Demšar 2006).

References
----------
J. Demšar, "Statistical comparisons of classifiers over multiple data sets",
J. Mach. Learn. Res. 7, 1–30 (2006).
E. Hairer, S. P. Nørsett and G. Wanner, *Solving Ordinary Differential
Equations I*, 2nd ed., Springer (1993).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from .style import MARKERS, THRESHOLD_COLOUR, new_figure, series_style
from .tables import METRIC_LABELS

__all__ = ["error_vs_horizon", "sweep_curve", "work_precision", "critical_difference"]


def _legend(ax, n: int):
    if n > 6:  # many series: outside the axes, never over the data
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=7)
    else:
        ax.legend(loc="best", framealpha=0.85)


def error_vs_horizon(curves: pd.DataFrame, system: str, *, threshold: float = 0.4, learner_order=None,
                     subtitle: str = ""):
    """``curves``: columns learner, seed, horizon (Lyapunov times), value (nrmse)."""
    fig, ax = new_figure()
    learners = learner_order or sorted(curves["learner"].unique())
    for i, name in enumerate(learners):
        g = curves[curves["learner"] == name]
        if g.empty:
            continue
        w = g.pivot_table(index="horizon", columns="seed", values="value", aggfunc="median").sort_index()
        h = w.index.to_numpy(float)
        w = w.where(w > 0)  # an exact zero (the start state itself) has no place on a log axis
        st = series_style(i)
        ax.plot(h, w.median(axis=1), color=st["color"], linestyle=st["linestyle"], marker=st["marker"],
                markerfacecolor=st["facecolor"], markersize=3,
                label=f"{name} ({w.shape[1]} seed{'s' if w.shape[1] != 1 else ''})")
        if w.shape[1] > 1:
            ax.fill_between(h, w.min(axis=1), w.max(axis=1), color=st["color"], alpha=0.2, linewidth=0)
    ax.axhline(threshold, color=THRESHOLD_COLOUR, linestyle=":", linewidth=1.2)
    ax.annotate(f"threshold {threshold:g}", xy=(0.99, threshold), xycoords=("axes fraction", "data"),
                ha="right", va="bottom", fontsize=8, color=THRESHOLD_COLOUR)
    ax.set_yscale("log")
    ax.set_xlabel("forecast horizon (Lyapunov times)")
    ax.set_ylabel("normalised RMSE (attractor std)")
    ax.set_title(f"{system}: forecast error against horizon" + (f"\n{subtitle}" if subtitle else ""))
    _legend(ax, len(ax.get_legend_handles_labels()[0]))
    return fig


def sweep_curve(points: pd.DataFrame, system: str, task: str, metric: str, axis: str, *, learner_order=None,
                subtitle: str = "", levels=None):
    """``points``: columns learner, seed, ``axis`` (fraction or noise), headline (ok cells only).

    ``levels``: every level of ``axis`` in the study; a learner without a
    result at some level (failed, diverged, ...) says so in the legend.
    """
    fig, ax = new_figure()
    learners = learner_order or sorted(points["learner"].unique())
    all_levels = sorted(points[axis].unique()) if levels is None else sorted(levels)
    single = []
    for i, name in enumerate(learners):
        g = points[points["learner"] == name]
        if g.empty:
            continue
        stat = g.groupby(axis)["headline"].agg(["median", "min", "max", "count"]).sort_index()
        if len(stat) == 1 and len(all_levels) > 1:  # one point is no curve: named under the axes instead
            single.append(f"{name} ({stat.index[0]:g})")
            continue
        x = stat.index.to_numpy(float)
        st = series_style(i)
        missing = [v for v in all_levels if v not in set(x)]
        label = name + (f" (no result at {', '.join(f'{v:g}' for v in missing)})" if missing else "")
        ax.plot(x, stat["median"], color=st["color"], linestyle=st["linestyle"], marker=st["marker"],
                markerfacecolor=st["facecolor"], markersize=5, label=label)
        if (stat["count"] > 1).any():
            ax.fill_between(x, stat["min"], stat["max"], color=st["color"], alpha=0.2, linewidth=0)
    if axis == "fraction":
        from matplotlib.ticker import FixedLocator, NullLocator

        ax.set_xscale("log")
        levels = np.unique(points[axis].to_numpy(float))
        ax.xaxis.set_major_locator(FixedLocator(levels))
        ax.xaxis.set_minor_locator(NullLocator())
        ax.set_xticklabels([f"{v:g}" for v in levels])
        ax.set_xlabel("fraction of training samples kept")
        ax.invert_xaxis()  # sparser to the right
    else:
        ax.set_xlabel("noise level (attractor std)")
    if metric == "valid_prediction_time":
        ax.axhline(1.0, color=THRESHOLD_COLOUR, linestyle=":", linewidth=1.0)
        ax.annotate("1 Lyapunov time", xy=(0.01, 1.0), xycoords=("axes fraction", "data"), ha="left",
                    va="bottom", fontsize=8, color=THRESHOLD_COLOUR)
    elif np.nanmin(points["headline"].to_numpy(float)) > 0:
        ax.set_yscale("log")
    ax.set_ylabel(METRIC_LABELS.get(metric, metric))
    what = "sparsity" if axis == "fraction" else "noise"
    ax.set_title(f"{system} · {task}: {what} curve\n" + (f"{subtitle}; " if subtitle else "")
                 + "median over seeds, band min–max")
    _legend(ax, len(ax.get_legend_handles_labels()[0]))
    if single:
        ax.text(0.0, -0.16, "results at one level only, not drawn: " + ", ".join(single),
                transform=ax.transAxes, fontsize=7, va="top", wrap=True)
    return fig


def work_precision(ladder: pd.DataFrame, learners: pd.DataFrame, title: str, *, learner_order=None):
    """``ladder``: rows of one problem (method, error, seconds_per_lyapunov_time, status);
    ``learners``: columns learner, nrmse_mean, inference_seconds_per_lyapunov_time (one row per cell)
    and optionally ``setting`` (a label: one marker shape per setting, one colour per learner)."""
    fig, ax = new_figure(7.2, 4.6)
    ok = ladder[(ladder["status"] == "success") & np.isfinite(ladder["error"])]
    grey = ("#000000", "#666666")
    solver_markers = ("x", "+", "1", "|", "2", "3", "4", "_")
    for j, (method, g) in enumerate(ok.groupby("method", sort=False)):
        g = g.sort_values("error")
        ax.plot(np.maximum(g["error"], 1e-16), g["seconds_per_lyapunov_time"], color=grey[j % 2],
                linestyle=("-", "--", "-.", ":")[j % 4], marker=solver_markers[j % len(solver_markers)],
                markersize=7, linewidth=1.0, label=f"solver {method}")
    names = learner_order or sorted(learners["learner"].unique())
    settings = list(dict.fromkeys(learners["setting"])) if "setting" in learners else [""]
    many = len(settings) > 1
    for i, name in enumerate(names):
        g = learners[learners["learner"] == name]
        if g.empty:
            continue
        st = series_style(i)
        for j, setting in enumerate(settings):
            h = g[g["setting"] == setting] if many else g
            if h.empty:
                continue
            ax.scatter(h["nrmse_mean"], h["inference_seconds_per_lyapunov_time"], facecolors=st["facecolor"],
                       marker=MARKERS[j % len(MARKERS)] if many else st["marker"], s=45,
                       edgecolors=st["edgecolor"], linewidths=0.5 if st["facecolor"] != "white" else 1.2,
                       zorder=3, label=f"learner {name}" if j == 0 or not many else None)
    if many:  # markers say the data setting, colours the learner
        for j, setting in enumerate(settings):
            ax.scatter([], [], color="white", edgecolors="black", marker=MARKERS[j % len(MARKERS)], s=45,
                       label=setting)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("time-averaged normalised RMSE over the horizon")
    ax.set_ylabel("seconds per trajectory per Lyapunov time")
    ax.set_title(title)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return fig


def critical_difference(test, title: str):
    """Critical-difference diagram of a :class:`suite.stats.RankTest` (rank 1 = best, on the left)."""
    k = len(test.learners)
    order = np.argsort(test.average_ranks)
    ranks = np.asarray(test.average_ranks, float)
    height = 2.2 + 0.22 * k
    fig, ax = new_figure(7.0, height)
    ax.grid(False)
    ax.set_xlim(0.5, k + 0.5)
    ax.set_ylim(-0.8 * max((k + 1) // 2, k - (k + 1) // 2) - 0.5, 1.6)
    ax.yaxis.set_visible(False)
    for s in ("left", "right", "bottom"):
        ax.spines[s].set_visible(False)
    ax.xaxis.set_ticks_position("top")
    ax.xaxis.set_label_position("top")
    ax.set_xticks(range(1, k + 1))
    ax.set_xlabel("average rank (1 = best)")
    ax.axhline(0, color="black", linewidth=1)
    half = (k + 1) // 2
    for pos, idx in enumerate(order):
        left = pos < half
        y = -(pos + 1) * 0.8 if left else -(k - pos) * 0.8
        x_text = 0.55 if left else k + 0.45
        ax.plot([ranks[idx], ranks[idx], x_text], [0, y, y], color="black", linewidth=0.8)
        ax.text(x_text, y + 0.08, f"{test.learners[idx]} ({ranks[idx]:.2f})", ha="left" if left else "right",
                va="bottom", fontsize=8)
    if np.isfinite(test.critical_difference):
        cd = test.critical_difference
        ax.plot([1, 1 + cd], [1.0, 1.0], color="black", linewidth=2)
        ax.text(1 + cd / 2, 1.1, f"CD = {cd:.2f} (Nemenyi, alpha = {test.alpha:g})", ha="center", va="bottom",
                fontsize=8)
    level = -0.25
    for group in test.cliques:
        if len(group) < 2:
            continue
        r = [ranks[test.learners.index(g)] for g in group]
        ax.plot([min(r) - 0.03, max(r) + 0.03], [level, level], color="#D55E00", linewidth=3,
                solid_capstyle="round")
        level -= 0.2
    p = test.p_value
    verdict = ("not significant: ranks may be noise" if not test.significant() else "significant")
    ax.set_title(f"{title}\nFriedman p = {p:.3g} ({verdict})\n"
                 "learners joined by a bar are not significantly different", fontsize=9)
    return fig
