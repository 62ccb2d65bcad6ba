"""Figures of a sweep Dataset: occupation, sideband ratio and asymmetry time, and stability.

At the edge of the package (matplotlib, imported only by the command line and
reports, figures built outside pyplot). A sweep with one dimension gives line
plots over the stable range (unstable points inside it shaded, those beyond
it named in the title); with two or more, maps over the first two dimensions
(further dimensions at their first value, said in the title), cells bounded
at the mid-points between swept values — geometric mid-points on a
logarithmic axis, so every cell covers only values around the one simulated.
Axes are named in words with units (:mod:`simulator.scenario.labels`); a
vertical axis is logarithmic only where the values span decades; each mode
keeps the colour of its thermal bath in the spectrum figures
(:mod:`simulator.report.colours`); legends sit outside the data.
"""

import numpy as np

from simulator.report.colours import THERMAL_SUFFIX, source_colour
from simulator.report.plots import data_limits, save_figure, spans_decades, subplots
from simulator.report.summary import coord_label

_CLASSES = (("stable", "#4c9f70"), ("bistable (stable branch)", "#e0b040"),
            ("unstable", "#c0392b"))


def _x_coord(dataset, dim):
    """The coordinate along ``dim`` to plot against (the first swept path of a zip)."""
    if dim != "point":
        return dataset[dim]
    named = [c for c in dataset.coords.values() if c.dims == (dim,) and "path" in c.attrs]
    return named[0] if named else dataset[dim]


def _names(dataset):
    return tuple(str(m) for m in dataset["mode"].values)


def _is_log(coord):
    return coord.attrs.get("spacing") == "log"


def cell_edges(values, log=False):
    """Edges of the cells around swept ``values``: mid-points, geometric on a log axis.

    The end cells extend by half a step on each side (a half step of the
    logarithm on a log axis).
    """
    v = np.asarray(values, dtype=float)
    if v.size == 1:
        return v * np.array([0.5, 2.0]) if log else v + np.array([-0.5, 0.5])
    t = np.log(v) if log else v
    mid = (t[1:] + t[:-1]) / 2
    edges = np.concatenate([[t[0] - (mid[0] - t[0])], mid, [t[-1] + (t[-1] - mid[-1])]])
    return np.exp(edges) if log else edges


def _reduce(dataset, keep):
    """Select the first value along every dimension not in ``keep``."""
    extra = [d for d in dataset["stable"].dims if d not in keep]
    note = ", ".join(f"{coord_label(dataset[d], _names(dataset))} = "
                     f"{float(dataset[d].values[0]):.4g}" for d in extra)
    return dataset.isel({d: 0 for d in extra}), note


def _stable_window(x, stable, log, name):
    """x-limits around the stable points, and the unstable values left outside them."""
    edges = cell_edges(x, log)
    inside = np.flatnonzero(stable)
    if not inside.size:
        return (edges[0], edges[-1]), ""
    lo, hi = inside[0], inside[-1]
    left = f"below {x[lo]:.4g}" if lo > 0 else ""
    right = f"above {x[hi]:.4g}" if hi < x.size - 1 else ""
    note = " and ".join(t for t in (left, right) if t)
    return (edges[lo], edges[hi + 1]), (f"unstable for {name} {note} (not shown)" if note
                                         else "")


def _line_panels(dataset, dim):
    coord = _x_coord(dataset, dim)
    x, log = coord.values.astype(float), _is_log(coord)
    stable = dataset["stable"].values == 1
    names = _names(dataset)
    panels = [("occupation", "phonon occupation n")]
    if "sideband_ratio" in dataset:
        panels.append(("sideband_ratio", "sideband ratio\nanti-Stokes / Stokes"))
    if "asymmetry_time_s" in dataset and np.isfinite(dataset["asymmetry_time_s"].values).any():
        panels.append(("asymmetry_time_s", "time to resolve the\nasymmetry at 5σ (s)"))
    fig, axes = subplots(len(panels), 1, figsize=(9, 0.8 + 2.6 * len(panels)), sharex=True,
                         squeeze=False, layout="constrained")
    limits, beyond = _stable_window(x, stable, log, coord_label(coord, names))
    for ax, (key, ylabel) in zip(axes[:, 0], panels, strict=True):
        values = np.where(stable[:, None], dataset[key].values, np.nan)
        for m, name in enumerate(names):
            colour = source_colour(name + THERMAL_SUFFIX, names)
            ax.plot(x, values[:, m], "-", lw=3, alpha=0.6, color=colour,
                    label=f"{name}: exact (Lyapunov)" if key == "occupation" else name)
            if key == "occupation":  # drawn over the exact curve, which it mostly follows
                weak = np.where(stable, dataset["weak_coupling_occupation"].values[:, m], np.nan)
                ax.plot(x, weak, "--", lw=1,
                        color="black" if len(names) == 1 else colour,
                        label=f"{name}: weak-coupling formula")
        log_y = spans_decades(values)
        ax.set_yscale("log" if log_y else "linear")
        ax.set_ylim(*data_limits(values, log=log_y))
        if key == "sideband_ratio":
            ax.ticklabel_format(axis="y", useOffset=False)
        _shade_unstable(ax, x, stable, log)
        ax.set_ylabel(ylabel)
        ax.grid(alpha=0.3, which="major")
    axes[-1, 0].set_xlabel(coord_label(coord, names))
    if log:
        axes[-1, 0].set_xscale("log")
    axes[-1, 0].set_xlim(*limits)
    handles, labels = axes[0, 0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside right upper", fontsize=8, frameon=False)
    fig.suptitle(f"{dataset.attrs.get('scenario_name', '')}: occupation along the sweep",
                 x=0.02, ha="left", fontsize=11)
    if beyond:
        axes[0, 0].set_title(beyond, fontsize=9)
    return fig


def _map_panels(dataset, dims):
    sub, note = _reduce(dataset, dims[:2])
    names = _names(dataset)
    panels = [("occupation", f"phonon occupation of {names[0]}")]
    if "sideband_ratio" in sub:
        panels.append(("sideband_ratio", f"sideband ratio of {names[0]}\nanti-Stokes / Stokes"))
    fig, axes = subplots(1, len(panels), figsize=(6 * len(panels), 5.2), squeeze=False,
                         layout="constrained")
    for ax, (key, label) in zip(axes[0], panels, strict=True):
        values = np.where(sub["stable"].values == 1, sub[key].values[..., 0], np.nan)
        norm = None
        if spans_decades(values):
            from matplotlib.colors import LogNorm

            finite = values[np.isfinite(values) & (values > 0)]
            norm = LogNorm(finite.min(), finite.max())
        mesh = _mesh(ax, sub, dims, values, norm=norm, cmap="viridis")
        fig.colorbar(mesh, ax=ax, label=label)
    fig.suptitle(f"{dataset.attrs.get('scenario_name', '')}: occupation and sideband ratio "
                 "(blank: unstable)" + (f"\nother parameters at {note}" if note else ""),
                 fontsize=11)
    return fig


def _mesh(ax, sub, dims, values, **options):
    """``values`` (dims[0] × dims[1]) as cells bounded at (geometric) mid-points."""
    cx, cy = sub[dims[0]], sub[dims[1]]
    names = _names(sub)
    mesh = ax.pcolormesh(cell_edges(cx.values, _is_log(cx)), cell_edges(cy.values, _is_log(cy)),
                         np.asarray(values).T, shading="flat", **options)
    ax.set_xlabel(coord_label(cx, names))
    ax.set_ylabel(coord_label(cy, names))
    if _is_log(cx):
        ax.set_xscale("log")
    if _is_log(cy):
        ax.set_yscale("log")
    return mesh


def plot_occupation(dataset, path):
    """Occupation (exact and weak-coupling), sideband ratio and asymmetry time along the sweep.

    Maps of occupation and sideband ratio for two or more dimensions.
    """
    dims = list(dataset["stable"].dims)
    one = len(dims) == 1 or "point" in dims
    fig = _line_panels(dataset, dims[0]) if one else _map_panels(dataset, dims)
    save_figure(fig, path, overwrite=True)  # the run's or sweep's own folder
    return path


def _shade_unstable(ax, x, stable, log):
    """Shade the cells of unstable points (those inside the stable range show)."""
    edges = cell_edges(x, log)
    for i in np.flatnonzero(~stable):
        ax.axvspan(edges[i], edges[i + 1], color=_CLASSES[2][1], alpha=0.12, lw=0)


def _classes(dataset):
    stable = dataset["stable"].values == 1
    return np.where(~stable, 2, np.where(dataset["bistable"].values == 1, 1, 0))


def plot_stability(dataset, path):
    """Stability along the sweep: the growth rate of fluctuations and the class of each point.

    Classes: stable, stable branch of a bistable point, unstable; the legend
    lists those that occur.
    """
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    dims = list(dataset["stable"].dims)
    code = _classes(dataset)
    names = _names(dataset)
    if len(dims) == 1 or "point" in dims:
        coord = _x_coord(dataset, dims[0])
        x, log = coord.values.astype(float), _is_log(coord)
        fig, ax = subplots(figsize=(9, 3.4), layout="constrained")
        edges = cell_edges(x, log)
        for i, c in enumerate(code):
            ax.axvspan(edges[i], edges[i + 1], color=_CLASSES[c][1], alpha=0.25, lw=0)
        growth = dataset["growth_rate_hz"].values
        ax.plot(x, growth, "k-", lw=1.2)
        ax.axhline(0, color="k", lw=0.6, ls=":")
        ax.set_ylim(*data_limits(growth, log=False))
        ax.set_ylabel("largest growth rate of the\nfluctuations, max Re λ/2π (Hz)")
        ax.set_xlabel(coord_label(coord, names))
        if log:
            ax.set_xscale("log")
        ax.set_xlim(edges[0], edges[-1])
        alpha = 0.25
    else:
        sub, note = _reduce(dataset, dims[:2])
        code2 = code[(slice(None), slice(None)) + (0,) * (len(dims) - 2)]
        fig, ax = subplots(figsize=(8, 5.2), layout="constrained")
        cmap = ListedColormap([colour for _, colour in _CLASSES])
        _mesh(ax, sub, dims, code2, cmap=cmap, vmin=0, vmax=2)
        if note:
            ax.set_title(f"other parameters at {note}", fontsize=9)
        alpha = 1.0
    present = sorted(set(np.asarray(code).ravel().tolist()))
    fig.legend(handles=[Patch(color=_CLASSES[i][1], alpha=alpha, label=_CLASSES[i][0])
                        for i in present],
               loc="outside right upper", fontsize=8, frameon=False)
    fig.suptitle(f"{dataset.attrs.get('scenario_name', '')}: stability of the operating point "
                 "(growth rate < 0: stable)" if len(dims) == 1 or "point" in dims
                 else f"{dataset.attrs.get('scenario_name', '')}: stability of the operating "
                      "point", fontsize=11)
    save_figure(fig, path, overwrite=True)  # the run's or sweep's own folder
    return path


# (file name, figure function, caption) of the figures drawn for every sweep
SWEEP_FIGURES = (
    ("occupation.png", plot_occupation,
     "Sweep: phonon occupation, sideband ratio and time to resolve the asymmetry over the "
     "stable range (maps for two swept parameters)."),
    ("stability.png", plot_stability,
     "Sweep: stability of the operating point (largest growth rate of the fluctuations; "
     "background: stable, bistable or unstable)."),
)
