"""Heating rate and damping of a scheduled record by the exact likelihood of its sideband.

A ``[schedule]`` switches a cooling tone on and off; the record reads the
mode through its anti-Stokes sideband. Demodulated there and averaged over
short blocks, the record is the mode's complex amplitude a(t) (E|a|² = n,
phonons) times √G_s e^{iφ_s}, G_s the segment's block power per phonon
(:func:`simulator.analysis.heating.block_power_per_phonon`), on a white
floor c_s S_b,s. In weak coupling each segment s obeys

    da = −(Γ_s/2 − iδ_s) a dt + dW,   E|dW|² = (H + h_s) dt,   Γ_s = Γm + Γopt,s,

with θ = (Γm, H = Γm n_th) the unknowns (H the heating rate by the bath in
phonons/s); the segment's optical damping Γopt,s, optical heating h_s,
frequency shift δ_s, gain G_s and floor S_b,s are known from its nominal
operating point (the model of :mod:`simulator.analysis.protocol_bound`;
Marquardt et al., PRL 99, 093902 (2007)). Two nuisances per segment name are
fitted with θ: the phase φ_s of the line in the record (the cavity's phase at
+f_m moves with the detuning: about 1 rad between the example's cooling and
probe) and the floor's scale c_s (a block mean folds in the background of its
whole band, which is not white: +4 % in the example's cooling segments).

A kick (``excite_phonons``) adds a deterministic mean to a at its segment's
start, which decays and rotates with the moments of every later block; the
filter runs on the residual and the kick's complex size is profiled out by
generalised least squares (:func:`simulator.analysis.ringdown_likelihood.profile_mean`;
size and phase fitted, as a piezo's kick is not calibrated to the precision
its decay resolves). The blocks of the detection's settling after a kick are
left out (:func:`simulator.analysis.sideband_blocks.kick_settling`).

The block means follow one linear state-space model whose moments switch
with the segment (the exact integrate-and-dump moments of
:func:`simulator.analysis.ringdown_likelihood.block_noise` for the diffusion
H + h_s), from the schedule's start (a ``thermal`` start at the nominal bath
occupation). Its exact Gaussian likelihood is the prediction-error
decomposition by the Kalman filter (Schweppe, IEEE Trans. Inf. Theory 11, 61
(1965); Harvey, Forecasting, Structural Time Series Models and the Kalman
Filter (CUP, 1989), Sec. 3.4; both from memory),

    −ln L = Σ_k [ln(π F_k) + |ν_k|²/F_k],

computed by :func:`simulator.analysis.ringdown_likelihood.kalman` and
minimised by Newton steps (:func:`fit_heating`); the errors are the inverse
Hessian at the optimum (the observed information), nuisances included. Γm
is not held positive (a record that hardly resolves it would pile its
estimates at zero and bias Γm and H with it). Unlike the mean-power slope of
:func:`simulator.analysis.ringdown.transient_rates`, the likelihood uses the
force noise of the fluctuations, whose spectrum G(H + h_s)/ω² above Γ_s
tells H within every segment, and so approaches the Cramér–Rao error of
:func:`simulator.analysis.protocol_bound.heating_rate_bound`.

The blocks resolve that force noise: it climbs out of the floor below ω_c =
√(G(H + h_s)/S_b), so a block lasts :data:`BLOCK_RESOLUTION`/ω_c at most,
with the Stokes image in a null of the block mean. The demodulation phase
runs on over the whole record, so the amplitude is continuous across a
switch. The initial slope Γ_s(n_∞,s − n(t_s)) of each segment (n carried by
the rate equation from the start) and Γ_s/2π follow from θ̂, their errors
from its covariance (delta method).
"""

import numpy as np

from simulator.analysis.newton import derivatives, precision_step
from simulator.analysis.sideband_blocks import (
    block_length,
    kick_settling,
    scheduled_blocks,
    switch_phases,
)
from simulator.errors import InputError

NEWTON_STEPS = 8  # most Newton steps of the fit
HALVINGS = 12  # most halvings of a step that does not lower −ln L
QUADRATIC = 1.0  # a Newton decrement below this keeps the Hessian (chord steps)
CONVERGED = 1e-4  # Newton decrement g·Δ below which the fit stops (in ln L)
PHASE_STEP = 0.05  # rad: the first search's step in a segment's phase (our choice)
FLOOR_STEP = 0.01  # the first search's step in a floor's scale (our choice)
SMALLEST_RATE = 1e-9  # 1/s: Γ_s = 0 exactly is taken as this (the moments are continuous)
HESSIAN_STEP = 0.3  # finite-difference step of the observed information, in errors
PHASE_GRID = 8  # points around the circle of a phase's second start (our choice)


def negative_log_likelihood(blocks, params):
    """−ln L of the block means at ``params`` = (Γm, H, φ of every segment name after the
    first, the floor's scale c of every name); ∞ for H ≤ 0 or a steady start that
    does not relax.

    Γm is not held positive, and a segment's Γ_s may be negative: its moments
    follow from the diffusion H + h_s and Γ_s of any sign. A record that hardly resolves Γm
    would otherwise pile its estimates up at Γm = 0 and bias Γm and H.
    """
    from simulator.analysis.ringdown_likelihood import block_noise, kalman, profile_mean

    gamma_m, heating = (float(x) for x in params[:2])
    names = len(blocks.names)
    phase = dict(zip(blocks.names, np.concatenate([[0.0], params[2:names + 1]]), strict=True))
    floor = dict(zip(blocks.names, params[names + 1:], strict=True))
    if not (heating > 0 and min(floor.values()) > 0):
        return np.inf
    n = len(blocks.u)
    rho, beta, cov_ef = (np.empty(n, np.complex128) for _ in range(3))
    q, var_obs = np.empty(n), np.empty(n)
    first, moments = 0, {}
    for index, spacing, count in blocks.runs:
        m = blocks.models[index]
        rate = gamma_m + m.optical_damping
        if rate == 0:
            rate = SMALLEST_RATE  # the limit Γ → 0 is continuous
        key = (m.name, spacing)
        if key not in moments:
            diffusion = heating + m.optical_heating
            if not diffusion > 0:
                return np.inf
            r, b, e2, f2, ef = block_noise(0.5 * rate - 1j * blocks.shifts[index], spacing,
                                           diffusion=1.0)
            g = np.sqrt(m.gain) * np.exp(1j * phase[m.name])
            moments[key] = (r, g * b, diffusion * e2,
                            m.gain * diffusion * f2 + floor[m.name] * m.floor / spacing,
                            np.conj(g) * diffusion * ef)
        end = first + count
        rho[first:end], beta[first:end], q[first:end], var_obs[first:end], \
            cov_ef[first:end] = moments[key]
        first = end
    start = blocks.start_phonons((gamma_m, heating))
    if not np.isfinite(start):
        return np.inf
    var_obs[list(blocks.unobserved)] = np.inf  # a missing observation: the filter only predicts
    a, c, f = kalman(blocks.u, rho, beta, q, var_obs, cov_ef, start,
                     np.array(blocks.kicks, dtype=np.int64))
    seen = np.isfinite(f)
    return float(np.sum(np.log(np.pi * f[seen])) + profile_mean(a[seen], c[seen], f[seen])[1])


def fit_heating(blocks, params0, scale0):
    """(Γm, H, φ…, c…) at the likelihood's maximum and their covariance (observed
    information).

    Newton's method on −ln L, the Hessian held once a step gains less than
    :data:`QUADRATIC` (the chord method: −ln L is nearly quadratic within a
    few errors of its minimum, so later steps need the gradient only), derivatives by central
    differences of :data:`HESSIAN_STEP` errors (``scale0``, a first guess such as
    the Cramér–Rao errors, then the errors found), each step halved until
    −ln L falls; the covariance is the inverse of a fresh Hessian at the end.
    """
    params, scale = np.asarray(params0, dtype=float), np.asarray(scale0, dtype=float)
    value = negative_log_likelihood(blocks, params)
    if not np.isfinite(value):
        raise InputError("heating-rate likelihood: the nominal parameters give no finite "
                         "likelihood; expected segments that relax (Γm + Γopt > 0)")
    curvature, decrement = None, np.inf  # Hessian in the parameters' own units
    for _ in range(NEWTON_STEPS):
        fresh = curvature is None or decrement > QUADRATIC
        grad, hess = derivatives(lambda x, p=params, u=scale: negative_log_likelihood(
            blocks, p + u * x), difference_steps(params, scale), fresh)
        grad = grad / scale
        if fresh:
            curvature = hess / np.outer(scale, scale)
            try:
                np.linalg.cholesky(curvature)
                scale = np.sqrt(np.diag(np.linalg.inv(curvature)))
            except np.linalg.LinAlgError:
                pass  # not yet where −ln L is convex: keep the units
        step = precision_step(curvature, grad)
        for _ in range(HALVINGS):
            trial = params + step
            new = negative_log_likelihood(blocks, trial)
            if new <= value:
                break
            step = step / 2
        else:
            break
        params, value, decrement = trial, new, float(-grad @ step)
        if decrement < CONVERGED:
            break
    _, hess = derivatives(lambda x: negative_log_likelihood(blocks, params + scale * x),
                          difference_steps(params, scale))
    try:
        cov = np.linalg.inv(hess) * np.outer(scale, scale)
    except np.linalg.LinAlgError:
        cov = np.full(hess.shape, np.nan)
    if not (np.all(np.isfinite(cov)) and np.all(np.diag(cov) > 0)):
        raise InputError("heating-rate likelihood: no curvature at the optimum; expected a "
                         "record that determines Γm and the heating rate")
    return params, cov


def scan_phases(blocks, params):
    """``params`` with each line phase in turn moved to the best of
    :data:`PHASE_GRID` points around the circle (−ln L the judge).

    A phase whose start comes from one switch out of a weak amplitude (the
    probe after a short cooling) can start on the far side of −ln L's ridge in
    that phase, where Newton's method runs to no maximum.
    """
    params = np.array(params, dtype=float)
    for i in range(2, len(blocks.names) + 1):
        trials = [params.copy() for _ in range(PHASE_GRID)]
        for k, trial in enumerate(trials):
            trial[i] += 2 * np.pi * k / PHASE_GRID
        params = min(trials, key=lambda t: negative_log_likelihood(blocks, t))
    return params


def difference_steps(params, scale):
    """:data:`HESSIAN_STEP` units per axis, but never more than half the way to H = 0
    (where the model ends)."""
    steps = np.full(len(params), HESSIAN_STEP)
    steps[1] = min(steps[1], 0.5 * params[1] / scale[1])
    return steps


def segment_slopes(blocks, theta, durations_s):
    """``{name: mean over its segments of Γ_s(n_∞,s − n(t_s))}`` (phonons/s), every
    segment after the first, n carried by the rate equation from the start."""
    gamma_m, heating = theta
    n, slopes = blocks.start_phonons(theta), {}
    for k, (m, duration) in enumerate(zip(blocks.models, durations_s, strict=True)):
        rate = gamma_m + m.optical_damping
        n_inf = (heating + m.optical_heating) / rate
        if k > 0:
            slopes.setdefault(m.name, []).append(rate * (n_inf - n))
        n = n_inf + (n - n_inf) * np.exp(-rate * duration)
    return {name: float(np.mean(v)) for name, v in slopes.items()}


def heating_likelihood(record):
    """Trial estimator: Γm and the heating rate of a scheduled iq record by likelihood.

    Returns ``bath_heating_rate_phonons_per_s`` (H = Γm n_th),
    ``mechanical_linewidth_hz`` (Γm/2π), and for every segment name
    ``effective_linewidth_hz@<name>`` (Γ_s/2π) and, where it follows another
    segment, ``heating_rate_phonons_per_s@<name>`` (the initial slope, as
    :func:`simulator.analysis.heating.initial_heating_rates`), each with its
    standard error.
    """
    from simulator.analysis.protocol_bound import central_differences

    scenario = record.scenario
    if getattr(scenario, "schedule", None) is None or record.kind != "iq":
        raise InputError("heating_likelihood needs an iq record of a scenario with a "
                         f"[schedule]; got a {record.kind!r} record"
                         + ("" if scenario.schedule is not None else " without one"))
    kicked = [s.name for s in scenario.schedule.segments
              if s.excite_phonons > 0 and s.excite_mode != 0]
    if kicked:
        raise InputError(f"heating_likelihood: segment {kicked[0]!r} kicks mechanical mode "
                         "excite_mode > 0; expected kicks of the first mode only (the one "
                         "whose sideband the likelihood reads)")
    fs = record.sample_rate_hz
    models, shifts, theta0, scale0 = nominal_model(scenario, fs)
    block = block_length(models, theta0, fs, scenario.mechanics[0].frequency_hz)
    blocks = scheduled_blocks(record.samples, scenario, block, models, shifts, fs,
                              theta0[1] / theta0[0], kick_settling(scenario))
    phases = switch_phases(blocks)
    start = np.concatenate([theta0, phases, np.ones(len(blocks.names))])
    steps = np.concatenate([scale0, np.full(len(phases), PHASE_STEP),
                            np.full(len(blocks.names), FLOOR_STEP)])
    try:
        params, cov = fit_heating(blocks, start, steps)
    except InputError:  # stopped off the maximum: start again from the best phases
        params, cov = fit_heating(blocks, scan_phases(blocks, start), steps)
    theta, cov = params[:2], cov[:2, :2]
    durations = [round(s.duration_s * fs) / fs for s in scenario.schedule.segments]

    def with_error(function):
        grad = np.array(central_differences(function, theta))
        return float(function(theta)), float(np.sqrt(grad @ cov @ grad))

    out = {"bath_heating_rate_phonons_per_s": (theta[1], np.sqrt(cov[1, 1])),
           "mechanical_linewidth_hz": (theta[0] / (2 * np.pi),
                                       np.sqrt(cov[0, 0]) / (2 * np.pi))}
    for m in {m.name: m for m in models}.values():
        out[f"effective_linewidth_hz@{m.name}"] = (
            (theta[0] + m.optical_damping) / (2 * np.pi), np.sqrt(cov[0, 0]) / (2 * np.pi))
    for name in segment_slopes(blocks, theta, durations):
        out[f"heating_rate_phonons_per_s@{name}"] = with_error(
            lambda t, name=name: np.array(segment_slopes(blocks, t, durations)[name]))
    return {key: (float(v), float(e)) for key, (v, e) in out.items()}


def nominal_model(scenario, sample_rate_hz):
    """``(segment models, δ_s, nominal θ, Cramér–Rao errors)`` of a scheduled scenario.

    The segment models are :func:`simulator.analysis.protocol_bound.segment_models`
    at the record's rate; δ_s = 2π(f_eff,s − f_m) the line's offset from the
    demodulation at the nominal mechanical frequency; θ nominal from the
    scenario (Γm from its linewidth, H = Γm n_th); the errors from the Whittle
    information of the same schedule (the unit of the first search).
    """
    from simulator.analysis.heating import segment_system_of
    from simulator.analysis.protocol_bound import segment_models, whittle_fisher
    from simulator.linear.steady_state import steady_state

    models, gamma_m, heating, _ = segment_models(scenario)
    names = {m.name for m in models}
    systems = segment_system_of(scenario, names)
    f_m = scenario.mechanics[0].frequency_hz
    offset = {name: 2 * np.pi * (steady_state(s).modes[0].effective_frequency_hz - f_m)
              for name, s in systems.items()}
    theta0 = np.array([gamma_m, heating])
    info = whittle_fisher(models, theta0, sample_rate_hz)
    try:
        scale = np.sqrt(np.diag(np.linalg.inv(info)))
    except np.linalg.LinAlgError:
        scale = np.full(2, np.nan)
    if not np.all(np.isfinite(scale) & (scale > 0)):
        scale = 0.1 * theta0  # no usable bound: start in steps of 10 %
    return models, tuple(offset[m.name] for m in models), theta0, scale
