"""Feasibility: Fisher information of a record, Cramér–Rao bounds, integration time.

For a stationary Gaussian record of duration T the Whittle approximation
gives the Fisher information about parameters θ as

    F_ij = T ∫ dν ∂_i S(ν) ∂_j S(ν) / S(ν)²,

over the record's frequency axis (two-sided for IQ heterodyne, f ≥ 0 for a
real record): every 1/T-wide bin of the periodogram is exponentially
distributed about S. So the information grows linearly in T and everything
below is quoted per unit time (1/s); the Cramér–Rao bound on θ_i after T is
√((F₁⁻¹)_ii / T). S is that of the samples actually recorded: the
integrate-and-dump digitiser's spectral matrix of the record's real channels
on |f| < fs/2 (aliased × sinc², :mod:`simulator.analysis.information`).

Two uses:
- :func:`fisher_matrix`: information about any scenario parameters (by path:
  bath occupation or temperature, coupling, efficiency, ...) from the exact
  analytic spectrum of the samples, derivatives by central differences of
  re-solved models; :func:`occupation_bound` turns it into the bound on the
  mode occupation.
- :func:`asymmetry_time`: time to separate the quantum sideband asymmetry
  from zero at a chosen significance. In the reference lineshape model of
  :mod:`simulator.analysis.thermometry` the cavity-corrected areas are
  c_AS = c·n and c_S = c·(n + 1); the asymmetry is their difference
  d = c_S − c_AS = c, the "+1" that quantum mechanics predicts and a
  classical oscillator lacks. (The normalisation c itself is not identifiable
  from one spectrum without calibration, so the testable statement is d ≠ 0.)
  With every lineshape parameter free, T = z² (F₁⁻¹)_dd / d².

References
----------
Whittle, Ark. Mat. 2, 423 (1953); Cramér, Mathematical Methods of Statistics
(1946), Sec. 32.3; Rao, Bull. Calcutta Math. Soc. 37, 81 (1945).
"""

import dataclasses
import math

import numpy as np

from simulator.analysis.feasibility_engine import (  # noqa: F401 (part of this module's API)
    _CovarianceResponse,
    _finite,
    _fisher,
    _grid,
    _grid_of_form,
    _sample_rate,
    _system,
)
from simulator.analysis.information import SteppedModels
from simulator.errors import InputError

# Default significance (standard deviations) for "the asymmetry is resolved".
ASYMMETRY_SIGNIFICANCE = 5.0


def fisher_matrix(system, paths, *, frequency_hz=None, sample_rate_hz=None):
    """Fisher information per unit time (1/s) about the parameters at ``paths``.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    paths : sequence of str
        Scenario parameter paths, e.g. ``["mechanics[0].bath_occupation",
        "mechanics[0].coupling_hz", "detection.efficiency"]``.
    frequency_hz : ndarray, optional
        Integration grid (Hz) on the record's axis; only |f| ≤ fs/2 is used
        (the integrand is even in f). Default: a grid resolving every line of
        the sampled record.
    sample_rate_hz : float, optional
        The digitiser's rate; default ``digitizer.sample_rate_hz`` or the
        automatic rate of :func:`simulator.model.sample_rate.automatic_sample_rate`;
        ``math.inf`` for the continuous record (no digitiser).

    Returns
    -------
    ndarray (k, k)
        In units of 1/(s · unit_i · unit_j).

    Notes
    -----
    The record is the p real channels of the detection chain (I and Q for
    an iq record; the one photocurrent of homodyne and if records), sampled
    by integrate-and-dump: a real stationary Gaussian vector sequence whose
    spectral matrix S(f) on |f| < fs/2 is the continuous one aliased and
    multiplied by sinc²(f/fs), so

        F_ij / T = ½ ∫_{−fs/2}^{fs/2} df tr[S⁻¹ ∂_i S S⁻¹ ∂_j S]

    (Whittle 1953). This includes everything the chain adds (amplifier
    noise, electronic noise, filters, single-ended detection), what the
    digitiser takes (sinc², aliased noise, the Nyquist band) and the
    correlation of the two sidebands of a heterodyne record, which a
    scalar formula over the complex I + iQ spectrum would miss.
    """
    from simulator.model.units import angular

    system = _system(system, "simulator.analysis.feasibility.fisher_matrix")
    fs = _sample_rate(system, sample_rate_hz)
    if frequency_hz is not None:
        omega = angular(frequency_hz)
    else:  # None: the grid of the sampled record's own form
        omega = None if math.isfinite(fs) else _grid(system, fs)
    return _fisher(system, [tuple(paths)], omega, fs)[0]


@dataclasses.dataclass(frozen=True, kw_only=True)
class OccupationBound:
    """Cramér–Rao bound on the occupation of one mode, per √(measurement time)."""

    mode: str
    occupation: float
    paths: tuple  # parameters estimated jointly (nuisance parameters included)
    error_one_second: float  # σ_n after T = 1 s
    fisher_per_second: np.ndarray
    sample_rate_hz: float = math.nan  # of the samples the bound is for
    method: str = "pole-residue"  # how the spectra were evaluated (or why the resolvent)

    def error_after(self, duration_s):
        """Bound on the standard deviation of n after ``duration_s`` seconds."""
        return self.error_one_second / np.sqrt(duration_s)


def default_paths(scenario, mode=0):
    """Bath (occupation or temperature) and coupling of the mode; detection efficiency.

    The intrinsic mechanical linewidth is taken as known (it is measured
    separately, by ring-down, in common practice): in the spectrum it enters
    almost only through Γm·n_th, so estimating it jointly with the bath makes
    the information matrix nearly singular. Pass ``paths`` to choose others.
    The coupling is that of the detected tone's cavity mode (``detection.tone``):
    ``mechanics[j].coupling_hz`` for the [cavity] mode, else the
    ``couplings[i].coupling_hz`` of the pair.
    """
    m = scenario.mechanics[mode]
    bath = "bath_occupation" if m.bath_occupation is not None else "bath_temperature_k"
    return (f"mechanics[{mode}].{bath}", _coupling_path(scenario, mode), "detection.efficiency")


def _coupling_path(scenario, mode):
    """Path of g0 between the detected tone's cavity mode and mechanical mode ``mode``."""
    from simulator.model.detected_tone import detected_tone_names

    detected = detected_tone_names(scenario)[0]
    cavity = next((t.cavity_mode for t in scenario.tones if t.name == detected), None)
    for i, pair in enumerate(scenario.couplings):
        if pair.cavity_mode == cavity and pair.mechanics == scenario.mechanics[mode].name:
            return f"couplings[{i}].coupling_hz"
    return f"mechanics[{mode}].coupling_hz"


def occupation_bound(system, mode=0, paths=None, *, sample_rate_hz=None):
    """Cramér–Rao bound on the exact occupation n of ``mode`` from the record.

    n is a function of the parameters at ``paths`` (the first is the bath);
    σ_n² T = ∇n · F₁⁻¹ · ∇n with ∇n by central differences of the Lyapunov
    steady state. All parameters are treated as unknown, so the bound includes
    the cost of estimating the nuisance parameters. The record is the
    sampled one (:func:`fisher_matrix`), at ``sample_rate_hz`` if given.
    """
    system = _system(system, "simulator.analysis.feasibility.occupation_bound")
    paths = tuple(paths) if paths is not None else default_paths(system.scenario, mode)
    return occupation_bounds(system, [mode], [paths], sample_rate_hz=sample_rate_hz)[0]


def occupation_bounds(system, modes=None, paths=None, steady=None, *, sample_rate_hz=None):
    """:func:`occupation_bound` of several modes, sharing one pass over the spectrum.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    modes : sequence of int, optional
        Default: every mode.
    paths : sequence of sequences of str, optional
        Per mode; default :func:`default_paths`.
    steady : SteadyState, optional
        The system's steady state, when the caller has it already.
    sample_rate_hz : float, optional
        The digitiser's rate (default: the record's, :func:`fisher_matrix`).

    Returns
    -------
    list of OccupationBound
    """
    system = _system(system, "simulator.analysis.feasibility.occupation_bounds")
    scenario = system.scenario
    modes = range(len(scenario.mechanics)) if modes is None else modes
    paths = [default_paths(scenario, j) for j in modes] if paths is None else paths
    if not paths:
        return []
    fs = _sample_rate(system, sample_rate_hz)
    stepped, report = SteppedModels(system), {}
    omega = None if math.isfinite(fs) else _grid(system, fs)  # None: the base form's grid
    fishers = _fisher(system, paths, omega, fs, stepped, report)
    response = _CovarianceResponse(system, None if steady is None else steady.covariance,
                                   stepped=stepped)
    bounds = []
    for mode, group, fisher in zip(modes, paths, fishers, strict=True):
        grad = np.array([response.occupation_derivative(path, mode) for path in group])
        try:
            variance = float(grad @ np.linalg.solve(fisher, grad))
        except np.linalg.LinAlgError:
            variance = np.inf  # some parameter leaves no trace in the record
        if not variance >= 0:  # NaN or negative: the information matrix is numerically empty
            variance = np.inf
        bounds.append(OccupationBound(
            mode=scenario.mechanics[mode].name, occupation=response.occupation(mode),
            paths=tuple(group), error_one_second=float(np.sqrt(variance)),
            fisher_per_second=fisher, sample_rate_hz=fs, method=report["method"]))
    return bounds


@dataclasses.dataclass(frozen=True, kw_only=True)
class AsymmetryTime:
    """How long to integrate to see the quantum sideband asymmetry."""

    mode: str
    significance: float  # in standard deviations
    duration_s: float  # integration time for d/σ_d = significance
    relative_asymmetry_error_one_second: float  # σ_d/d after 1 s
    occupation_error_one_second: float  # σ_n after 1 s from n = c_AS/d, same model
    lineshape: dict  # parameter values the bound was evaluated at


def asymmetry_time(system, mode=0, significance=ASYMMETRY_SIGNIFICANCE, steady=None, *,
                   sample_rate_hz=None):
    """Integration time to tell the sideband asymmetry d = c_S − c_AS from zero.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one; heterodyne detection (the asymmetry
        needs both sidebands).
    mode : int
    significance : float
        Required d/σ_d, e.g. 5 for a five-standard-deviation detection.
    steady : SteadyState, optional
        The scenario's steady state, when the caller has it already.
    sample_rate_hz : float, optional
        The digitiser's rate (default: the record's); the lineshape is that of
        the samples.

    Returns
    -------
    AsymmetryTime
    """
    from simulator.analysis.fitting import fisher_information
    from simulator.analysis.thermometry import Calibration, cavity_filter
    from simulator.linear.steady_state import steady_state

    system = _system(system, "simulator.analysis.feasibility.asymmetry_time")
    scenario = system.scenario
    if scenario.detection.backaction_evading:
        raise InputError("the sideband asymmetry does not apply to a back-action-evading "
                         "pair, which measures one quadrature; its resolution is "
                         "simulator.analysis.bae_feasibility.resolution_comparison")
    if scenario.detection.scheme != "heterodyne":
        raise InputError(f"detection.scheme = {scenario.detection.scheme!r}: the sideband "
                         "asymmetry needs heterodyne detection of both sidebands")
    if not significance > 0:
        raise InputError(f"significance = {significance!r}; expected a positive number "
                         "of standard deviations")
    cal = Calibration.from_scenario(system, mode)
    steady = steady_state(system) if steady is None else steady
    state = steady.modes[mode]
    omega, width = state.effective_frequency_hz, state.effective_linewidth_hz
    theta = _lineshape_of_record(system, cal, omega, width, steady, sample_rate_hz)
    with np.errstate(all="ignore"):  # no signal at all: caught below as no bound
        per_quantum, n = theta[4], theta[3] / theta[4]

    def model(f, t):
        floor, centre, gamma, c_as, d = t
        lor = lambda x: (gamma / (2 * np.pi)) / (x**2 + gamma**2 / 4)  # noqa: E731
        filt = cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz)
        return floor + filt * ((c_as + d) * lor(f + centre) + c_as * lor(f - centre))

    df = width / 20.0
    half = min(200.0 * width, omega)  # the two windows must not overlap
    side = np.arange(-half, half, df)
    f = np.concatenate([-omega + side, omega + side])
    with np.errstate(all="ignore"):  # a record without information gives no bound
        grad = np.array([0, 0, 0, 1 / per_quantum, -n / per_quantum])  # n = c_AS/d
        # (∂S/S)² per 1/T-wide bin, T·df bins per grid cell: per second, Σ (∂S/S)² df
        info = fisher_information(model, theta, f, 1) * df
        try:
            cov = np.linalg.inv(info)
        except np.linalg.LinAlgError:
            cov = np.full((5, 5), np.nan)
        rel = float(np.sqrt(cov[4, 4]) / per_quantum)
        occupation_error = float(np.sqrt(grad @ cov @ grad))
    if not (math.isfinite(rel) and math.isfinite(occupation_error)):
        # the record carries no usable trace of the sidebands: no finite time resolves them
        rel = occupation_error = math.inf
    return AsymmetryTime(
        mode=scenario.mechanics[mode].name, significance=float(significance),
        duration_s=float((significance * rel) ** 2), relative_asymmetry_error_one_second=rel,
        occupation_error_one_second=occupation_error,
        lineshape=dict(zip(("floor", "frequency_hz", "linewidth_hz", "anti_stokes_area",
                            "asymmetry_area"), map(float, theta), strict=True)))


def _lineshape_of_record(system, cal, omega, width, steady, sample_rate_hz=None):
    """Lineshape parameters (b, Ω, γ, c_AS, d) of the scenario's own record.

    Ω, γ and the occupation n are the exact ones; in weak coupling the
    cavity-corrected areas are c_AS = c·n and c_S = c·(n + 1) with c the area
    per quantum, so d = c. The floor b and the scale of c are read from the
    exact spectrum of the iq samples the scenario's chain and digitiser
    deliver (amplifier and electronic noise and aliasing raise b;
    single-ended detection, filters and the digitiser's sinc² lower c), by
    comparing it with the ideal heterodyne spectrum at the anti-Stokes peak.
    """
    from simulator.linear.spectra import heterodyne_spectrum

    scenario = system.scenario
    iq = system if scenario.record.kind in (None, "iq") else system.replace("record.kind", "iq")
    fs = _sample_rate(iq, sample_rate_hz)
    # the record's axis is the optical offset (anti-Stokes at +f); the samples' density:
    # aliased × sinc² (the lines lose sinc²(Ω/fs), the floor gains the aliased noise)
    # the floor under the anti-Stokes line: either side of it, 30 widths off (the
    # Stokes line's tail at −Ω − 30γ can match a weak anti-Stokes peak and skew b)
    step = min(30 * width, omega / 2)
    away = np.array([omega - step, omega + step])
    peak = np.array([omega])
    form = iq.chain.channel_form(_finite(fs)).project(np.array([1.0, 1.0j]))
    sampled = form.spectrum(-2 * np.pi * np.concatenate([peak, away]))[0, :, 0, 0].real
    floor = float(np.mean(sampled[1:]))
    ideal = heterodyne_spectrum(system, np.concatenate([peak, away]),
                                efficiency=cal.efficiency).total
    with np.errstate(divide="ignore", invalid="ignore"):  # no line at all: no finite bound
        gain = float((sampled[0] - floor) / (ideal[0] - np.mean(ideal[1:])))
    freqs = np.array([m.effective_frequency_hz for m in steady.modes])
    n = steady.modes[int(np.argmin(np.abs(freqs - omega)))].occupation
    c = cal.area_per_quantum() * gain
    return np.array([floor, omega, width, c * n, c])
