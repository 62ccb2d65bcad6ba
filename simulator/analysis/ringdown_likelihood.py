"""Exact Gaussian likelihood of a demodulated ring-down: the mode's own noise model.

After a kick the mode's complex amplitude, demodulated at its sideband,
obeys da = −γ a dt + dW, γ = Γ/2 − iδ, from a(0) = m₀ + thermal: the kicked
mean decays with the same factor ρ = e^{−γΔ} per block that correlates the
thermal motion (the Langevin equation of the mode is linear, so the kick only
sets its initial condition). The record gives block means

    u_k = β a_k + f_k + w_k,   a_{k+1} = ρ a_k + e_k,

with a_k the amplitude at the block's start, (e_k, f_k) integrals of the
same force noise over the block (exact moments in :func:`block_noise`; the
integrate-and-dump construction of records.discretize), the thermal power P
= E|a|² of the stationary motion, and a white imprecision w of variance
r = λP. Fitting the energy |u|² as if its points were independent ignores
that the thermal part is correlated over 2/Γ — the whole fit window — and
understates the error (the thermal beat). Here the likelihood is exact for
this model: the prediction-error decomposition by the Kalman filter
(Schweppe, IEEE Trans. Inf. Theory 11, 61 (1965); Harvey, Forecasting,
Structural Time Series Models and the Kalman Filter (CUP, 1989), Sec. 3.4;
both from memory),

    −ln L = Σ_k [ln(π P F_k) + |ν_k|²/(P F_k)],

with the innovations ν_k linear in m₀ and the scale P, so both are profiled
out in closed form (generalised least squares for m₀, P̂ = S/N). Γ, δ and
ln λ are found by minimising the profile −ln L; the standard error of Γ is
from the inverse Hessian of the profile (the observed information, which for a
profile likelihood gives the marginal error of Γ with the nuisance parameters
estimated). λ is kept at its floor unless fitting it gains 2Δln L >
:data:`IMPRECISION_TEST`; when it runs to its ceiling (a floor so far above
the thermal steps that they are not resolved) the decay on white noise alone
is fitted: unbiased, but its error then leaves out the thermal force
(docs/analysis.md, "Protocols", measured limits).

For negligible imprecision the bound is σ_Γ² = 2ΓP/∫|m(t)|²dt (the AR(1)
regression's information on |ρ|; :func:`thermal_limit`): the thermal force
noise, not the detector, limits a strong ring-down.
"""

import numba
import numpy as np
import scipy.optimize

from simulator.errors import InputError

LAMBDA_RANGE = (1e-9, 1e6)  # imprecision / thermal variance searched (log scale)
HESSIAN_STEP = 0.3  # finite-difference step, in units of the starting error estimate
START_KICK = np.zeros(1, np.int64)  # the ring-down's unknown amplitude enters at block 0
IMPRECISION_TEST = 3.84  # 2Δ(ln L) a fitted imprecision must gain: χ²₁ at 95 % (our choice)


def block_noise(gamma, spacing_s, diffusion=None):
    """Exact moments of one block of a unit-variance complex OU process (P = 1).

    With da = −γ a dt + dW, E|dW|² = 2 Re(γ) dt, over one block of length Δ:
    a_{k+1} = ρ a_k + e_k and the block mean ā_k = β a_k + f_k, where
    ρ = e^{−γΔ}, β = (1 − ρ)/(γΔ) and e_k, f_k are integrals of the same
    noise (integrate-and-dump; the method of records.discretize). Returns
    ``(ρ, β, E|e|², E|f|², E[e f*])``. With ``diffusion`` the noise has
    E|dW|² = diffusion·dt instead (any sign of Re γ: a growing process too).
    """
    g = gamma.real
    d = 2.0 * g if diffusion is None else diffusion  # 2 Re γ: the unit-variance process
    rho = np.exp(-gamma * spacing_s)
    one_minus_rho = -np.expm1(-gamma * spacing_s)
    decay2 = -np.expm1(-2.0 * g * spacing_s) / (2.0 * g)  # ∫ e^{−2gu} du
    beta = one_minus_rho / (gamma * spacing_s)
    var_e = d * decay2
    var_f = d / (spacing_s**2 * abs(gamma) ** 2) * (
        spacing_s - 2.0 * (one_minus_rho / gamma).real + decay2)
    cov_ef = d / (np.conj(gamma) * spacing_s) * (one_minus_rho / gamma - decay2)
    return rho, beta, float(var_e), float(max(var_f, 0.0)), complex(cov_ef)


def innovations(u, gamma, spacing_s, lam):
    """Kalman innovations of block means ``u`` (m₀ = 0), their response to m₀ = 1, F_k.

    The state is the mode's amplitude at each block's start; the observation
    is the block mean β a_k + f_k + w_k, whose noise f_k is correlated with
    the next step's e_k (the joint update of (a_k, e_k) by y_k; Anderson &
    Moore, Optimal Filtering (Prentice-Hall, 1979), Sec. 5.5, correlated
    process and measurement noise). Returns ``(a, c, f)`` with P = 1: the
    innovations for any m₀ are a + m₀ c, with variances P·f.
    """
    rho, beta, q, var_f, cov_ef = block_noise(gamma, spacing_s)
    n = len(u)
    a, c, f = kalman(np.ascontiguousarray(u, dtype=np.complex128), np.full(n, complex(rho)),
                     np.full(n, complex(beta)), np.full(n, float(q)),
                     np.full(n, float(var_f + lam)), np.full(n, complex(cov_ef)), 1.0,
                     START_KICK)
    return a, c[:, 0], f


@numba.njit(cache=True, nogil=True)
def kalman(u, rho, beta, q, var_obs, cov_ef, v0, kicks):
    """The recursion of :func:`innovations`, compiled, with step-by-step moments.

    Block k has its own ρ_k, β_k, E|e_k|² = q_k, observation variance
    var_obs_k (E|f_k|² plus the white floor) and E[e_k f_k*]; the state starts
    at mean 0 with variance ``v0``. Fixed moments give the stationary
    ring-down; moments that change at a switch give a scheduled record
    (:mod:`simulator.analysis.heating_likelihood`).

    ``kicks`` (integer array) holds the blocks at whose start a kick adds a
    deterministic mean to the amplitude; column j of the returned ``c`` is the
    innovations' response to a unit kick at block ``kicks[j]``, decaying and
    rotating with the ρ of every later block. The filter's gain does not
    depend on the mean, so the innovations of the record with kicks m_j are
    a + Σ_j m_j c_j, with the same variances f (the exact likelihood with a
    linear mean: Harvey 1989, Sec. 3.4, from memory). ``kicks = [0]`` is the
    ring-down's unknown start amplitude.
    """
    n = len(u)
    p = len(kicks)
    a = np.empty(n, np.complex128)
    c = np.empty((n, p), np.complex128)
    f = np.empty(n)
    xa, xc, v = 0j, np.zeros(p, np.complex128), v0
    for k in range(n):
        for j in range(p):
            if kicks[j] == k:
                xc[j] += 1.0
        b = beta[k]
        fk = abs(b) ** 2 * v + var_obs[k]
        a[k] = u[k] - b * xa
        f[k] = fk
        gx = v * np.conj(b) / fk
        ge = cov_ef[k] / fk
        r = rho[k]
        xa = r * (xa + gx * a[k]) + ge * a[k]
        for j in range(p):
            ck = -b * xc[j]
            c[k, j] = ck
            xc[j] = r * (xc[j] + gx * ck) + ge * ck
        v = abs(r) ** 2 * v + q[k] - abs(r * v * np.conj(b) + cov_ef[k]) ** 2 / fk
    return a, c, f


def profile_mean(a, c, f):
    """Kick amplitudes m̂ that minimise Σ|a + c m|²/f (generalised least squares) and
    the minimum: the innovations' mean profiled out in closed form."""
    w = c / np.sqrt(f)[:, None]
    r = a / np.sqrt(f)
    if w.shape[1] == 0:  # no kick: nothing to profile
        return np.zeros(0, np.complex128), float(np.sum(np.abs(r) ** 2))
    m = np.linalg.lstsq(w, -r, rcond=None)[0]
    return m, float(np.sum(np.abs(r + w @ m) ** 2))


def profile_nll(u, spacing_s, rate, shift, log_lam):
    """−ln L (constants dropped) with m₀ and P profiled out; also m̂₀ and P̂."""
    a, c, f = innovations(u, 0.5 * rate - 1j * shift, spacing_s, float(np.exp(log_lam)))
    (m0,), s = profile_mean(a, c[:, None], f)
    n = len(u)
    return n * np.log(s / n) + float(np.sum(np.log(f))), m0, s / n


def starting_point(u, spacing_s):
    """(Γ, δ, ln λ, σ_Γ) from the AR(1) regression u_{k+1} ≈ ρ u_k (least squares)."""
    x, y = u[:-1], u[1:]
    power = float(np.sum(np.abs(x) ** 2))
    rho = complex(np.sum(y * np.conj(x)) / power)
    e = y - rho * x
    var_e = float(np.mean(np.abs(e) ** 2))
    rate = -2.0 * np.log(min(max(abs(rho), 1e-12), 1.0 - 1e-12)) / spacing_s
    sigma = 2.0 * np.sqrt(var_e / (2.0 * power)) / spacing_s
    lag1 = -float(np.real(np.mean(e[1:] * np.conj(e[:-1])) / rho)) if len(e) > 2 else 0.0
    thermal = var_e / max(1.0 - abs(rho) ** 2, 1e-12)
    lam = float(np.clip(lag1 / thermal, *LAMBDA_RANGE))
    return rate, float(np.angle(rho)) / spacing_s, float(np.log(lam)), sigma


def fit_state_space(u, spacing_s):
    """Γ (1/s), its standard error, and the fitted (δ, λ, m₀, P) of a ring-down.

    Parameters
    ----------
    u : ndarray, complex
        Block means of the demodulated record from the kick on, one per
        ``spacing_s``.
    spacing_s : float
        Time between block centres (s).
    """
    u = np.asarray(u, dtype=complex)
    if not np.all(np.isfinite(u)) or not np.any(u):
        raise InputError("ring-down fit: the demodulated amplitudes are not finite or all "
                         "zero; expected a record with a kicked mode")
    rate0, shift0, loglam0, sigma0 = starting_point(u, spacing_s)
    limits = np.log(LAMBDA_RANGE)
    scale = np.array([sigma0, sigma0, 1.0])
    best = _minimise(u, spacing_s, np.array([rate0, shift0, limits[0]]), scale, (0, 1))
    free = _minimise(u, spacing_s, np.array([rate0, shift0, np.clip(loglam0, *limits)]),
                     scale, (0, 1, 2))
    if best[0] - free[0] > IMPRECISION_TEST / 2:  # the imprecision is resolved
        best = free
    elif not np.isfinite(free[0]) and free[3] >= limits[1]:  # the floor hides the motion
        ceiling = _minimise(u, spacing_s, np.array([rate0, shift0, limits[1]]), scale, (0, 1))
        best = min(best, ceiling, key=lambda fit: fit[0])
    nll, rate, shift, log_lam, sigma = best
    if not (sigma > 0 and np.isfinite(sigma)):
        raise InputError("ring-down fit: the likelihood has no curvature in Γ; expected a "
                         "decay that the record resolves")
    _, m0, thermal = profile_nll(u, spacing_s, rate, shift, log_lam)
    return (float(rate), float(sigma),
            dict(shift_rad_s=float(shift), imprecision_ratio=float(np.exp(log_lam)),
                 start_amplitude=complex(m0), thermal_power=float(thermal)))


def _minimise(u, spacing_s, origin, scale, free):
    """Minimise the profile −ln L over the parameters ``free`` of (Γ, δ, ln λ)."""
    bounds = np.log(LAMBDA_RANGE)
    free = list(free)

    def params(x):
        p = origin.copy()
        p[free] += scale[free] * x
        p[2] = np.clip(p[2], *bounds)
        return p

    def objective(x):
        return profile_nll(u, spacing_s, *params(x))[0]

    simplex = np.vstack([np.zeros(len(free)), np.eye(len(free))])  # steps of one scale
    result = scipy.optimize.minimize(objective, np.zeros(len(free)), method="Nelder-Mead",
                                     options={"xatol": 1e-4, "fatol": 1e-7, "maxiter": 4000,
                                              "initial_simplex": simplex})
    p = params(result.x)
    if len(free) == 3 and not bounds[0] < p[2] < bounds[1]:
        return np.inf, *p, np.nan  # the imprecision ran to a limit: keep an edge's fit
    hess = numerical_hessian(objective, result.x, HESSIAN_STEP)
    try:
        variance = float(np.linalg.inv(hess)[0, 0])
    except np.linalg.LinAlgError:
        variance = np.nan
    return float(result.fun), p[0], p[1], p[2], float(scale[0] * np.sqrt(variance))


def numerical_hessian(func, x, step):
    """Central-difference Hessian of ``func`` at ``x`` with one step for every axis."""
    n = len(x)
    h = np.zeros((n, n))
    eye = np.eye(n) * step
    f0 = func(x)
    for i in range(n):
        h[i, i] = (func(x + eye[i]) - 2 * f0 + func(x - eye[i])) / step**2
        for j in range(i):
            h[i, j] = h[j, i] = (func(x + eye[i] + eye[j]) - func(x + eye[i] - eye[j])
                                 - func(x - eye[i] + eye[j])
                                 + func(x - eye[i] - eye[j])) / (4 * step**2)
    return h


def thermal_limit(rate, thermal_power, start_power, duration_s):
    """σ_Γ of a ring-down limited by the thermal force (no imprecision), 1/s.

    σ_Γ² = 2ΓP / ∫₀ᵀ |m(t)|² dt with |m(t)|² = |m₀|² e^{−Γt}: the information
    on |ρ| of the AR(1) regression s_{k+1} = ρ s_k + e_k, 2Σ|s_k|²/E|e|², in the
    limit of short blocks (Brockwell & Davis, Time Series: Theory and Methods,
    2nd ed. (Springer, 1991), Sec. 8.8, the least-squares AR estimator's
    variance, from memory). In phonons: σ_Γ/Γ = √(2 n_th / (n_kick (1 − e^{−ΓT}))).
    """
    energy = start_power * (1.0 - np.exp(-rate * duration_s)) / rate
    return float(np.sqrt(2.0 * rate * thermal_power / energy))
