"""Trial verdicts are statistical tests: synthetic pulls with a chosen bias and width
(numpy, no records) cross each threshold exactly where the formula puts it, and the
statistics agree with scipy.stats' own tests."""

import math

import numpy as np
import pytest
import scipy.stats

from simulator.workflows.trial import summarise
from simulator.workflows.trial_verdicts import (
    FAMILY_LEVEL,
    GAUSSIAN_CONTENT,
    bias_threshold,
    checks,
    coverage_interval,
    level_for,
    width_interval,
)

TRUTH, SIGMA = 2.0, 0.3


def draws(n, bias, width, seed=7):
    """Estimates whose pulls have exactly sample mean ``bias`` and s.d. ``width``."""
    z = np.random.default_rng(seed).standard_normal(n)
    z = (z - z.mean()) / z.std(ddof=1)
    return TRUTH + SIGMA * (bias + width * z), np.full(n, SIGMA)


@pytest.mark.parametrize("n, compared", [(20, 6), (50, 1), (200, 3)])
def test_bias_is_flagged_exactly_beyond_the_student_t_threshold(n, compared):
    """bias/s.e. with s the sample s.d. is Student t with n − 1 degrees of freedom; at
    level α/m (Bonferroni) the verdict flips at t.ppf(1 − α/(2m), n − 1)."""
    level = level_for(compared)
    assert level == pytest.approx(FAMILY_LEVEL / compared)
    threshold = scipy.stats.t.ppf(1 - level / 2, n - 1)
    assert bias_threshold(n, level) == pytest.approx(threshold, rel=1e-12)
    for factor, flagged in ((1 - 1e-4, False), (1 + 1e-4, True)):
        for sign in (+1, -1):
            est, unc = draws(n, sign * factor * threshold / math.sqrt(n), 1.0)
            tested = checks(est, unc, TRUTH, level)
            assert ("BIASED" in tested.verdict) is flagged, tested.verdict
            assert tested.bias_t == pytest.approx(sign * factor * threshold, rel=1e-9)
            ttest = scipy.stats.ttest_1samp(est, TRUTH)  # the same test, by scipy
            assert ttest.statistic == pytest.approx(tested.bias_t, rel=1e-9)
            assert bool(ttest.pvalue < level) is flagged
            assert f"{abs(tested.bias_t):.2f} vs {threshold:.2f}" in tested.verdict


@pytest.mark.parametrize("n", [12, 40, 300])
def test_pull_width_is_flagged_exactly_outside_its_chi_square_interval(n):
    """(n − 1) w² is χ²(n − 1) for unit-width Gaussian pulls (Cowan, Statistical Data
    Analysis (1998), Ch. 9, cited from memory): the
    interval [w √(ν/χ²_{1−α/2}), w √(ν/χ²_{α/2})] just excludes 1 at
    w = √(χ²_{1−α/2}/ν) (too wide) and √(χ²_{α/2}/ν) (too narrow)."""
    level, dof = level_for(4), n - 1
    wide = math.sqrt(scipy.stats.chi2.ppf(1 - level / 2, dof) / dof)
    narrow = math.sqrt(scipy.stats.chi2.ppf(level / 2, dof) / dof)
    for edge, word, outward in ((wide, "UNDERSTATED", 1 + 1e-4), (narrow, "OVERSTATED",
                                                                   1 - 1e-4)):
        for factor, flagged in ((outward, True), (1 / outward, False)):
            width = edge * factor
            tested = checks(*draws(n, 0.0, width), TRUTH, level)
            assert (word in tested.verdict) is flagged, tested.verdict
            low, high = tested.pull_width_interval
            assert (low, high) == pytest.approx(width_interval(width, n, level), rel=1e-12)
            # the same as a two-sided χ² test of σ = 1 on the sample variance
            statistic = dof * width**2
            p = 2 * min(scipy.stats.chi2.cdf(statistic, dof), scipy.stats.chi2.sf(statistic,
                                                                                 dof))
            assert bool(p < level) is flagged


@pytest.mark.parametrize("inside, n", [(0, 10), (7, 10), (10, 10), (68, 100), (57, 100),
                                       (400, 500)])
def test_coverage_interval_is_clopper_pearson(inside, n):
    """The exact binomial interval (Clopper & Pearson 1934), as scipy computes it."""
    level = 0.05
    ci = scipy.stats.binomtest(inside, n).proportion_ci(confidence_level=1 - level,
                                                        method="exact")
    assert coverage_interval(inside, n, level) == pytest.approx((ci.low, ci.high), abs=1e-12)


def test_coverage_is_flagged_when_its_interval_excludes_the_gaussian_content():
    """Pulls of exactly unit width but with a heavy core: the ±1σ fraction is too high."""
    n, level = 200, level_for(1)
    k = next(k for k in range(n // 2, n + 1)
             if coverage_interval(k, n, level)[0] > GAUSSIAN_CONTENT[1])
    est = np.full(n, TRUTH)
    est[:k] += SIGMA * 0.5 * np.resize([1, -1], k)  # inside ±1
    est[k:] += SIGMA * 3.0 * np.resize([1, -1], n - k)  # outside ±2
    for count, flagged in ((k, True), (k - 1, False)):
        pulls_inside = est.copy()
        if count < k:
            pulls_inside[k - 1] = TRUTH + SIGMA * 1.5  # one moved out of ±1, still in ±2
        tested = checks(pulls_inside, np.full(n, SIGMA), TRUTH, level)
        assert ("1σ coverage HIGH" in tested.verdict) is flagged, tested.verdict


def test_honest_unbiased_draws_are_consistent_and_the_report_carries_the_tests():
    est, unc = draws(30, 0.1, 1.0)
    q = summarise("x", est, unc, TRUTH, 0, compared=6)
    assert q.verdict.startswith("consistent")
    assert q.level == pytest.approx(FAMILY_LEVEL / 6)
    assert q.bias_t == pytest.approx(q.bias / q.bias_error)
    assert q.pull_width_interval[0] < 1 < q.pull_width_interval[1]
    assert q.coverage_1sigma_interval[0] <= q.coverage_1sigma <= q.coverage_1sigma_interval[1]
    assert "Bonferroni" in q.verdict


def test_identical_estimates_off_the_truth_are_biased():
    q = summarise("x", np.full(12, 3.0), np.full(12, 0.1), TRUTH, 0)
    assert "every trial returned 3" in q.verdict


def test_fewer_trials_than_a_verdict_needs_still_report_the_statistics():
    # Three estimates 2.95, 3.0, 3.4 with stated errors 0.1 against a truth of 3 (not
    # this file's TRUTH): pulls (−0.5, 0, 4), so bias = 0.35/3, pull mean 3.5/3, pull
    # width √(73/12) (sample standard deviation) and 1σ coverage 2/3 — printed, but
    # with no test behind them.
    q = summarise("x", np.array([2.95, 3.0, 3.4]), np.full(3, 0.1), 3.0, 0)
    assert q.truth == 3.0
    assert q.bias == pytest.approx(0.35 / 3) and q.pull_mean == pytest.approx(3.5 / 3)
    assert q.pull_width == pytest.approx(np.sqrt(73 / 12))
    assert q.coverage_1sigma == pytest.approx(2 / 3)
    assert q.level is None and "too few trials for a verdict (3 < 10)" in q.verdict
    one = summarise("x", np.array([3.2]), np.array([0.1]), 3.0, 0)
    assert one.bias == pytest.approx(0.2) and one.pull_width is None
    assert one.bias_error is None
