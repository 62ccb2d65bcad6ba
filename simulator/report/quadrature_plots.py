"""Figure of a back-action-evading pair: where the noise of each quadrature comes from.

Left: the stationary variance of the measured quadrature X1 and of its
conjugate X2, source by source (:func:`simulator.linear.quadratures.quadrature_budget`,
one Lyapunov solution per independent source), on a log axis because the
evaded back-action piles into X2 orders of magnitude above what reaches X1;
the sources keep their colours of the spectrum figures, X1 solid and X2
hatched, with the zero-point variance ½ marked. Right: the imprecision
referred to X1 at the line, in quanta, for an ideal detector and for this
record, beside the least a single tone adds (the standard quantum limit ½),
which the pair is free of. The figure takes the budget's plain data
(``QuadratureBudget.to_dict``).
"""

import numpy as np

from simulator.report.colours import TOTAL_COLOUR, source_colour
from simulator.report.plots import FIGURE_DPI, save_figure, subplots
from simulator.report.ticks import tidy_log_ticks

ZERO_POINT = 0.5  # variance of a quadrature in its ground state (vacuum ½, the model's units)
BAR = 0.38  # height of each of the two bars of a source
HATCH = "///"  # the conjugate quadrature X2
SQL_COLOUR, IMPRECISION_COLOUR = "0.55", "#3b75af"


def plot_quadratures(budget, path, *, title=None, overwrite=False):
    """Save the figure of the pair's quadrature budget ``budget`` (plain data) to ``path``."""
    fig = quadrature_figure(budget, title=title)
    save_figure(fig, path, overwrite=overwrite)
    return path


def quadrature_figure(budget, *, title=None):
    """The :class:`matplotlib.figure.Figure` of :func:`plot_quadratures`."""
    fig, (left, right) = subplots(1, 2, figsize=(12.0, 4.6), layout="constrained",
                                  width_ratios=(1.6, 1.0))
    mode = budget["mode"]
    _variances(left, budget, mode)
    _imprecision(right, budget)
    fig.suptitle(title or f"back-action-evading measurement of mode {mode}", x=0.02,
                 ha="left", fontsize=10)
    tidy_log_ticks(fig, dpi=FIGURE_DPI)
    return fig


def _variances(ax, budget, mode):
    x1, x2 = budget["x1_by_source"], budget["x2_by_source"]
    sources = list(dict.fromkeys(list(x1) + list(x2)))
    rows = sources + ["total"]
    for k, source in enumerate(rows):
        colour = TOTAL_COLOUR if source == "total" else source_colour(source, (mode,))
        v1 = budget["x1_variance"] if source == "total" else x1.get(source, 0.0)
        v2 = budget["x2_variance"] if source == "total" else x2.get(source, 0.0)
        ax.barh(k - BAR / 2, v1, height=BAR, color=colour,
                label="X1, measured" if k == 0 else None)
        ax.barh(k + BAR / 2, v2, height=BAR, facecolor="white", edgecolor=colour,
                hatch=HATCH, label="X2, conjugate" if k == 0 else None)
    ax.axvline(ZERO_POINT, color="0.3", ls="--", lw=1.0, label="zero-point variance ½")
    ax.set_yticks(range(len(rows)), rows)
    ax.invert_yaxis()
    ax.set_xscale("log")
    values = [v for v in list(x1.values()) + list(x2.values()) if v > 0]
    ax.set_xlim(min(values + [ZERO_POINT]) / 3, max(values + [ZERO_POINT]) * 3)
    ax.set_xlabel("stationary variance of the quadrature (quanta; zero-point ½)")
    ax.set_title(f"variance of X1 and X2 by noise source (X1 total "
                 f"{budget['x1_variance']:.4g}, X2 {budget['x2_variance']:.4g})", fontsize=9)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), ncols=3, fontsize=8,
              frameon=False)  # below the axes, off the bars
    ax.grid(axis="x", alpha=0.3)


def _imprecision(ax, budget):
    eta = budget.get("detection_efficiency")
    rows = [(f"ideal phase-quadrature detector (η = {eta:g})", budget["imprecision_quanta"],
             IMPRECISION_COLOUR),
            ("this record (receiver and amplifier)", budget["record_imprecision_quanta"],
             IMPRECISION_COLOUR),
            ("one tone at best (standard quantum limit)", budget["standard_quantum_limit_quanta"],
             SQL_COLOUR)]
    for k, (_, value, colour) in enumerate(rows):
        ax.barh(k, value, height=0.6, color=colour)
        ax.annotate(f"{value:.3g}", xy=(value, k), xytext=(3, 0), textcoords="offset points",
                    va="center", fontsize=8)
    ax.set_yticks(range(len(rows)), [r[0] for r in rows])
    ax.invert_yaxis()
    ax.set_xscale("log")
    values = np.array([r[1] for r in rows])
    ax.set_xlim(values.min() / 3, values.max() * 10)  # room for the numbers
    ax.set_xlabel("noise added to X1 at the line (quanta)")
    ax.set_title("imprecision referred to X1", fontsize=9)
    ax.grid(axis="x", alpha=0.3)
