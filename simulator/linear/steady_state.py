"""The exact steady state of the linear model.

For a stable system (:mod:`simulator.model.stability`) the stationary
covariance comes from the Lyapunov equation A V + V Aᵀ + B N Bᵀ = 0, which is exact
for the linear model at any coupling strength. Occupations follow from the
quadrature variances, n = (⟨X²⟩ + ⟨Y²⟩ − 1)/2. Each mode's effective frequency
and linewidth are read from the eigenvalue of A whose eigenvector lies most on
that mode; the weak-coupling formulas of :mod:`simulator.linear.weak_coupling` are
reported beside them as diagnostics.
"""

import dataclasses

import numpy as np
from scipy.optimize import linear_sum_assignment

from simulator.linear import weak_coupling
from simulator.model.optomechanics import device_size, mode_states
from simulator.model.system import as_system
from simulator.model.units import angular, ordinary

# Weak-coupling and exact occupations further apart than this flag strong coupling.
STRONG_COUPLING_TOLERANCE = 0.10
# An eigenvalue counts as in the upper half-plane (a mode's, not its mirror's) down to
# Im λ = −this × |λ|: an overdamped mode's real eigenvalue carries rounding in Im λ.
UPPER_HALF_RTOL = 1e-12


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
    cavity_occupation: float  # of the drive's field (with several tones, each has its own)
    modes: tuple  # ModeState per mechanical mode


def steady_state(system):
    """Exact steady state of a system's linear model.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one (:func:`simulator.model.system.as_system`).

    Returns
    -------
    SteadyState

    Raises
    ------
    OperatingPointError
        If the operating point is unstable (no steady state exists).
    """
    system = as_system(system, several_tones=True)
    system = system.require_stable()
    scenario, point, model = system.scenario, system.point, system.model
    v = model.covariance()
    cavity_occupation = occupation(v, slice(0, 2))
    if scenario.detection.backaction_evading:  # one field; the mechanics' frame turns at ν
        from simulator.model.backaction_evasion import lab_mechanics

        frequencies, linewidths = map(tuple, zip(lab_mechanics(scenario, point, model),
                                                 strict=True))
    else:
        frequencies, linewidths = effective_mechanics(model, len(point.modes),
                                                      max(len(point.tones), 1))
    if point.several_tones:
        return SteadyState(states=model.states, covariance=v,
                           cavity_occupation=float(cavity_occupation),
                           modes=_summed_mode_states(scenario, point, v, frequencies,
                                                     linewidths))
    kappa, delta = angular([point.cavity_linewidth_hz, point.detuning_effective_hz])
    kappa_in_fraction = 1 - point.external_linewidth_hz / point.cavity_linewidth_hz
    n_cavity_bath = kappa_in_fraction * point.cavity_bath_occupation
    modes = []
    for j, mode in enumerate(point.modes):
        rates = dict(g=float(angular(mode.coupling_rate_hz)), kappa=kappa, detuning=delta,
                     frequency=float(angular(mode.frequency_hz)))
        a_minus, a_plus = weak_coupling.scattering_rates(**rates)
        modes.append(ModeState(
            name=mode.name,
            occupation=occupation(v, mode_states(j)),
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


def _summed_mode_states(scenario, point, v, frequencies, linewidths):
    """Mode states with several tones: the weak-coupling rates of every tone added.

    Each tone k on cavity mode c scatters at A∓,k = g_k² κc / (κc²/4 + (Δk ± Ωm)²);
    the rates add over tones (Aspelmeyer, Kippenberg & Marquardt, Rev. Mod.
    Phys. 86, 1391 (2014), Sec. VII), so n_f = [Γm n_th + Σk A+,k (n_c,k + 1) +
    Σk A−,k n_c,k + H] / (Γm + Σk (A−,k − A+,k)), n_c,k the loss-weighted bath
    occupation of tone k's cavity mode and H the heating by the tones' classical
    laser noise, tones of one laser interfering
    (:func:`simulator.linear.tone_rates.classical_heating`).
    """
    from simulator.linear.tone_rates import classical_heating

    modes = []
    for j, mode in enumerate(point.modes):
        om, gm = angular([mode.frequency_hz, mode.linewidth_hz])
        a_minus = a_plus = spring = heating = 0.0
        for tone in point.tones:
            cav = point.cavity_modes[tone.cavity_mode]
            rates = dict(g=float(angular(tone.coupling_rates_hz[j])),
                         kappa=float(angular(cav.linewidth_hz)),
                         detuning=float(angular(tone.detuning_effective_hz)), frequency=om)
            down, up = weak_coupling.scattering_rates(**rates)
            n_c = (1 - cav.external_linewidth_hz / cav.linewidth_hz) * cav.bath_occupation
            a_minus, a_plus = a_minus + down, a_plus + up
            spring += weak_coupling.optical_spring(**rates)
            heating += up * (n_c + 1) + down * n_c
        heating += classical_heating(scenario, point, j)
        with np.errstate(divide="ignore", invalid="ignore"):
            n_min = a_plus / (a_minus - a_plus)
            n_weak = (gm * mode.bath_occupation + heating) / (gm + a_minus - a_plus)
        modes.append(ModeState(
            name=mode.name, occupation=occupation(v, mode_states(j)),
            effective_frequency_hz=frequencies[j], effective_linewidth_hz=linewidths[j],
            anti_stokes_rate_hz=float(ordinary(a_minus)), stokes_rate_hz=float(ordinary(a_plus)),
            optical_damping_hz=float(ordinary(a_minus - a_plus)),
            optical_spring_hz=float(ordinary(spring)), backaction_limit=float(n_min),
            weak_coupling_occupation=float(n_weak)))
    return tuple(modes)


def _laser_occupation(scenario, point, mode):
    """η_c n_c: the drive's classical noise at Ωm as an input occupation (0 without)."""
    from simulator.model import laser_noise

    if laser_noise.is_quiet(scenario):
        return 0.0
    share = point.external_linewidth_hz / point.cavity_linewidth_hz
    return share * float(laser_noise.input_occupation(scenario, point, mode.frequency_hz))


def occupation(covariance, states):
    """n = (⟨X²⟩ + ⟨Y²⟩ − 1)/2 of the quadrature pair at ``states`` (a slice of two).

    Symmetrised covariance with vacuum variance ½ (docs/physics.md §1).
    """
    x, y = range(states.start, states.stop)
    return float((covariance[x, x] + covariance[y, y] - 1.0) / 2.0)


def effective_mechanics(model, n_modes, n_tones=1):
    """Effective frequency and linewidth (Hz) of each mechanical mode.

    The eigenvalue λ chosen for each mode by :func:`mode_eigenvalues` gives
    frequency |Im λ|/2π and energy linewidth −2 Re λ/2π.
    """
    chosen = mode_eigenvalues(model, n_modes, n_tones)
    return (tuple(float(x) for x in ordinary(np.abs(chosen.imag))),
            tuple(float(x) for x in ordinary(-2 * chosen.real)))


def mode_eigenvalues(model, n_modes, n_tones=1):
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
    size = device_size(n_modes, n_tones)
    lam, vec = np.linalg.eig(model.A[:size, :size])
    candidates = np.flatnonzero(lam.imag >= -UPPER_HALF_RTOL * np.abs(lam))
    if len(candidates) < n_modes:
        candidates = np.arange(len(lam))
    weights = np.abs(vec) ** 2
    weights /= weights.sum(axis=0, keepdims=True)
    score = np.array([[weights[mode_states(j), k].sum() for k in candidates]
                      for j in range(n_modes)])
    rows, cols = linear_sum_assignment(-score) if n_modes else ((), ())
    chosen = np.zeros(n_modes, dtype=complex)
    for j, c in zip(rows, cols, strict=False):
        chosen[j] = lam[candidates[c]]
    return chosen
