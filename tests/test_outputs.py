"""Output files: one atomic writer, no silent replacement, clean errors on a full
disk, and results folders that two runs cannot share.

- every file appears complete or not at all, with the permissions the user's
  umask gives any new file;
- an existing file is replaced only on request, never a read-only one, and
  never by a rename that races a file created meanwhile;
- a write that fails (no space left, file-size limit) names the file and
  removes the partial one, in the library and on the command line;
- two sweeps or trials into one folder: one is refused while the other runs,
  a lock left by a dead process is taken over, and a folder holding files
  that are not ours is refused.
"""

import errno
import json
import os
import resource
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import CLI_ENV, DEMO, REPO, SWEEP_BASE, detuning_sweep

from simulator.cli import parser as cli
from simulator.io.files import AtomicFile, OutputError, atomic_write_text
from simulator.io.folders import FolderLock
from simulator.scenario.loader import parse_scenario
from simulator.workflows.sweep import run_sweep

SWEEP = detuning_sweep(40)


def noisechain(*args, limit_bytes=None):
    """Run the command line in a subprocess; ``limit_bytes`` caps every file's size
    (RLIMIT_FSIZE) the way a nearly full disk would stop a write."""
    def cap():
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))

    return subprocess.run([sys.executable, "-m", "simulator", *args], cwd=REPO, env=CLI_ENV,
                          capture_output=True, text=True, timeout=120,
                          preexec_fn=cap if limit_bytes else None)


def test_new_files_get_the_permissions_of_the_umask(tmp_path):
    code = ("import os, sys\nos.umask(0o027)\nfrom simulator.io.files import atomic_write_text\n"
            "atomic_write_text(sys.argv[1], 'x')\n")
    subprocess.run([sys.executable, "-c", code, str(tmp_path / "a.txt")], check=True,
                   cwd=REPO, env=CLI_ENV)
    assert (tmp_path / "a.txt").stat().st_mode & 0o777 == 0o640


def test_existing_files_are_replaced_only_on_request(tmp_path):
    path = tmp_path / "a.txt"
    atomic_write_text(path, "first", overwrite=False)
    with pytest.raises(OutputError, match="already exists; pass --force"):
        atomic_write_text(path, "second", overwrite=False)
    atomic_write_text(path, "third", overwrite=True)
    assert path.read_text() == "third"
    path.chmod(0o444)
    with pytest.raises(OutputError, match="read-only"):
        atomic_write_text(path, "fourth", overwrite=True)
    assert path.read_text() == "third" and sorted(os.listdir(tmp_path)) == ["a.txt"]


def test_a_file_created_while_writing_is_not_replaced(tmp_path):
    path = tmp_path / "a.txt"
    out = AtomicFile(path)
    out.tmp.write_text("ours")
    path.write_text("someone else's")
    with pytest.raises(OutputError, match="already exists"):
        out.commit()
    assert path.read_text() == "someone else's" and os.listdir(tmp_path) == ["a.txt"]


def test_no_space_left_names_the_file_and_leaves_nothing(tmp_path, monkeypatch):
    def full(self, *args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(Path, "write_bytes", full)
    with pytest.raises(OutputError, match=r"cannot write .*a\.txt.*No space left on device"):
        atomic_write_text(tmp_path / "a.txt", "x")
    assert os.listdir(tmp_path) == []


def test_permission_lost_before_the_rename_is_a_clean_error(tmp_path, monkeypatch):
    def denied(*args):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))

    monkeypatch.setattr(os, "replace", denied)
    with pytest.raises(OutputError, match=r"a\.txt.*Permission denied"):
        atomic_write_text(tmp_path / "a.txt", "x", overwrite=True)
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("args, name", [
    (["record", "--duration", "0.05", "--quiet"], "r.h5"),
    (["spectrum"], "s.nc"),
])
def test_files_beyond_the_file_size_limit_are_a_clean_error(tmp_path, args, name):
    """HDF5 must fail the write, close its objects in order and not crash the
    interpreter (it used to die with a segmentation fault); the signal the
    limit sends (SIGXFSZ) is not ignored by the caller here."""
    done = noisechain(args[0], str(DEMO), "--out", str(tmp_path / name), *args[1:],
                      limit_bytes=100_000)
    assert done.returncode == 2, done.stderr
    assert f"cannot write {str(tmp_path / name)!r}: File too large" in done.stderr
    assert done.stderr.count("\n") == 1 and os.listdir(tmp_path) == []


@pytest.mark.parametrize("workers", ["1", "2"])
def test_sweep_with_records_beyond_the_file_size_limit_stops_cleanly(tmp_path, workers):
    scenario = tmp_path / "s.toml"
    scenario.write_text(SWEEP_BASE + """
[record]
duration_s = 0.01
[sweep]
records = true
[sweep.parameters]
"drive.detuning_hz" = [-1.5e6, -1.0e6, -0.5e6]
""")
    out = tmp_path / "out"
    done = noisechain("sweep", str(scenario), "--out", str(out), "--workers", workers,
                      "--quiet", limit_bytes=50_000)
    assert done.returncode == 2, done.stderr
    assert done.stderr.count("\n") == 1 and "File too large" in done.stderr
    assert not list(out.rglob("*.part")) and not list(out.rglob("*.h5"))
    assert not (out / "sweep.nc").exists()


def test_a_folder_in_use_is_refused_with_the_holder(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    scenario = tmp_path / "s.toml"
    scenario.write_text(SWEEP)
    with FolderLock(out, "sweep"):
        done = noisechain("sweep", str(scenario), "--out", str(out), "--workers", "1",
                          "--quiet")
    assert done.returncode == 2
    assert "in use" in done.stderr and f"process {os.getpid()}" in done.stderr
    assert not (out / "sweep.nc").exists()


def test_a_lock_left_by_a_dead_process_is_taken_over(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)
    (out / FolderLock.NAME).write_text(json.dumps(
        {"pid": int(dead.stdout), "host": "here", "since": "then", "what": "sweep"}))
    ds = run_sweep(parse_scenario(SWEEP), out, workers=1, progress=False)
    assert np.isfinite(ds["occupation"].values).all()


def test_two_sweeps_into_one_folder_never_give_a_zeroed_dataset(tmp_path):
    """Started together: the second is refused while the first runs (or, if
    the first has finished, resumes it); whatever exits 0 leaves the same
    dataset as a sweep of its own."""
    scenario = tmp_path / "s.toml"
    scenario.write_text(SWEEP)
    out = tmp_path / "shared"
    runs = [subprocess.Popen([sys.executable, "-m", "simulator", "sweep", str(scenario),
                              "--out", str(out), "--workers", "1", "--quiet"], cwd=REPO,
                             env=CLI_ENV, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                             text=True) for _ in range(2)]
    results = [(p.wait(timeout=120), p.stderr.read()) for p in runs]
    assert any(status == 0 for status, _ in results), results
    for status, err in results:
        assert status == 0 or (status == 2 and "in use by another noisechain run" in err)
    import xarray as xr

    alone = run_sweep(parse_scenario(SWEEP), tmp_path / "alone", workers=1, progress=False)
    with xr.open_dataset(out / "sweep.nc", engine="h5netcdf") as shared:
        for name in ("occupation", "photon_number", "stable"):
            np.testing.assert_array_equal(shared[name].values, alone[name].values)
    assert not list(out.rglob("*.part"))


def test_a_folder_with_other_files_is_not_taken(tmp_path):
    (tmp_path / "report.html").write_text("the user's own page")
    scenario = tmp_path / "s.toml"
    scenario.write_text(SWEEP)
    done = noisechain("run", str(scenario), "--out", str(tmp_path), "--quiet")
    assert done.returncode == 2 and "not empty" in done.stderr
    assert (tmp_path / "report.html").read_text() == "the user's own page"


@pytest.mark.parametrize("option, name", [("--out", "s.nc"), ("--out", "s.csv"),
                                          ("--plot", "s.png")])
def test_spectrum_replaces_an_existing_file_only_with_force(tmp_path, capsys, option, name):
    target = tmp_path / name
    target.write_text("not ours")
    args = ["spectrum", str(DEMO), option, str(target)]
    assert cli.main(args) == 2
    assert f"{option} {str(target)!r} already exists" in capsys.readouterr().err
    assert target.read_text() == "not ours"
    assert cli.main(args + ["--force"]) == 0
    assert target.stat().st_size > len("not ours")


def test_run_into_its_own_folder_again_replaces_what_it_wrote(tmp_path):
    """`make demo` twice: the run owns its folder, so the second replaces its
    files (the same numbers) and is not refused."""
    scenario = tmp_path / "s.toml"
    scenario.write_text(SWEEP_BASE)
    out = tmp_path / "out"
    assert cli.main(["run", str(scenario), "--out", str(out), "--quiet"]) == 0
    inspected = (out / "inspect.json").read_text()
    assert cli.main(["run", str(scenario), "--out", str(out), "--quiet"]) == 0
    assert (out / "inspect.json").read_text() == inspected
    assert not list(out.rglob("*.part"))


def test_a_write_stopped_before_its_block_began_is_removed_when_the_run_ends(tmp_path):
    """A stop request raises at any bytecode: one between the temporary file's
    creation and the ``with`` block leaves a part file of this (live) process,
    which the stale-file sweep keeps. The folder's lock removes it when the
    run ends; a write still in progress elsewhere is not touched."""
    out = tmp_path / "out"
    (out / "points").mkdir(parents=True)
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    with FolderLock(out, "sweep"):
        abandoned = AtomicFile(out / "points" / "00014.json")  # the interrupted write
        other = AtomicFile(elsewhere / "r.h5")
        assert abandoned.tmp.exists()
    assert not abandoned.tmp.exists() and not list(out.rglob("*.part"))
    assert other.tmp.exists()  # not the lock's folder: left to its own writer
    other.discard()
    assert list(elsewhere.iterdir()) == []
