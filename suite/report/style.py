"""One place for the look of every report figure: a colour-blind-safe palette, markers, fonts.

The palette is Okabe and Ito's eight colours, distinguishable under the
common forms of colour-vision deficiency; markers and line styles repeat
the distinction for grey-scale prints and for more than eight series.

References
----------
M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures and
presentations that are friendly to colorblind people" (2002).
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # reports are files; never open a window

import matplotlib.pyplot as plt  # noqa: E402

__all__ = ["PALETTE", "MARKERS", "LINESTYLES", "series_style", "new_figure", "THRESHOLD_COLOUR"]

#: Okabe–Ito colours (black last: it is kept for solvers and reference lines)
PALETTE = ("#E69F00", "#56B4E9", "#009E73", "#0072B2", "#D55E00", "#CC79A7", "#F0E442", "#000000")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
LINESTYLES = ("-", "--", "-.", ":")
THRESHOLD_COLOUR = "#555555"

_RC = {"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 8,
       "axes.grid": True, "grid.alpha": 0.3, "savefig.dpi": 150, "svg.fonttype": "none"}


def series_style(i: int) -> dict:
    """Colour, marker and line style of the ``i``-th series (stable across figures)."""
    return {"color": PALETTE[i % (len(PALETTE) - 1)], "marker": MARKERS[i % len(MARKERS)],
            "linestyle": LINESTYLES[(i // (len(PALETTE) - 1)) % len(LINESTYLES)]}


def new_figure(width: float = 6.4, height: float = 4.2):
    """A figure and one axes, with the report's style applied."""
    with plt.rc_context(_RC):
        fig, ax = plt.subplots(figsize=(width, height), layout="constrained")
    for k, v in _RC.items():
        if k.startswith("axes.grid"):
            ax.grid(True, alpha=_RC["grid.alpha"])
    ax.title.set_fontsize(_RC["axes.titlesize"])
    ax.xaxis.label.set_fontsize(_RC["axes.labelsize"])
    ax.yaxis.label.set_fontsize(_RC["axes.labelsize"])
    return fig, ax
