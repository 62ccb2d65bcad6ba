"""What a new user reads in the outputs of the bundled scenarios.

Each test here pins a place where the printed numbers were right but easy to
misread, or where a command's output was misleading, and asserts the physics
that makes the printed label true.
"""

import json
import math

import pytest

from simulator.cli.parser import main
from simulator.model.system import System
from simulator.scenario.loader import load_scenario
from simulator.workflows.inspection import inspect_scenario

RING = "scenarios/ring_two_modes.toml"  # cooling tone on one mode, probe on another


def test_mode_block_with_several_tones_says_whose_numbers_it_shows(capsys):
    """g and the cooperativity in a mode block are the detected tone's, while the
    optical damping and spring are summed over every tone: on the ring the detected
    probe sits on resonance and damps nothing (cooperativity 0.11), yet the block
    printed 79 kHz of damping from the cooling tone beside it without a word."""
    report = inspect_scenario(System(load_scenario(RING)), feasibility=False)
    d = report.to_dict()
    mode = d["modes"][0]
    per_tone = {row["name"]: row["modes"][0] for row in d["tones"]}
    detected = per_tone[d["detected_tone"]]
    # the cooperativity and g of the block are the detected tone's own
    assert mode["cooperativity"] == pytest.approx(detected["cooperativity"], rel=1e-9)
    assert mode["g_hz"] == pytest.approx(detected["g_hz"], rel=1e-9)
    # the damping is the sum over tones (weak coupling: rates add over tones,
    # Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Sec. VII)
    total = sum(t["optical_damping_hz"] for t in per_tone.values())
    assert mode["optical_damping_hz"] == pytest.approx(total, rel=1e-9)
    assert abs(detected["optical_damping_hz"]) < 1e-6 * abs(total)  # resonant probe
    # C = 4g²/(κΓm) with the detected tone's g is far from what the damping implies
    assert math.isclose(mode["cooperativity"], 0.1112, rel_tol=1e-3)

    assert main(["inspect", RING, "--no-feasibility"]) == 0
    text = capsys.readouterr().out
    block = text.split("mode breathing\n", 1)[1]
    assert block.startswith("  (g, cooperativities, Ωm/κ: the detected tone probe's; "
                            "damping, spring, occupations, n_min: every tone's)\n")


DAMAGED = {  # valid JSON in a layout the run never writes
    "a list": "[1, 2]",
    "text for a number": '{"photon_number": "x", "error": ""}',
    "a mode list too short": '{"occupation": [], "error": ""}',
    "no error field": '{"photon_number": 3.0}',
}


@pytest.mark.parametrize("damage", DAMAGED, ids=list(DAMAGED))
def test_damaged_sweep_point_is_computed_again(tmp_path, damage):
    """A point file damaged into another valid JSON failed the whole rerun with "the
    computation failed numerically ... a value of the scenario is probably outside
    the range" (blaming the scenario), or went into the dataset as it was."""
    from conftest import make_scenario

    from simulator.workflows.sweep import run_sweep

    scenario = make_scenario(sweep={"parameters": {"drive.power_w": {
        "start": 1e-7, "stop": 1e-6, "num": 3}}})
    fresh = run_sweep(scenario, tmp_path, workers=1, progress=False)
    stored = sorted((tmp_path / "points").glob("*.json"))
    assert len(stored) == 3
    stored[1].write_text(DAMAGED[damage], encoding="utf-8")
    again = run_sweep(scenario, tmp_path, workers=1, progress=False)
    for name in ("photon_number", "occupation", "cooperativity", "stable"):
        assert again[name].values.tolist() == fresh[name].values.tolist()
    assert again["error"].values.tolist() == ["", "", ""]


@pytest.mark.parametrize("damage", ["[1, 2]", '{"estimates": 3, "error": ""}',
                                    '{"estimates": {"q": [1.0, "x"]}, "error": "", '
                                    '"warnings": []}'])
def test_damaged_trial_file_is_run_again(tmp_path, damage):
    """A trial file damaged into a JSON list ended the rerun with a traceback
    (TypeError: list indices must be integers), and a malformed estimate reached
    the statistics."""
    from simulator.workflows.trial import run_trials

    scenario = load_scenario("tests/data/fast_thermometry.toml")
    spec = "tests.estimators_for_tests:shot_noise_level"
    fresh = run_trials(scenario, spec, 2, tmp_path, workers=1, progress=False)
    stored = sorted((tmp_path / "trials").glob("*.json"))
    stored[0].write_text(damage, encoding="utf-8")
    again = run_trials(scenario, spec, 2, tmp_path, workers=1, progress=False)
    assert again.to_dict() == fresh.to_dict()


def test_uncoupled_mode_is_named_not_silently_left_out_of_the_bounds(capsys):
    """A mode the detected light does not couple to has no Cramér–Rao bound (its motion
    is not in the record); its feasibility block used to vanish without a word, and
    its optical spring printed as "-0"."""
    from conftest import make_scenario

    scenario = make_scenario(mechanics=[
        {"name": "dark", "frequency_hz": 20e6, "linewidth_hz": 10.0,
         "effective_mass_kg": 1e-15, "coupling_hz": 0.0, "bath_occupation": 100.0},
        {"name": "lit", "frequency_hz": 27e6, "linewidth_hz": 10.0,
         "effective_mass_kg": 1e-15, "coupling_hz": 100.0, "bath_occupation": 100.0}])
    report = inspect_scenario(System(scenario))
    assert [f["mode"] for f in report.feasibility] == ["lit"]
    said = [w for w in report.warnings if w.startswith("mode dark: no measurement-time")]
    assert len(said) == 1 and "none of its motion" in said[0]
    assert not any(w.startswith("mode lit: no measurement-time") for w in report.warnings)
    dark = report.to_text().split("mode dark\n", 1)[1].split("\n\n", 1)[0]
    assert "optical damping (Hz)        0\n" in dark + "\n"
    assert "optical spring (Hz)         0\n" in dark + "\n"


def test_a_file_of_another_noisechain_format_is_named_with_its_reader(tmp_path):
    """An averaged spectrum given to the record reader was called "not a complete
    noisechain record ... an interrupted write leaves such a file": a physicist would
    rerun a record that was never broken. A folder was "not found"."""
    from simulator.errors import InputError
    from simulator.io.averagedfile import load_averaged_spectrum
    from simulator.io.recordfile import load_record
    from simulator.workflows.record import simulate_averaged_spectrum, simulate_record

    scenario = load_scenario("tests/data/fast_thermometry.toml")
    averaged, record = tmp_path / "a.h5", tmp_path / "r.h5"
    simulate_averaged_spectrum(scenario, segment_samples=64, out=averaged)
    simulate_record(scenario, out=record)
    with pytest.raises(InputError, match="holds format 'noisechain-averaged-spectrum', not "
                       "'noisechain-record'.*load_averaged_spectrum"):
        load_record(averaged)
    with pytest.raises(InputError, match="holds format 'noisechain-record', not "
                       "'noisechain-averaged-spectrum'.*recordfile.load_record"):
        load_averaged_spectrum(record)
    with pytest.raises(InputError, match="is a folder; expected an HDF5 file"):
        load_record(tmp_path)
    # and each reads its own
    assert load_record(record).n_samples > 0
    assert load_averaged_spectrum(averaged).segment_samples == 64


BAE = "scenarios/drum_bae_microwave.toml"


def test_a_mistuned_back_action_evading_pair_is_said_to_evade_nothing():
    """Tones 5 kHz off ±Ωm (the mode 20 Hz wide) were reported as a back-action-evading
    measurement with "X1 measured" and an imprecision of "inf quanta" in the record.
    The physics behind the warning: X1 then takes the back-action, so Var X1 and
    Var X2 come out alike, while the tuned pair leaves X1 near its thermal variance."""
    from simulator.linear.quadratures import quadrature_budget

    tuned = System(load_scenario(BAE))
    mistuned = tuned.replace("tones[0].detuning_hz", 5.01e6)

    budget = quadrature_budget(tuned)
    assert budget.x2_variance > 10 * budget.x1_variance  # X2 takes the back-action
    report = inspect_scenario(tuned, feasibility=False)
    assert not [w for w in report.warnings if "half-spacing" in w]

    budget = quadrature_budget(mistuned)
    assert budget.x1_backaction > 100 * quadrature_budget(tuned).x1_backaction
    assert abs(budget.x1_variance - budget.x2_variance) < 0.2 * budget.x2_variance
    report = inspect_scenario(mistuned, feasibility=False)
    said = [w for w in report.warnings if "half-spacing ν = 5005000 Hz" in w]
    assert len(said) == 1 and "does not evade it here" in said[0]
    assert "in this record              none: no X1 line" in report.to_text()
    assert "inf quanta" not in report.to_text()


def test_check_refuses_what_every_other_verb_refuses(tmp_path, capsys):
    """Two tones at one frequency on one cavity mode were "valid" for `check`, then
    refused by inspect, spectrum and record (the model's own spacing check): the
    tutorial's first step passed a file the second step rejected."""
    text = open("scenarios/drum_two_probes.toml", encoding="utf-8").read()
    path = tmp_path / "coinciding.toml"
    path.write_text(text.replace("detuning_hz = -6.4e6", "detuning_hz = -6.0e6", 1),
                    encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "tones[0].detuning_hz: tones 'drive' and 'red_probe' on one cavity mode" in err
    assert main(["inspect", str(path), "--no-feasibility"]) == 2
    assert err.splitlines()[0] == capsys.readouterr().err.splitlines()[0].replace(
        "noisechain inspect", "noisechain check")
    # an unstable operating point is a valid scenario: check passes, inspect exits 3
    assert main(["check", "scenarios/trampoline_blue_unstable.toml"]) == 0


def test_spectrum_of_several_recorded_tones_names_the_receiver_it_shows(capsys):
    """With detection.tones = [red_probe, blue_probe] `spectrum` drew the first tone's
    receiver without naming it: its lines (anti-Stokes near the cavity) could be read
    as the blue probe's. It is the spectrum of detection.tone = "red_probe"."""
    import numpy as np

    from simulator.scenario.loader import parse_scenario
    from simulator.workflows.spectrum import compute_spectrum, report_text

    text = open("scenarios/drum_two_probes.toml", encoding="utf-8").read()
    detected = 'tone = "blue_probe"'
    assert text.count(detected) == 1
    both = parse_scenario(text.replace(detected, 'tones = ["red_probe", "blue_probe"]'))
    red = parse_scenario(text.replace(detected, 'tone = "red_probe"'))
    shown, alone = compute_spectrum(System(both)), compute_spectrum(System(red))
    assert np.array_equal(shown.spectrum.frequency_hz, alone.spectrum.frequency_hz)
    assert np.allclose(shown.spectrum.total, alone.spectrum.total, rtol=1e-12, atol=0)
    text = report_text(shown, {})
    assert text.splitlines()[1] == (
        "  the receiver of red_probe, the first of detection.tones = ['red_probe', "
        "'blue_probe']; list another first for its spectrum (`noisechain record` writes "
        "every tone's)")
    assert "the receiver of" not in report_text(alone, {})


def test_an_unexplained_gap_of_the_sideband_ratio_is_still_stated():
    """With one tone the spectrum splits n_R − n by cause; with several it printed the
    two numbers 3 % apart (0.1996 against 0.2058 on the two-probe drum) and nothing
    else, as if they agreed."""
    from simulator.workflows.spectrum import compute_spectrum, report_text

    result = compute_spectrum(System(load_scenario("scenarios/drum_two_probes.toml")))
    (s,) = result.summary
    assert s.gap is None
    gap = s.occupation_from_ratio - s.steady_state_occupation
    assert gap < -0.01 * s.steady_state_occupation
    assert (f"    n from the ratio is {abs(gap):.4g} below the steady state; with several "
            "tones its causes are not split") in report_text(result, {})


@pytest.mark.parametrize("path, lines", [
    ("scenarios/drum_two_probes.toml", ["  tones: drive, red_probe, blue_probe; recorded: "
                                        "blue_probe"]),
    ("scenarios/ring_two_modes.toml", ["  tones: drive, probe; recorded: probe",
                                       "  cavity modes: cavity, readout"]),
    ("scenarios/nanostring_protocol.toml", ["  schedule: 3 segment(s), 0.042 s of record"]),
    ("scenarios/trampoline_blue_unstable.toml", ["  sweep: 81 points over "
                                                 "drive.detuning_hz (grid)"]),
    ("scenarios/drum_microwave_plan.toml", ["  plan: asymmetry_time over drive.detuning_hz, "
                                            "drive.power_w"]),
    ("scenarios/membrane_4k.toml", []),
])
def test_check_says_what_it_found_beyond_the_modes(capsys, path, lines):
    """`check` named the mechanical modes only: which tone is recorded, or how many
    points a sweep holds, was seen only after a long run."""
    assert main(["check", path]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith(f"{path}: valid scenario") and out[1:] == lines


def test_homodyne_feasibility_says_why_it_has_no_asymmetry_time():
    """A homodyne record is real, so its spectrum is even in Ω and the two sidebands
    are folded together: the line vanished from the feasibility block without a word.
    The bundled homodyne device's record is indeed real, its spectrum one-sided."""
    from simulator.linear.record_budget import digitiser_spectrum

    system = System(load_scenario("scenarios/microtoroid_room_temperature.toml"))
    assert digitiser_spectrum(system).sided == "one-sided"
    report = inspect_scenario(system)
    assert report.feasibility[0]["asymmetry_time_s"] is None
    assert ("  time to resolve the asymmetry    none from homodyne: one quadrature folds "
            "both sidebands onto |Ω|") in report.to_text()


@pytest.mark.parametrize("spec, says", [
    ("{tmp}/folder.py:estimate", "file {tmp}/folder.py is a folder; expected a Python file"),
    ("{tmp}/notes.toml:estimate", "{tmp}/notes.toml is neither a module name nor a .py file"),
    ("{tmp}:estimate", "{tmp} is neither a module name nor a .py file"),
])
def test_an_estimator_path_that_is_no_python_file_is_named_as_such(tmp_path, spec, says):
    """A folder named like a .py file was "not found", and a path to another kind of
    file was imported as a module name ("No module named '/tmp/notes'")."""
    from simulator.errors import InputError
    from simulator.workflows.estimator import load_estimator

    (tmp_path / "folder.py").mkdir()
    (tmp_path / "notes.toml").write_text("x = 1\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        load_estimator(spec.format(tmp=tmp_path))
    assert says.format(tmp=tmp_path) in str(info.value)


def test_master_equation_spectrum_quotes_its_budget_at_its_line(capsys):
    """Without a sideband summary the budget was quoted at the grid's middle (49 kHz,
    total 1.00001: shot noise alone), far from the drum's lines at ±8 MHz."""
    assert main(["spectrum", "scenarios/drum_microwave_mK.toml", "--at", "cavity",
                 "--engine", "master", "--quiet", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    at = d["budget_at"]
    assert at["total"] == d["peak"] and abs(abs(at["frequency_hz"]) - 8e6) < 1e4
    assert at["lines"]["output photon flux (master equation)"] > 0.2


@pytest.mark.parametrize("argv, words", [
    (["inspect", "scenarios/drum_two_probes.toml", "--master"],
     "--master with several drive tones ('drive', 'red_probe', 'blue_probe')"),
    (["inspect", "scenarios/drum_bae_microwave.toml", "--master", "--master-model",
      "linearised"], "--master with a back-action-evading pair"),
    (["spectrum", "scenarios/drum_two_probes.toml", "--engine", "master", "--at", "cavity"],
     "--engine master with several drive tones"),
    (["record", "scenarios/drum_two_probes.toml", "--engine", "master", "--master-model",
      "linearised", "--out", "never.h5"], "it gives the steady state only"),
])
def test_master_runs_that_tones_rule_out_are_refused_by_their_option(argv, words, capsys,
                                                                    tmp_path):
    """A master-equation option the scenario's tones rule out is refused before any work,
    in the option's words (it named an internal function), and writes nothing."""
    argv = [str(tmp_path / a) if a == "never.h5" else a for a in argv]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert words in err and "simulator." not in err and err.count("\n") == 1
    assert list(tmp_path.iterdir()) == []
