"""Record generation as a program: reproducibility, the HDF5 file, failures, the CLI.

- same bits for any chunk size (counter-based seeding by sample block);
- different seeds give independent records (coherence at the level of
  independent Gaussian noise);
- the HDF5 file round-trips with h5py alone and through load_record;
- an interrupted run (killed process, or an exception) leaves no file that
  looks complete;
- clipping is counted and warned about;
- the ideal chain's spectrum is the heterodyne (homodyne) spectrum of
  simulator.linear.spectra;
- bad input is refused with errors that name the input.
"""

import os
import signal as os_signal
import subprocess
import sys
import time
import warnings

import h5py
import numpy as np
import pytest
from conftest import REPO, run_cli
from scipy import signal
from test_records import make as make_scenario

from simulator import load_record
from simulator.cli import parser as cli
from simulator.errors import InputError, ScenarioError
from simulator.linear.steady_state import steady_state
from simulator.model.system import System
from simulator.records.generate import RecordWarning
from simulator.records.kernels import BLOCK_SAMPLES
from simulator.scenario.loader import load_scenario
from simulator.workflows.record import simulate_record

FS = 2e6


def make(samples=50_000, **sections):
    """The sideband-cooling scenario of test_records.py, shorter by default."""
    return make_scenario(samples=samples, **sections)


IF = dict(detection={"intermediate_frequency_hz": 0.41e6}, record={"kind": "if"})


@pytest.mark.parametrize("form, sections", [("innovations", {}), ("full-state", {}),
                                            ("innovations", IF)])
def test_same_bits_whatever_the_chunk_size(form, sections):
    n = 2 * BLOCK_SAMPLES + 12345
    scenario = make(samples=n, **sections)
    runs = [simulate_record(scenario, seed=17, form=form, chunk_samples=c,
                            store_mechanics=form == "full-state")
            for c in (n, 1000, BLOCK_SAMPLES + 7)]
    for other in runs[1:]:
        np.testing.assert_array_equal(other.counts, runs[0].counts)
        if form == "full-state":
            np.testing.assert_array_equal(other.mechanical_quadratures,
                                          runs[0].mechanical_quadratures)


def test_different_seeds_give_independent_records():
    """Magnitude-squared coherence of two independent Gaussian records
    averaged over K segments follows Beta(1, K − 1): mean 1/K, standard
    deviation ≈ 1/K per bin (Carter, Proc. IEEE 75, 236 (1987), citation from
    memory); averaged over M bins every third one apart (independent for the
    Hann window) it must lie within 1/K ± 5/(K√M). The same seed repeats."""
    scenario = make(samples=1 << 18)
    a, b = (simulate_record(scenario, seed=s).shot_noise_units() for s in (1, 2))
    again = simulate_record(scenario, seed=1).shot_noise_units()
    np.testing.assert_array_equal(a, again)
    assert not np.array_equal(a, b)
    nperseg = 512
    kw = dict(fs=FS, window="hann", nperseg=nperseg, noverlap=0, detrend=False,
              return_onesided=False)
    _, pab = signal.csd(a, b, **kw)
    _, paa = signal.welch(a, **kw)
    _, pbb = signal.welch(b, **kw)
    coherence = (np.abs(pab) ** 2 / (paa * pbb))[1::3]
    k, m = len(a) // nperseg, coherence.size
    assert abs(coherence.mean() - 1 / k) < 5 / (k * np.sqrt(m))


def test_hdf5_round_trip(tmp_path):
    scenario = make(samples=30_000)
    path = tmp_path / "rec.h5"
    written = simulate_record(scenario, seed=8, out=path, store_mechanics=True)
    memory = simulate_record(scenario, seed=8, store_mechanics=True)
    assert written.counts is None and written.path == path
    assert not list(tmp_path.glob("*.part"))
    back = load_record(path)
    np.testing.assert_array_equal(back.counts, memory.counts)
    np.testing.assert_array_equal(written.samples(), memory.counts)
    np.testing.assert_array_equal(back.mechanical_quadratures, memory.mechanical_quadratures)
    assert back.scenario == memory.scenario
    for field in ("kind", "scheme", "sample_rate_hz", "n_samples", "volts_per_count",
                  "shot_noise_per_count", "full_scale_v", "bits", "seed", "form",
                  "clipped_samples", "intermediate_frequency_hz", "software_version"):
        assert getattr(back, field) == getattr(memory, field), field
    truth = steady_state(scenario)
    assert back.truth.mode_names == ("m0",)
    assert back.truth.occupation == pytest.approx([truth.modes[0].occupation], rel=1e-12)
    assert back.truth.cavity_occupation == pytest.approx(truth.cavity_occupation, rel=1e-12)
    assert back.truth.calibration == pytest.approx(memory.truth.calibration, rel=1e-12)
    np.testing.assert_allclose(back.shot_noise_units(), memory.shot_noise_units())
    # a reader needs h5py alone: the layout of docs/records.md, "The file"
    with h5py.File(path, "r") as f:
        assert f.attrs["format"] == "noisechain-record"
        for key in ("format_version", "scenario_toml", "seed", "software_version",
                    "sample_rate_hz", "kind", "created_utc"):
            assert key in f.attrs
        assert f["samples"].shape == (30_000, 2) and f["samples"].dtype == np.int16
        assert f["samples"].compression is None and f["samples"].chunks is not None
        for key in ("volts_per_count", "shot_noise_per_count"):
            assert key in f["samples"].attrs
        for key in ("mode_names", "occupation", "effective_frequency_hz",
                    "effective_linewidth_hz", "coupling_rate_hz", "cavity_occupation"):
            assert key in f["truth"].attrs
        assert f["truth/mechanical_quadratures"].shape == (30_000, 2)
    part = load_record(path, start=100, stop=200)
    np.testing.assert_array_equal(part.counts, memory.counts[100:200])


def test_if_record_file_is_real(tmp_path):
    path = tmp_path / "if.h5"
    simulate_record(make(samples=5000, **IF), seed=1, out=path)
    back = load_record(path)
    assert back.kind == "if" and back.counts.shape == (5000,)
    assert back.shot_noise_units().dtype == float


def test_exception_midway_leaves_nothing(tmp_path, monkeypatch):
    from simulator.records import fused, kernels

    calls = []

    def failing(original):
        def step(*args):
            calls.append(1)
            if len(calls) == 3:
                raise RuntimeError("injected failure")
            return original(*args)
        return step

    for name in ("innovations_step", "modal_innovations_step"):
        monkeypatch.setattr(kernels, name, failing(getattr(kernels, name)))
    monkeypatch.setattr(fused, "modal_pair_step", failing(fused.modal_pair_step))
    path = tmp_path / "broken.h5"
    with pytest.raises(RuntimeError, match="injected"):
        simulate_record(make(samples=10_000), seed=1, out=path, chunk_samples=1000)
    assert len(calls) == 3
    assert list(tmp_path.iterdir()) == []


KILL_SCRIPT = """
import sys
from simulator.workflows.record import simulate_record
from simulator.scenario.loader import load_scenario
s = load_scenario(sys.argv[1])
simulate_record(s, duration_s=60.0, out=sys.argv[2], chunk_samples=20000)
"""


def test_killed_run_leaves_no_complete_looking_file(tmp_path):
    """SIGKILL mid-write: nothing at the target path; the temporary file left
    behind is refused by load_record (no format attribute yet)."""
    target = tmp_path / "killed.h5"
    env = dict(os.environ, PYTHONPATH=str(REPO))
    proc = subprocess.Popen([sys.executable, "-c", KILL_SCRIPT,
                             str(REPO / "simulator/data/demo.toml"), str(target)],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 90
        while not list(tmp_path.glob(".killed.h5.*.part")):
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "the run never started writing"
            time.sleep(0.05)
        time.sleep(1.0)  # let it write some chunks
        assert proc.poll() is None, "the run finished before it could be killed"
    finally:
        proc.send_signal(os_signal.SIGKILL)
        proc.wait()
    assert not target.exists()
    leftovers = list(tmp_path.glob(".killed.h5.*.part"))
    assert len(leftovers) == 1
    with pytest.raises(InputError, match="not a complete noisechain record|not a readable"):
        load_record(leftovers[0])


def test_clipping_is_counted_and_warned():
    """Full scale of one standard deviation: compare the count with the
    samples whose unclipped value (from a wide-range run with the same seed)
    falls outside the range."""
    scenario = make(samples=20_000)
    wide = simulate_record(scenario, seed=3)
    std = np.max(np.std(wide.volts().view(float).reshape(-1, 2), axis=0))
    narrow = scenario.replace("digitizer.full_scale_v", float(std))
    with pytest.warns(RecordWarning, match="clipped"):
        record = simulate_record(narrow, seed=3)
    volts = wide.volts().view(float).reshape(-1, 2)
    outside = np.any(np.abs(volts) > std, axis=1)
    assert abs(record.clipped_samples - np.count_nonzero(outside)) <= 0.01 * len(volts)
    assert 0.3 < record.clipped_samples / record.n_samples < 0.7
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert simulate_record(scenario, seed=3).clipped_samples == 0


def test_ideal_chain_spectrum_is_the_heterodyne_and_homodyne_spectrum():
    """For ideal electronics (no current noise, no filter, no amplifier) the
    chain's record spectrum in shot-noise units equals simulator.linear.spectra's
    S_het(ν) = 1 + η N_out(ν) (iq; and, for a real if photocurrent, S_het at ν
    plus its image band) and S_hom(f) = 1 + η (2 S̄_θθ − 1) (both built from
    the same linear model by a different route)."""
    spectra = pytest.importorskip("simulator.linear.spectra")
    scenario = make(detection={"efficiency": 0.7})
    nu = np.linspace(-1.5e6, 1.5e6, 301)
    np.testing.assert_allclose(System(scenario).chain.record_spectrum(nu),
                               spectra.heterodyne_spectrum(scenario, nu).total, rtol=1e-10)
    # One real photocurrent at f_IF: light at ν appears at f_IF + ν (local oscillator
    # below the drive) or f_IF − ν (above), together with its image at ∓2 f_IF − ν.
    f_if = 2.2e6
    for side, sign in (("below", 1.0), ("above", -1.0)):
        real = scenario.replace("detection.intermediate_frequency_hz", f_if).replace(
            "detection.local_oscillator_side", side).replace("record.kind", "if")
        image = -sign * 2 * f_if - nu
        het = spectra.heterodyne_spectrum(scenario, np.concatenate([nu, image])).total
        np.testing.assert_allclose(System(real).chain.record_spectrum(f_if + sign * nu),
                                   het[:nu.size] + het[nu.size:] - 1.0, rtol=1e-10)
    hom = scenario.replace("detection.scheme", "homodyne").replace(
        "detection.quadrature_angle_rad", 0.7)
    f = np.linspace(0, 1.5e6, 151)
    np.testing.assert_allclose(
        System(hom).chain.record_spectrum(f),
        spectra.homodyne_spectrum(hom, f, quadrature_angle=0.7).total, rtol=1e-10)


@pytest.mark.parametrize("sections, key", [
    (dict(detection={"scheme": "homodyne"}, record={"kind": "iq"}), "record.kind"),
    (dict(detection={"scheme": "homodyne", "intermediate_frequency_hz": 1e6}),
     "detection.intermediate_frequency_hz"),
    (dict(record={"kind": "if"}), "detection.intermediate_frequency_hz"),
    (dict(electronics={"amplifier_added_quanta": 0.3}), "electronics.amplifier_added_quanta"),
    (dict(digitizer={"bits": 40}), "digitizer.bits"),
    (dict(record={"kind": "complex"}), "record.kind"),
    (dict(record={"duration_s": -1.0}), "record.duration_s"),
])
def test_bad_chain_settings_name_the_key(sections, key):
    with pytest.raises(ScenarioError) as info:
        make(**sections)
    assert info.value.key == key


@pytest.mark.parametrize("kwargs, words", [
    (dict(seed=-1), "seed"), (dict(seed=1.5), "seed"), (dict(duration_s=0.0), "duration"),
    (dict(duration_s=1e-9), "no sample"), (dict(form="euler"), "form"),
    (dict(form="innovations", store_mechanics=True), "innovations"),
    (dict(chunk_samples=0), "chunk_samples"),
])
def test_bad_arguments_are_input_errors(kwargs, words):
    with pytest.raises(InputError, match=words):
        simulate_record(make(), **kwargs)


def test_load_record_refuses_other_files(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_record(tmp_path / "missing.h5")
    (tmp_path / "text.h5").write_text("hello")
    with pytest.raises(InputError, match="not a readable HDF5"):
        load_record(tmp_path / "text.h5")
    with h5py.File(tmp_path / "other.h5", "w") as f:
        f["x"] = 1
    with pytest.raises(InputError, match="not a complete noisechain record"):
        load_record(tmp_path / "other.h5")


def _damaged(tmp_path, damage):
    path = tmp_path / "r.h5"
    simulate_record(make(samples=2000), seed=3, out=path, store_mechanics=True)
    with h5py.File(path, "r+") as f:
        damage(f)
    return path


def _float_samples_with_nan(f):
    counts = f["samples"][...].astype(float)
    counts[7, 1] = np.nan
    attrs = dict(f["samples"].attrs)
    del f["samples"]
    f["samples"] = counts
    f["samples"].attrs.update(attrs)


def _nan_quadrature(f):
    f["truth/mechanical_quadratures"][5, 0] = np.inf


@pytest.mark.parametrize("damage, words", [
    (_float_samples_with_nan, "samples are float64, which can hold NaN"),
    (_nan_quadrature, "mechanical_quadratures holds 1 non-finite"),
    (lambda f: f.attrs.__delitem__("seed"), "root lacks the attribute(s) seed"),
    (lambda f: f["samples"].attrs.__delitem__("volts_per_count"),
     "samples lacks the attribute(s) volts_per_count"),
    (lambda f: f["samples"].attrs.__setitem__("shot_noise_per_count", np.nan),
     "shot_noise_per_count = array(nan)"),
    (lambda f: f.__delitem__("truth"), "no 'truth' in the file"),
    (lambda f: f.attrs.__setitem__("n_samples", 5), "samples have shape (2000, 2)"),
])
def test_load_record_names_the_file_and_what_is_wrong(tmp_path, damage, words):
    path = _damaged(tmp_path, damage)
    with pytest.raises(InputError) as caught:
        load_record(path)
    assert str(path) in str(caught.value) and words in str(caught.value)


def test_reference_thermometry_refuses_non_finite_samples():
    from simulator.analysis.reference import sideband_thermometry
    from simulator.workflows.estimator import public_view

    record = public_view(simulate_record(make(samples=4096), seed=2))
    record.samples[100] = np.nan
    with pytest.raises(InputError, match="1 non-finite samples .* index 100 of 4096"):
        sideband_thermometry(record)


def test_cli_record_writes_the_file_and_a_summary(tmp_path, capsys):
    out = tmp_path / "demo.h5"
    demo = REPO / "simulator/data/demo.toml"
    assert cli.main(["record", str(demo), "--out", str(out), "--duration", "0.002",
                     "--seed", "5", "--quiet"]) == 0
    text = capsys.readouterr().out
    truth = steady_state(load_scenario(demo))
    from simulator.model.chain import record_sample_rate
    from simulator.model.system import System

    system = System(load_scenario(demo))
    samples = round(0.002 * record_sample_rate(system.scenario, system.chain))  # the automatic rate
    assert f"{samples} samples" in text and "clipped samples: 0" in text
    assert f"true occupation of trampoline: {truth.modes[0].occupation:.6g}" in text
    assert load_record(out).seed == 5
    again = ["record", str(demo), "--out", str(out), "--duration", "0.001", "--json",
             "--quiet"]
    assert cli.main(again) == 2  # an existing file is replaced only with --force
    assert "already exists" in capsys.readouterr().err and load_record(out).seed == 5
    assert cli.main(again + ["--force"]) == 0
    import json

    summary = json.loads(capsys.readouterr().out)
    assert summary["samples"] == samples // 2 and summary["clipped_samples"] == 0
    assert summary["modes"][0]["occupation"] == pytest.approx(truth.modes[0].occupation)


@pytest.mark.parametrize("args, status, words", [
    (["record", "missing.toml", "--out", "x.h5"], 2, "not found"),
    (["record", "simulator/data/demo.toml", "--out", "x.txt"], 2, "extension"),
    (["record", "simulator/data/demo.toml", "--out", "x.h5", "--duration", "-1"], 2,
     "duration"),
    (["record", "simulator/data/demo.toml", "--out", "no/such/dir/x.h5",
      "--duration", "0.001"], 2, "does not exist"),
    (["record", "scenarios/trampoline_blue_unstable.toml", "--out", "x.h5"], 3, "unstable"),
])
def test_cli_record_errors(args, status, words, tmp_path):
    result = run_cli(*args, cwd=REPO)
    assert result.returncode == status, result.stderr
    assert words in result.stderr and "Traceback" not in result.stderr
    assert not (REPO / "x.h5").exists()


def test_cli_record_reports_clipping_as_a_warning(tmp_path, capsys):
    scenario = make(samples=2000).replace("digitizer.full_scale_v", 1e-12)
    path = tmp_path / "tiny_range.toml"
    path.write_text(scenario.to_toml(), encoding="utf-8")
    assert cli.main(["record", str(path), "--out", str(tmp_path / "r.h5"), "--quiet"]) == 0
    captured = capsys.readouterr()
    assert "noisechain record: warning:" in captured.err and "clipped" in captured.err
    assert "clipped samples: 2000" in captured.out
