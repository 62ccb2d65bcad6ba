"""Tick labels of logarithmic axes that never run into each other.

matplotlib's own choice on a log axis labels the decades, and on an axis
spanning less than about a decade it labels minor ticks as well; on a short
axis or a narrow range ("1.05×10⁻⁹, 1.1×10⁻⁹, ...") those labels collide. Here
the ticks are chosen from candidate sets, densest first, and the first set
whose rendered labels keep a gap between them at the figure's size is kept:

- an axis spanning at least a decade: 1, 2 and 5 in each decade, then each
  decade, then every second, third ... decade;
- a shorter axis: evenly spaced round numbers (steps 1, 2, 2.5 or 5 times a
  power of ten), fewer and fewer.

Unlabelled minor ticks stay on every decade's multiples so the scale still
reads as logarithmic. Labels are plain numbers between 0.01 and 9999 and
mantissa × 10^exponent outside, with just enough digits to tell neighbours
apart. Rendering is done with the Agg renderer on the figure itself, at the
resolution the figure is saved with.
"""

import numpy as np

LABEL_GAP_PX = 3.0  # least clear space between neighbouring labels (common practice)
PLAIN_DECADES = (-2, 3)  # exponents written as plain numbers (0.01 ... 9999)
MAX_DIGITS = 6  # significant digits a label may take to differ from its neighbours
_SUBS = ((1.0, 2.0, 5.0), (1.0, 3.0), (1.0,))  # labelled multiples per decade, densest first
_STEPS = (1.0, 2.0, 2.5, 5.0, 10.0)  # round steps on an axis shorter than a decade
_MAX_SHORT_TICKS = 9


def candidates(low, high):
    """Tick sets for a log axis from ``low`` to ``high`` (> 0), densest first.

    Every set holds at least two ticks inside [low, high] where the range
    allows; the last set is the sparsest.
    """
    low, high = sorted((float(low), float(high)))
    first, last = int(np.floor(np.log10(low))), int(np.ceil(np.log10(high)))
    sets = []
    if np.log10(high / low) >= 1.0:
        for subs in _SUBS:
            sets.append(_inside([s * 10.0**e for e in range(first, last + 1) for s in subs],
                                low, high))
        for every in range(2, max(last - first, 2) + 1):
            start = first + (-first) % every  # multiples of ``every`` in the exponent
            sets.append(_inside([10.0**e for e in range(start, last + 1, every)], low, high))
    else:
        from matplotlib.ticker import MaxNLocator

        for bins in range(_MAX_SHORT_TICKS, 0, -1):
            ticks = MaxNLocator(nbins=bins, steps=list(_STEPS)).tick_values(low, high)
            sets.append(_inside(ticks, low, high))
    out = []
    for ticks in sets:  # no repeats, no empty set
        if ticks.size and not any(t.shape == ticks.shape and np.allclose(t, ticks, rtol=1e-9)
                                  for t in out):
            out.append(ticks)
    return out or [np.array([np.sqrt(low * high)])]


def _inside(ticks, low, high):
    ticks = np.asarray(ticks, dtype=float)
    tol = 1e-9 * (high - low)
    return np.unique(ticks[(ticks >= low - tol) & (ticks <= high + tol) & (ticks > 0)])


def labels(ticks):
    """Text of each tick: plain or mantissa × 10^exponent, digits enough to say it exactly."""
    ticks = np.asarray(ticks, dtype=float)
    for digits in range(1, MAX_DIGITS + 1):
        rounded = np.array([float(f"{v:.{digits - 1}e}") for v in ticks])
        if np.allclose(rounded, ticks, rtol=1e-9, atol=0.0):
            break
    return [_label(v, digits) for v in ticks]


def _label(value, digits):
    exponent = int(np.floor(np.log10(value) + 1e-12))
    mantissa = float(f"{value / 10.0**exponent:.{digits - 1}f}")
    if mantissa >= 10.0:
        mantissa, exponent = mantissa / 10.0, exponent + 1
    if PLAIN_DECADES[0] <= exponent <= PLAIN_DECADES[1]:
        return f"{float(f'{value:.{digits}g}'):g}"
    number = f"{mantissa:.{digits - 1}f}".rstrip("0").rstrip(".")
    power = f"10^{{{exponent}}}"
    return rf"$\mathdefault{{{power}}}$" if number == "1" else \
        rf"$\mathdefault{{{number}\times{power}}}$"


def tidy_log_ticks(fig, dpi=None):
    """Choose the ticks of every log axis of ``fig`` (colour bars too) so labels never meet.

    Returns the number of axes it set. ``dpi``: the resolution the figure
    will be saved with (default the figure's own).
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.ticker import FixedFormatter, FixedLocator, LogLocator, NullFormatter

    if dpi is not None:
        fig.set_dpi(dpi)
    canvas = FigureCanvasAgg(fig)
    renderer = canvas.get_renderer()
    if fig.get_layout_engine() is not None:  # the axes where the saved figure has them
        fig.get_layout_engine().execute(fig)
    count = 0
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            if axis.get_scale() != "log":
                continue
            low, high = sorted(axis.get_view_interval())
            if not (np.isfinite(low) and low > 0 and high > low):
                continue
            axis.set_minor_locator(LogLocator(subs=np.arange(2, 10), numticks=100))
            axis.set_minor_formatter(NullFormatter())
            for ticks in candidates(low, high):
                axis.set_major_locator(FixedLocator(ticks))
                axis.set_major_formatter(FixedFormatter(labels(ticks)))
                if not collisions(axis, renderer):
                    break
            count += 1
    return count


def collisions(axis, renderer):
    """Pairs of visible major tick labels of ``axis`` closer than LABEL_GAP_PX apart."""
    return overlapping([t for t in axis.get_ticklabels() if t.get_text()], renderer)


def overlapping(texts, renderer):
    """Pairs of the rendered boxes of matplotlib ``texts`` closer than LABEL_GAP_PX apart."""
    boxes = [text.get_window_extent(renderer).padded(LABEL_GAP_PX / 2) for text in texts]
    return [(a, b) for i, a in enumerate(boxes) for b in boxes[i + 1:] if a.overlaps(b)]
