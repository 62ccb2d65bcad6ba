"""Feasibility: Fisher information of a record, Cramér–Rao bounds, integration time.

For a stationary Gaussian record of duration T the Whittle approximation
gives the Fisher information about parameters θ as

    F_ij = T ∫ dν ∂_i S(ν) ∂_j S(ν) / S(ν)²,

over the record's frequency axis (two-sided for IQ heterodyne, f ≥ 0 for a
real record): every 1/T-wide bin of the periodogram is exponentially
distributed about S. So the information grows linearly in T and everything
below is quoted per unit time (1/s); the Cramér–Rao bound on θ_i after T is
√((F₁⁻¹)_ii / T).

Two uses:
- :func:`fisher_matrix`: information about any scenario parameters (by path:
  bath occupation or temperature, coupling, efficiency, ...) from the EXACT
  analytic spectrum, derivatives by central differences of re-solved models;
  :func:`occupation_bound` turns it into the bound on the mode occupation.
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

import numpy as np

from simulator.errors import InputError

# Default significance (standard deviations) for "the asymmetry is resolved".
ASYMMETRY_SIGNIFICANCE = 5.0


def _spectrum_total(scenario, frequency_hz):
    from simulator.spectra import heterodyne_spectrum, homodyne_spectrum

    if scenario.detection.scheme == "homodyne":
        return homodyne_spectrum(scenario, frequency_hz).total
    return heterodyne_spectrum(scenario, frequency_hz).total


def _grid(scenario):
    from simulator.spectra import adaptive_grid, prepare

    _, model = prepare(scenario)
    return adaptive_grid(model, one_sided=scenario.detection.scheme == "homodyne",
                         points_per_decade=64)


def _derivative(evaluate, scenario, path):
    """d evaluate(scenario)/d(parameter at path), central where the range allows.

    At a boundary of the admissible range (a bath occupation of 0, an
    efficiency of 1) the one-sided difference is used instead.
    """
    from simulator.errors import ScenarioError

    value = scenario.get(path)
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        raise InputError(f"{path} = {value!r}: the Fisher information needs a numeric "
                         "parameter that is set in the scenario")
    h = 1e-4 * abs(value) if value != 0 else 1e-6
    try:
        up, hi = evaluate(scenario.replace(path, value + h)), h
    except ScenarioError:
        up, hi = evaluate(scenario), 0.0
    try:
        down, lo = evaluate(scenario.replace(path, value - h)), h
    except ScenarioError:
        down, lo = evaluate(scenario), 0.0
    return (up - down) / (hi + lo)


def fisher_matrix(scenario, paths, *, frequency_hz=None):
    """Fisher information per unit time (1/s) about the parameters at ``paths``.

    Parameters
    ----------
    scenario : Scenario
    paths : sequence of str
        Scenario parameter paths, e.g. ``["mechanics[0].bath_occupation",
        "mechanics[0].coupling_hz", "detection.efficiency"]``.
    frequency_hz : ndarray, optional
        Integration grid; default the adaptive grid of the spectrum.

    Returns
    -------
    ndarray (k, k)
        In units of 1/(s · unit_i · unit_j).
    """
    f = _grid(scenario) if frequency_hz is None else np.asarray(frequency_hz, float)
    base = _spectrum_total(scenario, f)
    logd = np.array([_derivative(lambda s: _spectrum_total(s, f), scenario, path) / base
                     for path in paths])
    integrand = logd[:, None, :] * logd[None, :, :]
    return np.trapezoid(integrand, f, axis=-1)


@dataclasses.dataclass(frozen=True, kw_only=True)
class OccupationBound:
    """Cramér–Rao bound on the occupation of one mode, per √(measurement time)."""

    mode: str
    occupation: float
    paths: tuple  # parameters estimated jointly (nuisance parameters included)
    error_one_second: float  # σ_n after T = 1 s
    fisher_per_second: np.ndarray

    def error_after(self, duration_s):
        """Bound on the standard deviation of n after ``duration_s`` seconds."""
        return self.error_one_second / np.sqrt(duration_s)


def default_paths(scenario, mode=0):
    """Bath (occupation or temperature), coupling, linewidth of the mode; efficiency."""
    m = scenario.mechanics[mode]
    bath = "bath_occupation" if m.bath_occupation is not None else "bath_temperature_k"
    return (f"mechanics[{mode}].{bath}", f"mechanics[{mode}].coupling_hz",
            f"mechanics[{mode}].linewidth_hz", "detection.efficiency")


def occupation_bound(scenario, mode=0, paths=None):
    """Cramér–Rao bound on the exact occupation n of ``mode`` from the record.

    n is a function of the parameters at ``paths`` (the first is the bath);
    σ_n² T = ∇n · F₁⁻¹ · ∇n with ∇n by central differences of the Lyapunov
    steady state. All parameters are treated as unknown, so the bound includes
    the cost of estimating the nuisance parameters.
    """
    from simulator.steady_state import steady_state

    paths = tuple(paths) if paths is not None else default_paths(scenario, mode)
    fisher = fisher_matrix(scenario, paths)
    grad = np.array([_derivative(lambda s: steady_state(s).modes[mode].occupation,
                                 scenario, path) for path in paths])
    try:
        variance = float(grad @ np.linalg.solve(fisher, grad))
    except np.linalg.LinAlgError:
        variance = np.inf  # some parameter leaves no trace in the record
    return OccupationBound(mode=scenario.mechanics[mode].name,
                           occupation=steady_state(scenario).modes[mode].occupation,
                           paths=paths, error_one_second=float(np.sqrt(variance)),
                           fisher_per_second=fisher)


@dataclasses.dataclass(frozen=True, kw_only=True)
class AsymmetryTime:
    """How long to integrate to see the quantum sideband asymmetry."""

    mode: str
    significance: float  # in standard deviations
    duration_s: float  # integration time for d/σ_d = significance
    relative_asymmetry_error_one_second: float  # σ_d/d after 1 s
    occupation_error_one_second: float  # σ_n after 1 s from n = c_AS/d, same model
    lineshape: dict  # parameter values the bound was evaluated at


def asymmetry_time(scenario, mode=0, significance=ASYMMETRY_SIGNIFICANCE):
    """Integration time to tell the sideband asymmetry d = c_S − c_AS from zero.

    Parameters
    ----------
    scenario : Scenario
        Heterodyne detection (the asymmetry needs both sidebands).
    mode : int
    significance : float
        Required d/σ_d, e.g. 5 for a five-standard-deviation detection.

    Returns
    -------
    AsymmetryTime
    """
    from simulator.analysis.fitting import fisher_information
    from simulator.analysis.thermometry import Calibration, cavity_filter
    from simulator.steady_state import steady_state

    if scenario.detection.scheme != "heterodyne":
        raise InputError(f"detection.scheme = {scenario.detection.scheme!r}: the sideband "
                         "asymmetry needs heterodyne detection of both sidebands")
    if not significance > 0:
        raise InputError(f"significance = {significance!r}; expected a positive number "
                         "of standard deviations")
    cal = Calibration.from_scenario(scenario, mode)
    state = steady_state(scenario).modes[mode]
    omega, width = state.effective_frequency_hz, state.effective_linewidth_hz
    per_quantum = cal.area_per_quantum()
    n = state.occupation
    theta = np.array([1.0, omega, width, per_quantum * n, per_quantum])

    def model(f, t):
        floor, centre, gamma, c_as, d = t
        lor = lambda x: (gamma / (2 * np.pi)) / (x**2 + gamma**2 / 4)  # noqa: E731
        filt = cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz)
        return floor + filt * ((c_as + d) * lor(f + centre) + c_as * lor(f - centre))

    df = width / 20.0
    half = 200.0 * width
    side = np.arange(-half, half + df / 2, df)
    f = np.concatenate([-omega + side, omega + side])
    # (∂S/S)² per 1/T-wide bin, T·df bins per grid cell: per second, Σ (∂S/S)² df
    info = fisher_information(model, theta, f, 1) * df
    cov = np.linalg.inv(info)
    rel = float(np.sqrt(cov[4, 4]) / per_quantum)
    grad = np.array([0, 0, 0, 1 / per_quantum, -n / per_quantum])  # n = c_AS/d
    return AsymmetryTime(
        mode=scenario.mechanics[mode].name, significance=float(significance),
        duration_s=float((significance * rel) ** 2), relative_asymmetry_error_one_second=rel,
        occupation_error_one_second=float(np.sqrt(grad @ cov @ grad)),
        lineshape=dict(zip(("floor", "frequency_hz", "linewidth_hz", "anti_stokes_area",
                            "asymmetry_area"), map(float, theta), strict=True)))
