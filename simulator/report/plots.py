"""Figures of analytic spectra (matplotlib, imported only when plotting, outside pyplot).

The command line imports this module lazily; the physics modules never do.

The spectrum figure has up to three rows: the whole spectrum on a log scale
(excess above shot noise, so a cavity-suppressed Stokes sideband stays
visible), zooms on the Stokes and anti-Stokes sidebands of one mode on a
linear scale with every budget term and the occupations, and the same zooms
referred to displacement with the standard quantum limit and zero-point
motion.
"""

import numpy as np

from simulator.report.colours import (
    FLOOR_COLOUR,
    TOTAL_COLOUR,
    source_colour,
    term_style,
    tone_order,
)

_PREFIXES = ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz"))
ZOOM_LINEWIDTHS = 6.0
DECADES_FOR_LOG = 1.5  # values spanning more decades get a log axis (common practice)
# standard quantum limit and zero-point motion: apart from every noise source's colour
REFERENCE_COLOURS = ("#d35400", "#16a085", "#7f8c8d")


def unit_of_span(span):
    """(scale, name) of the frequency unit for an axis spanning ``span`` Hz."""
    for scale, name in _PREFIXES:
        if span >= 2 * scale:
            return scale, name
    return 1.0, "Hz"


def titled(scenario):
    """The scenario's name for a figure title, with the tones the record holds.

    With the drive alone: the name. With several tones: which the receiver
    demodulates among all ("drum-two-probes, tones drive, red_probe, blue_probe;
    recorded: blue_probe"); a back-action-evading pair is named as the pair
    (the reference sits at its mean frequency).
    """
    from simulator.scenario.tone_sections import PRIMARY_TONE, detected_tone_names

    name = scenario.scenario.name
    if not scenario.tones:
        return name
    every = [PRIMARY_TONE] + [t.name for t in scenario.tones]
    if scenario.detection.backaction_evading:
        return f"{name}, back-action-evading pair {' + '.join(every)}"
    recorded = detected_tone_names(scenario)
    return f"{name}, tones {', '.join(every)}; recorded: {', '.join(recorded)}"


def plot_spectrum(spectrum, path, *, displacement=None, summary=(), mode=0, title=None,
                  overwrite=False, zooms=None):
    """Save a figure of ``spectrum`` with its noise budget to ``path`` (PNG, PDF, SVG).

    Parameters
    ----------
    spectrum : simulator.linear.spectrum.Spectrum
        Detected spectrum in shot-noise units with its contributions (the
        first contribution is the shot-noise floor).
    path : str or pathlib.Path
    displacement : simulator.linear.spectrum.Spectrum, optional
        The same spectrum referred to displacement (m²/Hz) with reference
        curves (standard quantum limit, zero-point motion).
    summary : sequence of simulator.linear.sidebands.SidebandSummary
        Labels the sidebands with their occupations; the zoom panels are
        centred on those of mode number ``mode``.
    mode : int
    title : str, optional
    overwrite : bool
        Replace an existing file at ``path`` (by default it is an error).
    zooms : sequence of (label, centre Hz, linewidth Hz), optional
        Zoom panels of lines the sideband summary does not describe (a
        back-action-evading pair's X1 line); default those of ``summary``.
    """
    fig = spectrum_figure(spectrum, displacement=displacement, summary=summary, mode=mode,
                          title=title, zooms=zooms)
    save_figure(fig, path, overwrite=overwrite)
    return path


def spectrum_figure(spectrum, *, displacement=None, summary=(), mode=0, title=None,
                    zooms=None):
    """The :class:`matplotlib.figure.Figure` of :func:`plot_spectrum`."""
    two_sided = spectrum.sided == "two-sided"
    zooms = _zooms(summary, mode, two_sided) if zooms is None else list(zooms)
    rows = 1 + bool(zooms) + bool(zooms and displacement is not None)
    fig = figure(figsize=(13, 3.6 * rows + 0.5), layout="constrained")
    grid = fig.add_gridspec(rows, max(len(zooms), 1))
    names = list(spectrum.contributions)
    modes = tuple(s.mode for s in summary) or None
    colours = {name: term_style(name, modes, names) for name in names}
    ax = fig.add_subplot(grid[0, :])
    _overview(ax, spectrum, colours, summary)
    fig.suptitle(title or spectrum.quantity, x=0.02, ha="left")
    for k, (label, centre, width) in enumerate(zooms):
        zx = fig.add_subplot(grid[1, k])
        _zoom(zx, spectrum, colours, label, centre, width)
        if displacement is not None:
            dx = fig.add_subplot(grid[2, k])
            _displacement_zoom(dx, displacement, label, centre, width)
    handles, labels = ax.get_legend_handles_labels()
    key = "noise budget (colour: source;\nline: term" + (
        ";\nshade: tone)" if tone_order(names) else ")")
    fig.legend(handles, labels, loc="outside right upper", fontsize=8, frameon=False,
               title=key, title_fontsize=8)
    if zooms and displacement is not None:
        handles, labels = dx.get_legend_handles_labels()
        fig.legend(handles, labels, loc="outside right lower", fontsize=8, frameon=False,
                   title="referred to displacement", title_fontsize=8)
    return fig


def _zooms(summary, mode, two_sided):
    if not summary:
        return []
    s = summary[min(mode, len(summary) - 1)]
    if not np.isfinite(s.anti_stokes.frequency_hz):  # the light does not see this mode
        return []
    sides = [("Stokes", s.stokes, f"area n + 1 = {s.stokes.area_quanta:.4g}")] if two_sided \
        else []
    # one number a line: a zoom's title is as wide as its column, the legend beside it
    sides.append(("anti-Stokes", s.anti_stokes,
                  f"area n = {s.anti_stokes.area_quanta:.4g}\nn from ratio = "
                  f"{s.occupation_from_ratio:.4g}, steady state n = "
                  f"{s.steady_state_occupation:.4g}"))
    out = []
    for name, side, text in sides:
        centre = side.frequency_hz if two_sided else abs(side.frequency_hz)
        if not two_sided:
            name, text = "mechanical peak", f"from the heterodyne sideband summary: {text}"
        out.append((f"{s.mode} {name}\n{text}", centre, side.linewidth_hz))
    return out


def _overview(ax, spectrum, colours, summary):
    scale, unit = unit_of_span(np.ptp(spectrum.frequency_hz))
    f = spectrum.frequency_hz / scale
    excess = spectrum.total - 1.0
    ax.semilogy(f, np.where(excess > 0, excess, np.nan), color=TOTAL_COLOUR, lw=3.0,
                alpha=0.4, label="total", zorder=1)
    for name, curve in list(spectrum.contributions.items())[1:]:
        ax.semilogy(f, np.where(curve > 0, curve, np.nan), lw=1.2, label=name,
                    **colours[name])
        if np.any(curve < 0):  # the magnitude, pale: a cross term can be negative
            ax.semilogy(f, np.where(curve < 0, -curve, np.nan), lw=1.0, alpha=0.4,
                        **colours[name])
    for line in getattr(spectrum, "lines", ()):
        # a line is a power (density units × Hz), not a density: marked, not drawn
        ax.axvline(line.frequency_hz / scale, color=source_colour(line.name), lw=1.0, ls="-.",
                   label=f"{line.name}: power {line.power:.3g} (units × Hz)")
    positive = excess[excess > 1e-12]
    if positive.size:
        # low enough to show every budget term's peak (under a flat floor, the lines are
        # in the terms), at most nine decades
        peaks = [float(c.max()) for c in list(spectrum.contributions.values())[1:]
                 if c.size and c.max() > 0]
        low = min([positive.min() / 3] + [p / 10 for p in peaks])
        ax.set_ylim(max(positive.max() * 1e-9, low), positive.max() * 3)
    else:
        ax.text(0.5, 0.5, "no excess noise: the spectrum is the shot-noise floor, S = 1",
                transform=ax.transAxes, ha="center", va="center", fontsize=11)
    ax.set_xlim(f.min(), f.max())
    for s in summary:
        sides = ((s.stokes, "S"), (s.anti_stokes, "aS"))
        for side, tag in sides if spectrum.sided == "two-sided" else sides[1:]:
            where = side.frequency_hz / scale
            if spectrum.sided == "one-sided":
                where, tag = abs(where), ""
            ax.axvline(where, color="0.75", lw=0.8, ls=":", zorder=0)
            ax.annotate(f"{s.mode} {tag}".strip(), xy=(where, 1.0),
                        xycoords=("data", "axes fraction"), xytext=(2, -2),
                        textcoords="offset points", rotation=90, va="top", fontsize=7,
                        color="0.35")
    ax.set_xlabel(f"{spectrum.axis} ({unit})")
    # three short lines: a long label would run past the panel into the title
    ax.set_ylabel(f"S − 1: excess above shot noise\n{spectrum.sided},\n{spectrum.units}")
    gaps = "; gaps in the total: below shot noise" if np.any(excess < -1e-12) else ""
    ax.set_title(f"whole spectrum, log scale (pale: magnitude of negative terms{gaps})",
                 fontsize=10)


def _window(spectrum, centre, width):
    half = ZOOM_LINEWIDTHS * width
    f = spectrum.frequency_hz
    inside = (f >= centre - half) & (f <= centre + half)
    scale, unit = unit_of_span(2 * half)
    return inside, (f[inside] - centre) / scale, unit, centre - half, centre + half


# a budget term that varies by less than this fraction of itself across a zoom is a flat
# floor there (an amplifier's added noise, say): drawn, it would squash the lines
FLAT_RTOL = 1e-3


def _flat_terms(spectrum, inside):
    """Budget terms constant across the window (name → value), left out of a zoom."""
    flat = {}
    for name, curve in list(spectrum.contributions.items())[1:]:
        c = curve[inside]
        if c.size and np.abs(c).max() > 0 and np.ptp(c) <= FLAT_RTOL * np.abs(c).max():
            flat[name] = float(np.mean(c))
    return flat


def _offset_label(centre, unit):
    """Axis label of a zoom about ``centre`` (Hz on the spectrum's own axis)."""
    where = "the record's zero frequency" if centre == 0 else f"{centre / 1e6:.6g} MHz"
    return f"offset from {where} ({unit})"


def _zoom(ax, spectrum, colours, label, centre, width):
    inside, x, unit, _, _ = _window(spectrum, centre, width)
    flat = _flat_terms(spectrum, inside)
    offset = sum(flat.values())
    ax.plot(x, spectrum.total[inside] - 1.0 - offset, color=TOTAL_COLOUR, lw=3.0, alpha=0.4,
            zorder=1)
    for name, curve in list(spectrum.contributions.items())[1:]:
        if name not in flat:
            ax.plot(x, curve[inside], lw=1.2, **colours[name])
    ax.axhline(0.0, color="0.6", lw=0.8, zorder=0)
    ax.set_xlabel(_offset_label(centre, unit))
    if flat:  # the flat terms keep their legend entries (with their values)
        ax.set_ylabel(f"S − 1 less its flat floor {offset:.3g},\nlinear "
                      f"({spectrum.units})")
    else:
        ax.set_ylabel(f"S − 1, linear scale\n({spectrum.units})")
    ax.set_title(label, fontsize=9)


def _displacement_zoom(ax, x_spec, label, centre, width):
    inside, x, unit, _, _ = _window(x_spec, centre, width)
    curves = [x_spec.total[inside]]
    ax.plot(x, curves[0], color=TOTAL_COLOUR, lw=2.0, label="measured, referred")
    floor = next(iter(x_spec.contributions.values()), None)
    if floor is not None:
        curves.append(floor[inside])
        ax.plot(x, curves[-1], ls="--", color=FLOOR_COLOUR, label="shot-noise imprecision")
    for (name, curve), style, colour in zip(x_spec.reference.items(), ("-.", ":", "-"),
                                            REFERENCE_COLOURS, strict=False):
        curves.append(curve[inside])
        ax.plot(x, curves[-1], ls=style, lw=1.6, color=colour, label=name)
    ax.set_xlabel(_offset_label(centre, unit))
    ax.set_ylabel(f"{x_spec.sided} density\n({x_spec.units.replace('^2', '²')})")
    ax.set_title(f"{label.splitlines()[0]}: referred to displacement", fontsize=9)
    values = np.concatenate(curves)
    log = spans_decades(values)
    ax.set_yscale("log" if log else "linear")
    ax.set_ylim(*data_limits(values, log=log))


def spans_decades(values):
    """Whether the positive finite ``values`` span more than DECADES_FOR_LOG decades."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v) & (v > 0)]
    return v.size > 1 and np.log10(v.max() / v.min()) > DECADES_FOR_LOG


def data_limits(values, *, log, margin=0.05):
    """Axis limits that hold the finite ``values`` with a small margin, nothing more.

    On a log axis only positive values count and the margin is a fraction of
    the decades spanned, so no empty decades are drawn.
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v) & (v > 0)] if log else v[np.isfinite(v)]
    if not v.size:
        return (0.1, 10.0) if log else (0.0, 1.0)
    low, high = v.min(), v.max()
    if log:
        span = max(np.log10(high / low), 0.3)  # a flat curve still gets a readable axis
        pad = 10 ** (margin * span + (0.3 - min(np.log10(high / low), 0.3)) / 2)
        return low / pad, high * pad
    pad = margin * (high - low) or margin * abs(high) or 1.0
    return low - pad, high + pad


FIGURE_DPI = 110  # every saved figure (png); vector formats ignore it


def figure(**options):
    """A new :class:`matplotlib.figure.Figure`, outside pyplot.

    Figures are built without pyplot, so no backend is chosen or switched
    (the user's interactive backend stays as it was) and nothing is left open
    in pyplot's list of figures; saving picks the renderer from the extension.
    """
    from matplotlib.figure import Figure

    return Figure(**options)


def subplots(*grid, figsize, layout=None, **options):
    """``figure(figsize=..., layout=...)`` and its ``Figure.subplots(*grid, **options)``."""
    fig = figure(figsize=figsize, layout=layout)
    return fig, fig.subplots(*grid, **options)


def save_figure(fig, path, *, overwrite=False, dpi=FIGURE_DPI):
    """Save ``fig`` through :class:`simulator.io.files.AtomicFile`.

    The format follows the extension (png, pdf, svg).
    """
    from simulator.io.files import AtomicFile

    with AtomicFile(path, overwrite=overwrite) as out:
        fig.savefig(out.tmp, dpi=dpi, format=out.path.suffix.lstrip(".").lower() or "png")
    return out.path
