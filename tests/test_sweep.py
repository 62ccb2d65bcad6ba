"""Sweeps: axes, executors agree bit for bit, resume after a kill, errors per point."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from simulator.errors import InputError, ScenarioError
from simulator.linear.steady_state import steady_state
from simulator.scenario.loader import parse_scenario
from simulator.workflows.sweep import evaluate_point, run_sweep, sweep_axes, sweep_points

BASE = (Path(__file__).parent / "data" / "sweep_base.toml").read_text()

GRID = BASE + """
[sweep]
[sweep.parameters]
"drive.detuning_hz" = { start = -2, stop = 2, num = 9, unit = "mechanics[0].frequency_hz" }
"mechanics[0].bath_temperature_k" = [1.0, 4.0]
"""


def test_axes_in_units_of_another_parameter():
    sc = parse_scenario(GRID)
    det, temp = sweep_axes(sc)
    assert det.unit == "mechanics[0].frequency_hz"
    np.testing.assert_allclose(det.values, np.linspace(-2, 2, 9) * 1.5e6)
    assert temp.values == (1.0, 4.0)
    assert len(sweep_points(sc)) == 18


def test_log_range_and_zip():
    sc = parse_scenario(BASE + """
[sweep]
combine = "zip"
[sweep.parameters]
"drive.power_w" = { start = 1e-8, stop = 1e-6, num = 3, log = true }
"drive.detuning_hz" = [-1.4e6, -1.5e6, -1.6e6]
""")
    power, _ = sweep_axes(sc)
    np.testing.assert_allclose(power.values, [1e-8, 1e-7, 1e-6])
    points = sweep_points(sc)
    assert [p[0] for p in points] == [(0,), (1,), (2,)]
    assert points[2][1] == (("drive.power_w", 1e-6), ("drive.detuning_hz", -1.6e6))


def test_zip_needs_equal_lengths():
    with pytest.raises(ScenarioError, match="equal lengths"):
        parse_scenario(BASE + """
[sweep]
combine = "zip"
[sweep.parameters]
"drive.power_w" = [1e-7, 2e-7]
"drive.detuning_hz" = [-1.4e6]
""")


def test_invalid_swept_value_is_refused_up_front():
    sc = parse_scenario(BASE + """
[sweep]
[sweep.parameters]
"mechanics[0].bath_temperature_k" = [4.0, -1.0]
""")
    with pytest.raises(ScenarioError, match=r"-1\.0.*non-negative"):
        sweep_axes(sc)


def test_point_equals_direct_steady_state():
    sc = parse_scenario(GRID)
    text = sc.to_toml()
    result = evaluate_point(text, (("drive.detuning_hz", -1.5e6),
                                   ("mechanics[0].bath_temperature_k", 4.0)))
    direct = steady_state(parse_scenario(BASE))
    assert result["error"] == ""
    assert result["occupation"][0] == direct.modes[0].occupation


def test_unstable_point_is_recorded_not_raised():
    sc = parse_scenario(GRID)
    result = evaluate_point(sc.to_toml(), (("drive.detuning_hz", 1.5e6),))
    assert result["stable"] == 0.0 and result["error"] == ""
    assert result["growth_rate_hz"] > 0 and np.isnan(result["occupation"][0])


def test_one_worker_two_workers_and_dask_agree_bit_for_bit(tmp_path):
    sc = parse_scenario(GRID)
    one = run_sweep(sc, tmp_path / "one", workers=1, progress=False)
    two = run_sweep(sc, tmp_path / "two", workers=2, progress=False)
    dask = run_sweep(sc, tmp_path / "dask", dask="local", progress=False)
    for other in (two, dask):
        for name in one.data_vars:
            np.testing.assert_array_equal(one[name].values, other[name].values)
    on_disk = xr.load_dataset(tmp_path / "two" / "sweep.nc")
    np.testing.assert_array_equal(on_disk["occupation"].values, one["occupation"].values)
    assert on_disk.attrs["scenario_toml"] == sc.to_toml()
    assert parse_scenario(on_disk.attrs["scenario_toml"]) == sc
    # red-detuned points are stable, far blue ones not
    # the unit axis is named for the ratio it holds; the Hz values ride beside it
    ratio = one["drive_detuning_over_mechanics0_frequency"]
    assert ratio.attrs["units"] == "in units of mechanics[0].frequency_hz"
    np.testing.assert_allclose(one["drive_detuning_hz"].values, ratio.values * 1.5e6)
    assert one["drive_detuning_hz"].attrs["units"] == "Hz"
    assert one["stable"].sel(drive_detuning_over_mechanics0_frequency=-1.0).all()
    assert not one["stable"].sel(drive_detuning_over_mechanics0_frequency=1.0).any()


def test_stored_points_are_strict_json_and_read_back_exactly(tmp_path):
    """Unstable points carry NaN occupations; the per-point files hold strict
    JSON (no bare NaN, which other JSON readers refuse) and read back the same
    numbers, so a resumed sweep equals a fresh one."""
    import json

    from simulator.io import jsontext

    one = run_sweep(parse_scenario(GRID), tmp_path, workers=1, progress=False)
    assert np.isnan(one["occupation"].values).any()
    stored = [p for p in tmp_path.rglob("*.json") if p.name != "run.json"]
    assert stored
    def refuse(constant):
        raise AssertionError(f"bare {constant} in a stored point")

    for path in stored:
        json.loads(path.read_text(), parse_constant=refuse)
    value = {"a": [float("nan"), 1.5, float("-inf")], "b": float("inf"), "c": "nan"}
    back = jsontext.loads(jsontext.dumps(value, keep_non_finite=True))
    assert np.isnan(back["a"][0]) and back["a"][1:] == [1.5, float("-inf")]
    assert back["b"] == float("inf") and back["c"] == "nan"
    again = run_sweep(parse_scenario(GRID), tmp_path, workers=1, progress=False)
    for name in one.data_vars:
        np.testing.assert_array_equal(one[name].values, again[name].values)


def test_changed_scenario_is_refused(tmp_path):
    run_sweep(parse_scenario(GRID), tmp_path, workers=1, progress=False)
    changed = parse_scenario(GRID.replace("power_w = 0.25e-6", "power_w = 0.3e-6"))
    with pytest.raises(InputError, match="different scenario"):
        run_sweep(changed, tmp_path, workers=1, progress=False)


def test_failing_point_is_recorded_and_sweep_goes_on(tmp_path, monkeypatch):
    import simulator.workflows.inspection as inspection

    real = inspection.inspect_scenario

    def flaky(scenario, **options):
        if scenario.drive.detuning_hz == 0.0:
            raise RuntimeError("injected failure")
        return real(scenario, **options)

    monkeypatch.setattr(inspection, "inspect_scenario", flaky)
    ds = run_sweep(parse_scenario(GRID), tmp_path, workers=1, progress=False)
    errors = ds["error"].sel(drive_detuning_over_mechanics0_frequency=0.0).values
    assert all("injected failure" in e for e in errors)
    assert (ds["error"] == "").sum() == ds["error"].size - 2


def test_killed_sweep_resumes_without_loss_or_repeat(tmp_path, monkeypatch):
    text = BASE + """
[sweep]
[sweep.parameters]
"drive.detuning_hz" = { start = -1.9, stop = -0.1, num = 80, unit = "mechanics[0].frequency_hz" }
"""
    path = tmp_path / "s.toml"
    path.write_text(text)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "simulator", "sweep", str(path), "--out",
                             str(out), "--workers", "1", "--quiet"])
    deadline = time.time() + 120
    while time.time() < deadline:
        done = len(list((out / "points").glob("*.json"))) if (out / "points").exists() else 0
        if done >= 5:
            break
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    stored = {p.name: p.read_text() for p in (out / "points").glob("*.json")}
    assert 5 <= len(stored) < 80, "the kill must land mid-sweep"
    assert not (out / "sweep.nc").exists()
    for content in stored.values():
        json.loads(content)  # every stored point is complete

    import simulator.workflows.sweep as sweep

    calls = []
    real = sweep.evaluate_point
    monkeypatch.setattr(sweep, "evaluate_point",
                        lambda t, a, o=None: calls.append(a) or real(t, a, o))
    scenario = parse_scenario(text, source=str(path))
    ds = run_sweep(scenario, out, workers=1, progress=False)
    assert len(calls) == 80 - len(stored)  # nothing repeated
    for name, content in stored.items():  # nothing lost or rewritten
        assert (out / "points" / name).read_text() == content
    fresh = run_sweep(scenario, tmp_path / "fresh", workers=1, progress=False)
    np.testing.assert_array_equal(ds["occupation"].values, fresh["occupation"].values)


def test_cli_sweep_json_and_bad_dask_address(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(GRID)
    run = subprocess.run([sys.executable, "-m", "simulator", "sweep", str(path), "--out",
                          str(tmp_path / "o"), "--workers", "1", "--quiet", "--json"],
                         capture_output=True, text=True, env={**os.environ})
    assert run.returncode == 0, run.stderr
    summary = json.loads(run.stdout)
    assert summary["points"] == 18 and summary["unstable_points"] > 0
    bad = subprocess.run([sys.executable, "-m", "simulator", "sweep", str(path), "--out",
                          str(tmp_path / "p"), "--dask", "nowhere"],
                         capture_output=True, text=True)
    assert bad.returncode == 2 and "Traceback" not in bad.stderr
    assert "nowhere" in bad.stderr


def test_records_and_spectra_per_point(tmp_path):
    """Per-point records use seeds spawned from the scenario seed (SeedSequence.spawn):
    the same files whatever the worker count; unstable points write nothing."""
    from simulator.io.recordfile import load_record

    text = BASE + """
[record]
duration_s = 0.0002
[sweep]
records = true
spectra = true
[sweep.parameters]
"drive.detuning_hz" = [-1.5e6, -1.0e6, 1.5e6]
"""
    sc = parse_scenario(text)
    one = run_sweep(sc, tmp_path / "one", workers=1, progress=False)
    two = run_sweep(sc, tmp_path / "two", workers=2, progress=False)
    assert list(one["files"].values) == list(two["files"].values)
    assert one["files"].values[2] == ""  # blue-detuned point: unstable
    first, second = (load_record(tmp_path / "one" / "records" / f"{k}.h5") for k in
                     ("00000", "00001"))
    again = load_record(tmp_path / "two" / "records" / "00000.h5")
    np.testing.assert_array_equal(first.counts, again.counts)
    assert first.seed != second.seed
    assert first.truth.occupation[0] == one["occupation"].values[0, 0]
    spectrum = xr.load_dataset(tmp_path / "one" / "spectra" / "00001.nc")
    assert spectrum.attrs["sided"] == "two-sided"


def test_a_scenario_with_a_sweep_pickles_for_worker_processes():
    """Sweeps and trials ship scenarios to other processes: a [sweep] section must pickle."""
    import pickle

    from simulator.scenario.loader import load_scenario

    root = Path(__file__).resolve().parents[1]
    scenario = load_scenario(root / "scenarios" / "trampoline_blue_unstable.toml")
    again = pickle.loads(pickle.dumps(scenario))
    assert dict(again.sweep.parameters) == dict(scenario.sweep.parameters)
    assert again.sweep.parameters is not scenario.sweep.parameters
