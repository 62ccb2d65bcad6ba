"""Stability of the linear model: the verdict every later stage relies on.

The model is stable when every eigenvalue of its drift matrix A has a
negative real part; the cause of an instability is named in the physicist's
terms (static: the optical spring pulls a frequency through zero; parametric:
anti-damping on the blue side).
"""

import dataclasses

import numpy as np

from simulator.errors import OperatingPointError
from simulator.model.units import ordinary


@dataclasses.dataclass(frozen=True, kw_only=True)
class Stability:
    """Stability verdict of the linear model."""

    stable: bool
    growth_rate_hz: float  # max Re(λ)/2π: amplitude growth (> 0) or decay (< 0)
    cause: str  # plain statement; empty when stable
    eigenvalues_hz: tuple  # λ/2π, complex, sorted by decreasing real part


def stability(model, point):
    """Stability verdict from the eigenvalues of ``model.A``.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
    point : simulator.model.operating_point.OperatingPoint
        Used to name the cause in the physicist's terms.
    """
    lam = model.eigenvalues()
    scale = np.max(np.abs(np.diag(model.A))) + 1e-300
    top = lam[0]
    stable = bool(top.real < -1e-12 * scale)
    cause = ""
    if not stable:
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


def require_stable(verdict):
    """Raise :class:`OperatingPointError` if the verdict is unstable."""
    if not verdict.stable:
        raise OperatingPointError(
            f"the operating point is unstable (amplitude growth rate "
            f"{verdict.growth_rate_hz:.6g} Hz): {verdict.cause}. Change the detuning, "
            "power or damping; the steady state does not exist here.")
