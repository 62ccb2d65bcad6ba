"""Records of several detected tones: one I/Q pair per tone, generated from the joint model.

A cooling tone and two probes at ±(Ωm + δ) on a warm drum (invented device,
tests/tone_scenarios.py). The red probe's anti-Stokes line and the blue
probe's Stokes line are scattered by the same phonons, so the two channels
are strongly correlated between f and −f; the record must carry exactly the
joint spectral matrix of the one linear model (docs/records.md, "Several
tones").
"""

import numpy as np
import pytest
import scipy.stats

from simulator import System
from simulator.analysis.psd import (
    WindowedExpectation,
    averaged_periodogram,
    spectral_matrix_estimate,
)
from simulator.errors import InputError, ScenarioError
from simulator.io.recordfile import load_record
from simulator.linear.channel_spectra import joint_spectral_matrix
from simulator.records.generate import generate_record, plan_record
from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows.record import simulate_record
from tests.tone_scenarios import KAPPA_HZ, OMEGA_HZ, scenario_text, tone_table

FS_HZ = 16e6
SEGMENT = 1024
SAMPLES = SEGMENT * 1024
DELTA_HZ = 2 * KAPPA_HZ  # probes δ beyond ±Ωm: far from every spacing resonance


def two_probe_text(detection='tones = ["red", "blue"]', extra=""):
    return (scenario_text(drive_photons=2e4, bath_occupation=2000.0, linewidth_hz=200.0)
            + tone_table("red", 2e4, -(OMEGA_HZ + DELTA_HZ))
            + tone_table("blue", 2e4, OMEGA_HZ + DELTA_HZ)
            + f"\n[detection]\nefficiency = 0.8\n{detection}\n"
            + f"[digitizer]\nsample_rate_hz = {FS_HZ!r}\n" + extra)


def two_probes(detection='tones = ["red", "blue"]', extra=""):
    return parse_scenario(two_probe_text(detection, extra), source="two-probes.toml")


def expected_matrices(plan, window):
    """Exact E of the averaged cross- and pseudo-periodograms of the complex channels,
    from the discrete model's autocovariance (no grid, any line width)."""
    r = plan.discrete.autocovariance(SEGMENT)  # E[y_{n+τ} y_nᵀ], real channels
    k = r.shape[1] // 2
    c = np.zeros((k, 2 * k), dtype=complex)
    c[np.arange(k), 2 * np.arange(k)], c[np.arange(k), 2 * np.arange(k) + 1] = 1.0, 1.0j
    w = WindowedExpectation(plan.sample_rate_hz, SEGMENT, window)
    out = {}
    for name, right in (("cross", c.conj()), ("pseudo", c)):
        pos = np.einsum("ja,tab,kb->tjk", c, r, right)
        neg = np.einsum("ja,tba,kb->tjk", c, r[1:], right)
        out[name] = np.empty((SEGMENT, k, k), dtype=complex)
        for j in range(k):
            for m in range(k):
                out[name][:, j, m] = w.of_autocovariance(pos[:, j, m], neg[:, j, m])
    return w.frequency_hz, out["cross"], out["pseudo"]


@pytest.fixture(scope="module")
def record_and_plan():
    scenario = two_probes()
    system = System(scenario)
    return generate_record(system, seed=11, duration_s=SAMPLES / FS_HZ, workers=1), \
        plan_record(system, seed=11, duration_s=SAMPLES / FS_HZ)


def test_channel_spectra_and_cross_spectra_match_the_joint_model(record_and_plan):
    """Welch estimates of each channel, the cross-spectrum and the pseudo cross-spectrum
    against the exact expectation of the joint model: every diagonal bin inside its χ²
    (Gamma) band at the expected rate; summed over each sideband line, every element
    within 4 σ, σ² = Σ S_jj S_kk / K (Bendat and Piersol, Random Data, 2010, Sec. 9.2.2,
    cited from memory)."""
    record, plan = record_and_plan
    assert record.tones == ("red", "blue") and record.counts.shape == (SAMPLES, 4)
    est = spectral_matrix_estimate(record.shot_noise_units(), record.sample_rate_hz,
                                   segment_samples=SEGMENT, window="boxcar",
                                   tones=record.tones)
    f, cross, pseudo = expected_matrices(plan, "boxcar")
    assert np.allclose(est.frequency_hz, f)
    k = est.averages
    # diagonal: Gamma(K, 1/K) per bin (Nørrelykke & Flyvbjerg, Rev. Sci. Instrum. 81,
    # 075103 (2010)); 99 % band, outside it at most 2 % of the bins
    lo, hi = scipy.stats.gamma.ppf([0.005, 0.995], k, scale=1.0 / k)
    for j in range(2):
        ratio = est.cross[:, j, j].real / cross[:, j, j].real
        assert np.mean((ratio < lo) | (ratio > hi)) < 0.02
    minus = np.array([np.argmin(np.abs(f + x)) for x in f])
    strong = 0.0
    for centre in (OMEGA_HZ, -OMEGA_HZ):
        line = np.abs(f - centre) < 4 * est.resolution_hz
        for name, got, want, other in (("cross", est.cross, cross, np.arange(f.size)),
                                       ("pseudo", est.pseudo, pseudo, minus)):
            for j in range(2):
                for m in range(2):
                    var = np.sum(cross[line, j, j].real * cross[other[line], m, m].real) / k
                    z = np.sum(got[line, j, m] - want[line, j, m]) / np.sqrt(var)
                    assert abs(z.real) < 4 and abs(z.imag) < 4, (name, centre, j, m, z)
                    if name == "pseudo" and j != m:
                        strong = max(strong, abs(np.sum(want[line, j, m])) / np.sqrt(var))
    # the correlation the joint model predicts is resolved many times over: channels
    # drawn independently would fail the pseudo check above
    assert strong > 10


ELECTRONICS = {
    "ideal optical": "",
    "optical, filter and current noise": "[electronics]\nbandwidth_hz = 3e6\n"
                                         "current_noise_a_per_sqrt_hz = 3e-12\n",
    "microwave amplifier": "[electronics]\namplifier_added_quanta = 2.0\n"
                           "amplifier_gain_db = 60.0\n",
}


@pytest.mark.parametrize("receiver", ELECTRONICS)
def test_joint_matrix_diagonal_is_each_tone_alone(receiver):
    """The diagonal of the joint spectral matrix equals each tone's one-tone record
    spectrum (the existing chain, System.chain.record_spectrum), and each channel's
    scale its one-tone chain's: the joint chain changes nothing in a channel's
    marginal law."""
    f = np.linspace(-6e6, 6e6, 301)
    extra = ELECTRONICS[receiver]
    detection = "receiver = \"microwave\"\n" if "microwave" in receiver else ""
    joint_system = System(two_probes(detection + 'tones = ["red", "blue"]', extra))
    joint = joint_spectral_matrix(joint_system, f).cross()
    for j, name in enumerate(("red", "blue")):
        alone = System(two_probes(detection + f'tone = "{name}"', extra)).chain
        assert np.allclose(joint[:, j, j].real, alone.record_spectrum(f), rtol=1e-10, atol=0)
        assert np.allclose(joint[:, j, j].imag, 0.0, atol=1e-12)
        assert joint_system.channels.channel_scales[j]["volts_per_unit"] == pytest.approx(
            alone.volts_per_unit, rel=1e-14)


def test_cavity_port_and_record_matrices_differ_by_the_receiver():
    f = np.linspace(-6e6, 6e6, 301)
    joint = joint_spectral_matrix(two_probes(), f).cross()
    cavity = joint_spectral_matrix(two_probes(), f, at="cavity").cross()
    # at the port the vacuum is ½; the record adds ½ (heterodyne split) and scales
    # the field's excess N_out by the detection efficiency: S = 1 + η N_out
    for j in range(2):
        assert np.allclose(joint[:, j, j].real - 1.0, 0.8 * (cavity[:, j, j].real - 0.5),
                           rtol=1e-6, atol=1e-13)


def test_one_tone_request_is_todays_record_bit_for_bit():
    a = generate_record(two_probes('tones = ["blue"]'), seed=5, duration_s=2e-4, workers=1)
    b = generate_record(two_probes('tone = "blue"'), seed=5, duration_s=2e-4, workers=1)
    assert np.array_equal(a.counts, b.counts) and a.tones == b.tones == ()
    assert a.truth.calibration == b.truth.calibration


def test_welch_per_channel_equals_averaged_periodogram(record_and_plan):
    record, _ = record_and_plan
    z = record.shot_noise_units()[: 64 * 256]
    est = spectral_matrix_estimate(z, record.sample_rate_hz, segment_samples=256)
    for j, name in enumerate(record.tones):
        one = averaged_periodogram(record.channel(name)[: 64 * 256], record.sample_rate_hz,
                                   segment_samples=256)
        assert np.allclose(est.channel(j).density, one.density, rtol=1e-12)


def test_file_round_trip(tmp_path):
    scenario = two_probes()
    out = tmp_path / "two.h5"
    written = simulate_record(scenario, seed=3, duration_s=3e-4, out=out, workers=1)
    again = load_record(out)
    memory = generate_record(scenario, seed=3, duration_s=3e-4, workers=1)
    assert np.array_equal(again.counts, memory.counts)
    assert again.tones == written.tones == ("red", "blue")
    assert again.channel_shot_noise_per_count == memory.channel_shot_noise_per_count
    assert again.truth.channels == memory.truth.channels
    assert [c["tone"] for c in again.truth.channels] == ["red", "blue"]
    red, blue = again.truth.channels
    assert red["frequency_hz"] < blue["frequency_hz"] and red["detuning_effective_hz"] < 0
    assert np.array_equal(load_record(out, start=10, stop=20).counts, memory.counts[10:20])
    assert np.array_equal(again.channel("blue"), again.shot_noise_units()[:, 1])
    import h5py
    with h5py.File(out) as f:
        assert [c.decode() if isinstance(c, bytes) else c for c in f["samples"].attrs[
            "columns"]] == ["red.I", "red.Q", "blue.I", "blue.Q"]
        assert f.attrs["format_version"] == 2


@pytest.mark.parametrize(("detection", "key", "words"), [
    ('tones = ["red", "green"]', "detection.tones[1]", "'green' names no drive tone"),
    ('tones = ["red", "red"]', "detection.tones[1]", "listed twice"),
    ('tones = []', "detection.tones", "not a list of 1 to"),
    ('tones = ["red", "blue"]\ntone = "red"', "detection.tones", "beside detection.tone"),
    ('tones = ["red", "blue"]\nscheme = "homodyne"', "detection.tones", "heterodyne"),
])
def test_bad_requests_are_named(detection, key, words):
    with pytest.raises(ScenarioError, match=words) as info:
        two_probes(detection)
    assert key in str(info.value)


def test_if_record_of_several_tones_is_refused_with_the_reason():
    with pytest.raises(ScenarioError, match="intermediate frequency is not offered"):
        two_probes(extra='[record]\nkind = "if"\n')


def test_every_mode_has_an_output_port():
    """A tone can only sit on a mode with a port: κ_ex = 0 is refused at loading."""
    text = two_probe_text().replace(f"external_linewidth_hz = {KAPPA_HZ / 2!r}",
                                    "external_linewidth_hz = 0.0")
    with pytest.raises(ScenarioError, match="external_linewidth_hz"):
        parse_scenario(text, source="x.toml")


def test_record_channel_names_are_checked(record_and_plan):
    record, _ = record_and_plan
    with pytest.raises(InputError, match=r"channel\('green'\): no such detected tone"):
        record.channel("green")


def test_bundled_two_probe_drum_records_both_probes_in_one_file(tmp_path):
    path = "scenarios/drum_two_probes.toml"
    text = open(path).read().replace('tone = "blue_probe"',
                                     'tones = ["red_probe", "blue_probe"]')
    scenario = parse_scenario(text, source=path)
    record = simulate_record(scenario, duration_s=2e-5, out=tmp_path / "d.h5", workers=1)
    again = load_record(tmp_path / "d.h5")
    assert again.tones == ("red_probe", "blue_probe")
    assert again.counts.shape == (record.n_samples, 4)
    system = System(load_scenario(path))
    photons = {t.name: t.photon_number for t in system.point.tones}
    for channel in again.truth.channels:
        assert channel["photon_number"] == pytest.approx(photons[channel["tone"]], rel=1e-12)


def test_record_figure_zooms_each_channel(record_and_plan, tmp_path):
    """One row of sideband zooms per detected tone; each channel's periodogram lies in
    its χ² band about the joint model's expectation at the expected rate."""
    from simulator.report.record_plots import (
        channel_against_model,
        plot_record_sidebands,
        sideband_lines,
    )

    record, plan = record_and_plan
    png = plot_record_sidebands(plan.system, record, tmp_path / "r.png")
    assert png.stat().st_size > 10_000
    for tone in record.tones:
        psd, _, expected, (low, high) = channel_against_model(plan.system, record, tone)
        for _, centre, _ in sideband_lines(plan.system, record)[:2]:
            near = np.abs(psd.frequency_hz - centre) < 40 * psd.resolution_hz
            want = expected(psd.frequency_hz[near])
            outside = np.mean((psd.density[near] < want * low) | (psd.density[near] > want * high))
            assert outside < 0.2


def test_trial_runs_an_estimator_per_channel_or_on_all(tmp_path):
    """A one-channel estimator runs on each tone's pair, its quantities labelled by the
    tone; one declaring ``all_channels`` gets the whole record."""
    from simulator.workflows.trial import run_trials, truth_of, truth_table

    scenario = two_probes()
    per = run_trials(scenario, "tests.tone_estimators:shot_noise_floor", 2, tmp_path / "a",
                     duration_s=1e-4, workers=1, progress=False)
    got = {q.name: q for q in per.quantities}
    assert set(got) == {"floor:red", "floor:blue", "tone_index:red", "tone_index:blue"}
    assert got["tone_index:blue"].mean == 4.0 and got["tone_index:red"].mean == 3.0
    assert got["floor:red"].mean == pytest.approx(1.0, rel=0.2)
    whole = run_trials(scenario, "tests.tone_estimators:every_channel", 2, tmp_path / "b",
                       duration_s=1e-4, workers=1, progress=False)
    got = {q.name: q.mean for q in whole.quantities}
    assert got == {"channels": 2.0, "named": 1.0}
    table = truth_table(scenario)
    system = System(scenario)
    g = {t.name: t.coupling_rates_hz[0] for t in system.point.tones}
    assert truth_of("coupling_rate_hz:fit:blue", table) == pytest.approx(g["blue"], rel=1e-12)
    assert truth_of("coupling_rate_hz[drum]:red", table) == pytest.approx(g["red"], rel=1e-12)
    assert truth_of("occupation:red", table) == table["occupation"]


def test_one_channel_products_refuse_several_detected_tones():
    """A schedule records every tone (tests/test_protocol_channels.py); its expected
    spectrogram holds one channel and says so."""
    from simulator.analysis.spectrogram import expected_sideband_power

    scheduled = two_probes(extra="[schedule]\n[[schedule.segments]]\nduration_s = 1e-5\n")
    assert simulate_record(scheduled, workers=1).tones == ("red", "blue")
    with pytest.raises(InputError, match="spectrogram holds one channel; this record holds 2"):
        expected_sideband_power(scheduled, OMEGA_HZ, 16)


def test_record_command_names_the_tones_and_writes_both_modes(tmp_path, capsys):
    """Tones on two cavity modes (the bundled ring): `noisechain record` writes one pair
    per tone, each with its own mode and frequency in the truth, and says so."""
    import json

    from simulator.cli.parser import main

    source = "scenarios/ring_two_modes.toml"
    scenario = tmp_path / "ring.toml"
    scenario.write_text(open(source).read().replace('tone = "probe"',
                                                    'tones = ["drive", "probe"]'))
    out = tmp_path / "ring.h5"
    assert main(["record", str(scenario), "--out", str(out), "--quiet", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["tones"] == ["drive", "probe"]
    record = load_record(out)
    assert [c["cavity_mode"] for c in record.truth.channels] == ["cavity", "readout"]
    system = System(load_scenario(source))
    frequency = {t.name: t.frequency_hz for t in system.point.tones}
    for channel in record.truth.channels:
        assert channel["frequency_hz"] == frequency[channel["tone"]]


@pytest.mark.parametrize("extra", ["", "[electronics]\nbandwidth_hz = 3e6\n"
                                       "current_noise_a_per_sqrt_hz = 3e-12\n"])
def test_every_generator_of_four_channels_has_the_joint_autocovariance(extra):
    """Full state, dense and modal innovations recursions of the four-output joint model:
    stationary from the first sample, autocovariance E[y_{n+τ} y_nᵀ] (4 × 4) equal to the
    discrete model's to 1e-10 (Anderson and Moore, Optimal Filtering (1979), Ch. 9; the
    check of tests/test_record_recursions.py on the joint model)."""
    from tests.test_record_recursions import assert_exact, recursions

    plan = plan_record(two_probes(extra=extra), form="innovations")
    assert plan.discrete.output.shape[0] == 4
    assert_exact(plan, recursions(plan))


def test_full_state_record_of_two_tones_stores_the_mechanics():
    record = generate_record(two_probes(), seed=2, duration_s=1e-4, workers=1,
                             store_mechanics=True)
    q = record.mechanical_quadratures
    assert record.form == "full-state" and q.shape == (record.n_samples, 2)
    assert record.counts.shape == (record.n_samples, 4)


def test_probe_lines_are_correlated_beyond_their_geometric_mean():
    """Bundled drum, n ≈ 0.2: the red probe's anti-Stokes line (∝ b, area ∝ n) and the
    blue probe's Stokes line (∝ b†, area ∝ n + 1) are scattered by the same phonons.
    Their integrated pseudo-correlation at the ports is the symmetrised
    (⟨bb†⟩ + ⟨b†b⟩)/2 = n + ½ per unit of √(rate_red · rate_blue), so
    |∫P|² / (∫E_red ∫E_blue) = (n + ½)²/(n(n + 1)) ≈ 2.0, above the bound 1 of any
    classical correlation (weak coupling, resolved sidebands: docs/physics.md §13, our
    derivation; the areas' ratio n/(n + 1) is Weinstein et al., PRX 4, 041003 (2014))."""
    from simulator.linear.steady_state import steady_state

    text = open("scenarios/drum_two_probes.toml").read().replace(
        'tone = "blue_probe"', 'tones = ["red_probe", "blue_probe"]')
    system = System(parse_scenario(text, source="drum_two_probes.toml"))
    mode = steady_state(system).modes[0]
    n, centre, width = mode.occupation, mode.effective_frequency_hz, mode.effective_linewidth_hz
    f = centre + np.linspace(-10 * width, 10 * width, 4001)
    here = joint_spectral_matrix(system, f, at="cavity")
    mirror = joint_spectral_matrix(system, -f, at="cavity")  # the blue probe's Stokes side
    red = np.trapezoid(here.cross()[:, 0, 0].real - 0.5, f)
    blue = np.trapezoid(mirror.cross()[:, 1, 1].real - 0.5, f)
    correlation = np.trapezoid(here.pseudo()[:, 0, 1], f)
    assert red / blue == pytest.approx(n / (n + 1), rel=0.03)
    ratio = correlation.real**2 / (red * blue)
    assert ratio == pytest.approx((n + 0.5) ** 2 / (n * (n + 1)), rel=0.02)
    assert ratio > 1.5


def shared_laser_probes(detection, reference, own_laser=False):
    """The two-probe device with both probes made by the drive's noisy laser (or the
    blue one by its own, equally noisy laser) and the local oscillator ``reference``."""
    white = "linewidth_hz = 50.0\n" if "independent" not in reference else ""
    noise = f"floor_rad2_per_hz = 1e-12\nfloor_high_hz = 2e7\n{white}"
    text = two_probe_text(detection + "\n" + reference)
    text = text.replace('name = "red"', 'name = "red"\nnoise_source = "drive"')
    blue = "\n[tones.phase_noise]\n" + noise if own_laser else ""
    text = text.replace('name = "blue"', 'name = "blue"\nnoise_source = "drive"'
                        if not own_laser else 'name = "blue"')
    text = text.replace("\n[detection]", blue + "\n[detection]", 1)
    return parse_scenario(text + "\n[drive.phase_noise]\n" + noise,
                          source="shared-laser.toml")


LO_REFERENCES = {
    "common, no delay": "",
    "common, delayed": "local_oscillator_delay_s = 1e-8",
    "locked": 'local_oscillator_source = "locked"\nlocal_oscillator_lock_bandwidth_hz = 1e5',
    "independent, noisy": 'local_oscillator_source = "independent"\n'
                          "[detection.local_oscillator_phase_noise]\n"
                          "floor_rad2_per_hz = 1e-13\nfloor_high_hz = 2e7",
}


@pytest.mark.filterwarnings("ignore::simulator.model.tone_validity.ToneNoiseWarning")
@pytest.mark.parametrize("reference", LO_REFERENCES)
def test_every_demodulator_is_referred_to_its_tones_laser(reference):
    """Probes made by the drive's noisy laser: each channel of the joint record is the
    one-tone record of that probe (the same local-oscillator reference: a copy of its
    laser, delayed or locked, or an independent source with its own phase noise), to
    1e-10. Before every demodulator was referred to the laser, the channels carried the
    laser's phase noise unreferenced (15× the one-tone spectrum)."""
    f = np.linspace(-6e6, 6e6, 201)
    lo = LO_REFERENCES[reference]
    joint_system = System(shared_laser_probes('tones = ["red", "blue"]', lo))
    joint = joint_spectral_matrix(joint_system, f).cross()
    for j, name in enumerate(("red", "blue")):
        alone = System(shared_laser_probes(f'tone = "{name}"', lo)).chain
        assert np.allclose(joint[:, j, j].real, alone.record_spectrum(f), rtol=1e-10, atol=0)


@pytest.mark.filterwarnings("ignore::simulator.model.tone_validity.ToneNoiseWarning")
def test_demodulators_of_two_lasers_with_a_reference_state_are_refused():
    lo = LO_REFERENCES["locked"]
    with pytest.raises(InputError, match=r"detection.tones: .* 2 lasers"):
        System(shared_laser_probes('tones = ["red", "blue"]', lo, own_laser=True))
    # with no reference state (a copy of each tone's laser) each is referred to its own
    joint_system = System(shared_laser_probes('tones = ["red", "blue"]', "", own_laser=True))
    f = np.linspace(-6e6, 6e6, 101)
    joint = joint_spectral_matrix(joint_system, f).cross()
    alone = System(shared_laser_probes('tone = "blue"', "", own_laser=True)).chain
    assert np.allclose(joint[:, 1, 1].real, alone.record_spectrum(f), rtol=1e-10, atol=0)
