"""Fisher information and Cramér–Rao bounds against Monte Carlo maximum likelihood.

Standard asymptotic theory (Whittle, Ark. Mat. 2, 423 (1953); Cramér,
Mathematical Methods of Statistics (1946), Sec. 32.3): the maximum-likelihood
estimator's variance approaches the inverse Fisher information. The synthetic
periodograms are exact draws (each bin the model spectrum times a Gamma(K, 1/K)
variate), so the check isolates the estimator and the bound.
"""

import numpy as np
import pytest

from simulator.analysis.feasibility import asymmetry_time, fisher_matrix, occupation_bound
from simulator.analysis.psd import PSDEstimate
from simulator.analysis.thermometry import Calibration, cavity_filter, measure_occupation
from simulator.demo import demo_scenario


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
    truth = 1.0 + cavity_filter(f, cal.cavity_linewidth_hz, cal.detuning_hz) * (
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


def test_exact_model_bound_agrees_with_the_lineshape_bound_in_weak_coupling(scenario):
    """Two independent routes to σ_n: derivatives of the exact analytic spectrum with
    respect to scenario parameters, and the lineshape model of the reference
    estimator. They parametrise the same spectrum differently, so agreement is
    expected only approximately (here g/κ ≈ 0.08); 25 % tolerance."""
    exact = occupation_bound(scenario)
    lineshape = asymmetry_time(scenario)
    assert exact.error_one_second == pytest.approx(lineshape.occupation_error_one_second,
                                                   rel=0.25)


def test_fisher_matrix_is_symmetric_positive_and_grows_with_efficiency(scenario):
    paths = ("mechanics[0].bath_temperature_k", "detection.efficiency")
    f1 = fisher_matrix(scenario, paths)
    assert np.allclose(f1, f1.T) and np.all(np.linalg.eigvalsh(f1) > 0)
    better = fisher_matrix(scenario.replace("detection.efficiency", 0.9), paths[:1])
    assert better[0, 0] > f1[0, 0]
