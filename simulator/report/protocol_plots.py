"""Figure of a scheduled record: the true occupation and the measured sideband in time.

Top: the exact thermal occupation of the first mode and its coherent phonon
number (mean_q² + mean_p²)/2 from the record's timeline
(:class:`simulator.records.protocol.Timeline`). Below: the record's
anti-Stokes sideband power in time, |block mean of z e^{−2πi f_m t}|²
(:func:`simulator.analysis.ringdown.demodulated_power`), in shot-noise units;
the segments are shaded and named on both. Given the scenario, the bottom
panel also draws the exact expectation of that measured power
(:func:`simulator.analysis.spectrogram.expected_sideband_power`): the same
blocks and frequency, from the exact two-time covariance and mean of the
schedule, so the measured points scatter about it.
"""

import numpy as np

from simulator.report.plots import save_figure, subplots, titled

BLOCKS = 400  # points of the measured sideband power across the record
MIN_COHERENT = 0.1  # coherent phonons below this are not drawn (they decay without end)
# segment backgrounds, one per segment name in order of first appearance: light tints
# of differing lightness (apart in greyscale too), white last
SHADES = ("#e9e9e9", "#ffffff", "#d6e4ef", "#f4e3cf", "#dcefd9", "#c9c9c9")
TRUTH_COLOUR, COHERENT_COLOUR, RECORD_COLOUR = "#b5432f", "#6a6a6a", "#3b75af"
EXPECTED_COLOUR = "#1d1d1d"


def plot_protocol(record, timeline, path, *, overwrite=False, scenario=None):
    """Write the figure of a scheduled iq ``record`` and its ``timeline`` to ``path``.

    ``scenario``, the scenario with the ``[schedule]`` the record was made
    from, adds the expected sideband power (a record's own ``scenario`` holds
    the first segment's parameters, not the file's, so it is not used).
    """
    from simulator.analysis.ringdown import demodulated_power
    from simulator.errors import InputError

    if record.kind != "iq":
        raise InputError(f"record kind {record.kind!r}; the protocol figure needs an iq "
                         "record (I + iQ)")
    fs = record.sample_rate_hz
    frequency = record.scenario.mechanics[0].frequency_hz
    block = max(1, record.n_samples // BLOCKS)
    t, power = demodulated_power(record.shot_noise_units(), fs, frequency, block)
    fig, (top, bottom) = subplots(2, 1, figsize=(9.0, 6.4), layout="constrained", sharex=True)
    ms = 1e3  # the axis in milliseconds
    coherent = 0.5 * (timeline.mean_q[:, 0] ** 2 + timeline.mean_p[:, 0] ** 2)
    top.semilogy(timeline.times_s * ms, timeline.occupation[:, 0], color=TRUTH_COLOUR,
                 label="thermal occupation n(t) (truth)")
    if np.any(coherent >= MIN_COHERENT):
        top.semilogy(timeline.times_s * ms, np.where(coherent >= MIN_COHERENT, coherent, np.nan),
                     color=COHERENT_COLOUR, linestyle="--", label="coherent phonons |β(t)|²")
    top.set_ylabel(f"{timeline.mode_names[0]}: phonons")
    top.legend(loc="best", fontsize="small")
    bottom.semilogy(t * ms, power, color=RECORD_COLOUR, linewidth=0.8, zorder=3,
                    label=f"record: anti-Stokes power, {block / fs * 1e6:.3g} µs blocks")
    if scenario is not None:
        from simulator.analysis.spectrogram import expected_sideband_power
        from simulator.records.protocol import plan_protocol

        te, expected, _ = expected_sideband_power(plan_protocol(scenario, seed=record.seed),
                                                  frequency, block)
        bottom.semilogy(te * ms, expected, color=EXPECTED_COLOUR, linewidth=1.2,
                        label="expected (exact, same blocks)")
    shown = power[power > 0]
    if shown.size:
        bottom.set_ylim(shown.min() / 2, shown.max() * 2)
    bottom.set_ylabel("sideband power (shot-noise units)")
    bottom.set_xlabel("time (ms)")
    bottom.legend(loc="best", fontsize="small")
    _segments(fig, top, bottom, timeline, record.n_samples / fs, ms)
    where = titled(scenario) if scenario is not None else record.scenario.scenario.name
    fig.suptitle(f"{where}: scheduled record, mode {timeline.mode_names[0]}\nthe truth in "
                 "time above the record's anti-Stokes sideband power", x=0.02, ha="left",
                 fontsize=10)
    return save_figure(fig, path, overwrite=overwrite)


def _segments(fig, top, bottom, timeline, end_s, ms):
    """Shade each segment by its name on both panels; name them above the top panel
    where the names fit side by side, else once each in a key below the figure."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.patches import Patch

    from simulator.report.ticks import overlapping

    names = list(dict.fromkeys(timeline.segment_names))
    shade = {name: SHADES[k % len(SHADES)] for k, name in enumerate(names)}
    ends = list(timeline.segment_starts_s[1:]) + [end_s]
    labels = []
    for start, end, name in zip(timeline.segment_starts_s, ends, timeline.segment_names,
                                strict=True):
        for ax in (top, bottom):
            ax.axvspan(start * ms, end * ms, color=shade[name], zorder=0)
        labels.append(top.annotate(name, xy=(0.5 * (start + end) * ms, 1.0),
                                   xycoords=("data", "axes fraction"), ha="center",
                                   va="bottom", fontsize="small"))
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw_without_rendering()  # the limits and layout the saved figure will have
    if overlapping(labels, renderer):
        for label in labels:
            label.remove()
        fig.legend([Patch(facecolor=shade[n], edgecolor="0.6") for n in names], names,
                   loc="outside lower center", ncols=min(len(names), 4), fontsize="small",
                   frameon=False, title="segments (background)", title_fontsize="small")
