"""Synthetic averaged spectra of several detected tones against time-domain records.

Three detected tones on a warm drum (invented device, tests/tone_scenarios.py):
red and blue probes at ±(Ωm + δ) on one cavity mode and a red tone on a second
mode. The red probe and the second mode's tone both scatter anti-Stokes light
from the same phonons (a cross-spectrum at the same f); the blue probe's Stokes
line correlates with both at −f (pseudo-spectra). The law of the averaged
spectral matrix (docs/records.md, "Synthetic averaged spectra") is checked as
the one-channel law is (tests/test_synthetic_spectrum.py):

- its exact means against an independent brute-force computation (the
  discrete model's autocovariance, the window and the DFT as matrices);
- the segments of a record: means of auto- and cross-spectra, their
  variances (Isserlis), the ±f correlation and covariance between channels,
  within bounds set by the number of segments;
- bin-to-bin correlation: none in the draw; the record's through the window;
- a bound on the discrepancy between a record's Welch matrix and a draw;
- d×d Wishart draws have the Wishart moments (Goodman, Ann. Math. Statist.
  34, 152 (1963));
- one detected tone: the output is what it was, bit for bit;
- the file round-trips, trials run per tone and on all, bad input is refused.
"""

import hashlib
import json

import h5py
import numpy as np
import pytest
import scipy.signal
import scipy.stats
from conftest import run_cli
from test_records import make

from simulator import System
from simulator.analysis.psd import spectral_matrix_estimate
from simulator.analysis.synthetic_channels import channels_law
from simulator.analysis.synthetic_spectrum import synthetic_averaged_spectrum
from simulator.analysis.wishart import complex_wishart, real_wishart
from simulator.errors import InputError
from simulator.io.averagedfile import load_averaged_spectrum
from simulator.records.generate import generate_record, plan_record
from simulator.scenario.loader import parse_scenario
from simulator.workflows.record import simulate_averaged_spectrum
from tests.test_tone_records import FS_HZ, two_probe_text, two_probes
from tests.tone_scenarios import OMEGA_HZ, second_mode, tone_table

N_SEG = 256
SEGMENTS = 2048
DURATION_S = N_SEG * SEGMENTS / FS_HZ
Z_MAX = 5.0  # no bin of a few hundred beyond 5 standard errors (p ~ 1e-4 for all)
HANN_NEIGHBOUR = 4.0 / 9.0  # |Σ w² e^{2πin/N}|² / (Σ w²)² for the Hann window
# The rms of ~230 standardised bins scatters by ≈ 0.055 from draw to draw (measured over
# 40 draws of the diagonal, the widest); two independent rms then differ by 0.3 at ≈ 4σ.
RMS_DISCREPANCY = 0.3
TONES = ("red", "blue", "side")


def three_tones():
    text = two_probe_text('tones = ["red", "blue", "side"]').replace(
        "[detection]", second_mode() + tone_table("side", 2e4, -OMEGA_HZ, "idler")
        + "[detection]")
    return parse_scenario(text, source="three-tones.toml")


def segments(record, window):
    """Windowed transforms Z/√(fs N) of every segment and channel, FFT order, (K, N, C)."""
    z = record.shot_noise_units()
    k = len(z) // N_SEG
    w = scipy.signal.get_window(window, N_SEG, fftbins=True)
    w = w / np.sqrt(np.mean(w**2))
    return np.fft.fft(z[:k * N_SEG].reshape(k, N_SEG, -1) * w[None, :, None], axis=1) \
        / np.sqrt(record.sample_rate_hz * N_SEG)


def law_fft_order(plan, window, n=N_SEG):
    expectation, spectra, pseudo = channels_law(plan, n, window)
    s, p = np.empty_like(spectra), np.empty_like(pseudo)
    s[expectation.order], p[expectation.order] = spectra, pseudo
    return s, p


@pytest.fixture(scope="module")
def three():
    system = System(three_tones())
    plan = plan_record(system, form="innovations", duration_s=DURATION_S)
    record = generate_record(system, seed=11, duration_s=DURATION_S, workers=1)
    return system, plan, record


def test_law_equals_a_brute_force_sum_over_the_segment():
    """E[Z_j Z_l†] and E[Z_j(f) Z_l(−f)] as F W C W F† and F W C' W Fᵀ with C the
    covariance of one segment of the discrete model (no lag folding, no doubling)."""
    n = 48
    plan = plan_record(System(three_tones()), form="innovations", duration_s=DURATION_S)
    s, p = law_fft_order(plan, "hann", n)
    r = plan.discrete.autocovariance(n)  # E[y_{a+τ} y_aᵀ], real outputs
    k = r.shape[1] // 2
    lag = np.arange(n)[:, None] - np.arange(n)[None, :]
    full = np.where(lag[:, :, None, None] >= 0, r[np.abs(lag)],
                    r[np.abs(lag)].transpose(0, 1, 3, 2))  # (n, n', a, b)
    y = full.transpose(0, 2, 1, 3).reshape(n * 2 * k, n * 2 * k)
    rounding = np.repeat(np.asarray(plan.channel_shot_noise_per_count) ** 2 / 12.0, 2)
    y += np.diag(np.tile(rounding, n))
    c = np.zeros((k, 2 * k), dtype=complex)
    c[np.arange(k), 2 * np.arange(k)], c[np.arange(k), 2 * np.arange(k) + 1] = 1.0, 1.0j
    w = scipy.signal.get_window("hann", n, fftbins=True)
    w = w / np.sqrt(np.mean(w**2))
    dft = np.exp(-2j * np.pi * np.outer(np.arange(n), np.arange(n)) / n) * w
    t = np.einsum("fn,ja->fjna", dft, c).reshape(n * k, n * 2 * k) / np.sqrt(
        plan.sample_rate_hz * n)
    cov = (t @ y @ t.conj().T).reshape(n, k, n, k)
    rel = (t @ y @ t.T).reshape(n, k, n, k)
    f = np.arange(n)
    scale = np.sqrt(np.einsum("fjj->fj", s).real.max())
    np.testing.assert_allclose(s, cov[f, :, f, :], atol=1e-9 * scale**2)
    np.testing.assert_allclose(p, rel[f, :, (-f) % n, :], atol=1e-9 * scale**2)


def test_record_segments_follow_the_joint_law(three):
    """Per bin and channel pair: mean and variance of Z_j Z_l* (Isserlis: E|X − S_jl|²
    = S_jj S_ll for circular pairs), the ±f term Z_j(f) Z_l(−f) and the covariance of
    the powers Cov(|Z_j(f)|², |Z_l(−f)|²) = |P_jl(f)|² between channels."""
    _, plan, record = three
    z = segments(record, "hann")
    k = z.shape[0]
    s, p = law_fft_order(plan, "hann")
    d = np.einsum("fjj->fj", s).real
    inner = np.r_[1:N_SEG // 2, N_SEG // 2 + 1:N_SEG]  # bins that pair with another
    minus = (-np.arange(N_SEG)) % N_SEG
    for j in range(3):
        for m in range(3):
            x = z[:, inner, j] * z[:, inner, m].conj()
            want = s[inner, j, m]
            ss = d[inner, j] * d[inner, m]
            if j == m:
                mean_z = (x.real.mean(axis=0) - want.real) / (want.real / np.sqrt(k))
                assert np.abs(mean_z).max() < Z_MAX and 0.8 < np.sqrt(np.mean(mean_z**2)) < 1.2
            else:
                var_re = (ss + (want**2).real) / 2 / k
                var_im = (ss - (want**2).real) / 2 / k
                err = x.mean(axis=0) - want
                assert np.abs(err.real / np.sqrt(var_re)).max() < Z_MAX, (j, m)
                assert np.abs(err.imag / np.sqrt(var_im)).max() < Z_MAX, (j, m)
            ratio = np.mean(np.abs(x - want) ** 2, axis=0) / ss
            assert np.abs(ratio - 1).max() < Z_MAX * np.sqrt(15.0 / k), (j, m)
            assert abs(ratio.mean() - 1) < 0.05
            # ±f: mean of Z_j(f) Z_l(−f) and covariance of the powers
            scale = np.sqrt(d[inner, j] * d[minus[inner], m])
            product = (z[:, inner, j] * z[:, minus[inner], m]).mean(axis=0)
            err = (product - p[inner, j, m]) / (scale / np.sqrt(2 * k))
            assert max(np.abs(err.real).max(), np.abs(err.imag).max()) < Z_MAX, (j, m)
            pj, pm = np.abs(z[:, inner, j]) ** 2, np.abs(z[:, minus[inner], m]) ** 2
            cov = np.mean((pj - d[inner, j]) * (pm - d[minus[inner], m]), axis=0) / scale**2
            predicted = np.abs(p[inner, j, m]) ** 2 / scale**2
            assert np.abs(cov - predicted).max() < Z_MAX * np.sqrt(3.0 / k), (j, m)
    # the correlations between tones are resolved many standard errors over
    coherence = np.abs(s[:, 0, 2]) / np.sqrt(d[:, 0] * d[:, 2])
    pseudo_coherence = np.abs(p[:, 1, 2]) / np.sqrt(d[:, 1] * d[minus, 2])
    assert coherence.max() > 0.3 and pseudo_coherence.max() > 0.3


@pytest.mark.parametrize("window, neighbour", [("boxcar", 0.0), ("hann", HANN_NEIGHBOUR)])
def test_neighbouring_bins_correlate_only_through_the_window(three, window, neighbour):
    """The law draws bins independently; a record's cross-spectrum bins correlate
    through the window (4/9 for Hann, < 0.05 for a boxcar), the draw's by 0."""
    system, plan, record = three
    z = segments(record, window)
    s, _ = law_fft_order(plan, window)
    d = np.einsum("fjj->fj", s).real
    inner = np.arange(2, N_SEG - 2)
    u = (z[:, :, 0] * z[:, :, 2].conj() - s[:, 0, 2]) / np.sqrt(d[:, 0] * d[:, 2])
    a, b = u[:, inner], u[:, inner + 1]
    corr = np.mean(a * b.conj(), axis=0).real / np.sqrt(
        np.mean(np.abs(a) ** 2, axis=0) * np.mean(np.abs(b) ** 2, axis=0))
    assert abs(np.median(corr) - neighbour) < 0.05
    drawn = synthetic_averaged_spectrum(system, segment_samples=N_SEG, window=window, seed=3,
                                        duration_s=DURATION_S)
    e = drawn.expected_spectral_matrix
    v = (drawn.spectral_matrix[:, 0, 2] - e[:, 0, 2]) / np.sqrt(
        drawn.expected_density[:, 0] * drawn.expected_density[:, 2])
    rho = np.mean(v[:-1] * v[1:].conj()).real / np.mean(np.abs(v) ** 2)
    assert abs(rho) < Z_MAX / np.sqrt(N_SEG)


def standardised(matrix, pseudo, law):
    """Deviations of every element of an averaged spectral and pseudo matrix from the
    law's means, over the standard error √(S_jj S_ll / K) (real and imaginary parts
    together: E|z|² = 1); diagonal, cross- and pseudo-spectra."""
    d = law.expected_density
    minus = np.array([np.argmin(np.abs(law.frequency_hz + f)) for f in law.frequency_hz])
    out = {}
    for j in range(3):
        for m in range(j, 3):
            se = np.sqrt(d[:, j] * d[:, m] / law.averages)
            out[f"S{j}{m}"] = (matrix[:, j, m] - law.expected_spectral_matrix[:, j, m]) / se
            se = np.sqrt(d[:, j] * d[minus, m] / law.averages)
            out[f"P{j}{m}"] = (pseudo[:, j, m] - law.expected_pseudo_matrix[:, j, m]) / se
    return out


def test_a_record_and_a_synthetic_draw_differ_by_less_than_the_bound(three):
    """Boxcar window (independent bins for lines wider than a bin, so the comparison is
    fair): every element of the record's Welch matrix and of a draw scatters about the
    law with unit rms (0.8–1.2); the two rms agree within 0.3 and the real parts'
    distributions pass a two-sample Kolmogorov–Smirnov test at 0.1 % — the bound on the
    discrepancy between a synthetic spectrum and a record's (away from 0 and fs/2)."""
    system, _, record = three
    est = spectral_matrix_estimate(record.shot_noise_units(), record.sample_rate_hz,
                                   segment_samples=N_SEG, window="boxcar", tones=record.tones)
    drawn = synthetic_averaged_spectrum(system, segment_samples=N_SEG, window="boxcar",
                                        seed=5, duration_s=DURATION_S)
    assert drawn.tones == record.tones == TONES and drawn.averages == est.averages
    np.testing.assert_allclose(drawn.frequency_hz, est.frequency_hz)
    assert drawn.noise_bandwidth_hz == pytest.approx(est.noise_bandwidth_hz)
    inner = np.abs(drawn.frequency_hz) < 0.45 * FS_HZ
    ours = standardised(est.cross, est.pseudo, drawn)
    theirs = standardised(drawn.spectral_matrix, drawn.pseudo_matrix, drawn)
    for key in ours:
        a, b = ours[key][inner], theirs[key][inner]
        rms = [np.sqrt(np.mean(np.abs(x) ** 2)) for x in (a, b)]
        assert all(0.8 < r < 1.2 for r in rms), (key, rms)
        assert abs(rms[0] - rms[1]) < RMS_DISCREPANCY, (key, rms)
        if key[0] == "S" and key[1] == key[2]:
            continue  # the diagonal: |Z|² is a power, scaled Gamma (compared by rms)
        assert scipy.stats.ks_2samp(a.real, b.real).pvalue > 1e-3, key


def test_wishart_draws_of_any_size_have_wishart_moments():
    """6×6: E W = KΣ and Cov(W_ij, W_kl) = K Σ_il Σ_kj (complex); E W = KC and
    Var W_ii = 2K C_ii² (real); a singular draw (K < d) has rank K and mean KΣ
    (Goodman, Ann. Math. Statist. 34, 152 (1963); Anderson, An Introduction to
    Multivariate Statistical Analysis, 3rd ed. (Wiley, 2003), Sec. 7.2, recalled
    from memory)."""
    rng = np.random.default_rng(4)
    a = rng.standard_normal((6, 6)) + 1j * rng.standard_normal((6, 6))
    sigma = a @ a.conj().T / 6
    m = 40_000
    tol = Z_MAX / np.sqrt(m)
    for dof in (9, 2):
        w = complex_wishart(np.broadcast_to(sigma, (m, 6, 6)).copy(), dof, rng)
        scale = np.sqrt(np.outer(np.diag(sigma).real, np.diag(sigma).real))
        assert np.abs(w.mean(axis=0) / dof - sigma).max() < 4 * tol * scale.max()
        if dof < 6:
            assert np.linalg.matrix_rank(w[0]) == dof
            continue
        x, y = w[:, 0, 3] - dof * sigma[0, 3], w[:, 2, 5] - dof * sigma[2, 5]
        got = np.mean(x * y)  # Cov(W_03, W_25) = K Σ_05 Σ_23 (Isserlis, circular)
        want = dof * sigma[0, 5] * sigma[2, 3]
        assert abs(got - want) < 20 * tol * dof * scale.max() ** 2
    c = (a @ a.conj().T).real / 6
    r = real_wishart(np.broadcast_to(c, (m, 6, 6)).copy(), 9, rng)
    assert np.abs(r.mean(axis=0) / 9 - c).max() < 4 * tol * np.diag(c).max()
    ratio = np.var(r[:, np.arange(6), np.arange(6)], axis=0) / (2 * 9 * np.diag(c) ** 2)
    np.testing.assert_allclose(ratio, 1, atol=10 * tol)


def test_an_hour_of_three_tones_costs_what_a_second_does(three):
    """K = 2.25·10⁸ segments: every element scatters by its standard error √(S_jj S_ll/K)."""
    system, _, _ = three
    s = synthetic_averaged_spectrum(system, segment_samples=N_SEG, seed=1, duration_s=3600.0)
    assert s.averages == int(3600.0 * FS_HZ) // N_SEG
    for key, z in standardised(s.spectral_matrix, s.pseudo_matrix, s).items():
        assert 0.8 < np.sqrt(np.mean(np.abs(z) ** 2)) < 1.2, key


def digest(spectrum):
    cross = b"" if spectrum.cross is None else spectrum.cross.tobytes()
    return hashlib.sha256(spectrum.density.tobytes() + cross).hexdigest()[:16]


# Written by the one-tone code before several detected tones were supported (same
# seed, segment and duration); a change of any bit of a one-tone draw changes them.
ONE_TONE_DIGESTS = {"iq": "a763b86fc0a502e5", "if": "f7f63d784723035f"}


@pytest.mark.parametrize("kind", ["iq", "if"])
def test_one_tone_output_is_unchanged_bit_for_bit(kind):
    sections = {} if kind == "iq" else dict(
        detection={"intermediate_frequency_hz": 0.41e6}, record={"kind": "if"})
    s = synthetic_averaged_spectrum(make(samples=N_SEG * 64, **sections),
                                    segment_samples=N_SEG, seed=7)
    assert digest(s) == ONE_TONE_DIGESTS[kind] and s.tones == ()


def test_one_listed_tone_is_the_detected_tone_bit_for_bit():
    a = synthetic_averaged_spectrum(two_probes('tones = ["blue"]'), segment_samples=N_SEG,
                                    seed=7, duration_s=DURATION_S)
    b = synthetic_averaged_spectrum(two_probes('tone = "blue"'), segment_samples=N_SEG,
                                    seed=7, duration_s=DURATION_S)
    assert digest(a) == digest(b) and a.tones == b.tones == ()


def test_file_round_trip_and_plain_h5py(three, tmp_path):
    system, _, _ = three
    path = tmp_path / "tones.h5"
    s = simulate_averaged_spectrum(system, segment_samples=N_SEG, seed=9,
                                   duration_s=DURATION_S, out=path)
    back = load_averaged_spectrum(path)
    for name in ("density", "cross", "expected_density", "expected_cross", "spectral_matrix",
                 "pseudo_matrix", "expected_spectral_matrix", "expected_pseudo_matrix"):
        np.testing.assert_array_equal(getattr(back, name), getattr(s, name), err_msg=name)
    assert back.tones == TONES and back.channel_rounding_variance == s.channel_rounding_variance
    assert [c["tone"] for c in back.truth.channels] == list(TONES)
    with h5py.File(path, "r") as f:
        assert f.attrs["format_version"] == 2 and list(f.attrs["tones"]) == list(TONES)
        assert f["density"].shape == (N_SEG, 3) and f["spectral_matrix"].shape == (N_SEG, 3, 3)
        assert "pseudo_matrix" in f["truth"] and "channels" in f["truth"]
        np.testing.assert_array_equal(f["density"][:], np.einsum(
            "fjj->fj", f["spectral_matrix"][:]).real)
    # one tone's view is that tone's spectrum with its own calibration
    blue = back.channel("blue")
    np.testing.assert_array_equal(blue.density, s.spectral_matrix[:, 1, 1].real)
    assert blue.truth.calibration == s.truth.channels[1]["calibration"]
    assert blue.estimate().density.shape == (N_SEG,)
    assert back.matrix().channel("side").density.tolist() == s.density[:, 2].tolist()
    one = simulate_averaged_spectrum(make(samples=N_SEG * 64), segment_samples=N_SEG, seed=1,
                                     out=tmp_path / "one.h5")
    with h5py.File(one.path, "r") as f:
        assert f.attrs["format_version"] == 1 and "tones" not in f.attrs


def test_bad_input_is_refused(three, tmp_path):
    system, _, _ = three
    s = synthetic_averaged_spectrum(system, segment_samples=N_SEG, seed=2,
                                    duration_s=DURATION_S)
    with pytest.raises(InputError, match="'green'.*expected one of 'red', 'blue', 'side'"):
        s.channel("green")
    with pytest.raises(InputError, match="3 detected tones.*channel\\(tone\\)"):
        s.estimate()
    one = synthetic_averaged_spectrum(make(samples=N_SEG * 64), segment_samples=N_SEG)
    with pytest.raises(InputError, match="one detected tone"):
        one.matrix()
    with pytest.raises(InputError, match="segment_samples"):
        synthetic_averaged_spectrum(system, segment_samples=1, duration_s=DURATION_S)
    path = tmp_path / "cut.h5"
    simulate_averaged_spectrum(system, segment_samples=N_SEG, seed=2, duration_s=DURATION_S,
                               out=path)
    with h5py.File(path, "r+") as f:
        del f["pseudo_matrix"]
        f["pseudo_matrix"] = np.zeros((N_SEG, 2, 2), dtype=complex)
    with pytest.raises(InputError, match="cut.h5.*expected \\(F, 3\\), \\(F, 3, 3\\)"):
        load_averaged_spectrum(path)
    with h5py.File(path, "r+") as f:
        del f["truth/spectral_matrix"]
    with pytest.raises(InputError, match="lacks"):
        load_averaged_spectrum(path)


def test_trial_runs_an_estimator_per_tone_or_on_all(tmp_path):
    """``trial --averaged`` with several tones: a one-tone estimator per tone (its
    quantities named ``<name>:<tone>``), an ``all_channels`` one on the matrix."""
    from simulator.workflows.trial import run_trials

    scenario = three_tones()
    options = dict(duration_s=DURATION_S / 8, workers=1, progress=False,
                   averaged=(N_SEG, "hann"))
    per = run_trials(scenario, "tests.tone_spectrum_estimators:tone_floor", 2,
                     tmp_path / "a", **options)
    got = {q.name: q.mean for q in per.quantities}
    assert set(got) == {f"{q}:{t}" for q in ("floor", "tone_letters") for t in TONES}
    assert got["tone_letters:blue"] == 4.0 and got["tone_letters:side"] == 4.0
    law = synthetic_averaged_spectrum(scenario, segment_samples=N_SEG,
                                      duration_s=DURATION_S / 8)
    for k, tone in enumerate(TONES):
        assert got[f"floor:{tone}"] == pytest.approx(np.median(law.expected_density[:, k]),
                                                     rel=0.02)
    whole = run_trials(scenario, "tests.tone_spectrum_estimators:joint_coherence", 2,
                       tmp_path / "b", **options)
    got = {q.name: q.mean for q in whole.quantities}
    assert got["channels"] == 3.0 and got["own_cross_columns"] == 3.0
    assert got["pseudo_coherence"] > 0.1  # the blue probe's Stokes with the red lines


def test_cli_writes_an_averaged_spectrum_of_several_tones(tmp_path):
    scenario = tmp_path / "s.toml"
    scenario.write_text(three_tones().to_toml())
    out = tmp_path / "a.h5"
    done = run_cli("record", scenario, "--out", out, "--averaged", N_SEG, "--duration",
                   "1", "--seed", "2", "--json")
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["tones"] == list(TONES)
    assert load_averaged_spectrum(out).averages == int(FS_HZ) // N_SEG
