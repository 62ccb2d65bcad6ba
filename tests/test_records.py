"""Statistics of generated records against the exact model they come from.

Every check compares a record with a number computed without random numbers:
the exact expectation of scipy.signal.welch for the sampled model, the
Lyapunov covariance, the steady-state occupation. Tolerances come from the
known sampling statistics of the estimators (quoted beside each test), with
fixed seeds.

Welch statistics used throughout: Hann window, non-overlapping segments of
L samples, no detrending. For a Gaussian record whose correlation time is
short against a segment, each periodogram bin (away from 0 and fs/2) is
exponentially distributed about its mean, so the average W over K segments
is Gamma distributed with shape K: W/E[W] has mean 1 and variance 1/K, and
a(r − 1)² has mean 1 and variance 2 + 6/K (moments of the Gamma
distribution). Bins three apart are uncorrelated for the Hann window (its
square has Fourier components at lags 0, 1, 2 only), so every third bin on
one side of zero gives independent terms; the two sides are tested
separately because the Stokes and anti-Stokes sidebands are correlated.
Reference: Welch, IEEE Trans. Audio Electroacoust. 15, 70 (1967); Harris,
Proc. IEEE 66, 51 (1978) (window properties).
"""

import dataclasses
import warnings

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling
from scipy import signal, special

from simulator.records.generate import MemorySink, generate, plan_record
from simulator.scenario.loader import scenario_from_dict
from simulator.workflows.record import simulate_record

FS = 2e6
SEGMENT = 1024
SAMPLES = 1 << 20
Z_LIMIT = 5.0  # standard normal: a 5σ excursion has probability 6e-7


def make(*, g_hz=40e3, detuning_hz=-300e3, linewidth_hz=3e3, bath=2.0, external_hz=None,
         samples=SAMPLES, coupling_hz=200.0, **sections):
    """A 300 kHz mode in a 600 kHz cavity, sampled at 2 MHz, with chain sections."""
    base = scenario_with_coupling(
        g_hz=g_hz, linewidth_hz=600e3, external_linewidth_hz=external_hz,
        detuning_hz=detuning_hz,
        modes=[mode(frequency_hz=300e3, linewidth_hz=linewidth_hz, coupling_hz=coupling_hz,
                    bath_occupation=bath, effective_mass_kg=1e-13)])
    data = base.to_dict()
    data["digitizer"] = {"sample_rate_hz": FS}
    data["record"] = {"duration_s": samples / FS}
    for name, values in sections.items():
        data.setdefault(name, {}).update(values)
    return scenario_from_dict(data, source="<test>")


def welch(record, nperseg=SEGMENT):
    return signal.welch(record.shot_noise_units(), fs=record.sample_rate_hz, window="hann",
                        nperseg=nperseg, noverlap=0, detrend=False, return_onesided=False)


def expected_welch(plan, nperseg=SEGMENT, window="hann", quantisation=True):
    """Exact E[welch] of the stored record, from the sampled model's autocovariance.

    E[W(f_k)] = Σ_τ c_w(τ) R(τ) e^{−2πikτ/L} / (fs Σ w²), with c_w the window's
    autocorrelation and R the record's autocovariance (complex I + iQ for iq;
    the time average 2 Re[e^{iθTτ} R_ρ(τ)] of the rotated real record for if),
    plus (with ``quantisation``) the rounding noise Δ²/12 per real channel.
    Frequencies in the order of numpy.fft.fftfreq, as welch returns them.
    """
    chain, lags = plan.chain, plan.discrete.autocovariance(nperseg)
    q = plan.shot_noise_per_count**2 / 12.0 if quantisation else 0.0
    if chain.receiver == "homodyne":
        r = lags[:, 0, 0].astype(complex)
        r[0] += q
    else:
        r = lags[:, 0, 0] + lags[:, 1, 1] + 1j * (lags[:, 1, 0] - lags[:, 0, 1])
        if chain.receiver == "if":
            turn = chain.carrier_rad_s / plan.sample_rate_hz
            r = (2 * np.real(np.exp(1j * turn * np.arange(nperseg)) * r)).astype(complex)
            r[0] += q
        else:
            r[0] += 2 * q
    w = signal.get_window(window, nperseg)
    cw = np.correlate(w, w, "full")[nperseg - 1:]
    seq = cw * r
    m = np.arange(1, nperseg)
    seq[m] += np.conj(cw[nperseg - m] * r[nperseg - m])
    return np.fft.fft(seq).real / (plan.sample_rate_hz * np.sum(w**2))


def halves(f):
    """Independent bins: every third bin on each side of zero, without 0 and fs/2."""
    order = np.argsort(f)
    pos = [k for k in order if f[k] > 0 and k != len(f) // 2][::3]
    neg = [k for k in order if f[k] < 0 and k != len(f) // 2][::3]
    return np.array(pos), np.array(neg)


def gof_z(w, e, segments, idx):
    """(Σ K (r − 1)² − M) / √(M (2 + 6/K)), r = W/E over M independent bins: ~ N(0, 1)."""
    r = w[idx] / e[idx]
    m = r.size
    return (segments * np.sum((r - 1) ** 2) - m) / np.sqrt(m * (2 + 6 / segments))


CHAINS = {
    "iq ideal": {},
    "iq lossy, filtered, current noise": dict(
        detection={"efficiency": 0.6},
        electronics={"bandwidth_hz": 0.7e6, "current_noise_a_per_sqrt_hz": 3e-12}),
    "iq amplifier": dict(electronics={"amplifier_added_quanta": 15.0}),
    "if below, filtered": dict(detection={"intermediate_frequency_hz": 0.4512e6},
                               record={"kind": "if"},
                               electronics={"bandwidth_hz": 1.5e6}),
    "if above": dict(detection={"intermediate_frequency_hz": 0.4512e6,
                                "local_oscillator_side": "above"}, record={"kind": "if"}),
    "homodyne": dict(detection={"scheme": "homodyne", "quadrature_angle_rad": 1.2}),
}


@pytest.mark.parametrize("name", list(CHAINS))
def test_welch_psd_matches_analytic_chain_spectrum(name):
    """The record's Welch PSD is consistent with the chain's analytic spectrum.

    Goodness of fit, |z| < 5 on each side, against (1) the exact expectation
    of the Welch estimate for the sampled model and (2) the analytic chain
    spectrum itself (StateSpace.output_spectrum of the chain, aliased and
    × sinc² by chain.sampled_spectrum, plus the quantisation noise), whose
    only difference from (1) is the smoothing by the window.
    """
    scenario = make(**CHAINS[name])
    plan = plan_record(scenario)
    record = simulate_record(scenario, seed=101)
    f, w = welch(record)
    expected = expected_welch(plan)
    quantisation = (2 if record.kind == "iq" else 1) * plan.shot_noise_per_count**2 / 12 / FS
    segments = SAMPLES // SEGMENT
    for idx in halves(f):
        if record.kind == "if" and f[idx[0]] < 0:
            continue  # a real record's negative half mirrors the positive one
        assert abs(gof_z(w, expected, segments, idx)) < Z_LIMIT
        analytic = np.zeros_like(w)
        analytic[idx] = plan.chain.sampled_spectrum(f[idx], FS, aliases=30) + quantisation
        assert abs(gof_z(w, analytic, segments, idx)) < Z_LIMIT


def wrong_plan(plan):
    """The classic mistake of docs/records.md: output noise drawn apart from the state noise."""
    disc = plan.discrete
    n = len(disc.states)
    cov = disc.noise_covariance.copy()
    cov[:n, n:] = 0.0
    cov[n:, :n] = 0.0
    return dataclasses.replace(plan, form="full-state", innovations=None,
                               discrete=dataclasses.replace(disc, noise_covariance=cov))


def test_independent_output_noise_is_rejected():
    """Dropping the state–output noise correlation (the imprecision–back-action
    correlation) changes the spectrum: the same goodness-of-fit test that
    accepts the exact generator rejects it on both sides."""
    scenario = make()
    plan = plan_record(scenario)
    sink = MemorySink(plan)
    generate(wrong_plan(plan), sink, chunk=1 << 18)
    wrong = sink.finish(0)
    right = simulate_record(scenario, seed=0, form="full-state")
    f, w_wrong = welch(wrong)
    _, w_right = welch(right)
    e = expected_welch(plan)
    segments = SAMPLES // SEGMENT
    for idx in halves(f):
        assert abs(gof_z(w_right, e, segments, idx)) < Z_LIMIT
        assert gof_z(w_wrong, e, segments, idx) > Z_LIMIT


def test_mechanical_quadratures_have_the_lyapunov_covariance():
    """Sample covariance of the stored q, p equals the Lyapunov covariance V.

    Standard error of a sample covariance of a stationary Gaussian sequence
    (Bartlett's formula; Priestley, Spectral Analysis and Time Series (1981),
    Sec. 5.3): Var Ĉ_ij = (1/N) Σ_τ [R_ii(τ) R_jj(τ) + R_ij(τ) R_ji(τ)], with
    R(τ) = Φ^τ V of the sampled model.
    """
    scenario = make(samples=1 << 19)
    record = simulate_record(scenario, seed=5, store_mechanics=True)
    plan = plan_record(scenario)
    x = record.mechanical_quadratures
    assert record.form == "full-state" and x.shape == (record.n_samples, 2)
    sample = x.T @ x / len(x)
    disc = plan.discrete
    idx = [disc.states.index("m0.q"), disc.states.index("m0.p")]
    v = disc.state_covariance
    lagged, r = [], v.copy()
    for _ in range(4000):
        lagged.append(r[np.ix_(idx, idx)])
        r = disc.transition @ r
    lagged = np.array(lagged)
    both = np.concatenate([lagged, np.swapaxes(lagged, 1, 2)[1:]])  # τ ≥ 0 and τ < 0
    var = (np.einsum("tii,tjj->tij", both, both) + both * np.swapaxes(both, 1, 2)).sum(0)
    err = np.sqrt(var / len(x))
    target = v[np.ix_(idx, idx)]
    assert np.all(np.abs(sample - target) < Z_LIMIT * err)
    n_sample = (sample[0, 0] + sample[1, 1] - 1) / 2
    assert abs(n_sample - record.truth.occupation[0]) < Z_LIMIT * np.hypot(*np.diag(err)) / 2


def test_full_state_and_innovations_forms_give_the_same_spectrum():
    """Two-sample test: log(W₁/W₂) per bin has mean 0 and variance 2ψ′(K)
    (ψ′ the trigamma function: the variance of the log of a Gamma(K)
    variable); Σ (log ratio)²/(2ψ′(K)) over M independent bins ≈ χ²_M."""
    scenario = make()
    full = simulate_record(scenario, seed=21, form="full-state")
    innov = simulate_record(scenario, seed=22, form="innovations")
    assert (full.form, innov.form) == ("full-state", "innovations")
    f, w1 = welch(full)
    _, w2 = welch(innov)
    var = 2 * special.polygamma(1, SAMPLES // SEGMENT)
    for idx in halves(f):
        t = np.log(w1[idx] / w2[idx])
        assert abs(t.mean()) < Z_LIMIT * np.sqrt(var / t.size)
        assert abs((np.sum(t**2) / var - t.size) / np.sqrt(2 * t.size)) < Z_LIMIT


def sideband_areas(w, f, floor, fm, half_width, kappa_hz, fs):
    """Sideband areas after removing the cavity filter point by point.

    At a resonant drive the heterodyne signal at ν is the mechanical
    spectrum times the cavity's Lorentzian response κ²/4 / (κ²/4 + (2πν)²),
    and integrate-and-dump multiplies by sinc²(ν/fs): both are divided out
    bin by bin, not at the peak only (common practice; docs/analysis.md).
    """
    k = 2 * np.pi * kappa_hz
    response = (k**2 / 4) / (k**2 / 4 + (2 * np.pi * f) ** 2) * np.sinc(f / fs) ** 2
    x = (w - floor) / response
    up, down = np.abs(f - fm) < half_width, np.abs(f + fm) < half_width
    return x, response, up, down


def test_sideband_asymmetry_gives_back_the_true_occupation():
    """Anti-Stokes : Stokes areas = n : n + 1 at a resonant drive.

    The quantum sideband asymmetry of heterodyne detection (Weinstein et al.,
    Phys. Rev. X 4, 041003 (2014); Khalili et al., Phys. Rev. A 86, 033840
    (2012)): n = A₊/(A₋ − A₊). The estimator applied to the exact expected
    spectrum gives the Lyapunov occupation within 1 %; applied to the record
    it must agree within 5 standard errors, computed exactly from the
    Gaussian statistics of the windowed DFT (Isserlis' theorem:
    Cov(|X_k|², |X_j|²) = |E X_k X_j*|² + |E X_k X_j|², the second term
    carrying the correlation of the two sidebands).
    """
    nperseg = 2048
    scenario = make(g_hz=40e3, detuning_hz=0.0, linewidth_hz=5e3, bath=0.0,
                    external_hz=600e3, samples=1 << 21)
    plan = plan_record(scenario)
    uncoupled = plan_record(make(g_hz=1e-6, detuning_hz=0.0, linewidth_hz=5e3, bath=0.0,
                                 external_hz=600e3, samples=1 << 21))
    record = simulate_record(scenario, seed=3)
    f, w = welch(record, nperseg)
    e, floor = expected_welch(plan, nperseg), expected_welch(uncoupled, nperseg)
    n_true = record.truth.occupation[0]
    fm, width = record.truth.effective_frequency_hz[0], record.truth.effective_linewidth_hz[0]
    args = (f, floor, fm, 4 * width, 600e3, FS)

    def occupation(spectrum):
        x, _, up, down = sideband_areas(spectrum, *args)
        return x[up].sum() / (x[down].sum() - x[up].sum())

    n_exact = occupation(e)
    assert n_exact == pytest.approx(n_true, rel=0.01)
    _, response, up, down = sideband_areas(e, *args)
    sel = np.flatnonzero(up | down)
    covariance = welch_covariance(plan, nperseg, sel) / (record.n_samples // nperseg)
    a_up, a_down = (e - floor)[up] / response[up], (e - floor)[down] / response[down]
    grad_up = a_down.sum() / (a_down.sum() - a_up.sum()) ** 2
    grad_down = -a_up.sum() / (a_down.sum() - a_up.sum()) ** 2
    weights = np.where(up[sel], grad_up, grad_down) / response[sel]
    sigma = np.sqrt(weights @ covariance @ weights)
    assert 0.02 < sigma < 0.2 * n_true  # the test has power
    assert abs(occupation(w) - n_true) < Z_LIMIT * sigma + abs(n_exact - n_true)


def welch_covariance(plan, nperseg, sel):
    """Covariance of one segment's periodogram at bins ``sel`` (per Hz², exact, Gaussian)."""
    lags = plan.discrete.autocovariance(nperseg)
    q = plan.shot_noise_per_count**2 / 12.0
    rc = lags[:, 0, 0] + lags[:, 1, 1] + 1j * (lags[:, 1, 0] - lags[:, 0, 1])
    rp = lags[:, 0, 0] - lags[:, 1, 1] + 1j * (lags[:, 1, 0] + lags[:, 0, 1])
    rc[0] += 2 * q
    d = np.subtract.outer(np.arange(nperseg), np.arange(nperseg))
    toeplitz_c = np.where(d >= 0, rc[np.abs(d)], np.conj(rc[np.abs(d)]))
    toeplitz_p = rp[np.abs(d)]
    w = signal.get_window("hann", nperseg)
    k = np.fft.fftfreq(nperseg, 1 / nperseg)[sel]
    basis = w * np.exp(-2j * np.pi * np.outer(k, np.arange(nperseg)) / nperseg)
    c = basis @ toeplitz_c @ basis.conj().T
    p = basis @ toeplitz_p @ basis.T
    norm = plan.sample_rate_hz * np.sum(w**2)
    return (np.abs(c) ** 2 + np.abs(p) ** 2) / norm**2


def test_heterodyne_floor_is_twice_homodyne_per_quadrature():
    """Heterodyne adds half a quantum: referred to the output field, the vacuum
    floor of one heterodyne quadrature is twice that of homodyne (Caves,
    Phys. Rev. D 26, 1817 (1982)). Ideal detection of a lossless, uncoupled
    cavity (the reflected vacuum alone); density = variance / fs of white
    samples, standard error √(2/N) of a Gaussian sample variance."""
    kw = dict(g_hz=1e-6, external_hz=600e3, samples=1 << 19)
    het = simulate_record(make(**kw), seed=1)
    hom = simulate_record(make(detection={"scheme": "homodyne", "quadrature_angle_rad": 0.4},
                               **kw), seed=2)
    omega = 2 * np.pi * 1.23e5  # the gain is the same at every frequency (all-pass)
    floors = []
    for record, values in ((het, het.shot_noise_units().real), (hom, hom.shot_noise_units())):
        plan = plan_record(record.scenario)
        h = plan.chain.model.transfer(omega)
        cols = [plan.chain.model.index(s, "inputs") for s in ("external.X", "external.Y")]
        gain = np.sum(np.abs(h[0, cols]) ** 2)  # power gain of the output field to channel 0
        floors.append(np.var(values) / FS / gain)
    rel = np.sqrt(2 / het.n_samples) * np.sqrt(2)
    assert floors[0] / floors[1] == pytest.approx(2.0, rel=Z_LIMIT * rel)


def test_quantisation_noise_is_delta_squared_over_twelve():
    """Rounding a signal that spans many levels adds noise of variance Δ²/12
    (Widrow and Kollár, Quantization Noise (Cambridge, 2008), Ch. 4). Same
    seed and full scale at 8 and 24 bits: the difference is the 8-bit
    rounding error. The mean of N values of e², e uniform, has relative
    standard error √(4/5)/√N."""
    automatic = plan_record(make(samples=1 << 18)).full_scale_v  # 8 standard deviations
    kw = dict(digitizer={"sample_rate_hz": FS, "full_scale_v": automatic}, samples=1 << 18)
    fine = simulate_record(make(**kw).replace("digitizer.bits", 24), seed=9)
    coarse = simulate_record(make(**kw).replace("digitizer.bits", 8), seed=9)
    assert (coarse.bits, fine.bits) == (8, 24)
    assert coarse.full_scale_v == fine.full_scale_v == automatic
    assert np.std(fine.volts().real) / coarse.volts_per_count > 10  # spans many levels
    err = (coarse.volts() - fine.volts()).view(float).ravel()
    delta = coarse.volts_per_count
    assert coarse.clipped_samples == 0
    assert np.mean(err**2) == pytest.approx(delta**2 / 12, rel=Z_LIMIT * np.sqrt(0.8 / err.size))
    assert abs(np.mean(err)) < Z_LIMIT * delta / np.sqrt(12 * err.size)


def test_coarse_digitiser_is_warned_about():
    """Two bits over the automatic ±8σ range: the step is 4σ, the rounding
    variance Δ²/12 exceeds the signal's and the Δ²/12 model itself fails
    (Widrow and Kollár 2008, Ch. 4); the record says so. 16 bits: silence."""
    from simulator.records.generate import RecordWarning, quantisation_share

    scenario = make(samples=4096)
    assert quantisation_share(plan_record(scenario.replace("digitizer.bits", 2))) == (
        pytest.approx((16 / 4) ** 2 / 12, rel=0.05))
    with pytest.warns(RecordWarning, match="rounding noise"):
        simulate_record(scenario.replace("digitizer.bits", 2), seed=1)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        simulate_record(scenario.replace("digitizer.bits", 16), seed=1)


@pytest.mark.parametrize("side, kind", [("below", "iq"), ("below", "if"), ("above", "if")])
def test_anti_stokes_sideband_is_where_the_file_says(side, kind):
    """Red-detuned cooling: the anti-Stokes sideband (light above the drive,
    enhanced by the cavity) dominates. In an iq record it must sit at +f_m
    of welch(I + iQ, return_onesided=False); in an if record at f_IF + f_m
    with the local oscillator below the drive and at f_IF − f_m above it."""
    f_if = 0.6e6
    sections = {} if kind == "iq" else dict(
        detection={"intermediate_frequency_hz": f_if, "local_oscillator_side": side},
        record={"kind": "if"})
    record = simulate_record(make(samples=1 << 18, **sections), seed=4)
    f, w = welch(record)
    peak = f[np.argmax(w)]
    fm = record.truth.effective_frequency_hz[0]
    expected = fm if kind == "iq" else (f_if + fm if side == "below" else f_if - fm)
    assert abs(abs(peak) - expected) < 5 * FS / SEGMENT
    if kind == "iq":
        assert peak > 0
