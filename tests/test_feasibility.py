"""Fisher information and Cramér–Rao bounds against Monte Carlo maximum likelihood.

Standard asymptotic theory (Whittle, Ark. Mat. 2, 423 (1953); Cramér,
Mathematical Methods of Statistics (1946), Sec. 32.3): the maximum-likelihood
estimator's variance approaches the inverse Fisher information. The synthetic
periodograms are exact draws (each bin the model spectrum times a Gamma(K, 1/K)
variate), so the check isolates the estimator and the bound.
"""

import numpy as np
import pytest
from conftest import REPO

from simulator.analysis.feasibility import asymmetry_time, fisher_matrix, occupation_bound
from simulator.analysis.psd import PSDEstimate
from simulator.analysis.thermometry import Calibration, cavity_filter, measure_occupation
from simulator.model.system import System
from simulator.workflows.demo import demo_scenario


@pytest.fixture(scope="module")
def scenario():
    return demo_scenario()


def test_mle_variance_matches_the_cramer_rao_bound(scenario):
    bound = asymmetry_time(scenario)
    shape = bound.lineshape
    cal = Calibration.from_scenario(scenario)
    width, centre = shape["linewidth_hz"], shape["frequency_hz"]
    c_as, d = shape["anti_stokes_area"], shape["asymmetry_area"]
    df = width / 20
    side = np.arange(-40 * width, 40 * width, df)
    f = np.concatenate([-centre + side, centre + side])
    lor = lambda x: (width / (2 * np.pi)) / (x**2 + width**2 / 4)  # noqa: E731
    truth = shape["floor"] + cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz) * (
        (c_as + d) * lor(f + centre) + c_as * lor(f - centre))
    k = 200_000
    duration = k / df  # K averages of 1/df-long segments
    rng = np.random.default_rng(11)
    estimates = []
    for _ in range(60):
        psd = PSDEstimate(frequency_hz=f, density=truth * rng.gamma(k, 1 / k, f.size),
                          averages=k, sided="two-sided", resolution_hz=df,
                          noise_bandwidth_hz=df, window="boxcar")
        estimates.append(measure_occupation(psd, cal).occupation_asymmetry)
    estimates = np.array(estimates)
    expected = bound.occupation_error_one_second / np.sqrt(duration)
    # the sample standard deviation of 60 draws scatters by ±1/√(2·59) ≈ 9 %
    assert estimates.std(ddof=1) == pytest.approx(expected, rel=0.3)
    assert abs(estimates.mean() - shape["anti_stokes_area"] / d) < 4 * expected / np.sqrt(60)


def test_integration_time_scales_with_significance_squared(scenario):
    t3 = asymmetry_time(scenario, significance=3).duration_s
    t6 = asymmetry_time(scenario, significance=6).duration_s
    assert t6 / t3 == pytest.approx(4.0, rel=1e-9)


def test_matrix_fisher_formula_reduces_to_the_scalar_one_for_resolved_sidebands(scenario):
    """For a circular complex record the two-channel formula ½∫tr(S⁻¹∂S S⁻¹∂S) equals
    the scalar Whittle formula ∫(∂S_z/S_z)² over the I + iQ spectrum (Whittle,
    Ark. Mat. 2, 423 (1953)); with resolved sidebands the record is nearly
    circular, so the two agree to better than 1 %. The scalar route uses the
    independent analytic heterodyne spectrum of simulator.linear.spectra."""
    from simulator.linear.spectra import adaptive_grid, heterodyne_spectrum

    path = "mechanics[0].bath_temperature_k"
    system = System(scenario).require_stable()
    _, model = system.point, system.model
    f = adaptive_grid(model, points_per_decade=64)
    base = heterodyne_spectrum(scenario, f).total
    t, h = scenario.get(path), 1e-4 * scenario.get(path)
    up = heterodyne_spectrum(scenario.replace(path, t + h), f).total
    down = heterodyne_spectrum(scenario.replace(path, t - h), f).total
    scalar = np.trapezoid(((up - down) / (2 * h) / base) ** 2, f)
    # the continuous record (no digitiser), as the analytic spectrum is
    assert fisher_matrix(scenario, [path], sample_rate_hz=np.inf)[0, 0] == pytest.approx(
        scalar, rel=0.01)


def test_amplifier_noise_and_single_ended_detection_cost_information(scenario):
    """The bound sees the whole chain: a cryogenic-amplifier-like added noise or
    single-ended detection (half the signal) lowers the information and lengthens
    the integration time."""
    path = ["mechanics[0].bath_temperature_k"]
    plain = fisher_matrix(scenario, path)[0, 0]
    noisy = scenario.replace("electronics.amplifier_added_quanta", 15.0)
    single = scenario.replace("detection.balanced", False)
    assert fisher_matrix(noisy, path)[0, 0] < 0.2 * plain
    assert fisher_matrix(single, path)[0, 0] < 0.8 * plain
    assert asymmetry_time(noisy).duration_s > 5 * asymmetry_time(scenario).duration_s
    bound = occupation_bound(scenario)
    assert np.isfinite(bound.error_one_second) and bound.error_one_second > 0


def test_fisher_matrix_is_symmetric_positive_and_grows_with_efficiency(scenario):
    paths = ("mechanics[0].bath_temperature_k", "detection.efficiency")
    f1 = fisher_matrix(scenario, paths)
    assert np.allclose(f1, f1.T) and np.all(np.linalg.eigvalsh(f1) > 0)
    better = fisher_matrix(scenario.replace("detection.efficiency", 0.9), paths[:1])
    assert better[0, 0] > f1[0, 0]


def test_fisher_matrix_equals_differences_of_whole_sampled_spectra():
    """The information of the samples from the pole–residue forms equals the one built
    the direct way, written out here: the 2×2 I, Q matrix of the resolvent
    (StateSpace.output_spectrum) aliased and multiplied by sinc² (integrate-and-dump
    sampling; Oppenheim and Schafer, Discrete-Time Signal Processing (2010), Sec. 4.2),
    central differences of whole re-computed matrices, ½∫tr(S⁻¹∂S S⁻¹∂S) df over the
    band (Whittle, Ark. Mat. 2, 423 (1953)); every default parameter of two modes."""
    from simulator.analysis.feasibility import _grid, _sample_rate, default_paths
    from simulator.model.system import System
    from simulator.scenario.loader import load_scenario

    scenario = load_scenario(REPO / "scenarios" / "membrane_4k.toml")
    system = System(scenario)
    fs = _sample_rate(system)
    omega = _grid(system, fs)[::9]  # a sub-grid keeps the direct route quick
    ws, m = 2 * np.pi * fs, np.arange(-150, 151)

    def sampled(s):
        model = System(s).chain.model
        white = model.D @ model.N @ model.D.T
        shifted = omega[:, None] + m * ws
        total = model.output_spectrum(shifted) - white
        return white + np.einsum("wmab,wm->wab", total, np.sinc(shifted / ws) ** 2)

    base = sampled(scenario)
    derivs = []
    for path in default_paths(scenario, 1):
        value = scenario.get(path)
        h = 1e-4 * value
        up, down = scenario.replace(path, value + h), scenario.replace(path, value - h)
        derivs.append(np.linalg.solve(base, (sampled(up) - sampled(down)) / (2 * h)))
    direct = np.trapezoid(np.einsum("iwab,jwba->ijw", derivs, derivs).real,
                          omega / (2 * np.pi), axis=-1)  # f ≥ 0: half of both signs
    fast = fisher_matrix(scenario, default_paths(scenario, 1), frequency_hz=omega / (2 * np.pi))
    np.testing.assert_allclose(fast, direct, rtol=1e-4)


def test_occupation_gradient_equals_differences_of_steady_states():
    """∂n/∂θ from the linear response of the Lyapunov equation equals central
    differences of the full steady state re-solved on either side."""
    from simulator.analysis.feasibility import _CovarianceResponse, default_paths
    from simulator.linear.steady_state import steady_state
    from simulator.model.system import System
    from simulator.scenario.loader import load_scenario

    scenario = load_scenario(REPO / "scenarios" / "membrane_4k.toml")
    response = _CovarianceResponse(System(scenario))
    for mode in (0, 1):
        for path in default_paths(scenario, mode)[:2]:
            value = scenario.get(path)
            h = 1e-4 * value
            direct = (steady_state(scenario.replace(path, value + h)).modes[mode].occupation
                      - steady_state(scenario.replace(path, value - h)).modes[mode].occupation
                      ) / (2 * h)
            assert response.occupation_derivative(path, mode) == pytest.approx(direct,
                                                                               rel=1e-5)


def test_if_record_information_is_that_of_the_one_real_photocurrent():
    """An "if" record is one real photocurrent r = e^{iθt}u + c.c., not its envelope's two
    channels: its information is ½∫(∂S_r/S_r)² df over both signs of f with S_r from
    the record's own density (the image band's noise included), here by central
    differences of whole re-computed record spectra on a uniform grid (Whittle, Ark.
    Mat. 2, 423 (1953); second method). With the carrier far above the lines it equals
    the iq record's information (the same two quadratures, each at half efficiency)."""
    from simulator.model.system import System
    from simulator.scenario.loader import load_scenario

    demo = load_scenario(REPO / "simulator" / "data" / "demo.toml")
    iq = demo.replace("detection.intermediate_frequency_hz", 8e6)
    real = iq.replace("record.kind", "if")
    path = "mechanics[0].bath_temperature_k"
    fast = fisher_matrix(real, [path], sample_rate_hz=np.inf)[0, 0]  # the continuous record
    f = np.linspace(1e3, 40e6, 200001)
    value = real.get(path)
    h = 1e-4 * value
    s = System(real).chain.record_spectrum(f)
    ds = (System(real.replace(path, value + h)).chain.record_spectrum(f)
          - System(real.replace(path, value - h)).chain.record_spectrum(f)) / (2 * h)
    direct = np.trapezoid((ds / s) ** 2, f)
    assert fast == pytest.approx(direct, rel=2e-3)
    assert fast == pytest.approx(fisher_matrix(iq, [path], sample_rate_hz=np.inf)[0, 0],
                                 rel=0.01)
