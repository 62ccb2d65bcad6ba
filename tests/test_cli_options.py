"""``noisechain record`` (and ``spectrum``, ``trial``): options out of range, or that the
chosen output would ignore, are refused with a message naming the option, its value and
what was expected (status 2, no traceback, no file)."""

import pytest

from simulator.cli.parser import main

DEMO = "simulator/data/demo.toml"


@pytest.mark.parametrize("options, says", [
    (["--threads", "0"], "--threads 0: expected a positive number"),
    (["--window", "hann"], "--window hann: expected it only with --averaged"),
    (["--averaged", "64", "--compress", "--threads", "2"],
     "--compress, --threads with --averaged: expected none"),
    (["--averaged", "64", "--form", "innovations"], "--form with --averaged"),
    (["--engine", "master", "--threads", "2"], "--threads with --engine master"),
    (["--threads", "100000"], "--threads 100000: expected at most"),
    (["--duration", "0"], "--duration 0.0 is out of range; expected a positive number"),
    (["--duration", "nan"], "--duration nan is not a finite number"),
    (["--duration", "1e30"], r"--duration 1e\+30 is out of range; .*at most 1e6"),
    (["--seed", "-1"], "--seed -1 is out of range; expected a non-negative integer"),
    (["--seed", str(2**64)], f"--seed {2**64} is out of range"),
    (["--averaged", "64", "--window", "nonsense"],
     "window = 'nonsense': .*expected a scipy.signal.get_window name"),
    (["--averaged", "64", "--window", "kaiser"], "window = 'kaiser': .*needs no parameter"),
])
def test_bad_record_options_are_refused(tmp_path, capsys, options, says):
    import re

    out = tmp_path / "r.h5"
    assert main(["record", DEMO, "--out", str(out), "--quiet", *options]) == 2
    err = capsys.readouterr().err
    assert re.search(says, err) and "Traceback" not in err
    assert not out.exists()


@pytest.mark.parametrize("averaged, says", [
    ((1, "hann"), "--averaged 1: expected segments of 2 to the record's"),
    ((64, "nonsense"), "window = 'nonsense'"),
])
def test_trial_checks_its_averaged_option_before_any_trial(tmp_path, averaged, says):
    """Before this check every trial failed alike, reported as the estimator's failure."""
    from simulator.errors import InputError
    from simulator.scenario.loader import load_scenario
    from simulator.workflows.trial import run_trials

    scenario = load_scenario("tests/data/fast_thermometry.toml")
    with pytest.raises(InputError, match=says):
        run_trials(scenario, "tests.estimators_for_tests:spectrum_floor", 2,
                   tmp_path / "trial", workers=1, progress=False, averaged=averaged)
    assert not (tmp_path / "trial").exists()


def test_a_homodyne_angle_with_heterodyne_detection_is_refused(capsys):
    """It was ignored: the heterodyne spectrum does not depend on a quadrature angle."""
    assert main(["spectrum", DEMO, "--angle-deg", "30"]) == 2
    assert "--angle-deg 30 with detection.scheme = 'heterodyne'" in capsys.readouterr().err


@pytest.mark.parametrize("options", [["--duration", "1e30"], ["--seed", "-1"],
                                     ["--threads", "100000"]])
def test_a_bad_record_option_is_one_line_naming_the_option(tmp_path, capsys, options):
    """The progress bar was drawn before the library refused the value, and the value
    was blamed on the scenario file ("demo.toml: record.duration_s") or called
    "workers" or "seed": now one line, the option's own name, before any work."""
    out = tmp_path / "r.h5"
    assert main(["record", DEMO, "--out", str(out), *options]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"noisechain record: error: {options[0]} ")
    assert DEMO not in err


SCHEDULED = "scenarios/nanostring_protocol.toml"


@pytest.mark.parametrize("verb", [
    ["record", SCHEDULED, "--out", "{out}/r.h5"],
    ["trial", SCHEDULED, "--estimator", "tests.estimators_for_tests:spectrum_floor",
     "--trials", "2", "--out", "{out}/trial"],
], ids=["record", "trial"])
def test_a_duration_with_a_schedule_is_refused(tmp_path, capsys, verb):
    """A scheduled record lasts the sum of its segments: --duration 0.1, the default of
    record.duration_s, was silently ignored by record (and any --duration by trial)."""
    argv = [a.replace("{out}", str(tmp_path)) for a in verb]
    assert main([*argv, "--duration", "0.1", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "--duration 0.1 with a [schedule]" in err and "0.042 s here" in err
    assert list(tmp_path.iterdir()) == []


def test_a_record_refused_inside_the_engine_prints_no_empty_progress_bar(tmp_path, capsys):
    """1 ps at the demo's sample rate is no sample: refused by the record plan, after
    the bar had been drawn ("record: 0.00sample [00:00, ?sample/s]" twice)."""
    out = tmp_path / "r.h5"
    assert main(["record", DEMO, "--out", str(out), "--duration", "1e-12"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("noisechain record: error: duration 1e-12 s at ")
    assert err.count("\n") == 1 and "sample/s]" not in err and not out.exists()


@pytest.mark.parametrize("angle", ["nan", "1e300", "-400"])
def test_a_homodyne_angle_beyond_a_turn_is_refused_as_the_option(capsys, angle):
    """nan was blamed on the scenario file (detection.quadrature_angle_rad), and 1e300
    degrees was accepted: its remainder modulo a turn is lost to rounding, so the
    spectrum was that of an arbitrary quadrature."""
    homodyne = "scenarios/microtoroid_room_temperature.toml"
    assert main(["spectrum", homodyne, "--angle-deg", angle, "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"--angle-deg {float(angle):g}: expected a finite angle from -360 to 360" in err
    assert homodyne not in err and err.count("\n") == 1


def test_a_count_of_trials_beyond_the_limit_is_refused_before_any_work(tmp_path, capsys):
    """--trials 1000000000 spawned a billion seeds at once: MemoryError and a traceback
    (or the machine's memory exhausted), after the trial folder had been claimed."""
    out = tmp_path / "trial"
    argv = ["trial", "tests/data/fast_thermometry.toml", "--estimator",
            "tests.estimators_for_tests:shot_noise_level", "--out", str(out), "--quiet"]
    assert main([*argv, "--trials", "1000000000"]) == 2
    err = capsys.readouterr().err
    assert "--trials 1000000000: expected an integer from 2 to 100000" in err
    assert not out.exists()


@pytest.mark.parametrize("verb", [
    ["sweep", "scenarios/trampoline_blue_unstable.toml", "--out", "{out}/sweep"],
    ["plan", "scenarios/drum_microwave_plan.toml"],
    ["trial", "tests/data/fast_thermometry.toml", "--estimator",
     "tests.estimators_for_tests:shot_noise_level", "--trials", "2", "--out", "{out}/trial"],
], ids=["sweep", "plan", "trial"])
def test_more_worker_processes_than_the_machine_can_use_are_refused(tmp_path, capsys, verb):
    """--workers 100000 started one process per batch (a sweep of 81 points: 81
    interpreters with numpy each) on a machine of a few cores."""
    import os

    from simulator.workflows.tasks import PROCESSES_PER_CORE

    most = PROCESSES_PER_CORE * (os.cpu_count() or 1)
    argv = [a.replace("{out}", str(tmp_path)) for a in verb]
    assert main([*argv, "--workers", str(most + 1)]) == 2
    err = capsys.readouterr().err
    assert f"--workers {most + 1}: expected at most {most}" in err
    assert list(tmp_path.iterdir()) == []


def _folder_refusing_files():
    """A folder whose permission bits allow writing (as root) but that takes no file."""
    import os
    import tempfile

    for folder in ("/sys", "/proc"):
        if os.path.isdir(folder) and os.access(folder, os.W_OK | os.X_OK):
            try:
                with tempfile.TemporaryFile(dir=folder):
                    pass
            except OSError:
                return folder
    return None


REFUSING = _folder_refusing_files()


@pytest.mark.skipif(REFUSING is None, reason="needs a folder that passes os.access but "
                    "refuses files (/sys or /proc as root)")
@pytest.mark.parametrize("verb", [
    ["spectrum", DEMO, "--out", "{dir}/s.nc"],
    ["plan", "scenarios/drum_microwave_plan.toml", "--plot", "{dir}/p.png"],
    ["record", DEMO, "--out", "{dir}/r.h5"],
], ids=["spectrum", "plan", "record"])
def test_an_output_folder_that_takes_no_file_is_refused_before_any_work(capsys, verb):
    """The permission bits said yes (root; a network share that maps root to nobody
    is the same), so the spectrum or the plan was computed and then not written, and
    a record was refused for lack of room ("the folder has 0 GB free")."""
    argv = [a.replace("{dir}", REFUSING) for a in verb]
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert f"folder {REFUSING!r} cannot take a file" in captured.err
