"""Figures of a sweep Dataset: occupation and sideband ratio, and a stability map.

At the edge of the package (matplotlib, imported only by the command line and
reports, figures built outside pyplot). A sweep with one dimension gives line
plots with the unstable range shaded; with two or more, maps over the first
two dimensions (further dimensions at their first value, said in the title).
"""

import numpy as np

from simulator.report.plots import save_figure, subplots


def _axis_label(dataset, dim):
    coord = dataset[dim]
    path = coord.attrs.get("path", dim)
    units = coord.attrs.get("units", "")
    return f"{path} ({units})" if units else path


def _reduce(dataset, keep):
    """Select the first value along every dimension not in ``keep``."""
    extra = [d for d in dataset["stable"].dims if d not in keep]
    note = ", ".join(f"{d} = {dataset[d].values[0]:.4g}" for d in extra)
    return dataset.isel({d: 0 for d in extra}), note


def plot_occupation(dataset, path):
    """Occupation of every mode (exact and weak-coupling) against the swept parameters.

    Also the sideband ratio n/(n+1) where the dataset carries it.
    """
    dims = [d for d in dataset["stable"].dims]
    if len(dims) == 1 or "point" in dims:
        dim = dims[0]
        x = dataset[dim].values
        has_ratio = "sideband_ratio" in dataset
        has_time = "asymmetry_time_s" in dataset and np.isfinite(
            dataset["asymmetry_time_s"].values).any()
        rows = 1 + has_ratio + has_time
        fig, axes = subplots(rows, 1, figsize=(8, 1.0 + 3.2 * rows), sharex=True,
                             squeeze=False)
        ax = axes[0, 0]
        for m, name in enumerate(dataset["mode"].values):
            exact = dataset["occupation"].values[:, m]
            ax.plot(x, exact, "-", lw=2, label=f"{name}: exact (Lyapunov)")
            ax.plot(x, dataset["weak_coupling_occupation"].values[:, m], "--", lw=1,
                    label=f"{name}: weak-coupling formula")
        positive = dataset["occupation"].values
        if np.nanmin(np.where(positive > 0, positive, np.nan), initial=np.inf) > 0:
            ax.set_yscale("log")
        ax.set_ylabel("phonon occupation")
        _shade_unstable(ax, x, dataset["stable"].values)
        ax.legend(loc="best", fontsize=8)
        ax.grid(alpha=0.3)
        if has_ratio:
            axr = axes[1, 0]
            for m, name in enumerate(dataset["mode"].values):
                axr.plot(x, dataset["sideband_ratio"].values[:, m], "-", label=name)
            axr.set_ylabel("sideband ratio anti-Stokes/Stokes")
            axr.ticklabel_format(axis="y", useOffset=False)
            _shade_unstable(axr, x, dataset["stable"].values)
            axr.grid(alpha=0.3)
            axr.legend(fontsize=8)
        if has_time:
            axt = axes[-1, 0]
            for m, name in enumerate(dataset["mode"].values):
                axt.semilogy(x, dataset["asymmetry_time_s"].values[:, m], "-", label=name)
            axt.set_ylabel("integration time to resolve\nthe asymmetry at 5σ (s)")
            _shade_unstable(axt, x, dataset["stable"].values)
            axt.grid(alpha=0.3, which="both")
            axt.legend(fontsize=8)
        axes[-1, 0].set_xlabel(_axis_label(dataset, dim))
        if dataset[dim].attrs.get("spacing") == "log":
            axes[-1, 0].set_xscale("log")
        fig.suptitle(f"{dataset.attrs.get('scenario_name', '')}: occupation along the sweep")
    else:
        sub, note = _reduce(dataset, dims[:2])
        fig, ax = subplots(figsize=(8, 5.5))
        values = sub["occupation"].values[..., 0].T
        from matplotlib.colors import LogNorm

        finite = values[np.isfinite(values) & (values > 0)]
        norm = LogNorm(finite.min(), finite.max()) if finite.size else None
        mesh = ax.pcolormesh(sub[dims[0]].values, sub[dims[1]].values, values,
                             shading="nearest", norm=norm, cmap="viridis")
        fig.colorbar(mesh, ax=ax, label=f"occupation of {dataset['mode'].values[0]}")
        ax.set_xlabel(_axis_label(dataset, dims[0]))
        ax.set_ylabel(_axis_label(dataset, dims[1]))
        _log_axes(ax, dataset, dims)
        ax.set_title("occupation (blank: unstable)" + (f"; {note}" if note else ""))
    fig.tight_layout()
    save_figure(fig, path, overwrite=True)  # the run's or sweep's own folder
    return path


def _log_axes(ax, dataset, dims):
    """Logarithmic axes for parameters swept on a logarithmic range."""
    if dataset[dims[0]].attrs.get("spacing") == "log":
        ax.set_xscale("log")
    if dataset[dims[1]].attrs.get("spacing") == "log":
        ax.set_yscale("log")


def _shade_unstable(ax, x, stable):
    unstable = stable == 0
    if not unstable.any():
        return
    step = np.median(np.diff(x)) if x.size > 1 else 1.0
    first = True
    for xi, u in zip(x, unstable, strict=True):
        if u:
            ax.axvspan(xi - step / 2, xi + step / 2, color="tab:red", alpha=0.15, lw=0,
                       label="unstable (no steady state)" if first else None)
            first = False


def plot_stability(dataset, path):
    """Stability map: stable, bistable and unstable points over the swept parameters."""
    from matplotlib.colors import ListedColormap

    dims = list(dataset["stable"].dims)
    code = np.where(dataset["stable"].values == 0, 2, 0) + np.where(
        (dataset["bistable"].values == 1) & (dataset["stable"].values == 1), 1, 0)
    cmap = ListedColormap(["#4c9f70", "#e0b040", "#c0392b"])
    labels = ["stable", "bistable (stable branch)", "unstable"]
    if len(dims) == 1 or "point" in dims:
        fig, ax = subplots(figsize=(8, 2.6))
        x = dataset[dims[0]].values
        ax.scatter(x, np.zeros_like(x), c=code, cmap=cmap, vmin=0, vmax=2, s=40, marker="s")
        ax.set_yticks([])
        ax.set_xlabel(_axis_label(dataset, dims[0]))
        growth = dataset["growth_rate_hz"].values
        ax2 = ax.twinx()
        ax2.plot(x, growth, "k-", lw=1)
        ax2.axhline(0, color="k", lw=0.5, ls=":")
        ax2.set_ylabel("max growth rate (Hz)")
    else:
        sub, note = _reduce(dataset, dims[:2])
        code2 = code[(slice(None), slice(None)) + (0,) * (len(dims) - 2)]
        fig, ax = subplots(figsize=(8, 5.5))
        ax.pcolormesh(sub[dims[0]].values, sub[dims[1]].values, code2.T, cmap=cmap, vmin=0,
                      vmax=2, shading="nearest")
        ax.set_xlabel(_axis_label(dataset, dims[0]))
        ax.set_ylabel(_axis_label(dataset, dims[1]))
        _log_axes(ax, dataset, dims)
        if note:
            ax.set_title(note)
    from matplotlib.patches import Patch

    ax.legend(handles=[Patch(color=cmap(i), label=lab) for i, lab in enumerate(labels)],
              loc="upper left", fontsize=8, framealpha=0.9)
    fig.suptitle(f"{dataset.attrs.get('scenario_name', '')}: stability of the operating point")
    fig.tight_layout()
    save_figure(fig, path, overwrite=True)  # the run's or sweep's own folder
    return path
