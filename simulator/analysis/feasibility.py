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
import math

import numpy as np

from simulator.errors import InputError

# Default significance (standard deviations) for "the asymmetry is resolved".
ASYMMETRY_SIGNIFICANCE = 5.0


def _record_chain(scenario):
    """The detection chain of the scenario's record (iq for heterodyne)."""
    from simulator.chain import detection_chain

    return detection_chain(scenario)


def _spectral_matrix(scenario, omega):
    """Symmetrised spectral matrix of the record's output channels, chain included."""
    return _record_chain(scenario).model.output_spectrum(omega)


def _grid(scenario):
    """Two-sided angular-frequency grid resolving every resonance of the record's model."""
    from simulator.physics import angular
    from simulator.spectra import adaptive_grid, prepare

    prepare(scenario)  # a clear error for an unstable operating point
    return angular(adaptive_grid(_record_chain(scenario).model, points_per_decade=64))


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
        Two-sided integration grid (Hz); default the adaptive grid of the
        record's model.

    Returns
    -------
    ndarray (k, k)
        In units of 1/(s · unit_i · unit_j).

    Notes
    -----
    The record is the p output channels of the detection chain (I and Q for
    heterodyne, one channel for homodyne), a real stationary Gaussian vector
    process with symmetrised spectral matrix S(f), so

        F_ij / T = ½ ∫ df tr[S⁻¹ ∂_i S S⁻¹ ∂_j S]     (f from −∞ to ∞),

    (Whittle 1953). This includes everything the chain adds (amplifier
    noise, electronic noise, filters, single-ended detection) and the
    correlation of the two sidebands of a heterodyne record, which a
    scalar formula over the complex I + iQ spectrum would miss.
    """
    from simulator.physics import angular

    omega = _grid(scenario) if frequency_hz is None else angular(frequency_hz)
    base = _spectral_matrix(scenario, omega)
    derivs = np.array([np.linalg.solve(base, _derivative(
        lambda s: _spectral_matrix(s, omega), scenario, path)) for path in paths])
    # tr(X_i X_j) per frequency, X = S⁻¹ ∂S
    integrand = np.einsum("iwab,jwba->ijw", derivs, derivs).real
    return 0.5 * np.trapezoid(integrand, omega / (2 * np.pi), axis=-1)


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
    """Bath (occupation or temperature) and coupling of the mode; detection efficiency.

    The intrinsic mechanical linewidth is taken as known (it is measured
    separately, by ring-down, in common practice): in the spectrum it enters
    almost only through Γm·n_th, so estimating it jointly with the bath makes
    the information matrix nearly singular. Pass ``paths`` to choose others.
    """
    m = scenario.mechanics[mode]
    bath = "bath_occupation" if m.bath_occupation is not None else "bath_temperature_k"
    return (f"mechanics[{mode}].{bath}", f"mechanics[{mode}].coupling_hz",
            "detection.efficiency")


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
    if not variance >= 0:  # NaN or negative: the information matrix is numerically empty
        variance = np.inf
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
    theta = _lineshape_of_record(scenario, cal, omega, width)
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
    grad = np.array([0, 0, 0, 1 / per_quantum, -n / per_quantum])  # n = c_AS/d
    with np.errstate(all="ignore"):  # a record without information gives no bound
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


def _lineshape_of_record(scenario, cal, omega, width):
    """Lineshape parameters (b, Ω, γ, c_AS, d) of the scenario's own record.

    Ω, γ and the occupation n are the exact ones; in weak coupling the
    cavity-corrected areas are c_AS = c·n and c_S = c·(n + 1) with c the area
    per quantum, so d = c. The floor b and the scale of c are read from the
    exact spectrum of the iq record the scenario's chain delivers (amplifier
    and electronic noise raise b; single-ended detection and filters lower
    c), by comparing it with the ideal heterodyne spectrum at the anti-Stokes
    peak.
    """
    from simulator.spectra import heterodyne_spectrum
    from simulator.steady_state import steady_state

    iq = scenario if scenario.record.kind in (None, "iq") else scenario.replace(
        "record.kind", "iq")
    chain = _record_chain(iq)
    # the record's axis is the optical offset (anti-Stokes at +f)
    away = np.array([omega + 30 * width, -omega - 30 * width])
    floor = float(np.mean(chain.record_spectrum(away)))
    peak = np.array([omega])
    ideal = heterodyne_spectrum(scenario, np.concatenate([peak, away]),
                                efficiency=cal.efficiency).total
    gain = float((chain.record_spectrum(peak)[0] - floor) / (ideal[0] - np.mean(ideal[1:])))
    n = steady_state(scenario).modes[_mode_index(scenario, omega)].occupation
    c = cal.area_per_quantum() * gain
    return np.array([floor, omega, width, c * n, c])


def _mode_index(scenario, omega):
    from simulator.steady_state import steady_state

    freqs = [m.effective_frequency_hz for m in steady_state(scenario).modes]
    return int(np.argmin(np.abs(np.array(freqs) - omega)))
