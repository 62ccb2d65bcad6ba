"""Every verb that reads a scenario survives damaged input (common practice: fuzzing).

Mutated copies of the bundled scenarios (``scenario_mutations``: keys and
sections deleted, wrong types, NaN, infinities, 1e308, subnormals, huge
integers, odd text, deep nesting, truncated and byte-flipped files, bad
sweeps) go through the command line. Each run draws new cases from a seed
taken from the clock; the seed is printed with any failure, and
``NOISECHAIN_FUZZ_SEED=<seed>`` replays that run. Every case must end with
exit status 0, 2 (bad input) or 3 (unstable), within a time bound, and a
refusal must be one paragraph naming the key (or the broken file), never a
traceback.
"""

import contextlib
import io
import os
import re
import signal
import time

import pytest
from conftest import run_cli
from scenario_mutations import cases

from simulator.cli.parser import main

SEED = int(os.environ.get("NOISECHAIN_FUZZ_SEED", time.time_ns() % 2**32))
IN_PROCESS_CASES = 300
SPECTRUM_CASES = 40
SUBPROCESS_CASES = 24
SECONDS_PER_CASE = 60  # a hang, not a slow machine: a 10⁶-point sweep is checked in ~20 s

# What a refusal must name: a key path, or the file's own defect.
KEY = re.compile(r"(scenario|drive|cavity|mechanics|detection|electronics|digitizer|record|"
                 r"sweep|plan|tones|cavity_modes|couplings|schedule)(\[\d+\])?(\.|\b)")
FILE_DEFECT = ("malformed TOML", "cannot read the file", "is not a table", "unknown key",
               "the file is empty",
               "missing required")


class Hang(Exception):
    """A case ran past SECONDS_PER_CASE."""


def _alarm(signum, frame):
    raise Hang


def run_in_process(argv):
    """``main(argv)`` with its output captured and a time bound: (status, out, err)."""
    out, err = io.StringIO(), io.StringIO()
    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, SECONDS_PER_CASE)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            status = main(argv)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
    return status, out.getvalue(), err.getvalue()


def check_outcome(status, out, err, what):
    """The contract of the command line for one case."""
    assert status in (0, 2, 3), f"{what}: exit status {status}\n{err}"
    assert "Traceback" not in err + out, f"{what}: traceback\n{err}"
    if status == 2:
        message = err.strip()
        assert message, f"{what}: exit 2 without a message"
        assert "\n\n" not in message, f"{what}: more than one paragraph\n{message}"
        assert KEY.search(err) or any(d in err for d in FILE_DEFECT), (
            f"{what}: the refusal names no key\n{err}")
    if status == 3:  # inspect prints its report, with the cause, then exits 3
        said = ("growth rate" in err or '"stable": false' in out or "UNSTABLE" in out)
        assert said, f"{what}: exit 3 without saying why\n{out[-500:]}{err}"


def write_cases(folder, count, seed):
    paths = []
    for i, (description, raw) in enumerate(cases(seed, count)):
        path = folder / f"case{i:04d}.toml"
        path.write_bytes(raw)
        paths.append((description, path))
    return paths


def run_case(argv, what, path):
    """Run one command line in process and check its outcome; ``what`` names the case."""
    try:
        status, out, err = run_in_process(argv)
    except Hang:
        pytest.fail(f"{what}: no answer within {SECONDS_PER_CASE} s")
    except BaseException as exc:  # noqa: BLE001 - report which case escaped
        raise AssertionError(f"{what}: {type(exc).__name__} escaped the command "
                             f"line:\n{path.read_bytes()[:2000]!r}") from exc
    check_outcome(status, out, err, what)


def test_check_and_inspect_survive_mutated_scenarios(tmp_path):
    for description, path in write_cases(tmp_path, IN_PROCESS_CASES, SEED):
        for argv in (["check", str(path)], ["inspect", "--json", str(path)]):
            what = f"seed {SEED}, {' '.join(argv[:-1])} {path.name} ({description})"
            run_case(argv, what, path)


def test_spectrum_and_record_survive_mutated_scenarios(tmp_path):
    seed = SEED + 1
    for i, (description, path) in enumerate(write_cases(tmp_path, SPECTRUM_CASES, seed)):
        argv = ["spectrum", "--json", str(path)]
        if i % 8 == 0:  # a record is costlier: a few short ones
            argv = ["record", "--duration", "1e-4", "--quiet", "--out",
                    str(tmp_path / f"r{i}.h5"), str(path)]
        run_case(argv, f"seed {seed}, {argv[0]} {path.name} ({description})", path)


def test_installed_command_survives_mutated_scenarios(tmp_path):
    """A fresh interpreter, as a user runs it: the status and stderr it really gives."""
    seed = SEED + 2
    for i, (description, path) in enumerate(write_cases(tmp_path, SUBPROCESS_CASES, seed)):
        verb = ("check", "inspect")[i % 2]
        done = run_cli(verb, path)
        check_outcome(done.returncode, done.stdout, done.stderr,
                      f"seed {seed}, {verb} {path.name} ({description})")
