"""Classical laser noise on the added tones (``[[tones]]``): own or shared with another tone.

Each check compares the state-space model with something computed another way:
the weak-coupling heating by laser noise of the papers on laser noise (here
for an added tone), the symmetry of two identical cavity modes, the exact
scaling of a shared (fully correlated) noise against independent noises, and
a record's Welch estimate against the analytic spectrum.
"""


import numpy as np
import pytest
from tone_scenarios import OMEGA_HZ, scenario_text, second_mode, tone_table

from simulator.analysis.psd import averaged_periodogram
from simulator.linear import weak_coupling
from simulator.linear.laser_effects import without_laser_noise
from simulator.linear.record_budget import digitiser_spectrum
from simulator.linear.spectra import heterodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.laser_spectra import floor_shape, tone_densities, tone_input_occupation
from simulator.model.system import System
from simulator.model.units import angular
from simulator.scenario.loader import parse_scenario, scenario_from_dict
from simulator.workflows.record import simulate_record

FLOOR = {"floor_rad2_per_hz": 2e-11, "floor_low_hz": 1e6, "floor_high_hz": 1e8}
NOISE = {  # (phase-noise table, RIN), each shape alone
    "white frequency noise": ({"linewidth_hz": 300.0}, 0.0),
    "phase-noise floor": (FLOOR, 0.0),
    "intensity noise": ({}, 3e-11),
}
# A second cavity mode identical to the [cavity] mode (same resonance, linewidths and g0):
# the drive's mode sits Ωm above the drive frequency, so a tone at −Ωm on either mode
# has the drive's frequency and photon energy.
TWIN = second_mode(name="twin", g0_hz=50.0, frequency_hz=6e9 + OMEGA_HZ)


def noise_tables(shapes, rin, table="tones"):
    """TOML of a tone's (or the drive's, ``table="drive"``) own noise tables."""
    text = ""
    if shapes:
        text += f"[{table}.phase_noise]\n" + "".join(f"{k} = {v!r}\n" for k, v in shapes.items())
    if rin:
        text += f"[{table}.intensity_noise]\nrelative_intensity_noise_per_hz = {rin!r}\n"
    return text


def two_tones(drive_noise="", tone_noise="", *, drive_photons=1e3, tone_photons=1e3,
              mode="twin", detuning_hz=-OMEGA_HZ, detected="drive",
              drive_detuning_hz=-OMEGA_HZ):
    """A quiet red drive and a red tone on ``mode`` (the twin mode or the [cavity] mode),
    weak coupling (2g/κ ≤ 0.02), resolved sidebands (Ωm/κ = 25)."""
    extra = (TWIN + tone_table("probe", tone_photons, detuning_hz, cavity_mode=mode)
             + tone_noise)
    text = scenario_text(drive_photons=drive_photons, drive_detuning_hz=drive_detuning_hz,
                         extra=extra).replace(
        '[cavity]', drive_noise + '[cavity]', 1)
    return parse_scenario(text).replace("detection.tone", detected)


def excess(scenario):
    """Occupation of the drum above that of the same scenario without laser noise."""
    return (steady_state(scenario).modes[0].occupation
            - steady_state(without_laser_noise(scenario)).modes[0].occupation)


@pytest.mark.parametrize("where", ["twin", "cavity"])
@pytest.mark.parametrize("name", list(NOISE))
def test_a_tones_laser_noise_heats_as_the_weak_coupling_rate(name, where):
    """n_f = [Γm n_th + Σk A+,k + Σk (A−,k + A+,k) η_c n_c,k]/(Γm + Σk (A−,k − A+,k)),
    n_c,k = Φk [S̄_φφ(Ωm) + S̄_εε/4] (two-sided) for the noisy tone only, against the exact
    Lyapunov occupation: the closed form for laser-noise heating in weak coupling
    (Rabl, Genes, Hammerer & Aspelmeyer, Phys. Rev. A 80, 063819 (2009); Jayich et al.,
    New J. Phys. 14, 115018 (2012); Safavi-Naeini et al., New J. Phys. 15, 035007
    (2013)), the form tests/test_laser_noise.py checks for the drive, rates added over
    tones (Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII).
    The tone sits at −Ωm on an identical second mode, or on the drive's mode with the
    drive 400 kHz (thousands of mechanical widths) above it; there the tone's white
    intensity noise is also input noise in the drive's bands. Off the sideband the term
    in σ² that this form drops grows (tone_rates.classical_heating keeps it)."""
    shapes, rin = NOISE[name]
    drive_detuning = -OMEGA_HZ if where == "twin" else -OMEGA_HZ + 4e5
    scenario = two_tones(tone_noise=noise_tables(shapes, rin), mode=where,
                         drive_detuning_hz=drive_detuning, tone_photons=2e3)
    system = System(scenario)
    point, m = system.point, system.point.modes[0]
    om, gm = angular([m.frequency_hz, m.linewidth_hz])
    down = up = heating = 0.0
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        kappa, kex, delta, g = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                                        tone.detuning_effective_hz, tone.coupling_rates_hz[0]])
        a_minus, a_plus = weak_coupling.scattering_rates(g=g, kappa=kappa, detuning=delta,
                                                         frequency=om)
        n_c = tone_input_occupation(scenario, tone.name, tone.input_photon_flux,
                                    m.frequency_hz)
        assert (n_c > 0) == (tone.name == "probe")
        # white intensity noise of another tone on the mode is input noise in this
        # tone's bands too: Φ_l S̄_εε/4, phase-insensitive there
        n_c += sum(other.input_photon_flux
                   * tone_densities(scenario, other.name, m.frequency_hz)[1] / 4
                   for other in point.tones
                   if other is not tone and other.cavity_mode == tone.cavity_mode)
        down, up, heating = down + a_minus, up + a_plus, heating + (a_minus + a_plus) * (
            kex / kappa) * n_c
    formula = (gm * m.bath_occupation + up + heating) / (gm + down - up)
    steady = steady_state(system)
    assert excess(scenario) > 0.05 * steady.modes[0].occupation  # the noise heats visibly
    # the rest is of order (2g/κ)² ≈ 4e-4 and Γm/κ (weak coupling, rotating terms)
    assert steady.modes[0].occupation == pytest.approx(formula, rel=2e-3)
    assert steady.modes[0].weak_coupling_occupation == pytest.approx(formula, rel=1e-3)


@pytest.mark.parametrize("name", list(NOISE))
def test_noise_moved_from_the_drive_to_a_twin_tone_heats_alike(name):
    """Two identical modes, each with an identical red tone: the exchange of the modes is
    a symmetry of the model, so the noise on either tone gives one occupation."""
    shapes, rin = NOISE[name]
    on_drive = two_tones(drive_noise=noise_tables(shapes, rin, "drive"))
    on_tone = two_tones(tone_noise=noise_tables(shapes, rin))
    n_drive, n_tone = (steady_state(s).modes[0].occupation for s in (on_drive, on_tone))
    assert n_tone == pytest.approx(n_drive, rel=1e-9)
    assert excess(on_tone) > 0.01 * n_tone


@pytest.mark.parametrize("name", list(NOISE))
def test_a_shared_laser_heats_coherently_and_independent_lasers_add(name):
    """Two red tones on identical modes, n1 and n2 photons. The noise reaches the drum
    through each field with an amplitude ∝ g_k √n_k ∝ n_k (same mode response), so with
    Δn_k the heating by tone k's noise alone: one laser (a single random process in both
    fields) gives (√Δn1 + √Δn2)², two independent lasers of the same noise Δn1 + Δn2.
    Exact in the linear model (the drum's back-action response is the same in all four),
    so shared noise here heats 2√(Δn1 Δn2) more. The weak-coupling diagnostic, which adds
    the forces of one laser before squaring, follows the exact value."""
    shapes, rin = NOISE[name]
    kw = dict(drive_photons=1e3, tone_photons=3e3)
    drive = noise_tables(shapes, rin, "drive")
    tone = noise_tables(shapes, rin)
    dn1 = excess(two_tones(drive_noise=drive, **kw))
    dn2 = excess(two_tones(tone_noise=tone, **kw))
    shared = two_tones(drive_noise=drive, tone_noise='noise_source = "drive"\n', **kw)
    independent = two_tones(drive_noise=drive, tone_noise=tone, **kw)
    assert dn2 == pytest.approx(9 * dn1, rel=1e-6)  # amplitude ∝ n_k
    assert excess(shared) == pytest.approx((np.sqrt(dn1) + np.sqrt(dn2)) ** 2, rel=1e-8)
    assert excess(independent) == pytest.approx(dn1 + dn2, rel=1e-8)
    exact = steady_state(shared).modes[0]
    assert exact.weak_coupling_occupation == pytest.approx(exact.occupation, rel=2e-3)
    # one laser's inputs drive both fields; independent lasers have inputs each
    def laser_inputs(scenario):
        return [n for n in System(scenario).model.inputs if n.startswith("laser.")]

    alone = laser_inputs(two_tones(drive_noise=drive, **kw))
    assert laser_inputs(shared) == alone
    assert len(laser_inputs(independent)) == 2 * len(alone)


def test_a_tone_with_its_own_intensity_noise_keeps_the_shared_phase_noise():
    """A tone naming the drive's laser but with its own intensity_noise table: the phase
    noise is the drive's process, the intensity noise its own and independent."""
    drive = noise_tables(FLOOR, 3e-11, "drive")
    mixed = two_tones(drive_noise=drive, tone_noise='noise_source = "drive"\n'
                      + noise_tables({}, 3e-11))
    model = System(mixed).model
    assert [n for n in model.inputs if n.startswith("laser.")] == [
        "laser.floor", "laser.intensity", "laser.tones.probe.intensity"]
    sources = dict(model.sources)
    assert "intensity noise of tone probe" in sources
    assert "phase-noise floor of tone drive" in sources
    phase_only = two_tones(drive_noise=noise_tables(FLOOR, 0.0, "drive"),
                           tone_noise='noise_source = "drive"\n')
    rin_drive = two_tones(drive_noise=noise_tables({}, 3e-11, "drive"))
    rin_tone = two_tones(tone_noise=noise_tables({}, 3e-11))
    assert excess(mixed) == pytest.approx(excess(phase_only) + excess(rin_drive)
                                          + excess(rin_tone), rel=1e-8)


# the budget and the record are checked against the model itself: the phase noise it
# leaves out of the other tone's bands (warned about, tested below) does not matter there
LEFT_OUT = "ignore::simulator.model.tone_validity.ToneNoiseWarning"


@pytest.mark.filterwarnings(LEFT_OUT)
def test_the_detected_tones_budget_names_each_tones_noise():
    """The budget of the detected probe has a line per laser noise, named after the tone
    that owns the laser; the terms add up to the total."""
    scenario = two_tones(drive_noise=noise_tables(FLOOR, 0.0, "drive"),
                         tone_noise=noise_tables({"linewidth_hz": 300.0}, 3e-11),
                         mode="cavity", detuning_hz=-OMEGA_HZ - 4e5, detected="probe")
    f = np.linspace(-1.5e6, 1.5e6, 301) + 7.0
    spectrum = heterodyne_spectrum(scenario, f)
    names = {k.split(":")[0] for k in spectrum.contributions}
    assert {"frequency noise of tone probe", "intensity noise of tone probe",
            "phase-noise floor of tone drive"} <= names
    assert np.allclose(sum(spectrum.contributions.values()), spectrum.total, rtol=1e-9)


TAU, LOCK = 1e-8, 3e5
REFERENCES = {  # detection keys, L(ω): the local oscillator's phase against the laser's
    "common": ({}, lambda w: 1.0),
    "common, delayed (Padé)": ({"local_oscillator_delay_s": TAU},
                               lambda w: (1 + 0.5j * w * TAU) / (1 - 0.5j * w * TAU)),
    "locked": ({"local_oscillator_source": "locked",
                "local_oscillator_lock_bandwidth_hz": LOCK},
               lambda w: 2 * np.pi * LOCK / (2 * np.pi * LOCK - 1j * w)),
    "independent": ({"local_oscillator_source": "independent"}, lambda w: 0.0),
}


@pytest.mark.parametrize("shared", [False, True])
@pytest.mark.parametrize("name", list(REFERENCES))
def test_the_local_oscillator_follows_the_detected_tones_laser(name, shared):
    """Mechanics uncoupled, the probe on the twin mode detected: its classical phase noise
    (own, or the drive's laser shared) is η Φ_probe S̄_φφ |r(ω) − r(0) L(ω)|², the
    drive-frame input-output form of tests/test_laser_noise.py (Gardiner & Collett,
    Phys. Rev. A 31, 3761 (1985)) with the probe's flux and its mode's reflection
    r(ω) = 1 − κ_ex/(κ/2 − i(Δ + ω)): the local oscillator takes its phase from the laser
    that makes the detected tone. The drive's own noise stays out of the probe's record."""
    detection, reference = REFERENCES[name]
    floor = {**FLOOR, "floor_rad2_per_hz": 1e-13}
    noise = noise_tables(floor, 0.0)
    if shared:
        scenario = two_tones(drive_noise=noise_tables(floor, 0.0, "drive"),
                             tone_noise='noise_source = "drive"\n', detected="probe")
    else:
        scenario = two_tones(drive_noise=noise_tables({**floor, "floor_low_hz": 2e6}, 0.0,
                                                      "drive"),
                             tone_noise=noise, detected="probe")
    data = scenario.to_dict()
    data["mechanics"][0]["coupling_hz"] = 0.0
    data["couplings"][0]["coupling_hz"] = 0.0
    data["detection"].update(detection)
    scenario = scenario_from_dict(data, source="<test>")
    f = np.linspace(-3e6, 3e6, 13) + 1234.5
    spectrum = heterodyne_spectrum(scenario, f)
    laser = sum(v for k, v in spectrum.contributions.items()
                if k.startswith(("laser", "phase-noise floor of tone")))
    tone = System(scenario).point.tones[1]
    cav = System(scenario).point.cavity_modes[tone.cavity_mode]
    k, kex, d = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                         tone.detuning_effective_hz])
    w = angular(f)

    def r(x):
        return 1 - kex / (k / 2 - 1j * (d + x))

    s_phi = 0.5 * floor["floor_rad2_per_hz"] * floor_shape(
        scenario.tones[0].phase_noise if not shared else scenario.drive.phase_noise, f)
    expected = (scenario.detection.efficiency * tone.input_photon_flux * s_phi
                * np.abs(r(w) - r(0) * reference(w)) ** 2)
    assert np.allclose(laser, expected, rtol=1e-6, atol=1e-9 * expected.max())


@pytest.mark.filterwarnings(LEFT_OUT)
def test_a_record_of_a_probe_with_shared_noise_matches_its_spectrum():
    """Cooling drive with a phase-noise floor and intensity noise, a blue probe made by
    the same laser and detected with an independent local oscillator (so the laser's
    phase noise reaches the record directly and through the drum): the averaged
    periodogram against the analytic digitiser spectrum (Nørrelykke & Flyvbjerg, Rev.
    Sci. Instrum. 81, 075103 (2010): each bin is the spectrum times a Gamma(K)/K
    variate; every third bin of a Hann window independent)."""
    fs, segment, samples = 12.5e6, 4096, 1 << 17
    drive = noise_tables(FLOOR, 3e-11, "drive")
    scenario = two_tones(drive_noise=drive, tone_noise='noise_source = "drive"\n',
                         drive_photons=1.6e5, tone_photons=2e3, mode="cavity",
                         detuning_hz=OMEGA_HZ + 3e5, detected="probe")
    scenario = (scenario.replace("detection.local_oscillator_source", "independent")
                .replace("digitizer.sample_rate_hz", fs).replace("record.duration_s",
                                                                 samples / fs))
    system = System(scenario)
    record = simulate_record(system, seed=5, progress=False)
    psd = averaged_periodogram(record.shot_noise_units(), fs, segment_samples=segment)
    keep = (np.abs(psd.frequency_hz) > 0) & (np.abs(psd.frequency_hz) < 0.49 * fs)
    f = psd.frequency_hz[keep][::3]
    expected = digitiser_spectrum(system, f).total
    quiet = digitiser_spectrum(System(without_laser_noise(scenario)), f).total
    assert np.max(expected / quiet) > 1.2  # the laser noise is visible in the record
    ratio = psd.density[keep][::3] / expected
    k, m = psd.averages, ratio.size
    assert abs(ratio.mean() - 1.0) < 5.0 / np.sqrt(k * m)
    z = (k * np.sum((ratio - 1.0) ** 2) - m) / np.sqrt(m * (2.0 + 6.0 / k))
    assert abs(z) < 5.0


def test_an_independent_oscillator_refuses_the_detected_tones_random_walk():
    """White frequency noise on the detected tone's laser with an independent local
    oscillator has no stationary beat (docs/laser-noise.md): refused, naming the table
    of the laser that makes the detected tone, own or shared."""
    from simulator.errors import ScenarioError

    walk = noise_tables({"linewidth_hz": 100.0}, 0.0)
    own = two_tones(tone_noise=walk)
    with pytest.raises(ScenarioError, match="random walk") as info:
        own.replace("detection.tone", "probe").replace(
            "detection.local_oscillator_source", "independent")
    assert info.value.key == "tones[0].phase_noise.linewidth_hz"
    shared = two_tones(drive_noise=noise_tables({"linewidth_hz": 100.0}, 0.0, "drive"),
                       tone_noise='noise_source = "drive"\n', detected="probe")
    with pytest.raises(ScenarioError, match="random walk") as info:
        shared.replace("detection.local_oscillator_source", "independent")
    assert info.value.key == "drive.phase_noise.linewidth_hz"
    # the drive's laser free-running is no obstacle when the probe has a clean laser
    quiet_probe = two_tones(drive_noise=noise_tables({"linewidth_hz": 100.0}, 0.0, "drive"),
                            detected="probe").replace("detection.local_oscillator_source",
                                                      "independent")
    assert steady_state(quiet_probe).modes[0].occupation > 0


def test_tone_noise_round_trips_and_is_derived_by_path():
    """The tone's noise tables and its laser survive to_toml → parse, and are scenario
    paths (sweeps and plans take them like any other)."""
    scenario = two_tones(drive_noise=noise_tables(FLOOR, 1e-12, "drive"),
                         tone_noise='noise_source = "drive"\n' + noise_tables({}, 2e-12))
    assert parse_scenario(scenario.to_toml()) == scenario
    own = scenario.replace("tones[0].noise_source", "own")
    assert own.tones[0].noise_source == "own"
    assert excess(own) != pytest.approx(excess(scenario), rel=1e-3)  # the phase noise left
    path = "tones[0].intensity_noise.relative_intensity_noise_per_hz"
    e0, e2, e4 = (excess(own.replace(path, rin)) for rin in (0.0, 2e-12, 4e-12))
    assert e4 - e2 == pytest.approx(e2 - e0, rel=1e-8) and e2 > e0  # linear in the RIN
