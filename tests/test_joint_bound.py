"""The bound of a scheme that records several tones: the joint Whittle information.

Checked: the joint spectral matrix holds each tone's own record as its
diagonal blocks; one tone alone gives that tone's bound; the joint
information is never below either record's (a record is a function of the
pair: the information inequality, Rao, Linear Statistical Inference (2nd ed.,
1973), Sec. 5a.4); with no shared noise (tones on different cavity modes
coupled to different mechanical modes) it is exactly the sum; and a Monte
Carlo of the Whittle score of time-domain records of the joint model
(Whittle, Ark. Mat. 2, 423 (1953)) has the joint information as its variance.
"""

import numpy as np
import pytest

from simulator.analysis.joint_feasibility import joint_fisher, tone_set_bounds
from simulator.errors import InputError
from simulator.model.system import System
from simulator.model.tone_channels import tones_chain
from simulator.scenario.loader import load_scenario, parse_scenario
from tests.tone_scenarios import KAPPA_HZ, OMEGA_HZ, scenario_text, second_mode, tone_table

PROBES = ("red_probe", "blue_probe")
BATH = "mechanics[0].bath_temperature_k"


@pytest.fixture(scope="module")
def probes():
    return load_scenario("scenarios/drum_two_probes.toml")


def test_diagonal_blocks_are_each_tones_own_record(probes):
    system = System(probes)
    joint = tones_chain(probes, system.point, system.model, PROBES)
    f = np.linspace(-7e6, 7e6, 57)
    s = joint.sampled_channel_matrix(f, 60e6)
    for tone in PROBES:
        own = System(probes.replace("detection.tone", tone)).chain.sampled_channel_matrix(f, 60e6)
        idx = joint.channels_of(tone)
        np.testing.assert_allclose(s[:, idx][:, :, idx], own, atol=1e-10 * np.abs(own).max())
    # correlated through the drum: at the motional line (Ωm from each probe) the cross
    # density of a red-probe and a blue-probe channel is of the size of the lines' excess
    # over the floor (here above their geometric mean: the red probe's anti-Stokes and the
    # blue probe's Stokes photons come from the same phonon process)
    omega = system.detected.point.modes[0].frequency_hz
    line, floor = joint.sampled_channel_matrix([omega, 4e6], 60e6)
    excess = np.diag(line - floor).real
    assert np.abs(line[0, 2]) > 0.5 * np.sqrt(excess[0] * excess[2])


def test_one_tone_is_its_own_bound_and_the_pair_is_at_least_either(probes):
    """One tone: the bound of its own record (feasibility.fisher_matrix). The pair: F_pair −
    F_tone is positive semi-definite for both tones (information inequality)."""
    from simulator.analysis.feasibility import default_paths, fisher_matrix

    paths = default_paths(probes)
    own = fisher_matrix(probes.replace("detection.tone", "red_probe"), paths)
    alone = joint_fisher(probes, ["red_probe"], [paths])[0]
    np.testing.assert_allclose(alone, own, rtol=1e-9)
    pair = joint_fisher(probes, PROBES, [paths])[0]
    # the receiver's view of the system (one tone's output) is rebuilt whole
    np.testing.assert_array_equal(joint_fisher(System(probes).detected, PROBES, [paths])[0],
                                  pair)
    for tone in PROBES:
        single = joint_fisher(probes, [tone], [paths])[0]
        scale = np.sqrt(np.outer(np.diag(pair), np.diag(pair)))
        assert np.linalg.eigvalsh((pair - single) / scale).min() > -1e-9
    bounds = tone_set_bounds(probes, [(PROBES[0],), (PROBES[1],), PROBES])
    assert bounds[2].error_one_second < min(b.error_one_second for b in bounds[:2])


def uncorrelated_scenario():
    """Drive on [cavity] coupled to drum only; a tone on the idler mode coupled to a second
    mechanical mode only: the two detected fields share no noise."""
    second_mech = """
[[mechanics]]
name = "string"
frequency_hz = 3.1e6
linewidth_hz = 40.0
effective_mass_kg = 1e-12
coupling_hz = 0.0
bath_occupation = 50.0
"""
    text = scenario_text(extra=second_mech + second_mode(g0_hz=0.0) + """
[[couplings]]
cavity_mode = "idler"
mechanics = "string"
coupling_hz = 40.0
""" + tone_table("pump", 1e5, -3.1e6, "idler", frequency_hz=7e9) + """
[detection]
scheme = "heterodyne"
efficiency = 0.7
local_oscillator_power_w = 1e-3
""")
    return parse_scenario(text)


def test_channels_that_share_no_noise_add_their_information():
    """Block-diagonal S: log det and tr(S⁻¹∂S S⁻¹∂S) split by block, F_pair = F_a + F_b."""
    scenario = uncorrelated_scenario()
    paths = ("mechanics[0].bath_occupation", "mechanics[1].bath_occupation",
             "detection.efficiency")
    pair = joint_fisher(scenario, ["drive", "pump"], [paths], sample_rate_hz=20e6)[0]
    parts = [joint_fisher(scenario, [t], [paths], sample_rate_hz=20e6)[0]
             for t in ("drive", "pump")]
    np.testing.assert_allclose(pair, parts[0] + parts[1], rtol=1e-6,
                               atol=1e-9 * np.abs(pair).max())
    assert parts[0][1, 1] < 1e-6 * parts[1][1, 1]  # each record sees only its own mode


def test_joint_samples_approach_the_continuous_joint_record(probes):
    """sinc² → 1 and the aliases vanish as fs grows: the joint information of the samples
    rises towards that of the continuous records (a function of which they are)."""
    info = [joint_fisher(probes, PROBES, [(BATH,)], sample_rate_hz=fs)[0][0, 0]
            for fs in (2.5e7, 6e7, 2.4e8, np.inf)]
    assert info[0] < info[1] < info[2] <= info[3] * (1 + 1e-9)
    assert info[2] == pytest.approx(info[3], rel=1e-2)


def test_if_records_and_unknown_tones_are_refused(probes):
    with pytest.raises(InputError, match="iq and homodyne"):
        real = probes.replace("detection.intermediate_frequency_hz", 1e6)
        joint_fisher(real.replace("record.kind", "if"), PROBES, [(BATH,)])
    with pytest.raises(InputError, match="expected distinct names"):
        joint_fisher(probes, ["red_probe", "red_probe"], [(BATH,)])
    with pytest.raises(InputError, match="green"):
        joint_fisher(probes, ["green"], [(BATH,)])


def whittle_scores(y, fs, s, ds, segment):
    """Whittle score of each segment of a real multichannel record at the truth: at
    0 < f_k < fs/2 the periodogram matrix is complex Wishart with one degree of freedom
    about S(f_k), so U = Σ_k [tr(S⁻¹∂S S⁻¹ P_k) − tr(S⁻¹∂S)] has variance T_segment·F."""
    x = y[: y.shape[0] // segment * segment].reshape(-1, segment, y.shape[1])
    spectra = np.fft.fft(x, axis=1)[:, 1:segment // 2]
    inv = np.linalg.inv(s)
    a = inv @ ds @ inv
    quad = np.einsum("kwa,wab,kwb->k", spectra.conj(), a, spectra).real / (segment * fs)
    return quad - np.trace(inv @ ds, axis1=1, axis2=2).real.sum()


def test_score_variance_of_joint_records_is_the_joint_information(probes):
    """Records of both probes drawn by the exact discrete recursion of the joint model at
    2.5 MHz (the 6 MHz lines aliased to ±1 MHz): the score variance of the bath over
    300 segments of 4096 samples equals T·F of the joint sampled matrix within 4 standard
    errors, and the sum of the two records' own informations lies outside that band."""
    from simulator.analysis.information import steps
    from simulator.records.discretize import discretize, noise_factor
    from simulator.records.kernels import full_state_step

    fs, segment, count = 2.5e6, 4096, 300
    system = System(probes)

    def joint_of(scenario):
        built = System(scenario)
        return tones_chain(scenario, built.point, built.model, PROBES)

    joint = joint_of(probes)
    discrete = discretize(joint.model, 1 / fs)
    rng = np.random.default_rng(20261202)
    factor = noise_factor(discrete.noise_covariance)
    state = noise_factor(discrete.state_covariance) @ rng.standard_normal(
        noise_factor(discrete.state_covariance).shape[1])
    y = np.empty((segment * count, len(joint.model.outputs)))
    full_state_step(discrete.transition, discrete.output, factor, state,
                    rng.standard_normal((y.shape[0], factor.shape[1])), y,
                    np.zeros(0, np.int64), np.empty((y.shape[0], 0)))
    f = np.fft.fftfreq(segment, 1 / fs)[1:segment // 2]
    up, down, span = steps(probes, BATH)
    s = joint.sampled_channel_matrix(f, fs)
    ds = (joint_of(up).sampled_channel_matrix(f, fs)
          - joint_of(down).sampled_channel_matrix(f, fs)) / span
    scores = whittle_scores(y, fs, s, ds, segment)
    t_segment = segment / fs
    pair = joint_fisher(system, PROBES, [(BATH,)], sample_rate_hz=fs)[0][0, 0] * t_segment
    apart = sum(joint_fisher(system, [t], [(BATH,)], sample_rate_hz=fs)[0][0, 0]
                for t in PROBES) * t_segment
    error = 4 * np.sqrt(2 / (count - 1))
    print(f"score variance {scores.var(ddof=1):.4g}, joint T·F {pair:.4g}, "
          f"sum of the two alone {apart:.4g}")
    assert scores.var(ddof=1) == pytest.approx(pair, rel=error)
    assert abs(scores.mean()) < 4 * np.sqrt(pair / count)
    assert abs(pair - apart) > error * pair


def test_the_master_equation_says_why_it_refuses_and_what_instead(probes):
    with pytest.raises(InputError, match="one Hilbert factor per tone field") as refused:
        System(probes).require_one_tone("simulator.master.steady.master_steady_state")
    assert "simulator.master.tone_fields" in str(refused.value)  # what to use instead


def noisy_probes(probes):
    """The probes made by the cooling tone's laser, whose phase noise has a floor (a common
    local oscillator copied from that laser cancels it on the tone it demodulates)."""
    shared = probes.replace("tones[0].noise_source", "drive").replace(
        "tones[1].noise_source", "drive")
    return shared.replace("drive.phase_noise.floor_high_hz", 2e7).replace(
        "drive.phase_noise.floor_rad2_per_hz", 1e-13)


# the per-tone model's reach (its warning) is not what is checked here
@pytest.mark.filterwarnings("ignore::simulator.model.tone_validity.ToneNoiseWarning")
def test_each_receiver_is_referred_to_its_own_tones_laser(probes):
    """The scenario demodulates the blue probe; a bound of the red probe refers the red
    receiver to the red probe's laser, so its chain is the red probe's own record (and
    differs from the red field left in its laser's frame), and the pair's is the chain of
    the record that holds both (System.channels)."""
    from simulator.model.chain import detection_chain
    from simulator.model.detected_tone import detected_parts

    noisy = noisy_probes(probes)
    system = System(noisy)
    f, fs = np.linspace(-7e6, 7e6, 29), 60e6
    red = noisy.replace("detection.tone", "red_probe")
    own = System(red).chain.sampled_channel_matrix(f, fs)
    alone = tones_chain(noisy, system.point, system.model, ["red_probe"])
    np.testing.assert_allclose(alone.sampled_channel_matrix(f, fs), own,
                               rtol=1e-9, atol=1e-12 * np.abs(own).max())
    unreferred = detection_chain(red, *detected_parts(red, system.point, system.model))
    assert np.abs(unreferred.sampled_channel_matrix(f, fs) - own).max() > 1e-3 * np.abs(
        own).max()
    both = System(noisy.replace("detection.tone", "drive").replace("detection.tones",
                                                                   list(PROBES)))
    pair = tones_chain(noisy, system.point, system.model, PROBES).sampled_channel_matrix(f, fs)
    record = both.channels.sampled_channel_matrix(f, fs)
    np.testing.assert_allclose(pair, record, rtol=1e-9, atol=1e-12 * np.abs(record).max())


def test_homodyne_receivers_stack_each_tones_own_record():
    """One optical homodyne detector per probe, at the same quadrature angle: one real
    channel each, the diagonal of the joint matrix each probe's own homodyne record, the
    off-diagonal the drum's correlation."""
    tones = ("red", "blue")
    homodyne = parse_scenario(
        scenario_text(drive_photons=2e4, bath_occupation=2000.0, linewidth_hz=200.0)
        + tone_table("red", 2e4, -(OMEGA_HZ + 2 * KAPPA_HZ))
        + tone_table("blue", 2e4, OMEGA_HZ + 2 * KAPPA_HZ)
        + '\n[detection]\nscheme = "homodyne"\nquadrature_angle_rad = 0.4\n'
        + 'efficiency = 0.8\ntone = "blue"\n')
    system = System(homodyne)
    joint = tones_chain(homodyne, system.point, system.model, tones)
    assert joint.model.outputs == tuple(f"record.{t}" for t in tones)
    f, fs = np.linspace(-2.5 * OMEGA_HZ, 2.5 * OMEGA_HZ, 29), 8 * OMEGA_HZ
    s = joint.sampled_channel_matrix(f, fs)
    for k, tone in enumerate(tones):
        own = System(homodyne.replace("detection.tone", tone)).chain
        np.testing.assert_allclose(s[:, k, k], own.sampled_channel_matrix(f, fs)[:, 0, 0],
                                   rtol=1e-9)
    assert np.abs(s[:, 0, 1]).max() > 1e-3 * np.abs(s[:, 0, 0]).max()  # the drum correlates
    paths = ("mechanics[0].bath_occupation",)
    pair = joint_fisher(homodyne, tones, [paths], sample_rate_hz=fs)[0][0, 0]
    assert pair >= max(joint_fisher(homodyne, [t], [paths], sample_rate_hz=fs)[0][0, 0]
                       for t in tones) * (1 - 1e-9)
