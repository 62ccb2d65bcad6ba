"""Whittle-likelihood fits against Monte Carlo truth; the least-squares bias.

Synthetic averaged periodograms are drawn exactly: each bin is the true
spectrum times a Gamma(K, 1/K) variate (the distribution of a K-fold averaged
periodogram bin of a Gaussian record; Nørrelykke & Flyvbjerg, Rev. Sci.
Instrum. 81, 075103 (2010), Eq. (9)). So these tests check the estimator, not
the record generator; the record tests check the rest of the chain.
"""

import numpy as np
import pytest

from simulator.analysis.fitting import (
    fisher_information,
    fit_least_squares,
    fit_whittle,
)
from simulator.analysis.psd import averaged_periodogram


def lorentzian_on_floor(f, theta):
    floor, area, centre, width = theta
    return floor + area * (width / (2 * np.pi)) / ((f - centre) ** 2 + width**2 / 4)


TRUE = np.array([1.0, 40.0, 0.0, 4.0])  # floor 1/Hz, area 40, centre 0 Hz, FWHM 4 Hz
FREQ = np.linspace(-40, 40, 161)


def draw(rng, averages):
    return lorentzian_on_floor(FREQ, TRUE) * rng.gamma(averages, 1 / averages, FREQ.size)


def trials(fit, averages, n, seed):
    rng = np.random.default_rng(seed)
    return [fit(draw(rng, averages)) for _ in range(n)]


def test_whittle_is_unbiased_with_honest_errors():
    """Bias of the area below 1.5 standard errors of the mean; pulls have unit width."""
    results = trials(lambda p: fit_whittle(lorentzian_on_floor, FREQ, p, 4, TRUE * 1.1), 4,
                     200, seed=1)
    areas = np.array([r.values[1] for r in results])
    errors = np.array([r.errors[1] for r in results])
    pulls = (areas - TRUE[1]) / errors
    assert abs(areas.mean() - TRUE[1]) < 1.5 * areas.std() / np.sqrt(areas.size) + 0.01 * TRUE[1]
    assert 0.85 < pulls.std() < 1.15
    # Cramér–Rao: the spread matches the inverse expected information (Whittle 1953)
    crb = np.sqrt(np.linalg.inv(fisher_information(lorentzian_on_floor, TRUE, FREQ, 4))[1, 1])
    assert areas.std() == pytest.approx(crb, rel=0.15)


def test_log_least_squares_bias_matches_digamma_and_whittle_removes_it():
    """Nørrelykke & Flyvbjerg (2010), Sec. IV: least squares on ln P biases amplitudes
    by exp(ψ(K))/K since E[ln Gamma(K, 1/K)] = ψ(K) − ln K; the likelihood fit on the
    same data is unbiased, and plain least squares scatters more than the likelihood."""
    from scipy.special import digamma

    n, k = 120, 4
    rng = np.random.default_rng(7)
    data = [draw(rng, k) for _ in range(n)]
    log_ls = np.array([fit_least_squares(lorentzian_on_floor, FREQ, p, TRUE * 1.1,
                                         log=True).values for p in data])
    plain = np.array([fit_least_squares(lorentzian_on_floor, FREQ, p, TRUE * 1.1).values
                      for p in data])
    ml = np.array([fit_whittle(lorentzian_on_floor, FREQ, p, k, TRUE * 1.1).values
                   for p in data])
    factor = np.exp(digamma(k)) / k  # 0.878 for K = 4
    sem = lambda x: x.std() / np.sqrt(n)  # noqa: E731
    for col in (0, 1):  # floor and area
        assert abs(ml[:, col].mean() - TRUE[col]) < 3 * sem(ml[:, col])
        assert abs(log_ls[:, col].mean() - factor * TRUE[col]) < 3 * sem(log_ls[:, col])
        assert abs(log_ls[:, col].mean() - TRUE[col]) > 5 * sem(log_ls[:, col])
    assert plain[:, 1].std() > 1.1 * ml[:, 1].std()


def test_periodogram_normalisation_complex_white_noise():
    """White complex noise of variance σ² sampled at fs has two-sided density σ²/fs."""
    rng = np.random.default_rng(3)
    fs, sigma2 = 1e3, 2.5
    z = np.sqrt(sigma2 / 2) * (rng.standard_normal(2**16) + 1j * rng.standard_normal(2**16))
    est = averaged_periodogram(z, fs, segment_samples=256)
    assert est.sided == "two-sided" and est.averages == 256
    assert est.density.mean() == pytest.approx(sigma2 / fs, rel=0.01)
    # bins scatter as Gamma(K): relative standard deviation 1/√K
    assert est.density.std() / est.density.mean() == pytest.approx(1 / 16, rel=0.15)
    # integral equals the variance (Parseval)
    assert np.sum(est.density) * est.resolution_hz == pytest.approx(sigma2, rel=0.01)


def test_periodogram_sign_and_one_sided():
    """A tone e^(+2πi f0 t) appears at +f0 (numpy FFT kernel e^(−iωt)); a real
    record's one-sided density integrates to its variance."""
    fs, n = 1e3, 4096
    t = np.arange(n) / fs
    est = averaged_periodogram(np.exp(2j * np.pi * 125 * t), fs, segment_samples=1024)
    assert est.frequency_hz[np.argmax(est.density)] == pytest.approx(125.0)
    rng = np.random.default_rng(0)
    x = rng.standard_normal(2**15) * 3.0
    one = averaged_periodogram(x, fs, segment_samples=512, window="boxcar")
    assert one.sided == "one-sided"
    assert np.sum(one.density) * one.resolution_hz == pytest.approx(9.0, rel=0.03)


def test_bad_segment_length_is_a_clear_error():
    from simulator.errors import InputError

    with pytest.raises(InputError, match="segment_samples"):
        averaged_periodogram(np.zeros(10), 1.0, segment_samples=100)


@pytest.mark.parametrize("fit", ["whittle", "least_squares"])
def test_fits_start_where_they_are_told_negative_values_included(fit):
    """Parameters are scaled by |initial| internally; the first point tried must
    still be the given one, sign and all (a start at |θ0| once sent a Fano fit
    with negative dispersive weights into another basin). Recovers a falling
    line exactly."""
    f = np.linspace(0.0, 1.0, 200)
    truth = np.array([2.0, -1.0])
    tried = []

    def line(x, theta):
        tried.append(np.array(theta, dtype=float))
        return theta[0] + theta[1] * x

    start = [1.5, -0.5]
    if fit == "whittle":
        result = fit_whittle(line, f, line(f, truth), 10**6, start)
    else:
        result = fit_least_squares(line, f, line(f, truth), start)
    assert np.array_equal(tried[1], start)  # tried[0] made the data
    assert np.allclose(result.values, truth, rtol=1e-6)


@pytest.mark.parametrize("window", ["boxcar", "hann", "flattop"])
def test_windowed_expectation_is_the_density_convolved_with_the_window_kernel(window):
    """E[P_k] from the autocovariance sum equals the brute-force convolution of
    the density with |Σ w_n e^{−2πifn/fs}|²/(fs N) (Percival & Walden 1993,
    Sec. 6.3), and its sum over the bins is the variance (Parseval)."""
    import scipy.signal

    from simulator.analysis.psd import WindowedExpectation

    fs, n, f0, gamma = 1000.0, 64, 100.3, 40.0

    def density(f):
        return (gamma / (2 * np.pi)) / ((f - f0) ** 2 + gamma**2 / 4) + 0.01

    expect = WindowedExpectation(fs, n, window, oversample=8)
    e = expect(density)
    w = scipy.signal.get_window(window, n, fftbins=True)
    w = w / np.sqrt(np.mean(w**2))
    fine = np.linspace(-fs / 2, fs / 2, 40_001)[:-1]
    for k in range(0, n, 4):
        kernel = np.abs(np.exp(-2j * np.pi * np.outer(expect.frequency_hz[k] - fine,
                                                      np.arange(n)) / fs) @ w) ** 2 / (fs * n)
        assert e[k] == pytest.approx(np.trapezoid(density(fine) * kernel, fine), rel=2e-3)
    assert np.sum(e) * fs / n == pytest.approx(np.trapezoid(density(fine), fine), rel=1e-4)
    # on chosen bins around a line (a fit's), the local sum over the bins and a
    # margin equals the full computation (a flat floor would need no smearing)
    def line(f):
        return density(f) - 0.01

    chosen = expect.frequency_hz[np.abs(expect.frequency_hz - f0) < 150]
    full = expect(line)[np.searchsorted(expect.frequency_hz, chosen)]
    assert np.allclose(expect.at(line, chosen, margin_bins=16), full, rtol=2e-3)


def test_windowed_expectation_refuses_bad_input():
    from simulator.analysis.psd import WindowedExpectation
    from simulator.errors import InputError

    for args in ((0.0, 64, "boxcar"), (1e3, 1, "boxcar"), (1e3, 64, "no-such-window")):
        with pytest.raises(InputError):
            WindowedExpectation(*args)
    with pytest.raises(InputError, match="oversample"):
        WindowedExpectation(1e3, 64, "boxcar", oversample=1)
    with pytest.raises(InputError, match="not bins"):
        WindowedExpectation(1e3, 64, "boxcar").at(np.ones_like, [1.0])
