"""Several drive tones and cavity modes: scenario sections, operating point, linear model,
steady state, the command line on the detected tone and the refusal of stages that do not
support them yet."""

import dataclasses
import glob

import numpy as np
import pytest
from tone_scenarios import KAPPA_HZ, OMEGA_HZ, scenario_text, second_mode, tone_table

from simulator.errors import InputError, ScenarioError
from simulator.linear.spectra import heterodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.operating_point import operating_point
from simulator.model.optomechanics import linear_model, several_tones_model
from simulator.model.system import System
from simulator.model.tone_point import CavityModePoint, TonePoint, shift_matrix
from simulator.model.units import angular, photon_energy_j
from simulator.scenario.loader import load_scenario, parse_scenario

# the bundled one-tone scenarios (the examples with [[tones]] are checked on their own)
BUNDLED = [p for p in sorted(glob.glob("scenarios/*.toml")) + ["simulator/data/demo.toml"]
           if "[[tones]]" not in open(p, encoding="utf-8").read()]


# -- scenario sections ------------------------------------------------------------------

def test_existing_scenarios_keep_their_form():
    for path in BUNDLED:
        scenario = load_scenario(path)
        assert scenario.tones == scenario.cavity_modes == scenario.couplings == ()
        data = scenario.to_dict()
        assert not {"tones", "cavity_modes", "couplings"} & set(data)


def test_tone_sections_load_and_round_trip():
    text = scenario_text(extra=second_mode() + tone_table("probe", 1e3, 7e6)
                         + tone_table("pump", 1e4, -3e6, cavity_mode="idler"))
    scenario = parse_scenario(text)
    assert [t.name for t in scenario.tones] == ["probe", "pump"]
    assert scenario.tones[1].cavity_mode == "idler" and scenario.couplings[0].coupling_hz == 30
    assert parse_scenario(scenario.to_toml()) == scenario
    assert scenario.replace("tones[0].detuning_hz", 8e6).tones[0].detuning_hz == 8e6


@pytest.mark.parametrize("extra, key, words", [
    (tone_table("probe", 1e3, 7e6, cavity_mode="nowhere"), "tones[0].cavity_mode",
     "names no cavity mode"),
    (tone_table("drive", 1e3, 7e6), "tones[0].name", "already used"),
    (second_mode(frequency_hz=1e8) + tone_table("far", 1e3, -2e8, cavity_mode="idler"),
     "tones[0].detuning_hz", "below the mode's frequency"),
    (second_mode(name="cavity"), "cavity_modes[0].name", "already used"),
    (second_mode() + '[[couplings]]\ncavity_mode = "cavity"\nmechanics = "drum"\n'
     'coupling_hz = 1.0\n', "couplings[1].cavity_mode", "mechanics.coupling_hz"),
    (second_mode() + '[[couplings]]\ncavity_mode = "idler"\nmechanics = "drum"\n'
     'coupling_hz = 1.0\n', "couplings[1]", "given twice"),
    (second_mode().replace('mechanics = "drum"', 'mechanics = "plate"'),
     "couplings[0].mechanics", "names no .*mechanics.* table"),
    (tone_table("probe", 1e3, 7e6) + 'noise_source = "drive"\n[tones.phase_noise]\n'
     "linewidth_hz = 10.0\n", "tones[0].noise_source", "not both"),
    (tone_table("probe", 1e3, 7e6) + 'noise_source = "pump"\n', "tones[0].noise_source",
     "names no tone"),
    (tone_table("a", 1e3, 7e6) + 'noise_source = "b"\n' + tone_table("b", 1e3, 8e6)
     + 'noise_source = "a"\n', "tones[0].noise_source", "loop of shared lasers"),
    (tone_table("a", 1e3, 7e6) + 'noise_source = "a"\n', "tones[0].noise_source",
     "loop of shared lasers"),
    (tone_table("own", 1e3, 7e6), "tones[0].name", "reserved"),
])
def test_bad_tone_sections_are_refused_with_the_key(extra, key, words):
    with pytest.raises(ScenarioError, match=words) as info:
        parse_scenario(scenario_text(extra=extra))
    assert info.value.key == key


# -- the one-tone path is untouched -----------------------------------------------------

@pytest.mark.parametrize("path", BUNDLED)
def test_one_tone_generic_builder_reproduces_the_model_bit_for_bit(path):
    """The per-tone builder, handed the drive as its only tone, gives the same matrices
    and names as the one-tone model (which is unchanged by the tone sections)."""
    scenario = load_scenario(path)
    point = operating_point(scenario)
    assert point.tones == ()
    tone = TonePoint(name="drive", cavity_mode=0, frequency_hz=point.drive_frequency_hz,
                     input_photon_flux=point.input_photon_flux,
                     photon_number=point.photon_number,
                     detuning_bare_hz=point.detuning_bare_hz,
                     detuning_effective_hz=point.detuning_effective_hz,
                     coupling_rates_hz=tuple(m.coupling_rate_hz for m in point.modes))
    cav = CavityModePoint(name="cavity", linewidth_hz=point.cavity_linewidth_hz,
                          external_linewidth_hz=point.external_linewidth_hz,
                          bath_occupation=point.cavity_bath_occupation,
                          static_shift_hz=point.static_shift_hz,
                          photon_number=point.photon_number)
    one = dataclasses.replace(point, tones=(tone,), cavity_modes=(cav,))
    a, b = linear_model(scenario, point), several_tones_model(scenario, one)
    for name in ("A", "B", "N", "C", "D", "coupling"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    assert (a.states, a.inputs, a.outputs, a.sources) == (b.states, b.inputs, b.outputs,
                                                          b.sources)


def test_a_silent_tone_on_another_mode_changes_nothing():
    base = System(parse_scenario(scenario_text(reference="bare")))
    text = scenario_text(reference="bare", extra=second_mode()
                         + tone_table("idle", 0.0, 0.0, cavity_mode="idler"))
    silent = System(parse_scenario(text))
    assert silent.point.photon_number == pytest.approx(base.point.photon_number, rel=1e-12)
    assert silent.point.detuning_effective_hz == pytest.approx(
        base.point.detuning_effective_hz, rel=1e-12)
    assert (steady_state(silent).modes[0].occupation
            == pytest.approx(steady_state(base).modes[0].occupation, rel=1e-9))


# -- operating point --------------------------------------------------------------------

@pytest.mark.parametrize("reference", ["bare", "effective"])
def test_operating_point_solves_the_shared_static_shift(reference):
    """Every tone's photons shift its own mode and, through the drum, the other one."""
    text = scenario_text(reference=reference, extra=second_mode(g0_hz=80.0)
                         + tone_table("probe", 4e4, 1.5e5)
                         + tone_table("pump", 2e5, -2e5, cavity_mode="idler"))
    scenario = parse_scenario(text.replace("coupling_hz = 50.0", "coupling_hz = 3000.0"))
    point = operating_point(scenario)
    s = shift_matrix(scenario)
    n_mode = np.array([c.photon_number for c in point.cavity_modes])
    shifts = angular(np.array([c.static_shift_hz for c in point.cavity_modes]))
    assert shifts == pytest.approx(s @ n_mode, rel=1e-9)
    assert abs(shifts[0]) > 0.1 * angular(KAPPA_HZ)  # a shift that matters
    for tone in point.tones:
        cav = point.cavity_modes[tone.cavity_mode]
        k, ke, d = angular([cav.linewidth_hz, cav.external_linewidth_hz,
                            tone.detuning_effective_hz])
        assert tone.photon_number == pytest.approx(
            ke * tone.input_photon_flux / (k**2 / 4 + d**2), rel=1e-9)
        assert tone.detuning_effective_hz - tone.detuning_bare_hz == pytest.approx(
            cav.static_shift_hz, rel=1e-9)


def test_multistability_matches_the_one_tone_cubic():
    """A silent second tone: the bracketing search finds the cubic's three branches. With
    d = Δ0/(κ/2) = −4 the cubic x³ + 2d x² + (1 + d²) x = P has three roots for
    3.93 < P < 10.88 (its local extrema); P = 7 sits inside."""
    text = scenario_text(reference="bare", drive_detuning_hz=-2 * KAPPA_HZ)
    scenario = parse_scenario(text.replace("coupling_hz = 50.0", "coupling_hz = 5e3"))
    shift = float(shift_matrix(scenario)[0, 0])
    half, kappa_ex = angular(KAPPA_HZ) / 2, angular(KAPPA_HZ / 2)
    flux = 7.0 * half**3 / (shift * kappa_ex)
    scenario = scenario.replace("drive.power_w", flux * photon_energy_j(6e9))
    one = operating_point(scenario)
    assert one.bistable and len(one.branches) == 3
    silent = parse_scenario(scenario_text(extra=tone_table("x", 0.0, 1e6))).tones
    for branch in ("lowest", "middle", "highest"):
        picked = scenario.replace("drive.bistable_branch", branch)
        two = operating_point(dataclasses.replace(picked, tones=silent))
        assert two.branches == pytest.approx(one.branches, rel=1e-9)
        assert two.photon_number == pytest.approx(operating_point(picked).photon_number,
                                                  rel=1e-9)


# -- steady state: rates add over tones -------------------------------------------------

def test_occupation_from_summed_weak_coupling_rates():
    """Three tones on two modes, weak coupling (g ≪ κ): the exact occupation and linewidth
    match the rate equation with rates summed over tones. Marquardt, Chen, Clerk & Girvin,
    PRL 99, 093902 (2007), Eqs. (3)–(5); Wilson-Rae, Nooshi, Zwerger & Kippenberg, PRL 99,
    093901 (2007); Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014),
    Sec. VII: A∓ = Σk g_k² κ / (κ²/4 + (Δk ± Ωm)²), n = (Γm n_th + A+)/(Γm + A− − A+)."""
    text = scenario_text(drive_photons=1e4, extra=second_mode(bath_occupation=0.0)
                         + tone_table("probe", 2e3, 0.7 * OMEGA_HZ)
                         + tone_table("pump", 3e4, -1.1 * OMEGA_HZ, cavity_mode="idler"),
                         bath_occupation=1000.0)
    system = System(parse_scenario(text))
    point = system.point
    om, gm = angular([OMEGA_HZ, 50.0])
    down = up = 0.0
    for tone in point.tones:
        k = angular(point.cavity_modes[tone.cavity_mode].linewidth_hz)
        g, d = angular([tone.coupling_rates_hz[0], tone.detuning_effective_hz])
        down += g**2 * k / (k**2 / 4 + (d + om) ** 2)
        up += g**2 * k / (k**2 / 4 + (d - om) ** 2)
    expected = (gm * 1000.0 + up) / (gm + down - up)
    state = steady_state(system)
    mode = state.modes[0]
    assert len(point.tones) == 3 and down > 5 * gm  # light dominates the damping
    # beyond weak coupling the exact result differs at order (2g/κ)² = 2.5e-3 for the drive
    assert mode.occupation == pytest.approx(expected, rel=5e-3)
    assert mode.weak_coupling_occupation == pytest.approx(expected, rel=1e-12)
    assert mode.effective_linewidth_hz == pytest.approx(
        float((gm + down - up) / (2 * np.pi)), rel=5e-3)


# -- stages that do not support several tones yet ---------------------------------------

def test_unsupported_stages_refuse_with_a_message():
    """The stages after the receiver take the detected tone (tests/test_detected_tone.py);
    the master equation's full model still refuses (its several-tone linearised steady
    state is tests/test_master_tones.py; the gap split, tests/test_tone_gap.py)."""
    from simulator.master.spectra import master_heterodyne_spectrum

    system = System(probe_system_text())
    with pytest.raises(InputError, match="'drive', 'probe'"):
        master_heterodyne_spectrum(system.scenario)
    assert heterodyne_spectrum(system).total.size > 0
    assert steady_state(system.scenario).modes[0].occupation > 0


def probe_system_text():
    return parse_scenario(scenario_text(extra=tone_table("probe", 1e3, OMEGA_HZ + 3e5)))


@pytest.mark.parametrize("verb", [["inspect"], ["spectrum"], ["record", "--out", "r.h5",
                                                              "--duration", "1e-4"]])
def test_command_line_reads_the_detected_tone(verb, tmp_path, capsys, monkeypatch):
    from simulator.cli.parser import main

    monkeypatch.chdir(tmp_path)
    path = tmp_path / "two.toml"
    path.write_text(probe_system_text().replace("detection.tone", "probe").to_toml(),
                    encoding="utf-8")
    assert main([verb[0], str(path), *verb[1:]]) == 0
    out = capsys.readouterr().out
    assert "Traceback" not in out and out


def test_random_tone_sets_build_or_refuse_cleanly():
    """Random tones on two modes, bare detunings (so the shift search runs), strong and weak:
    each builds a System whose steady state exists, or is refused with a ScenarioError or
    an OperatingPointError (unstable); nothing else escapes (common practice: fuzzing)."""
    import warnings

    from simulator.errors import OperatingPointError
    from simulator.model.tone_validity import ToneSpacingWarning

    rng = np.random.default_rng(20261202)
    outcomes = {"built": 0, "refused": 0, "unstable": 0}
    for _ in range(40):
        extra = second_mode(g0_hz=float(rng.uniform(0, 500)))
        for k in range(int(rng.integers(1, 4))):
            extra += tone_table(f"t{k}", float(10 ** rng.uniform(0, 6)),
                                float(rng.uniform(-3, 3) * OMEGA_HZ),
                                cavity_mode=str(rng.choice(["cavity", "idler"])))
        text = scenario_text(reference="bare", drive_photons=float(10 ** rng.uniform(0, 6)),
                             drive_detuning_hz=float(rng.uniform(-2, 1) * OMEGA_HZ), extra=extra)
        text = text.replace("coupling_hz = 50.0", f"coupling_hz = {rng.uniform(1, 2000)!r}")
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ToneSpacingWarning)
                system = System(parse_scenario(text))
                state = steady_state(system)
            assert np.all(np.isfinite(state.covariance))
            outcomes["built"] += 1
        except ScenarioError:
            outcomes["refused"] += 1
        except OperatingPointError:
            outcomes["unstable"] += 1
    assert outcomes["built"] >= 10, outcomes


def test_newton_search_with_two_independent_shifts_matches_each_modes_cubic():
    """Two cavity modes, each coupled to its own mechanical mode (S diagonal, rank two: the
    Newton search runs). Each mode then has the one-tone cubic of its own tone, solved by
    simulator.model.operating_point.photon_number_branches."""
    from simulator.model.operating_point import photon_number_branches

    plate = ('[[mechanics]]\nname = "plate"\nfrequency_hz = 3e6\nlinewidth_hz = 20.0\n'
             'effective_mass_kg = 1e-12\ncoupling_hz = 0.0\nbath_occupation = 10.0\n')
    text = (scenario_text(reference="bare", drive_detuning_hz=-4e5, drive_photons=3e4)
            .replace("coupling_hz = 50.0", "coupling_hz = 2000.0") + plate
            + second_mode(g0_hz=0.0) + '[[couplings]]\ncavity_mode = "idler"\n'
            'mechanics = "plate"\ncoupling_hz = 1500.0\n'
            + tone_table("pump", 5e4, -3e5, cavity_mode="idler"))
    scenario = parse_scenario(text.replace(
        '[[couplings]]\ncavity_mode = "idler"\nmechanics = "drum"\ncoupling_hz = 0.0\n', ""))
    s = shift_matrix(scenario)
    assert s[0, 1] == s[1, 0] == 0 and s[0, 0] > 0 and s[1, 1] > 0
    point = operating_point(scenario)
    for tone in point.tones:
        c = tone.cavity_mode
        cav = point.cavity_modes[c]
        k, ke, d0 = angular([cav.linewidth_hz, cav.external_linewidth_hz, tone.detuning_bare_hz])
        branches = photon_number_branches(kappa=k, kappa_ex=ke, flux=tone.input_photon_flux,
                                          detuning_bare=d0, shift=s[c, c])
        assert tone.photon_number == pytest.approx(branches[0], rel=1e-8)
        assert abs(cav.static_shift_hz) > 0.05 * KAPPA_HZ  # the shift matters


def test_the_example_in_the_physics_page_loads_and_builds():
    """The TOML example of docs/physics.md §13, added to a one-tone device, is valid and
    its model has one field per tone."""
    from pathlib import Path

    text = Path("docs/physics.md").read_text(encoding="utf-8")
    section = text[text.index("## 13. Several tones"):]
    start = section.index("```toml") + len("```toml")
    example = section[start:section.index("```", start)]
    system = System(parse_scenario(scenario_text(drive_photons=1e4) + example))
    assert [t.name for t in system.point.tones] == ["drive", "probe", "pump"]
    assert system.model.states[-4:] == ("probe.X", "probe.Y", "pump.X", "pump.Y")
    assert steady_state(system).modes[0].occupation > 0


def test_a_strong_blue_tone_beside_a_red_drive_is_named_as_the_instability():
    """Anti-damping from a blue probe larger than the red drive's damping plus Γm."""
    text = scenario_text(drive_photons=1e3, extra=tone_table("probe", 1e5, OMEGA_HZ + 3e5))
    system = System(parse_scenario(text))
    assert not system.stable and "parametric instability on blue detuning" in \
        system.stability.cause
    from simulator.errors import OperatingPointError

    with pytest.raises(OperatingPointError):
        steady_state(system)


@pytest.mark.parametrize("path", ["scenarios/membrane_phase_noise.toml",
                                  "scenarios/drum_microwave_mK.toml"])
def test_drive_noise_with_a_silent_tone_gives_the_one_tone_state(path):
    """The drive's classical noise (laser states appended after the tone fields) reaches the
    drive's field only; a silent tone on another mode leaves the state of the cavity and
    the mechanics as it was."""
    from pathlib import Path

    base = load_scenario(path)
    mode = base.mechanics[0].name
    extra = (second_mode(frequency_hz=1e9).replace('"drum"', f'"{mode}"')
             + tone_table("idle", 0.0, 0.0, cavity_mode="idler"))
    system = System(parse_scenario(Path(path).read_text(encoding="utf-8") + extra))
    one = System(base)
    keep = [system.model.index(name) for name in one.model.states]
    assert system.model.covariance()[np.ix_(keep, keep)] == pytest.approx(
        one.model.covariance(), rel=1e-9, abs=1e-12)
    assert [m.occupation for m in steady_state(system).modes] == pytest.approx(
        [m.occupation for m in steady_state(one).modes], rel=1e-9)
