"""Synthetic averaged spectra: the law of averaged periodogram bins against records.

- the exact bin expectations agree with an independent computation (the
  full-state model's autocovariance folded with the window, test_records);
- periodograms of time-domain records, segment by segment, have the law's
  means, variances (exponential: variance = mean²), ±f correlation
  E[Z_f Z_{−f}] and covariance Cov(P_f, P_{−f}) = |E[Z_f Z_{−f}]|² (complex
  Gaussian, Isserlis), within bounds set by the number of segments;
- bin-to-bin correlation: the law draws bins independently; the records'
  neighbouring bins are uncorrelated for a boxcar window (bound 0.05) and
  correlated by the Hann window's 4/9 (documented approximation);
- the Wishart draws have the Wishart moments (Goodman, Ann. Math. Statist.
  34, 152 (1963): E W = KΣ, Cov(W_ij, W_kl) = K Σ_il Σ_kj for the complex law);
- real records: the scaled chi-square law per bin;
- the file round-trips through h5py alone, the CLI and the trial harness
  take the new input, bad input is refused.
"""

import h5py
import numpy as np
import pytest
import scipy.signal
from conftest import run_cli
from test_records import expected_welch, make

from simulator.analysis.psd import averaged_periodogram
from simulator.analysis.synthetic_spectrum import bin_law, synthetic_averaged_spectrum
from simulator.analysis.wishart import complex_wishart, real_wishart
from simulator.errors import InputError
from simulator.io.averagedfile import load_averaged_spectrum
from simulator.records.generate import plan_record
from simulator.workflows.record import simulate_averaged_spectrum, simulate_record

N_SEG = 256
SAMPLES = N_SEG * 2048  # K = 2048 segments
IF = dict(detection={"intermediate_frequency_hz": 0.41e6}, record={"kind": "if"})
HOMODYNE = dict(detection={"scheme": "homodyne", "quadrature_angle_rad": 1.2})
Z_MAX = 5.0  # no bin of a few hundred beyond 5 standard errors (p ~ 1e-4 for all)
HANN_NEIGHBOUR = 4.0 / 9.0  # |Σ w² e^{2πin/N}|² / (Σ w²)² for the Hann window


def segments(record, window):
    """Windowed transforms Z/√(fs N) of every segment, FFT order, (K, N)."""
    x = record.shot_noise_units()
    k = x.size // N_SEG
    w = scipy.signal.get_window(window, N_SEG, fftbins=True)
    w = w / np.sqrt(np.mean(w**2))
    return np.fft.fft(x[:k * N_SEG].reshape(k, N_SEG) * w, axis=1) / np.sqrt(
        record.sample_rate_hz * N_SEG)


def law_fft_order(plan, window):
    expectation, mean, pseudo = bin_law(plan, N_SEG, window)
    e = np.empty(N_SEG)
    e[expectation.order] = mean
    if pseudo is None:
        return e, None
    b = np.empty(N_SEG, dtype=complex)
    b[expectation.order] = pseudo
    return e, b


@pytest.fixture(scope="module")
def iq():
    scenario = make(samples=SAMPLES)
    return plan_record(scenario, form="innovations"), simulate_record(scenario, seed=11)


@pytest.mark.parametrize("sections", [{}, IF, HOMODYNE])
def test_expectation_agrees_with_the_full_state_autocovariance(sections):
    """Innovations-form autocovariance by doubling = full-state autocovariance, folded."""
    plan = plan_record(make(samples=SAMPLES, **sections), form="innovations")
    e, _ = law_fft_order(plan, "hann")
    np.testing.assert_allclose(e, expected_welch(plan, N_SEG), rtol=1e-9)


def test_iq_segments_follow_the_pair_law(iq):
    plan, record = iq
    z = segments(record, "hann")
    k = z.shape[0]
    e, b = law_fft_order(plan, "hann")
    partner = (-np.arange(N_SEG)) % N_SEG
    pairs = np.arange(1, N_SEG // 2)  # (f, −f) pairs; 0 and fs/2 pair with themselves
    p = np.abs(z) ** 2
    mean_z = (p.mean(axis=0) - e) / (e / np.sqrt(k))
    assert np.abs(mean_z).max() < Z_MAX and 0.8 < np.sqrt(np.mean(mean_z**2)) < 1.2
    ratio = p[:, pairs].var(axis=0) / e[pairs] ** 2  # exponential law: variance = mean²
    assert np.abs(ratio - 1).max() < Z_MAX * np.sqrt(8.0 / k)
    assert abs(ratio.mean() - 1) < 0.05
    # the ±f correlation: non-trivial here, and what the records show
    scale = np.sqrt(e[pairs] * e[partner[pairs]])
    assert np.max(np.abs(b[pairs]) / scale) > 0.2
    product = (z[:, pairs] * z[:, partner[pairs]]).mean(axis=0)
    err = (product - b[pairs]) / (scale / np.sqrt(2 * k))
    assert max(np.abs(err.real).max(), np.abs(err.imag).max()) < Z_MAX
    cov = np.mean((p[:, pairs] - e[pairs]) * (p[:, partner[pairs]] - e[partner[pairs]]),
                  axis=0) / scale**2
    predicted = np.abs(b[pairs]) ** 2 / scale**2
    assert np.abs(cov - predicted).max() < Z_MAX * np.sqrt(3.0 / k)


@pytest.mark.parametrize("window, neighbour", [("boxcar", 0.0), ("hann", HANN_NEIGHBOUR)])
def test_neighbouring_bins_correlate_only_through_the_window(iq, window, neighbour):
    """The law's independent bins: exact for a boxcar window (within 0.05), off
    by the window's own neighbour correlation for Hann (4/9 for white noise)."""
    plan, record = iq
    p = np.abs(segments(record, window)) ** 2
    e, _ = law_fft_order(plan, window)
    u = p / e - 1.0
    inner = np.arange(2, N_SEG - 2)
    corr = np.mean(u[:, inner] * u[:, inner + 1], axis=0) / np.sqrt(
        np.mean(u[:, inner] ** 2, axis=0) * np.mean(u[:, inner + 1] ** 2, axis=0))
    assert abs(np.median(corr) - neighbour) < 0.05
    synthetic = synthetic_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG,
                                            window=window, seed=3)
    v = synthetic.density / synthetic.expected_density - 1.0
    assert abs(np.corrcoef(v[:-1], v[1:])[0, 1]) < Z_MAX / np.sqrt(N_SEG)


def test_averaged_record_and_synthetic_spectrum_share_mean_and_spread(iq):
    plan, record = iq
    estimate = averaged_periodogram(record.shot_noise_units(), record.sample_rate_hz,
                                    segment_samples=N_SEG)
    synthetic = synthetic_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG,
                                            seed=5)
    assert synthetic.averages == estimate.averages
    np.testing.assert_allclose(synthetic.frequency_hz, estimate.frequency_hz)
    assert synthetic.noise_bandwidth_hz == pytest.approx(estimate.noise_bandwidth_hz)
    for density in (estimate.density, synthetic.density):
        z = (density - synthetic.expected_density) / (synthetic.expected_density
                                                       / np.sqrt(synthetic.averages))
        assert np.abs(z).max() < Z_MAX and 0.8 < np.sqrt(np.mean(z**2)) < 1.2
    z = (synthetic.cross - synthetic.expected_cross) / (
        synthetic.expected_density / np.sqrt(2 * synthetic.averages))
    assert np.abs(z).max() < 1.5 * Z_MAX


@pytest.mark.parametrize("sections", [IF, HOMODYNE])
def test_real_record_bins_are_scaled_chi_square(sections):
    scenario = make(samples=SAMPLES, **sections)
    plan = plan_record(scenario, form="innovations")
    z = segments(simulate_record(scenario, seed=4), "hann")
    e, _ = law_fft_order(plan, "hann")
    inner = np.arange(2, N_SEG // 2 - 2)  # away from 0 and fs/2, where Z_k correlates with itself
    p = np.abs(z[:, inner]) ** 2
    k = z.shape[0]
    assert np.abs((p.mean(axis=0) - e[inner]) / (e[inner] / np.sqrt(k))).max() < Z_MAX
    assert abs((p.var(axis=0) / e[inner] ** 2).mean() - 1) < 0.05
    synthetic = synthetic_averaged_spectrum(scenario, segment_samples=N_SEG, seed=2)
    assert synthetic.sided == "one-sided" and synthetic.cross is None
    np.testing.assert_allclose(synthetic.expected_density[inner - 1], 2 * e[inner])


def test_wishart_draws_have_wishart_moments():
    rng = np.random.default_rng(8)
    sigma = np.array([[2.0, 0.6 - 0.5j], [0.6 + 0.5j, 1.0]])
    m, dof = 200_000, 7
    w = complex_wishart(np.broadcast_to(sigma, (m, 2, 2)).copy(), dof, rng)
    tol = Z_MAX / np.sqrt(m)
    np.testing.assert_allclose(w.mean(axis=0) / dof, sigma, atol=3 * tol)
    assert np.var(w[:, 0, 0].real) / (dof * 4.0) == pytest.approx(1, abs=10 * tol)
    cov = np.mean((w[:, 0, 0].real - 2 * dof) * (w[:, 1, 1].real - dof))
    assert cov / (dof * abs(sigma[0, 1]) ** 2) == pytest.approx(1, abs=20 * tol)
    c = np.array([[1.5, -0.4], [-0.4, 0.5]])
    r = real_wishart(np.broadcast_to(c, (m, 2, 2)).copy(), dof, rng)
    np.testing.assert_allclose(r.mean(axis=0) / dof, c, atol=3 * tol)
    assert np.var(r[:, 0, 0]) / (2 * dof * c[0, 0] ** 2) == pytest.approx(1, abs=10 * tol)
    cov = np.mean((r[:, 0, 0] - dof * c[0, 0]) * (r[:, 1, 1] - dof * c[1, 1]))
    assert cov / (2 * dof * c[0, 1] ** 2) == pytest.approx(1, abs=30 * tol)


def test_an_hour_costs_the_same_as_a_second():
    """K = 1.4·10⁷ segments: the relative spread of the bins is 1/√K."""
    s = synthetic_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG, seed=1,
                                    duration_s=3600.0)
    assert s.averages == int(3600.0 * 2e6) // N_SEG
    rel = s.density / s.expected_density - 1
    assert 0.8 < np.std(rel) * np.sqrt(s.averages) < 1.2


def test_file_round_trip_and_plain_h5py(tmp_path):
    path = tmp_path / "spectrum.h5"
    s = simulate_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG, seed=9,
                                   out=path)
    back = load_averaged_spectrum(path)
    np.testing.assert_array_equal(back.density, s.density)
    np.testing.assert_array_equal(back.cross, s.cross)
    assert back.truth.occupation == s.truth.occupation and back.averages == s.averages
    with h5py.File(path, "r") as f:
        assert f.attrs["format"] == "noisechain-averaged-spectrum"
        assert f["density"].shape == (N_SEG,) and "expected_density" in f["truth"]
        assert "occupation" in f["truth"].attrs and "calibration" in f["truth"]
    with pytest.raises(InputError, match="already exists"):
        simulate_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG, out=path)
    again = simulate_averaged_spectrum(make(samples=SAMPLES), segment_samples=N_SEG, seed=9)
    np.testing.assert_array_equal(again.density, s.density)  # a pure function of the seed


@pytest.mark.parametrize("kwargs, words", [
    (dict(segment_samples=1), "segment_samples = 1"),
    (dict(segment_samples=10 * SAMPLES), "segment_samples"),
    (dict(segment_samples=N_SEG, window="no-such-window"), "window"),
])
def test_bad_input_is_refused(kwargs, words):
    with pytest.raises(InputError, match=words):
        synthetic_averaged_spectrum(make(samples=SAMPLES), **kwargs)


def test_a_calibration_tone_is_refused():
    scenario = make(samples=SAMPLES, drive={"calibration_tone": {
        "depth_rad": 1e-4, "frequency_hz": 123e3}})
    with pytest.raises(InputError, match="calibration_tone"):
        synthetic_averaged_spectrum(scenario, segment_samples=N_SEG)


def test_cli_writes_an_averaged_spectrum(tmp_path):
    scenario = tmp_path / "s.toml"
    scenario.write_text(make(samples=SAMPLES).to_toml())
    out = tmp_path / "a.h5"
    done = run_cli("record", str(scenario), "--out", str(out), "--averaged", str(N_SEG),
                   "--duration", "3600", "--seed", "2")
    assert done.returncode == 0, done.stderr
    assert load_averaged_spectrum(out).averages == int(3600 * 2e6) // N_SEG


def test_trial_hands_the_estimator_an_averaged_spectrum(tmp_path):
    """The harness plumbing: each trial draws a spectrum for its seed, the
    estimator sees a PublicSpectrum, and the floor comes out at 1 per Hz plus
    the mechanics' share of the median bin."""
    from simulator.workflows.trial import run_trials

    scenario = make(samples=SAMPLES)
    result = run_trials(scenario, "tests.estimators_for_tests:spectrum_floor", 3,
                        tmp_path / "trial", workers=1, progress=False,
                        averaged=(N_SEG, "hann"))
    estimates = result.dataset["estimate"].sel(quantity="floor_density").values
    expected = np.median(synthetic_averaged_spectrum(
        scenario, segment_samples=N_SEG).expected_density)
    np.testing.assert_allclose(estimates, expected, rtol=0.01)
    assert len(set(estimates)) == 3  # each trial its own seed
