"""Stability and the exact steady state of the linear model.

Stability comes from the eigenvalues of the drift matrix A; the stationary
covariance from the Lyapunov equation A V + V Aᵀ + B N Bᵀ = 0, which is exact
for the linear model at any coupling strength. Occupations follow from the
quadrature variances, n = (⟨X²⟩ + ⟨Y²⟩ − 1)/2. Each mode's effective frequency
and linewidth are read from the eigenvalue of A whose eigenvector lies most on
that mode; the weak-coupling formulas of :mod:`simulator.weak_coupling` are
reported beside them as diagnostics.
"""

import cmath
import dataclasses
import math

import numpy as np
from scipy.optimize import linear_sum_assignment

from simulator import weak_coupling
from simulator.errors import OperatingPointError
from simulator.model import linear_model
from simulator.operating_point import operating_point
from simulator.physics import angular, ordinary

# Weak-coupling and exact occupations further apart than this flag strong coupling.
STRONG_COUPLING_TOLERANCE = 0.10

# An eigenvalue of a coupled block b of n states decides stability only when its
# real part is further from zero than this many times n·ε·‖A_b‖_F, the rounding
# error of the eigenvalue computation (ε the unit roundoff).
STABILITY_ROUNDING_MARGIN = 8.0


@dataclasses.dataclass(frozen=True, kw_only=True)
class Stability:
    """Stability verdict of the linear model."""

    stable: bool
    growth_rate_hz: float  # max Re(λ)/2π: amplitude growth (> 0) or decay (< 0)
    cause: str  # plain statement; empty when stable
    eigenvalues_hz: tuple  # λ/2π, complex, sorted by decreasing real part


@dataclasses.dataclass(frozen=True, kw_only=True)
class ModeState:
    """Steady-state and diagnostic quantities of one mechanical mode.

    Rates are ordinary frequencies (Hz). ``optical_damping_hz`` is an energy
    damping rate; ``optical_spring_hz`` the shift of the resonance frequency.
    """

    name: str
    occupation: float
    effective_frequency_hz: float
    effective_linewidth_hz: float
    anti_stokes_rate_hz: float  # A−/2π
    stokes_rate_hz: float  # A+/2π
    optical_damping_hz: float
    optical_spring_hz: float
    backaction_limit: float  # n_min
    weak_coupling_occupation: float


@dataclasses.dataclass(frozen=True, kw_only=True)
class SteadyState:
    """Exact stationary state of the linear model."""

    states: tuple
    covariance: np.ndarray  # symmetrised, vacuum = ½·identity
    cavity_occupation: float
    modes: tuple  # ModeState per mechanical mode


def stability(model, point):
    """Stability verdict from the eigenvalues of ``model.A``, decided block by block.

    Parameters
    ----------
    model : simulator.statespace.StateSpace
    point : simulator.operating_point.OperatingPoint
        Used to name the cause in the physicist's terms.

    Notes
    -----
    The states split into blocks that drive one another only one way (the
    strongly connected components of the graph of A's non-zero entries: an
    undriven mechanical mode, a laser-noise filter, the cavity with the modes
    coupled to it). A is block triangular in that order, so its eigenvalues
    are those of the blocks, and each block is judged on its own scale:

    - one or two states by the Routh–Hurwitz conditions, a < 0, or tr < 0 and
      det > 0, exact up to relative rounding whatever the damping ratio;
    - a larger block by its eigenvalues, whose real parts are trusted beyond
      ``STABILITY_ROUNDING_MARGIN``·n·ε·‖A_b‖_F, the size of the rounding
      error of the QR algorithm (Golub & Van Loan, Matrix Computations, 4th
      ed. (2013), Sec. 7.5.6);
    - an eigenvalue of a mechanical mode inside that band is recomputed on
      the mode's own scale from the mode's 2 × 2 block and the exact
      self-energy of the rest, λ = eig(A_mm + A_mr (λ − A_rr)⁻¹ A_rm) (the
      Schur complement, solved by fixed-point iteration), whose real part is
      accurate to ε times the mode's damping and self-energy.

    A real part that stays inside its band cannot be told from zero and is
    reported as not stable, with the band.
    """
    modes = [(2 + 2 * j, 3 + 2 * j) for j in range(len(point.modes))]
    lam, band = map(np.concatenate, zip(*(_block_eigenvalues(model.A, idx, modes)
                                          for idx in _coupled_blocks(model.A)), strict=True))
    order = np.argsort(-lam.real)
    lam, band = lam[order], band[order]
    top = lam[0]
    stable = bool(np.all(lam.real < -band))
    unresolved = np.abs(lam.real) <= band
    cause = ""
    if not stable and not np.any(lam.real > band):
        cause = ("a damping rate is below the rounding error of the eigenvalue computation "
                 f"({ordinary(band[unresolved].max()):.3g} Hz for the block of states it "
                 "belongs to), so the sign of the growth rate cannot be decided; the "
                 "steady state would not be reliable")
    elif not stable:
        if abs(top.imag) <= 1e-9 * abs(top) + 1e-300:
            cause = ("static instability: a real eigenvalue of the drift matrix is "
                     "positive (det A < 0), the optical spring has pulled a mechanical "
                     "frequency through zero; this is the unstable branch of a bistable "
                     "response or an overly strong drive")
        elif point.detuning_effective_hz > 0:
            cause = ("parametric instability on blue detuning: optical anti-damping "
                     "exceeds the intrinsic mechanical damping (Γm + Γopt < 0), so the "
                     "mechanics self-oscillates")
        else:
            cause = ("oscillatory instability: an eigenvalue of the drift matrix has a "
                     "positive real part")
    return Stability(stable=stable, growth_rate_hz=float(ordinary(top.real)), cause=cause,
                     eigenvalues_hz=tuple(complex(x) / (2 * np.pi) for x in lam))


def _coupled_blocks(a):
    """State indices of each strongly connected block of ``a`` (see :func:`stability`)."""
    from scipy.sparse.csgraph import connected_components

    count, labels = connected_components(a != 0, directed=True, connection="strong")
    return [np.flatnonzero(labels == k) for k in range(count)]


def _block_eigenvalues(a, idx, modes):
    """Eigenvalues of the block ``idx`` of ``a`` and the rounding band of each real part.

    A block of one or two states has exact eigenvalues (band 0): a, or for
    [[a, b], [c, d]] half the trace ± the root of (tr/2)² − det, the stable
    form of the quadratic's roots, so their signs are those of the
    Routh–Hurwitz conditions tr < 0, det > 0 whatever the damping ratio.
    """
    b = a[np.ix_(idx, idx)]
    if len(idx) == 1:
        return np.array([complex(b[0, 0])]), np.zeros(1)
    eps = np.finfo(float).eps
    if len(idx) == 2:
        half, det = (b[0, 0] + b[1, 1]) / 2, b[0, 0] * b[1, 1] - b[0, 1] * b[1, 0]
        disc = half * half - det
        if disc < 0:
            root = 1j * np.sqrt(-disc)
            return np.array([half + root, half - root]), np.zeros(2)
        big = half + math.copysign(np.sqrt(disc), half)
        return np.array([big, det / big if big else 0.0], dtype=complex), np.zeros(2)
    lam = np.linalg.eigvals(b).astype(complex)
    band = np.full(len(idx), STABILITY_ROUNDING_MARGIN * len(idx) * eps * np.linalg.norm(b))
    if np.all(np.abs(lam.real) > band):
        return lam, band
    local = {int(k): i for i, k in enumerate(idx)}
    for q, p in modes:
        if q in local and p in local:
            refined = _mode_eigenvalue(b, [local[q], local[p]])
            if refined is not None:
                mu, mu_band = refined
                for target in {mu, mu.conjugate()}:
                    k = int(np.argmin(np.abs(lam - target)))
                    lam[k], band[k] = target, mu_band
    return lam, band


def _mode_eigenvalue(b, pair, iterations=50):
    """A mode's eigenvalue (Im ≥ 0) from its 2 × 2 block and the rest's self-energy.

    Returns ``(λ, band)`` or ``None`` when the fixed-point iteration does not
    settle (strong coupling, where the mode is no longer a small perturbation).
    """
    rest = [k for k in range(len(b)) if k not in pair]
    a_mm, a_mr = b[np.ix_(pair, pair)], b[np.ix_(pair, rest)]
    a_rm, a_rr = b[np.ix_(rest, pair)], b[np.ix_(rest, rest)]
    eps = np.finfo(float).eps
    mu = complex(np.trace(a_mm) / 2, np.sqrt(max(np.linalg.det(a_mm) - np.trace(a_mm) ** 2
                                                  / 4, 0.0)))
    for _ in range(iterations):
        sigma = a_mr @ np.linalg.solve(mu * np.eye(len(rest)) - a_rr, a_rm)
        (m11, m12), (m21, m22) = a_mm + sigma
        # closed form: the square root keeps the small real part to relative accuracy
        root = cmath.sqrt(((m11 - m22) / 2) ** 2 + m12 * m21)
        half = (m11 + m22) / 2
        new = max((half + root, half - root), key=lambda z: z.imag)
        band = STABILITY_ROUNDING_MARGIN * 2 * eps * (np.abs(np.diag(a_mm)).max()
                                                       + np.linalg.norm(sigma))
        settled = abs(new - mu) <= 16 * eps * abs(new) + 0.1 * band
        mu = new
        if settled:
            return mu, band
    return None


def require_stable(verdict):
    """Raise :class:`OperatingPointError` if the verdict is unstable."""
    if not verdict.stable:
        raise OperatingPointError(
            f"the operating point is unstable (amplitude growth rate "
            f"{verdict.growth_rate_hz:.6g} Hz): {verdict.cause}. Change the detuning, "
            "power or damping; the steady state does not exist here.")


def steady_state(scenario=None, *, model=None, point=None):
    """Exact steady state of a scenario's linear model.

    Parameters
    ----------
    scenario : simulator.scenario.Scenario, optional
        Used to build ``point`` and ``model`` where they are not given.
    model : StateSpace, optional
    point : OperatingPoint, optional

    Returns
    -------
    SteadyState

    Raises
    ------
    OperatingPointError
        If the operating point is unstable (no steady state exists).
    """
    if point is None:
        point = operating_point(scenario)
    if model is None:
        model = linear_model(scenario, point)
    require_stable(stability(model, point))
    v = model.covariance()
    cavity_occupation = (v[0, 0] + v[1, 1] - 1.0) / 2.0
    frequencies, linewidths = effective_mechanics(model, len(point.modes))
    kappa, delta = angular([point.cavity_linewidth_hz, point.detuning_effective_hz])
    kappa_in_fraction = 1 - point.external_linewidth_hz / point.cavity_linewidth_hz
    n_cavity_bath = kappa_in_fraction * point.cavity_bath_occupation
    modes = []
    for j, mode in enumerate(point.modes):
        s = 2 + 2 * j
        rates = dict(g=float(angular(mode.coupling_rate_hz)), kappa=kappa, detuning=delta,
                     frequency=float(angular(mode.frequency_hz)))
        a_minus, a_plus = weak_coupling.scattering_rates(**rates)
        modes.append(ModeState(
            name=mode.name,
            occupation=float((v[s, s] + v[s + 1, s + 1] - 1.0) / 2.0),
            effective_frequency_hz=frequencies[j], effective_linewidth_hz=linewidths[j],
            anti_stokes_rate_hz=float(ordinary(a_minus)),
            stokes_rate_hz=float(ordinary(a_plus)),
            optical_damping_hz=float(ordinary(a_minus - a_plus)),
            optical_spring_hz=float(ordinary(weak_coupling.optical_spring(**rates))),
            backaction_limit=float(weak_coupling.backaction_limit(**rates)),
            weak_coupling_occupation=float(weak_coupling.weak_coupling_occupation(
                **rates, linewidth=float(angular(mode.linewidth_hz)),
                bath_occupation=mode.bath_occupation,
                cavity_occupation=n_cavity_bath + _laser_occupation(scenario, point, mode)))))
    return SteadyState(states=model.states, covariance=v,
                       cavity_occupation=float(cavity_occupation), modes=tuple(modes))


def _laser_occupation(scenario, point, mode):
    """η_c n_c: the drive's classical noise at Ωm as an input occupation (0 without)."""
    from simulator import laser_noise

    if scenario is None or laser_noise.is_quiet(scenario):
        return 0.0
    share = point.external_linewidth_hz / point.cavity_linewidth_hz
    return share * float(laser_noise.input_occupation(scenario, point, mode.frequency_hz))


def effective_mechanics(model, n_modes):
    """Effective frequency and linewidth (Hz) of each mechanical mode.

    The eigenvalue λ chosen for each mode by :func:`mode_eigenvalues` gives
    frequency |Im λ|/2π and energy linewidth −2 Re λ/2π.
    """
    chosen = mode_eigenvalues(model, n_modes)
    return (tuple(float(x) for x in np.abs(chosen.imag) / (2 * np.pi)),
            tuple(float(x) for x in -2 * chosen.real / (2 * np.pi)))


def mode_eigenvalues(model, n_modes):
    """Each mechanical mode's eigenvalue of the drift matrix (the one with Im λ ≥ 0).

    Taken from the cavity–mechanics block alone (the first 2 + 2·modes
    states): classical laser-noise filters drive that block and detection
    states are driven by it, neither feeds back, so its eigenvalues are
    exactly eigenvalues of the whole A, and a filter pole next to a mode
    cannot be mistaken for it. Each mode is matched to the eigenvalue whose
    eigenvector has the largest weight on that mode's quadratures, one
    eigenvalue per mode (an assignment problem); past normal-mode splitting
    the assignment picks the hybrid mode that is more mechanical.
    """
    size = 2 + 2 * n_modes
    lam, vec = np.linalg.eig(model.A[:size, :size])
    candidates = np.flatnonzero(lam.imag >= -1e-12 * np.abs(lam))
    if len(candidates) < n_modes:
        candidates = np.arange(len(lam))
    weights = np.abs(vec) ** 2
    weights /= weights.sum(axis=0, keepdims=True)
    score = np.array([[weights[2 + 2 * j, k] + weights[3 + 2 * j, k] for k in candidates]
                      for j in range(n_modes)])
    rows, cols = linear_sum_assignment(-score) if n_modes else ((), ())
    chosen = np.zeros(n_modes, dtype=complex)
    for j, c in zip(rows, cols, strict=False):
        chosen[j] = lam[candidates[c]]
    return chosen
