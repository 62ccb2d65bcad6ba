"""Maximum-likelihood fits of spectra with the statistics of averaged periodogram bins.

An averaged periodogram bin P_k with K averages is Gamma distributed with
shape K and mean S(f_k; θ) (Whittle approximation for stationary Gaussian
records). The negative log-likelihood, up to a constant, is

    ℓ(θ) = K Σ_k [ln S(f_k; θ) + P_k / S(f_k; θ)],

its expected (Fisher) information I_ij = K Σ_k ∂_i S ∂_j S / S², and the
parameter covariance at the optimum is I⁻¹. Unweighted least squares on the
same data is offered only to demonstrate its bias on peak areas.

References
----------
Whittle, Ark. Mat. 2, 423 (1953) (the spectral likelihood);
Nørrelykke & Flyvbjerg, Rev. Sci. Instrum. 81, 075103 (2010), Eqs. (9)–(12)
(Gamma statistics of averaged bins; least-squares bias).
"""

import dataclasses

import numpy as np
import scipy.optimize

from simulator.errors import InputError


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class FitResult:
    """Parameters, covariance and diagnostics of a spectral fit."""

    names: tuple
    values: np.ndarray
    covariance: np.ndarray
    negative_log_likelihood: float
    converged: bool
    method: str
    message: str = ""

    @property
    def errors(self):
        """One-standard-deviation uncertainties √diag(covariance)."""
        return np.sqrt(np.clip(np.diag(self.covariance), 0, None))

    def as_dict(self):
        """``{name: (value, uncertainty)}``."""
        return {n: (float(v), float(e)) for n, v, e in zip(self.names, self.values,
                                                            self.errors, strict=True)}


def whittle_nll(model, theta, frequency, density, averages):
    """Negative log-likelihood ℓ(θ) of Gamma-distributed bins (constant dropped)."""
    s = model(frequency, theta)
    if np.any(~np.isfinite(s)) or np.any(s <= 0):
        return np.inf
    return float(averages * np.sum(np.log(s) + density / s))


def _jacobian(model, theta, frequency, scale, jacobian=None):
    """(S, ∂S/∂θ): the model's analytic derivatives if given, else central differences."""
    if jacobian is not None:
        return jacobian(frequency, theta)
    base = model(frequency, theta)
    jac = np.empty((theta.size, frequency.size))
    for i in range(theta.size):
        step = 1e-6 * scale[i]
        up, down = theta.copy(), theta.copy()
        up[i] += step
        down[i] -= step
        jac[i] = (model(frequency, up) - model(frequency, down)) / (2 * step)
    return base, jac


def _scale(theta):
    return np.where(theta != 0, np.abs(theta), 1.0)


def fisher_information(model, theta, frequency, averages, scale=None, jacobian=None):
    """Expected information I_ij = K Σ ∂_i S ∂_j S / S² of the Whittle likelihood.

    ``jacobian(frequency, θ) -> (S, ∂S/∂θ)``, optional: analytic derivatives
    (else central differences with steps 1e-6 of each parameter's scale).
    """
    theta = np.asarray(theta, dtype=float)
    scale = _scale(theta) if scale is None else scale
    s, jac = _jacobian(model, theta, frequency, scale, jacobian)
    return averages * (jac / s) @ (jac / s).T


def fit_whittle(model, frequency, density, averages, initial, *, names=None,
                lower=None, upper=None, jacobian=None):
    """Maximum-likelihood fit of ``model(frequency, θ)`` to an averaged periodogram.

    Parameters
    ----------
    model : callable
        ``model(frequency, theta) -> expected density`` (positive).
    frequency, density : ndarray
        Bin frequencies and averaged periodogram values.
    averages : int
        Gamma shape K of each bin (segments averaged × bins block-averaged).
    initial : array_like
        Starting parameters; also sets the scale of each parameter.
    names : sequence of str, optional
    lower, upper : array_like, optional
        Bounds on the parameters.
    jacobian : callable, optional
        ``jacobian(frequency, theta) -> (S, ∂S/∂θ)`` with ∂S/∂θ of shape
        (parameters, frequencies): analytic derivatives for the gradient of
        ℓ, K Σ ∂S (S − P)/S², the scoring steps and the information (else
        finite differences, a model evaluation or two per parameter).

    Returns
    -------
    FitResult
        Covariance from the expected information at the optimum.
    """
    theta0 = np.asarray(initial, dtype=float)
    names = tuple(names) if names is not None else tuple(f"p{i}" for i in range(theta0.size))
    if len(names) != theta0.size:
        raise InputError(f"{len(names)} parameter names for {theta0.size} parameters")
    if averages < 1:
        raise InputError(f"averages = {averages}; expected at least 1")
    scale = _scale(theta0)
    bounds = None
    if lower is not None or upper is not None:
        lo = np.full(theta0.size, -np.inf) if lower is None else np.asarray(lower, float)
        hi = np.full(theta0.size, np.inf) if upper is None else np.asarray(upper, float)
        bounds = list(zip(lo / scale, hi / scale, strict=True))
    f, p = np.asarray(frequency, float), np.asarray(density, float)

    def objective(u):
        return whittle_nll(model, u * scale, f, p, averages) / f.size

    def objective_and_gradient(u):
        s, jac = jacobian(f, u * scale)
        if np.any(~np.isfinite(s)) or np.any(s <= 0):
            return np.inf, np.zeros_like(u)
        value = averages * np.sum(np.log(s) + p / s) / f.size
        return value, averages * scale * (jac @ ((s - p) / s**2)) / f.size

    with np.errstate(invalid="ignore", over="ignore"):  # trial steps may leave the domain
        res = scipy.optimize.minimize(objective if jacobian is None else objective_and_gradient,
                                      theta0 / scale, jac=jacobian is not None,
                                      method="L-BFGS-B" if bounds else "BFGS", bounds=bounds,
                                      options={"maxiter": 2000})
    theta, converged = _fisher_scoring(model, res.x * scale, f, p, averages, scale, bounds,
                                       jacobian=jacobian)
    info = fisher_information(model, theta, f, averages, scale, jacobian)
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        cov = np.full_like(info, np.nan)
    return FitResult(names=names, values=theta, covariance=cov,
                     negative_log_likelihood=whittle_nll(model, theta, f, p, averages),
                     converged=bool(converged or res.success), method="whittle",
                     message=str(res.message))


def _fisher_scoring(model, theta, f, p, averages, scale, bounds, iterations=50, *,
                    jacobian=None):
    """Polish an optimum by Fisher scoring θ ← θ + I⁻¹U with step halving.

    U = K Σ ∂S (P − S)/S² is the score. Converges quadratically near the
    optimum, where quasi-Newton steps stall on badly scaled parameters.
    """
    lo = np.array([b[0] for b in bounds]) * scale if bounds else -np.inf
    hi = np.array([b[1] for b in bounds]) * scale if bounds else np.inf
    current = whittle_nll(model, theta, f, p, averages)
    for _ in range(iterations):
        s, jac = _jacobian(model, theta, f, scale, jacobian)
        score = averages * jac @ ((p - s) / s**2)
        info = averages * (jac / s) @ (jac / s).T
        try:
            step = np.linalg.solve(info, score)
        except np.linalg.LinAlgError:
            return theta, False
        for _ in range(30):
            trial = np.clip(theta + step, lo, hi)
            value = whittle_nll(model, trial, f, p, averages)
            if value <= current:
                break
            step /= 2
        else:
            return theta, True  # no descent direction left: at the optimum
        done = abs(current - value) < 1e-12 * max(1.0, abs(current))
        theta, current = trial, value
        if done:
            return theta, True
    return theta, False


def fit_least_squares(model, frequency, density, initial, *, names=None, log=False):
    """Unweighted least-squares fit, for comparison only.

    With ``log=True`` the residuals are ln P − ln S, the common practice of
    fitting a spectrum on a logarithmic scale. Since E[ln P] = ln S + ψ(K) −
    ln K for Gamma bins, that biases every amplitude by the factor
    exp(ψ(K))/K (Nørrelykke & Flyvbjerg 2010, Sec. IV). Plain residuals are
    unbiased only to first order and far less efficient than the likelihood.
    """
    theta0 = np.asarray(initial, dtype=float)
    names = tuple(names) if names is not None else tuple(f"p{i}" for i in range(theta0.size))
    scale = _scale(theta0)
    if log:
        def residual(u):
            return np.log(np.clip(model(frequency, u * scale), 1e-300, None)) - np.log(density)
    else:
        def residual(u):
            return model(frequency, u * scale) - density
    res = scipy.optimize.least_squares(residual, theta0 / scale, method="lm",
                                       xtol=1e-12, ftol=1e-12)
    jac = res.jac / scale
    dof = max(frequency.size - theta0.size, 1)
    sigma2 = float(np.sum(res.fun**2) / dof)
    try:
        cov = sigma2 * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov = np.full((theta0.size, theta0.size), np.nan)
    return FitResult(names=names, values=res.x * scale, covariance=cov,
                     negative_log_likelihood=np.nan, converged=bool(res.success),
                     method="log-least-squares" if log else "least-squares",
                     message=str(res.message))
