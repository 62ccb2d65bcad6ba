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
    (["--threads", "100000"], "workers = 100000 threads; expected at most"),
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
