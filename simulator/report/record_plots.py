"""Figure of a synthetic record: its periodogram against the model, sideband by sideband.

The averaged periodogram of K non-overlapping, unwindowed segments has,
bin by bin, the distribution E[P]·χ²(2K)/(2K) (each segment's bin is an
exponential variable, χ² with 2 degrees of freedom, for a Gaussian record;
exact for a flat spectrum, close for one that changes little across a bin):
Bendat & Piersol, *Random Data*, 4th ed. (Wiley, 2010), Sec. 8.5.4 (section
recalled from memory); Percival & Walden, *Spectral Analysis for Physical
Applications* (Cambridge, 1993), Sec. 6.10 (from memory). The figure draws the model's
expected periodogram — the exact density of the samples
(:meth:`simulator.model.chain.DetectionChain.sampled_spectrum`) smoothed by the
segment's Fejér kernel (:class:`simulator.analysis.psd.WindowedExpectation`)
— with that band around it, and the record's
periodogram over both: about 1 bin in 20 falls outside a 95 % band when the
record agrees with the model.

Top row: the whole band. Below: each motional sideband zoomed, on a linear
scale, with the peak height over the floor against the band's half-width, so
a sideband the record cannot resolve is said so rather than hidden.
"""

import numpy as np

from simulator.report.colours import TOTAL_COLOUR
from simulator.report.plots import ZOOM_LINEWIDTHS, save_figure, subplots, titled, unit_of_span
from simulator.scenario.tone_sections import offset_words

CONFIDENCE = 0.95  # two-sided band of the periodogram (common practice)
MIN_ZOOM_BINS = 12  # a zoom shows at least ±12 bins
MIN_AVERAGES = 16  # segments averaged at the least
MAX_ZOOM_MODES = 2  # sidebands of the first two modes get a zoom each
RECORD_COLOUR = "#3b75af"  # measured (synthetic) data, apart from every noise source
LINEAR_SPAN = 30.0  # a model spanning less than this factor is drawn on a linear axis
FIGURE_WIDTH = 12.4  # inches: two zooms side by side, or one wide


def segment_length(record):
    """Segment samples: bins of a quarter of the narrowest line, at least 16 averages."""
    fs = record.sample_rate_hz
    width = min(record.truth.effective_linewidth_hz, default=fs / 1e4)
    segment = int(2 ** np.ceil(np.log2(fs / max(width / 4, 1e-9))))
    longest = 2 ** np.floor(np.log2(max(record.n_samples // MIN_AVERAGES, 16)))
    return int(min(segment, longest))


def chi2_band(averages, confidence=CONFIDENCE):
    """(low, high) factors on E[P] of the averaged periodogram's central ``confidence`` band."""
    from scipy.stats import chi2

    dof = 2 * averages
    tail = (1 - confidence) / 2
    return chi2.ppf(tail, dof) / dof, chi2.ppf(1 - tail, dof) / dof


def sideband_lines(system, record):
    """(label, centre on the record's axis, linewidth) of each motional sideband shown."""
    truth = record.truth
    detection = system.scenario.detection
    carrier = detection.intermediate_frequency_hz if record.kind == "if" else 0.0
    above = -1.0 if getattr(detection, "local_oscillator_side", "below") == "above" else 1.0
    lines = []
    for name, f, w in list(zip(truth.mode_names, truth.effective_frequency_hz,
                               truth.effective_linewidth_hz, strict=True))[:MAX_ZOOM_MODES]:
        if record.kind == "if" and carrier == 0.0:
            lines.append((f"{name}: both sidebands (homodyne, folded)", f, w))
            continue
        sign = above if record.kind == "if" else 1.0
        lines += [(f"{name}: Stokes sideband", carrier - sign * f, w),
                  (f"{name}: anti-Stokes sideband", carrier + sign * f, w)]
    return lines


def record_against_model(system, record):
    """The record's averaged periodogram and what the model expects of it.

    Returns ``(psd, model, expected, band)``: the
    :class:`~simulator.analysis.psd.PSDEstimate` (unwindowed segments of
    :func:`segment_length`); the model's density of the samples in the
    periodogram's convention (one-sided: doubled) as a callable of
    frequency; the callable giving the expected periodogram on chosen bins
    (that density through the segment's Fejér kernel,
    :class:`~simulator.analysis.psd.WindowedExpectation`); and the factors
    (low, high) of its :data:`CONFIDENCE` band.
    """
    from simulator.analysis.psd import WindowedExpectation, averaged_periodogram

    fs, segment = record.sample_rate_hz, segment_length(record)
    psd = averaged_periodogram(record.shot_noise_units(), fs, segment_samples=segment,
                               window="boxcar")
    factor = 2.0 if psd.sided == "one-sided" else 1.0
    kernel = WindowedExpectation(fs, segment, "boxcar")

    def density(freq):  # two-sided, as the chain gives it
        return system.chain.sampled_spectrum(freq, fs, aliases=40)

    def model(freq):
        return factor * density(freq)

    def expected(freq):
        return factor * kernel.at(density, freq)

    return psd, model, expected, chi2_band(psd.averages)


def channel_against_model(system, record, tone):
    """:func:`record_against_model` for the I/Q pair of ``tone`` in a record of several
    detected tones: its periodogram and the diagonal of the joint model's sampled
    spectral matrix (:func:`simulator.linear.channel_spectra.joint_spectral_matrix`)."""
    from simulator.analysis.psd import WindowedExpectation, averaged_periodogram
    from simulator.linear.channel_spectra import joint_spectral_matrix

    fs, segment = record.sample_rate_hz, segment_length(record)
    psd = averaged_periodogram(record.channel(tone), fs, segment_samples=segment,
                               window="boxcar")
    kernel, k = WindowedExpectation(fs, segment, "boxcar"), record.tones.index(tone)

    def model(freq):
        return joint_spectral_matrix(system, freq, sample_rate_hz=fs).cross()[:, k, k].real

    def expected(freq):
        return kernel.at(model, freq)

    return psd, model, expected, chi2_band(psd.averages)


def plot_record_sidebands(system, record, path, *, title=None):
    """Save the figure of ``record`` against the model of ``system`` to ``path``.

    A record of several detected tones gets one row per tone: that channel's
    Stokes and anti-Stokes sidebands of the first mechanical mode, each about
    its own tone (its channel's axis).
    """
    if record.tones:
        return _plot_tone_channels(system, record, path, title=title)
    psd, model, expected, band = record_against_model(system, record)
    sampling = (record.sample_rate_hz, segment_length(record))
    lines = [line for line in sideband_lines(system, record)
             if psd.frequency_hz[0] < line[1] < psd.frequency_hz[-1]]
    columns = 2 if len(lines) > 1 else 1
    rows = 1 + -(-len(lines) // columns)
    fig, axes = subplots(rows, columns, figsize=(FIGURE_WIDTH, 3.3 * rows + 0.8),
                         layout="constrained", squeeze=False)
    top = fig.add_subplot(axes[0, 0].get_gridspec()[0, :])
    for ax in axes[0]:
        ax.remove()
    _whole_band(top, psd, model, record, offset_words(system.scenario))
    for ax, line in zip(axes[1:].ravel(), lines, strict=False):
        _sideband(ax, psd, expected, line, sampling, band)
    for ax in axes[1:].ravel()[len(lines):]:
        ax.remove()
    handles, labels = (axes[1, 0] if lines else top).get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=3, fontsize=8,
               frameon=False)
    floor = "1" if psd.sided == "two-sided" else "2, one-sided"
    scale, unit = unit_of_span(psd.resolution_hz)
    fig.suptitle(title or f"{titled(system.scenario)}: synthetic record against the "
                 f"model\n{psd.averages} averages, bins of {psd.resolution_hz / scale:.3g} {unit}; "
                 f"shot-noise units, vacuum = {floor}", x=0.02, ha="left", fontsize=10)
    save_figure(fig, path, overwrite=True)  # the run's own folder
    return path


def _whole_band(ax, psd, model, record, offset):
    scale, unit = unit_of_span(np.ptp(psd.frequency_hz))
    step = max(1, psd.frequency_hz.size // 1024)  # the model is smooth: 1024 points
    f_model = psd.frequency_hz[::step]
    exact = model(f_model)
    ax.plot(psd.frequency_hz / scale, psd.density, lw=0.5, color=RECORD_COLOUR, alpha=0.8)
    ax.plot(f_model / scale, exact, lw=1.5, color=TOTAL_COLOUR)
    if np.nanmax(exact) / np.nanmin(exact) > LINEAR_SPAN:
        ax.set_yscale("log")
    axis = offset if record.kind == "iq" else "frequency"
    ax.set_xlabel(f"{axis} ({unit})")
    ax.set_ylabel("noise power density\n(shot-noise units)")
    ax.set_xlim(psd.frequency_hz[0] / scale, psd.frequency_hz[-1] / scale)
    ax.set_title("whole band", fontsize=9)
    ax.grid(alpha=0.3)


def _sideband(ax, psd, expectation, line, sampling, band):
    label, centre, width = line
    half = max(ZOOM_LINEWIDTHS * width, MIN_ZOOM_BINS * psd.resolution_hz)
    inside = np.abs(psd.frequency_hz - centre) <= half
    f = psd.frequency_hz[inside]
    expected = expectation(f)
    scale, unit = unit_of_span(2 * half)
    x = (f - centre) / scale
    low, high = band
    ax.fill_between(x, expected * low, expected * high, color="0.8", lw=0,
                    label=f"{CONFIDENCE:.0%} band of the periodogram (χ², 2K dof)")
    ax.plot(x, expected, color=TOTAL_COLOUR, lw=1.5, label="model: expected periodogram")
    ax.plot(x, psd.density[inside], ".-", color=RECORD_COLOUR, lw=0.6, ms=2.5,
            label="record: averaged periodogram")
    floor = float(np.median(np.concatenate([expected[:3], expected[-3:]])))
    height = (expected.max() - floor) / floor
    outside = np.mean((psd.density[inside] < expected * low)
                      | (psd.density[inside] > expected * high))
    half_band = (high - low) / 2
    if height > half_band:
        verdict = "resolved"
    else:  # the band narrows as 1/√K: K = (z/height)² segments, z of the confidence
        from scipy.stats import norm

        z = norm.ppf(0.5 + CONFIDENCE / 2)
        needed = (z / max(height, 1e-300)) ** 2 * sampling[1] / sampling[0]
        verdict = f"not resolved bin by bin: needs ≈ {needed:.2g} s of record"
    # the verdict on a line of its own: two columns of zooms leave each title half the width
    ax.set_title(f"{label}\npeak/floor − 1 = {height:.3g}, band ±{half_band:.0%}\n{verdict}\n"
                 f"{outside:.0%} of bins outside the band (expected {1 - CONFIDENCE:.0%})",
                 fontsize=8.5)
    ax.set_xlabel(f"offset from {centre / 1e6:.6g} MHz ({unit})")
    ax.set_ylabel("noise power density\n(shot-noise units, linear)")
    ax.ticklabel_format(axis="y", useOffset=False)
    ax.grid(alpha=0.3)


def _plot_tone_channels(system, record, path, *, title=None):
    sampling = (record.sample_rate_hz, segment_length(record))
    lines = sideband_lines(system, record)[:2]  # the first mode's Stokes and anti-Stokes
    rows = len(record.tones)
    fig, axes = subplots(rows, len(lines), figsize=(FIGURE_WIDTH, 3.3 * rows + 0.8),
                         layout="constrained", squeeze=False)
    for row, tone in zip(axes, record.tones, strict=True):
        psd, _, expected, band = channel_against_model(system, record, tone)
        for ax, (label, centre, width) in zip(row, lines, strict=True):
            _sideband(ax, psd, expected, (f"channel {tone}: {label}", centre, width),
                      sampling, band)
    handles, labels = axes[0, 0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncols=3, fontsize=8,
               frameon=False)
    scale, unit = unit_of_span(psd.resolution_hz)
    fig.suptitle(title or f"{titled(system.scenario)}: one I/Q pair per detected tone "
                 f"against the joint model\n{psd.averages} averages, bins of "
                 f"{psd.resolution_hz / scale:.3g} {unit}; offsets from each channel's own "
                 "tone, shot-noise units, vacuum = 1", x=0.02, ha="left", fontsize=10)
    save_figure(fig, path, overwrite=True)  # the run's own folder
    return path
