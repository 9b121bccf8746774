"""One place for the look of every report figure: a colour-blind-safe palette, markers, fonts.

The palette is Okabe and Ito's eight colours, distinguishable under the
common forms of colour-vision deficiency; markers and line styles repeat
the distinction for grey-scale prints, and beyond seven series the colours
come back with another line style and hollow markers.

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
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*", "h", "<", ">", "p")  # 12: the settings of a study fit
LINESTYLES = ("-", "--", "-.", ":")
THRESHOLD_COLOUR = "#555555"

_RC = {"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 8,
       "axes.grid": True, "grid.alpha": 0.3, "savefig.dpi": 150, "svg.fonttype": "none"}


def series_style(i: int) -> dict:
    """Colour, marker, line style and marker fill of the ``i``-th series (stable across figures).

    The seven colours repeat from the eighth series on; a repeat differs in
    line style and is drawn with hollow markers (white face, coloured edge),
    so that two series of one colour stay apart in scatter plots too, where
    there are no lines (``facecolor`` and ``edgecolor``).
    """
    colours = len(PALETTE) - 1
    cycle = i // colours
    color = PALETTE[i % colours]
    return {"color": color, "marker": MARKERS[i % len(MARKERS)],
            "linestyle": LINESTYLES[cycle % len(LINESTYLES)],
            "facecolor": color if cycle % 2 == 0 else "white",
            "edgecolor": "black" if cycle % 2 == 0 else color}


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
