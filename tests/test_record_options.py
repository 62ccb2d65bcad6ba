"""``noisechain record``: options out of range, or that the chosen output would ignore, are
refused with a message naming the option, its value and what was expected (status 2, no
traceback, no file)."""

import pytest

from simulator.cli.parser import main

DEMO = "simulator/data/demo.toml"


@pytest.mark.parametrize("options, says", [
    (["--threads", "0"], "--threads 0: expected a positive number"),
    (["--window", "hann"], "--window hann: expected it only with --averaged"),
    (["--averaged", "64", "--compress", "--threads", "2"],
     "--compress, --threads with --averaged: expected none"),
    (["--averaged", "64", "--form", "innovations"], "--form with --averaged"),
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
