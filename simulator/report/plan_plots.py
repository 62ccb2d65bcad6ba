"""Figure of a plan: the objective around the optimum with the constraint boundaries.

Takes the plain data of a plan (``noisechain plan --json``, the ``map``,
``optimum`` and ``own_point`` entries), so it needs nothing from the
workflows. With two free parameters: the objective as a colour map (log
scale) with the boundary of each constraint drawn as a contour, the
optimum as a star and the scenario's own point as a circle; with one: the
objective along it with the spans each constraint excludes shaded.
"""

import numpy as np

from simulator.report.plots import FIGURE_DPI, save_figure, subplots
from simulator.report.ticks import tidy_log_ticks
from simulator.scenario.labels import axis_label

_STYLES = ("-", "--", "-.", ":")
# the planner's constraint names in words, for the legend
_CONSTRAINT_WORDS = {"max_power_w": "maximum drive power",
                     "max_photon_number": "maximum intracavity photons",
                     "stability": "stability margin",
                     "bistability_margin": "distance from bistability",
                     "regime": "linear-engine regime",
                     "signal": "a finite bound (a line to measure)",
                     "valid": "a valid scenario",
                     "max_occupation": "maximum occupation",
                     "max_backaction_heating": "maximum back-action heating of X2"}
# the objective in a few words, for the colour bar and the vertical axis
_OBJECTIVE_WORDS = {"asymmetry_time": "time to resolve the asymmetry",
                    "occupation_error": "error of the occupation",
                    "occupation": "occupation",
                    "recorded_tones_time": "time T of the tones recorded together",
                    "thermal_variance_time": "time to resolve n_th + ½"}


def _label(axis):
    """The axis in words with its unit ("drive detuning Δ / Ωm"), as the sweep figures."""
    return axis_label(axis["path"], axis["unit"])


def _where(point, axes):
    """The numbers of a point's parameters along the map's axes (None if absent)."""
    if not point:
        return None
    numbers = {p["path"]: p["number"] for p in point.get("parameters", [])}
    return [numbers.get(a["path"]) for a in axes]


def _fields(data, shape):
    """Per constraint that some map point violates, a field that changes sign on its boundary.

    A graded violation keeps its value (the boundary falls where it crosses zero,
    linearly between grid points); a satisfied pass/fail constraint (0) becomes −1,
    so its boundary falls half-way between a passing and a failing point.
    """
    fields = {}
    for name, values in data["map"].get("violations", {}).items():
        v = np.array([1.0 if x is None or not np.isfinite(x) else x for x in values])
        if (v > 0).any():
            fields[name] = np.where(v == 0, -1.0, v).reshape(shape)
    return fields


def _crossings(x, field):
    """Excluded intervals along ``x`` (field > 0), with ends where it crosses zero."""
    spans, start = [], x[0] if field[0] > 0 else None
    for i in range(len(x) - 1):
        a, b = field[i], field[i + 1]
        if (a > 0) != (b > 0):
            cross = x[i] + (x[i + 1] - x[i]) * a / (a - b)
            if b > 0:
                start = cross
            else:
                spans.append((start, cross))
                start = None
    if start is not None:
        spans.append((start, x[-1]))
    return spans


def plot_plan(data, path, *, overwrite=False):
    """Save the plan figure of ``data`` (a plan's plain data) to ``path``; return the path."""
    fig = plan_figure(data)
    if fig is None:
        return None
    save_figure(fig, path, overwrite=overwrite)
    return path


def plan_figure(data):
    """The plan figure of ``data`` (a :class:`matplotlib.figure.Figure`), None without a map."""
    axes = data["map"]["axes"]
    if not axes:
        return None
    shape = tuple(len(a["numbers"]) for a in axes)
    objective = np.array(data["map"]["objective"], dtype=float).reshape(shape)
    fields = _fields(data, shape)
    best = _where(data.get("optimum"), axes)
    own = _where(data.get("own_point"), axes)
    units = f" ({data['units']})" if data["units"] else ""
    quantity = _OBJECTIVE_WORDS.get(data["objective"], "objective") + units
    if len(axes) == 1:
        fig, ax = subplots(figsize=(8, 4.5))
        x = np.asarray(axes[0]["numbers"])
        ax.plot(x, objective, "k-", lw=1.5, label="objective")
        for k, (name, field) in enumerate(fields.items()):
            for i, (a, b) in enumerate(_crossings(x, field)):
                ax.axvspan(a, b, color=f"C{k}", alpha=0.15, lw=0,
                           label=f"excluded: {name}" if i == 0 else None)
        if best is not None:
            ax.plot(best[0], data["optimum"]["objective"], "*", color="C3", ms=14,
                    label="optimum")
        if own is not None and own[0] is not None and np.isfinite(
                data["own_point"]["objective"]):
            ax.plot(own[0], data["own_point"]["objective"], "o", mfc="none", color="k",
                    ms=9, label="scenario's own point")
        if np.nanmin(np.where(objective > 0, objective, np.nan), initial=np.inf) > 0:
            ax.set_yscale("log")
        ax.set_xlabel(_label(axes[0]))
        ax.set_ylabel(quantity)
        if axes[0]["log"]:
            ax.set_xscale("log")
    else:
        from matplotlib.colors import LogNorm

        fig, ax = subplots(figsize=(8, 5.5))
        x, y = np.asarray(axes[0]["numbers"]), np.asarray(axes[1]["numbers"])
        finite = objective[np.isfinite(objective) & (objective > 0)]
        norm = LogNorm(finite.min(), finite.max()) if finite.size else None
        mesh = ax.pcolormesh(x, y, np.where(np.isfinite(objective), objective, np.nan).T,
                             shading="nearest", norm=norm, cmap="viridis")
        fig.colorbar(mesh, ax=ax, label=quantity)
        for k, (name, field) in enumerate(fields.items()):
            if (field <= 0).any():
                ax.contour(x, y, field.T, levels=[0.0], colors=["w"],
                           linestyles=_STYLES[k % len(_STYLES)], linewidths=1.5)
                ax.plot([], [], color="0.3", ls=_STYLES[k % len(_STYLES)],
                        label=f"limit: {_CONSTRAINT_WORDS.get(name, name)}")
        if best is not None:
            ax.plot(best[0], best[1], "*", color="C3", ms=16, mec="w", label="optimum")
        if own is not None and None not in own:
            ax.plot(own[0], own[1], "o", mfc="none", mec="C1", ms=10, mew=2,
                    label="scenario's own point")
        ax.set_xlabel(_label(axes[0]))
        ax.set_ylabel(_label(axes[1]))
        if axes[0]["log"]:
            ax.set_xscale("log")
        if axes[1]["log"]:
            ax.set_yscale("log")
    # below the axes, off the map
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), ncol=3, fontsize=8,
              frameon=False)
    ax.set_title(data["objective_description"], fontsize=10)
    fig.suptitle(f"{data['scenario']}: best operating point")
    for _ in range(2):  # the labels chosen change the margins: lay out, choose, again
        fig.tight_layout()
        tidy_log_ticks(fig, dpi=FIGURE_DPI)
    return fig


def plan_html(data):
    """The report section of a plan: the optimum beside the scenario's own point."""
    from simulator.report import html

    if not data["feasible"]:
        return f'<p class="warn">{html.escape(data["message"])}</p>'
    opt, own = data["optimum"], data["own_point"]
    rows = [[p["path"], o["number"], p["number"], p["unit"] or "—"]
            for p, o in zip(opt["parameters"], own["parameters"], strict=True)]
    rows.append([f"objective ({data['units'] or 'quanta'})", own["objective"],
                 opt["objective"], "—"])
    ratio = own.get("ratio_to_optimum")
    active = ", ".join(data["active_constraints"]) or "none"
    text = (f"<p>Minimised: the {html.escape(data['objective_description'])}. The scenario's "
            f"own point is {'' if ratio is None else f'{ratio:.3g} × '}the best"
            + (f" and violates {html.escape(', '.join(own['violated']))}"
               if own["violated"] else "")
            + f". Active constraints: {html.escape(active)}"
            + (f"; on a bound of {html.escape(', '.join(data['at_bounds']))}"
               if data["at_bounds"] else "") + ".</p>")
    flat = [[f"{p['path']} {p['change']:+.0%}", p["value"], p["ratio"], "yes" if p["feasible"] else
             "no: " + ", ".join(p["violated"])] for p in data["flatness"]]
    return (text + html.table(rows, header=["parameter", "scenario's own point", "best",
                                            "in units of"])
            + html.table(flat, header=["flatness: parameter ±10 %", "value",
                                       "objective / best", "feasible"]))
