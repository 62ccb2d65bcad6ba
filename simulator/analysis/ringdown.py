"""Ring-down linewidth and re-thermalisation of a scheduled heterodyne record.

Reference estimators for the trial harness. A mode kicked to a coherent
amplitude and released decays as e^{−Γt/2} in amplitude; its sideband in a
heterodyne record carries that amplitude. The ring-down estimate
(:func:`fit_ring_down`):

1. demodulate the complex record z = I + iQ at the anti-Stokes sideband,
   w(t) = z(t) e^{−2πi f_m t} (the anti-Stokes line sits at +f_m in the
   record's convention, docs/records.md);
2. average w over blocks of L samples, short against the decay (Γ L/fs ≤
   :data:`BLOCK_DECAY`) and long against the mechanical period;
3. fit the complex block means by their exact Gaussian likelihood
   (:mod:`simulator.analysis.ringdown_likelihood`): the kicked mean decays
   with the same factor e^{(−Γ/2 + iδ)Δ} per block that correlates the mode's
   thermal motion, on a white imprecision floor. The thermal motion is the
   noise that beats with the kicked amplitude in the energy |u|²; fitting the
   energy as independent points understates the error by about three
   (measured on the example), while the likelihood of the amplitude has the
   right covariance and gives the observed-information error.

The window of each ring-down is taken from the scenario's ``[schedule]``
(the protocol the experimenter wrote, not the truth): every segment with a
kick (``excite_phonons`` > 0) is fitted on its own, and the nominal
``linewidth_hz`` of the kicked mode only sets the block length.
"""

import numpy as np
import scipy.optimize

from simulator.analysis.ringdown_likelihood import fit_state_space
from simulator.errors import InputError

BLOCK_DECAY = 0.02  # Γ × block length: the decay within a block stays below 2 %
MIN_BLOCKS = 8  # fewer blocks leave too few degrees of freedom for the fit


def demodulated_amplitude(z, sample_rate_hz, frequency_hz, block_samples):
    """Block centres (s) and block means of z e^{−2πi f t}: the line at +f in time.

    Each block mean passes a band of about fs/L around the line (a sinc
    response), so the result follows the sideband's complex amplitude: a
    coherent amplitude plus the thermal and shot noise in that band.
    """
    block_samples = int(block_samples)
    n_blocks = len(z) // block_samples
    k = np.arange(n_blocks * block_samples)
    w = np.asarray(z)[:len(k)] * np.exp(-2j * np.pi * frequency_hz * k / sample_rate_hz)
    return ((np.arange(n_blocks) + 0.5) * block_samples / sample_rate_hz,
            w.reshape(n_blocks, block_samples).mean(axis=1))


def demodulated_power(z, sample_rate_hz, frequency_hz, block_samples):
    """Block centres (s) and |block mean of z e^{−2πi f t}|²: the power near the line at +f."""
    t, u = demodulated_amplitude(z, sample_rate_hz, frequency_hz, block_samples)
    return t, np.abs(u) ** 2


def fit_ring_down(z, sample_rate_hz, frequency_hz, block_samples):
    """Energy decay rate Γ (1/s) and its standard error from a demodulated ring-down.

    Parameters
    ----------
    z : ndarray, complex
        The record (shot-noise units) from the kick onwards.
    sample_rate_hz, frequency_hz : float
        Sample rate and the sideband's offset from the drive (the anti-Stokes
        line at +frequency_hz).
    block_samples : int
        Samples averaged into one point of the envelope.
    """
    t, u = demodulated_amplitude(z, sample_rate_hz, frequency_hz, block_samples)
    if len(t) < MIN_BLOCKS:
        raise InputError(f"a ring-down of {len(z)} samples gives {len(t)} blocks of "
                         f"{block_samples}; expected at least {MIN_BLOCKS}")
    rate, error, _ = fit_state_space(u, block_samples / sample_rate_hz)
    return rate, error


def mirror_null_block(block_samples, sample_rate_hz, frequency_hz):
    """The block length in [¾L, L] that puts the Stokes line at −f nearest a null.

    A block mean at +f passes the line at −f (the same mode, and its kicked
    amplitude) by sinc(2fL/fs); a whole number of cycles of 2f per block
    cancels it, which the noise model (thermal motion on a white floor) does
    not describe.
    """
    candidates = np.arange(max(1, (3 * block_samples) // 4), block_samples + 1)
    cycles = 2.0 * frequency_hz * candidates / sample_rate_hz
    leak = np.abs(np.sin(np.pi * cycles)) / np.maximum(cycles, 1.0)
    return int(candidates[np.argmin(leak)])


def ring_down_linewidth(record):
    """Reference estimator for the trial harness: ``effective_linewidth_hz@<segment>``.

    ``record`` is a :class:`simulator.workflows.estimator.PublicRecord` of an
    iq record of a scenario with a ``[schedule]``. Returns Γ/2π (Hz) and its
    standard error for every kicked segment, named after the segment.
    """
    scenario = record.scenario
    if scenario.schedule is None or record.kind != "iq":
        raise InputError("ring_down_linewidth needs an iq record of a scenario with a "
                         "[schedule] whose segments kick a mode (excite_phonons > 0)")
    fs = record.sample_rate_hz
    z = np.asarray(record.samples)
    out, first = {}, 0
    for segment in scenario.schedule.segments:
        n = int(round(segment.duration_s * fs))
        if segment.excite_phonons > 0:
            mode = scenario.mechanics[segment.excite_mode]
            block = mirror_null_block(
                max(1, int(BLOCK_DECAY * fs / (2 * np.pi * mode.linewidth_hz))),
                fs, mode.frequency_hz)
            rate, error = fit_ring_down(z[first:first + n], fs, mode.frequency_hz, block)
            out[f"effective_linewidth_hz@{segment.name}"] = (rate / (2 * np.pi),
                                                              error / (2 * np.pi))
        first += n
    return out


BLOCKS_PER_SEGMENT = 200  # points of a transient's sideband power curve
# A segment shorter than this many relaxation times (at its nominal rate) hardly
# determines its Γ: a 4 ms window on an 8 ms re-thermalisation scatters by 165 % of Γ
# and its jackknife error understates that (docs/analysis.md, "Protocols"); the
# estimator then leaves Γ out (the heating rate, fitted at the nominal Γ, stays).
MIN_RELAXATION_TIMES = 1.0
SIGMA_FLOOR = 1e-9  # smallest weight's sigma, relative to the curve's largest value
RATE_LIMIT = 100.0  # largest |Γ| × window fitted: e^{−100} leaves nothing to fit after
RATE_GRID = 81  # coarse Γ grid that brackets the profile χ² minimum before Brent (our choice)
MIN_CYCLES = 3  # repetitions of a segment needed to average it and estimate its error


def relaxation(time, p0, rate, p_inf):
    """P(t) = P∞ − (P∞ − P₀) e^{−Γt}: a sideband power relaxing to its new level."""
    return p_inf - (p_inf - p0) * np.exp(-rate * time)


def relaxation_by_slope(time, p0, slope, rate):
    """The same curve as P₀ + Ṗ₀ (1 − e^{−Γt})/Γ: its initial slope Ṗ₀ = Γ (P∞ − P₀)
    is a parameter, well determined even when Γ is not (a window short against 1/Γ)."""
    x = rate * time
    small = np.abs(x) < 1e-8
    growth = np.where(small, time, -np.expm1(-x) / np.where(small, 1.0, rate))
    return p0 + slope * growth


def linear_in_slope(t, curve, sigma, rate):
    """(P₀, Ṗ₀) of :func:`relaxation_by_slope` at a given Γ (weighted linear least
    squares, exact) and its χ²."""
    design = np.column_stack([np.ones_like(t), relaxation_by_slope(t, 0.0, 1.0, rate)])
    coef, *_ = np.linalg.lstsq(design / sigma[:, None], curve / sigma, rcond=None)
    return coef, float(np.sum(((design @ coef - curve) / sigma) ** 2))


def _rate_and_slope(t, curve, sigma=None):
    """Γ and the initial slope Γ (P∞ − P₀) of the fitted relaxation (power units/s).

    Least squares in the slope form with fixed σ (default: unweighted): for a
    given Γ the curve is linear in (P₀, Ṗ₀), solved exactly
    (:func:`linear_in_slope`), and Γ minimises the remaining χ² over
    |Γ| T ≤ :data:`RATE_LIMIT` (bounded Brent search after a grid; a noisy
    curve may bend either way) — a profile that cannot wander off as a
    three-parameter search can when the window is short against 1/Γ.
    """
    sigma = np.ones_like(curve) if sigma is None else sigma
    limit = RATE_LIMIT / t[-1]
    grid = np.linspace(-limit, limit, RATE_GRID)
    step = grid[1] - grid[0]
    start = grid[int(np.argmin([linear_in_slope(t, curve, sigma, r)[1] for r in grid]))]
    best = scipy.optimize.minimize_scalar(
        lambda r: linear_in_slope(t, curve, sigma, r)[1], method="bounded",
        bounds=(max(-limit, start - step), min(limit, start + step)))
    return np.array([best.x, linear_in_slope(t, curve, sigma, best.x)[0][1]])


def transient_rates(record):
    """Reference estimator: the relaxation rate and heating rate of repeated segments.

    A segment that follows another and kicks nothing (cooling switched on,
    or off for re-thermalisation) shows the sideband power relaxing to its
    new level at the segment's energy damping rate Γ_eff (weak coupling;
    Marquardt et al., PRL 99, 093902 (2007)); with the tone off or on
    resonance Γ_eff = Γm. One such transient holds only a few independent
    values of the thermal power (it is exponentially distributed and
    correlated over 1/Γ), so the segments that share a name (the cycles of
    one schedule) are averaged: the demodulated power of each
    (:func:`demodulated_power`, :data:`BLOCKS_PER_SEGMENT` blocks) is averaged
    over the cycles and fitted by :func:`relaxation` (in its slope form),
    weighted by the nominal expected curve (:func:`nominal_sigma` of
    :func:`simulator.analysis.heating.nominal_relaxations`: weights fixed
    before the data keep the slope unbiased). The initial
    slope Γ (P∞ − P₀) is fitted at the segment's nominal damping rate
    (:func:`simulator.analysis.heating.nominal_damping_rate`: a window short
    against 1/Γ determines the slope but hardly Γ, and a slope that moves
    with a wandering Γ is a statistic the jackknife cannot follow); divided
    by the sideband's calibrated block power per phonon
    (:func:`simulator.analysis.heating.block_power_per_phonon`), it is the
    heating rate in phonons/s (negative for a cooling transient). Its error
    is :func:`thermal_slope_error` (the thermal-light covariance of the block
    powers); Γ's is the jackknife over cycles (Efron, The Jackknife, the
    Bootstrap and Other Resampling Plans (SIAM, 1982), Ch. 3; common
    practice). Returns ``effective_linewidth_hz@<name>`` (Γ/2π in
    Hz) and ``heating_rate_phonons_per_s@<name>`` for every segment name
    repeated :data:`MIN_CYCLES` times or more.
    """
    scenario = record.scenario
    if scenario.schedule is None or record.kind != "iq":
        raise InputError("transient_rates needs an iq record of a scenario with a "
                         "[schedule] of repeated segments")
    fs = record.sample_rate_hz
    curves = transient_curves(np.asarray(record.samples), fs, scenario.schedule.segments,
                              scenario.mechanics[0].frequency_hz)
    return fit_transients(scenario, fs, curves)


def fit_transients(scenario, sample_rate_hz, curves):
    """The results of :func:`transient_rates` from its ``{name: (t, cycles × blocks)}``
    curves (:func:`transient_curves`), e.g. exact expected ones."""
    from simulator.analysis.heating import (
        block_power_per_phonon,
        nominal_relaxations,
        segment_system_of,
    )

    fs = sample_rate_hz
    systems = segment_system_of(scenario, set(curves))
    out = {}
    expected = nominal_relaxations(scenario, set(curves))
    for name, (t, stack) in curves.items():
        gain = block_power_per_phonon(systems[name], fs)
        n0, n_inf, nominal = expected[name]
        # the record's vacuum floor per block mean of L samples: 1 per Hz over fs, / L
        block = round(2 * t[0] * fs)  # block centres sit at (k + ½) L / fs
        sigma = nominal_sigma(t, gain, fs / block, n0, n_inf, nominal)

        def both(t, curve, nominal=nominal, sigma=sigma):
            return np.array([_rate_and_slope(t, curve, sigma)[0],
                             linear_in_slope(t, curve, sigma, nominal)[0][1]])

        (rate, slope), error = jackknife_over_cycles(t, stack, both)
        slope_error = thermal_slope_error(t, stack.mean(axis=0), sigma, nominal, fs / block,
                                          len(stack))
        window_s = t[-1] + t[0]  # block centres at (k + ½) L / fs: the segment's length
        if window_s * nominal >= MIN_RELAXATION_TIMES:  # else Γ is hardly determined
            out[f"effective_linewidth_hz@{name}"] = (rate / (2 * np.pi),
                                                     error[0] / (2 * np.pi))
        out[f"heating_rate_phonons_per_s@{name}"] = (slope / gain, slope_error / gain)
    return out


def thermal_slope_error(t, curve, sigma, rate, floor, cycles):
    """Standard error of the slope Ṗ₀ fitted at Γ with weights σ, from the
    thermal-light covariance of the block powers at the fitted level.

    The block mean u is a complex Gaussian (the mode's narrow-band amplitude
    on a white floor B), so Cov(|u_i|², |u_j|²) = |E u_i u_j*|² (Isserlis,
    Biometrika 12, 134 (1918), for circular complex variables; Reed, IRE
    Trans. Inf. Theory 8, 194 (1962), from memory): P_i² on the diagonal and
    (P_e − B)² e^{−Γ|t_i − t_j|} off it, P_e the line's power at the earlier
    block (the amplitude decays at Γ/2 while new thermal motion adds
    uncorrelated). The fitted slope is a fixed linear map w of the curve, so
    its variance is w C wᵀ / cycles. The jackknife over twenty cycles of such
    skewed values gives errors that grow with the estimate (measured: pull
    width 1.25 on the example, docs/analysis.md); this error moves only with
    the fitted level.
    """
    design = np.column_stack([np.ones_like(t), relaxation_by_slope(t, 0.0, 1.0, rate)])
    coef = np.linalg.pinv(design / sigma[:, None]) / sigma[None, :]
    level = design @ (coef @ curve)
    line = np.maximum(level - floor, 0.0)
    earlier = line[np.minimum.outer(np.arange(len(t)), np.arange(len(t)))]
    cov = earlier**2 * np.exp(-abs(rate) * np.abs(np.subtract.outer(t, t)))
    cov[np.diag_indices_from(cov)] = level**2
    return float(np.sqrt(coef[1] @ cov @ coef[1] / cycles))


def transient_curves(z, sample_rate_hz, segments, frequency_hz):
    """``{name: (t, cycles × blocks)}``: the demodulated power of every repeated segment.

    Un-kicked segments after the first, :data:`BLOCKS_PER_SEGMENT` blocks
    each, names with fewer than :data:`MIN_CYCLES` cycles left out.
    """
    curves, first = {}, 0
    for k, segment in enumerate(segments):
        n = int(round(segment.duration_s * sample_rate_hz))
        if k > 0 and segment.excite_phonons == 0:
            block = max(1, n // BLOCKS_PER_SEGMENT)
            t, power = demodulated_power(z[first:first + n], sample_rate_hz, frequency_hz,
                                         block)
            curves.setdefault(segment.name, []).append((t, power))
        first += n
    out = {}
    for name, cycles in curves.items():
        if len(cycles) >= MIN_CYCLES:
            size = min(len(p) for _, p in cycles)
            out[name] = (cycles[0][0][:size], np.array([p[:size] for _, p in cycles]))
    return out


def jackknife_over_cycles(t, stack, estimate):
    """``estimate(t, mean)`` of the cycle-averaged curve and its jackknife error.

    Each leave-one-out replicate runs the whole estimate, weights included,
    so the error also holds the weights' own scatter.
    """
    k = len(stack)
    value = estimate(t, stack.mean(axis=0))
    leave_out = np.array([estimate(t, np.delete(stack, i, axis=0).mean(axis=0))
                          for i in range(k)])
    error = np.sqrt((k - 1) / k * np.sum((leave_out - leave_out.mean(axis=0)) ** 2, axis=0))
    return value, error


def nominal_sigma(t, gain, floor, n0, n_inf, rate):
    """σ ∝ the expected block power G n(t) + B of the nominal transient (a line's
    block power is exponential: its s.d. is its mean).

    Fixed before the data are seen: at a given Γ the slope is then linear in
    the data, so its mean is the slope of the mean curve whatever the weights.
    Weights from a fit to the same data (even its smooth model) move with
    that data's noise and bias the slope: −2.6 ± 0.6 % for the two-pass
    weights on simulated cycles of the example (docs/analysis.md).
    """
    return gain * (n_inf - (n_inf - n0) * np.exp(-rate * t)) + floor
