"""Ring-down linewidth from a scheduled heterodyne record (a reference estimator).

A mode kicked to a coherent amplitude and released decays as e^{−Γt/2} in
amplitude; its sideband in a heterodyne record carries that amplitude. The
estimate follows the usual lab procedure (common practice: demodulate at the
mechanical sideband, low-pass, fit the energy decay |x(t)|² with an
exponential on a background):

1. demodulate the complex record z = I + iQ at the anti-Stokes sideband,
   w(t) = z(t) e^{−2πi f_m t} (the anti-Stokes line sits at +f_m in the
   record's convention, docs/records.md);
2. average w over blocks of L samples, short against the decay (Γ L/fs ≤
   :data:`BLOCK_DECAY`) and long against the mechanical period;
3. fit P_k = |u_k|² by P(t) = A e^{−Γt} + B, weighted with the variance of
   |u|² of a Gaussian block mean, Var P = s⁴ + 2 s² (P − s²) (s² the
   background B), iterated once; the uncertainty is the fit's covariance
   scaled by the residual χ² per degree of freedom (scipy.optimize.curve_fit,
   ``absolute_sigma=False``) and by the residuals' integrated autocorrelation
   (:func:`correlation_factor`), which takes up the thermal motion's scatter.

The window of each ring-down is taken from the scenario's ``[schedule]``
(the protocol the experimenter wrote, not the truth): every segment with a
kick (``excite_phonons`` > 0) is fitted on its own, and the nominal
``linewidth_hz`` of the kicked mode only sets the block length.
"""

import numpy as np
import scipy.optimize

from simulator.errors import InputError

BLOCK_DECAY = 0.02  # Γ × block length: the decay within a block stays below 2 %
MIN_BLOCKS = 8  # fewer blocks leave too few degrees of freedom for three parameters


def demodulated_power(z, sample_rate_hz, frequency_hz, block_samples):
    """Block centres (s) and |block mean of z e^{−2πi f t}|²: the power near the line at +f.

    Each block mean passes a band of about fs/L around the line (a sinc
    response), so the result follows the sideband's power in time: a coherent
    amplitude's square plus the thermal and shot-noise power in that band.
    """
    block_samples = int(block_samples)
    n_blocks = len(z) // block_samples
    k = np.arange(n_blocks * block_samples)
    w = np.asarray(z)[:len(k)] * np.exp(-2j * np.pi * frequency_hz * k / sample_rate_hz)
    power = np.abs(w.reshape(n_blocks, block_samples).mean(axis=1)) ** 2
    return (np.arange(n_blocks) + 0.5) * block_samples / sample_rate_hz, power


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
    t, power = demodulated_power(z, sample_rate_hz, frequency_hz, block_samples)
    n_blocks = len(t)
    if n_blocks < MIN_BLOCKS:
        raise InputError(f"a ring-down of {len(z)} samples gives {n_blocks} blocks of "
                         f"{block_samples}; expected at least {MIN_BLOCKS}")

    def model(time, a, rate, b):
        return a * np.exp(-rate * time) + b

    tail = max(1.0, float(np.median(power[-n_blocks // 4:])))  # background guess
    guess = (max(power[0] - tail, tail), 1.0 / t[-1], tail)
    sigma = np.ones(n_blocks)
    for _ in range(2):  # weights from the previous fit's model
        params, cov = scipy.optimize.curve_fit(
            model, t, power, p0=guess, sigma=sigma, absolute_sigma=False,
            bounds=([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]), maxfev=10_000)
        s2 = max(params[2], 1e-300)
        sigma = np.sqrt(s2**2 + 2.0 * s2 * np.clip(model(t, *params) - s2, 0.0, None))
        guess = params
    residual = (power - model(t, *params)) / sigma
    return float(params[1]), float(np.sqrt(cov[1, 1] * correlation_factor(residual)))


def correlation_factor(residual):
    """1 + 2 Σ ρ_j of the residuals, summed until ρ_j first falls to zero or below.

    The thermal motion of the mode beats with the kicked amplitude and makes
    neighbouring blocks' residuals correlated over 1/Γ; a least-squares error
    for independent points is then too small by the square root of this
    integrated autocorrelation (the effective number of independent points is
    the number of blocks over it; Priestley, Spectral Analysis and Time Series
    (Academic Press, 1981), Sec. 5.3, from memory; common practice).
    """
    r = residual - residual.mean()
    var = float(np.dot(r, r))
    factor = 1.0
    for lag in range(1, len(r) // 2):
        rho = float(np.dot(r[:-lag], r[lag:])) / var
        if rho <= 0:
            break
        factor += 2.0 * rho
    return factor


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
            block = max(1, int(BLOCK_DECAY * fs / (2 * np.pi * mode.linewidth_hz)))
            rate, error = fit_ring_down(z[first:first + n], fs, mode.frequency_hz, block)
            out[f"effective_linewidth_hz@{segment.name}"] = (rate / (2 * np.pi),
                                                              error / (2 * np.pi))
        first += n
    return out


BLOCKS_PER_SEGMENT = 200  # points of a transient's sideband power curve
SIGMA_FLOOR = 1e-9  # smallest weight's sigma, relative to the curve's largest value
MIN_CYCLES = 3  # repetitions of a segment needed to average it and estimate its error


def relaxation(time, p0, rate, p_inf):
    """P(t) = P∞ − (P∞ − P₀) e^{−Γt}: a sideband power relaxing to its new level."""
    return p_inf - (p_inf - p0) * np.exp(-rate * time)


def _fit_relaxation(t, curve, sigma):
    guess = (float(curve[0]), 3.0 / t[-1], float(np.mean(curve[-len(t) // 4:])))
    params, _ = scipy.optimize.curve_fit(
        relaxation, t, curve, p0=guess, sigma=sigma, absolute_sigma=True,
        bounds=([0.0, 0.0, 0.0], [np.inf, np.inf, np.inf]), maxfev=10_000)
    return params


def transient_rates(record):
    """Reference estimator: the relaxation rate of every repeated un-kicked segment.

    A segment that follows another and kicks nothing (cooling switched on,
    or off for re-thermalisation) shows the sideband power relaxing to its
    new level at the segment's energy damping rate Γ_eff (weak coupling;
    Marquardt et al., PRL 99, 093902 (2007)); with the tone off or on
    resonance Γ_eff = Γm, and Γm times the known bath occupation is the
    heating rate. One such transient holds only a few independent values of
    the thermal power (it is exponentially distributed and correlated over
    1/Γ), so the segments that share a name (the cycles of one schedule) are
    averaged: the demodulated power of each (:func:`demodulated_power`,
    :data:`BLOCKS_PER_SEGMENT` blocks) is averaged over the cycles and
    fitted by :func:`relaxation`, weighted by the spread across cycles. The
    error is the jackknife over cycles (Efron, The Jackknife, the Bootstrap
    and Other Resampling Plans (SIAM, 1982), Ch. 3; common practice), which
    needs no model of the noise. Returns ``effective_linewidth_hz@<segment
    name>`` (Γ/2π in Hz) for every name repeated :data:`MIN_CYCLES` times or more.
    """
    scenario = record.scenario
    if scenario.schedule is None or record.kind != "iq":
        raise InputError("transient_rates needs an iq record of a scenario with a "
                         "[schedule] of repeated segments")
    fs, z = record.sample_rate_hz, np.asarray(record.samples)
    frequency = scenario.mechanics[0].frequency_hz
    curves, first = {}, 0
    for k, segment in enumerate(scenario.schedule.segments):
        n = int(round(segment.duration_s * fs))
        if k > 0 and segment.excite_phonons == 0:
            block = max(1, n // BLOCKS_PER_SEGMENT)
            t, power = demodulated_power(z[first:first + n], fs, frequency, block)
            curves.setdefault(segment.name, []).append((t, power))
        first += n
    out = {}
    for name, cycles in curves.items():
        if len(cycles) < MIN_CYCLES:
            continue
        size = min(len(p) for _, p in cycles)
        t, stack = cycles[0][0][:size], np.array([p[:size] for _, p in cycles])
        k = len(stack)
        mean = stack.mean(axis=0)  # weights: the spread over cycles, floored (a noiseless
        sigma = np.maximum(stack.std(axis=0, ddof=1) / np.sqrt(k),  # curve stays finite)
                           SIGMA_FLOOR * np.abs(mean).max())
        rate = _fit_relaxation(t, mean, sigma)[1]
        leave_out = np.array([_fit_relaxation(t, np.delete(stack, i, axis=0).mean(axis=0),
                                              sigma)[1] for i in range(k)])
        error = np.sqrt((k - 1) / k * np.sum((leave_out - leave_out.mean()) ** 2))
        out[f"effective_linewidth_hz@{name}"] = (rate / (2 * np.pi), error / (2 * np.pi))
    return out
