"""Unstable segments of a schedule: the limits they run within, and what replaces a steady state.

A segment whose linear model is unstable — a blue-detuned pulse beyond the
threshold of parametric instability, where optical anti-damping exceeds the
intrinsic damping (Γm + Γopt < 0; Marquardt, Chen, Clerk and Girvin, PRL 99,
093902 (2007)) — has no steady state, but its exact discretisation
(:func:`simulator.records.discretize.discretize`, Van Loan's integrals exist
for any drift) and its covariance flow
(:func:`simulator.records.protocol.covariance_flow_van_loan`) do. A scheduled
record runs such a segment when it is finite and grows the state's variance
by at most :data:`MAX_VARIANCE_GROWTH`; its effective frequency and
(negative) linewidth come from the drift's eigenvalues.
"""

import numpy as np

from simulator.errors import InputError, OperatingPointError
from simulator.model.statespace import solve_lyapunov

MAX_VARIANCE_GROWTH = 1e12  # largest factor an unstable segment may amplify the variance by
# (e^{2 Re λ T}): 10¹² keeps a thermal state of 10⁵ phonons far inside double precision
# and the digitiser's range meaningful; a longer or stronger pulse is refused.


def check_unstable(i, segment, system, start):
    """Refuse an unstable segment that has no defined start or grows too far."""
    where = f"schedule segment {i} ({segment.name!r})"
    if i == 0 and start == "steady":
        raise InputError(
            f'{where} is unstable ({system.stability.cause}), so it has no steady state '
            'to start from; expected start = "thermal" or "occupation", or a stable first '
            "segment")
    rate = float(np.max(np.linalg.eigvals(system.model.A).real))  # 1/s, > 0
    exponent = 2.0 * rate * segment.duration_s
    if not exponent <= np.log(MAX_VARIANCE_GROWTH):
        raise OperatingPointError(
            f"{where} is unstable ({system.stability.cause}) and would amplify the state's "
            f"variance by e^(2 Re λ T) = e^{exponent:.4g} (amplitude growth rate Re λ/2π = "
            f"{rate / (2 * np.pi):.6g} Hz, duration_s = {segment.duration_s!r}); expected a "
            f"growth of at most {MAX_VARIANCE_GROWTH:.0e}: a shorter or weaker pulse")


def effective_from_eigenvalues(system):
    """Effective frequency and energy damping rate (Hz) of each mode from the drift's poles.

    For each mode the eigenvalue λ of A in the upper half-plane nearest
    i·2π f_m: frequency Im λ/2π, linewidth −2 Re λ/2π (negative when the mode
    grows). What an unstable segment has instead of a steady state.
    """
    lam = np.linalg.eigvals(system.model.A)
    lam = lam[lam.imag > 0]
    freq, width = [], []
    for mode in system.point.modes:
        near = lam[np.argmin(np.abs(lam - 2j * np.pi * mode.frequency_hz))]
        freq.append(float(near.imag / (2 * np.pi)))
        width.append(float(-2.0 * near.real / (2 * np.pi)))
    return freq, width


def uncoupled_covariance(model):
    """Stationary covariance of ``model`` with its optomechanical coupling removed.

    A − coupling is stable (the cavity, the mechanics at their intrinsic
    damping, the detection chain): the start of the states other than the
    mechanics when the first segment is unstable and has no steady state.
    """
    cov = solve_lyapunov(model.A - model.coupling, -model.diffusion)
    return 0.5 * (cov + cov.T)
