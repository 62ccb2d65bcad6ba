"""Processes and signals: exit statuses, pipes closed early, workers that end with
their parent, and partial files of killed runs that the next run removes.

Every test drives the command line in a subprocess, as a user's shell would.
"""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from conftest import CLI_ENV, DEMO, REPO, detuning_sweep

from simulator.io.files import HOST

LONG_SWEEP = detuning_sweep(400)


def start(*args, **kwargs):
    """``noisechain ARGS`` in a subprocess of this worktree's package."""
    return subprocess.Popen([sys.executable, "-m", "simulator", *args], cwd=REPO, env=CLI_ENV,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, **kwargs)


def wait_for(condition, proc, what, timeout=60.0):
    deadline = time.monotonic() + timeout
    while not condition():
        assert proc.poll() is None, f"exited before {what}: {proc.stderr.read().decode()}"
        assert time.monotonic() < deadline, f"timed out waiting for {what}"
        time.sleep(0.05)


def parts(folder):
    return sorted(p.name for p in Path(folder).glob(".*.part"))


def children(pid):
    """Process ids whose parent is ``pid`` (Linux /proc)."""
    found = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                found.append(int(entry.name))
    return found


def running(pid):
    """True while ``pid`` exists and is not a zombie."""
    try:
        return (Path("/proc") / str(pid) / "stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def outliving(workers, grace_s=10.0):
    """The workers still running ``grace_s`` after their parent ended. The parent-death
    signal reaches them asynchronously: on a loaded machine a worker can take a moment
    to be scheduled and exit."""
    deadline = time.monotonic() + grace_s
    while any(running(pid) for pid in workers) and time.monotonic() < deadline:
        time.sleep(0.1)
    return [pid for pid in workers if running(pid)]


@pytest.mark.parametrize("signum, status", [(signal.SIGTERM, 143), (signal.SIGINT, 130)])
def test_record_stopped_by_a_signal_exits_128_plus_its_number_and_leaves_nothing(
        tmp_path, signum, status):
    target = tmp_path / "r.h5"
    proc = start("record", str(DEMO), "--out", str(target), "--duration", "60", "--quiet")
    wait_for(lambda: parts(tmp_path), proc, "the temporary file")
    proc.send_signal(signum)
    assert proc.wait(timeout=30) == status
    assert "Traceback" not in proc.stderr.read().decode()
    assert list(tmp_path.iterdir()) == []


def test_killed_record_leaves_a_part_file_that_the_next_run_removes(tmp_path):
    proc = start("record", str(DEMO), "--out", str(tmp_path / "a.h5"), "--duration", "60",
                 "--quiet")
    wait_for(lambda: parts(tmp_path), proc, "the temporary file")
    (stale,) = parts(tmp_path)
    assert f".{HOST}-{proc.pid}-" in stale  # unique per process
    proc.kill()
    proc.wait()
    live = tmp_path / f".other.h5.{HOST}-{os.getpid()}-0123abcd.part"  # a live process's
    live.write_bytes(b"")
    done = subprocess.run([sys.executable, "-m", "simulator", "record", str(DEMO), "--out",
                           str(tmp_path / "b.h5"), "--duration", "0.001", "--quiet"],
                          cwd=REPO, env=CLI_ENV, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert parts(tmp_path) == [live.name]
    assert sorted(p.name for p in tmp_path.glob("*.h5")) == ["b.h5"]


def test_sweep_workers_end_with_their_killed_parent(tmp_path):
    scenario = tmp_path / "s.toml"
    scenario.write_text(LONG_SWEEP)
    out = tmp_path / "out"
    proc = start("sweep", str(scenario), "--out", str(out), "--workers", "2", "--quiet")
    workers = []

    def two_workers_busy():
        workers[:] = children(proc.pid)
        return len(workers) >= 2 and any((out / "points").glob("*.json"))

    wait_for(two_workers_busy, proc, "two busy workers")
    proc.kill()
    proc.wait()
    assert not outliving(workers), "workers outlived their parent"


def test_sweep_stopped_by_sigterm_exits_143_promptly_and_resumes(tmp_path):
    scenario = tmp_path / "s.toml"
    scenario.write_text(LONG_SWEEP)
    out = tmp_path / "out"
    proc = start("sweep", str(scenario), "--out", str(out), "--workers", "2", "--quiet")
    wait_for(lambda: any((out / "points").glob("*.json")), proc, "the first points")
    workers = children(proc.pid)
    proc.send_signal(signal.SIGTERM)
    assert proc.wait(timeout=30) == 143
    assert not outliving(workers), "workers outlived their parent"
    assert not (out / "sweep.nc").exists() and not parts(out / "points")


def test_output_read_by_a_pipe_that_closes_early_is_not_an_error():
    """``noisechain inspect ... | head -1``: the reader has gone before the
    output is written; the command exits 0 without a message."""
    proc = subprocess.Popen([sys.executable, "-m", "simulator", "inspect", str(DEMO)],
                            cwd=REPO, env=CLI_ENV, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # no reader left: the first write fails with EPIPE
    assert proc.wait(timeout=60) == 0
    assert proc.stderr.read().decode() == ""
