"""Stability of the linear model: the verdict every later stage relies on.

The model is stable when every eigenvalue of its drift matrix A has a
negative real part; the cause of an instability is named in the physicist's
terms (static: the optical spring pulls a frequency through zero; parametric:
anti-damping on the blue side).
"""

import cmath
import dataclasses
import math

import numpy as np

from simulator.errors import OperatingPointError
from simulator.model.optomechanics import mode_states
from simulator.model.units import ordinary

# An eigenvalue of a coupled block b of n states decides stability only when its
# real part is further from zero than this many times n·ε·‖A_b‖_F, the rounding
# error of the eigenvalue computation (ε the unit roundoff).
STABILITY_ROUNDING_MARGIN = 8.0
# |Im λ| below this fraction of |λ|: the growing eigenvalue is real (a static instability).
REAL_EIGENVALUE_RTOL = 1e-9


@dataclasses.dataclass(frozen=True, kw_only=True)
class Stability:
    """Stability verdict of the linear model."""

    stable: bool
    growth_rate_hz: float  # max Re(λ)/2π: amplitude growth (> 0) or decay (< 0)
    cause: str  # plain statement; empty when stable
    eigenvalues_hz: tuple  # λ/2π, complex, sorted by decreasing real part


def stability(model, point):
    """Stability verdict from the eigenvalues of ``model.A``, decided block by block.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    point : simulator.model.operating_point.OperatingPoint
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
    modes = [(mode_states(j).start, mode_states(j).start + 1) for j in range(len(point.modes))]
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
        if abs(top.imag) <= REAL_EIGENVALUE_RTOL * abs(top) + 1e-300:
            cause = ("static instability: a real eigenvalue of the drift matrix is "
                     "positive (det A < 0), the optical spring has pulled a mechanical "
                     "frequency through zero; this is the unstable branch of a bistable "
                     "response or an overly strong drive")
        elif point.detuning_effective_hz > 0 or any(
                t.detuning_effective_hz > 0 for t in point.tones):
            cause = ("parametric instability on blue detuning: optical anti-damping "
                     "exceeds the intrinsic mechanical damping (Γm + Γopt < 0), so the "
                     "mechanics self-oscillates")
        else:
            cause = ("oscillatory instability: an eigenvalue of the drift matrix has a "
                     "positive real part")
    return Stability(stable=stable, growth_rate_hz=float(ordinary(top.real)), cause=cause,
                     eigenvalues_hz=tuple(complex(x) for x in ordinary(lam)))


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
