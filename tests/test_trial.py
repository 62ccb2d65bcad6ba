"""The validation harness: reference estimator unbiased with honest errors, a biased
one flagged, failures recorded, resumable, same answer on every executor."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from test_records import expected_welch

from simulator.errors import InputError
from simulator.scenario.loader import load_scenario
from simulator.workflows.estimator import load_estimator
from simulator.workflows.trial import run_trials, summarise, trial_seeds

FAST = Path(__file__).parent / "data" / "fast_thermometry.toml"
REFERENCE = "simulator.analysis.reference:sideband_thermometry"


@pytest.fixture(scope="module")
def scenario():
    return load_scenario(FAST)


@pytest.fixture(scope="module")
def reference_run(scenario, tmp_path_factory):
    return run_trials(scenario, REFERENCE, 20, tmp_path_factory.mktemp("ref"), workers=2,
                      progress=False)


def test_reference_thermometry_is_unbiased_with_honest_errors(reference_run):
    """In weak coupling (g/κ ≈ 0.03) the asymmetry and calibrated-area
    estimates recover the Lyapunov occupation: bias within 3 standard errors,
    pull width within 3 standard errors of one (standard asymptotic theory);
    the damping estimate within 4 (see below). It needs the periodogram's
    window kernel in the model (see the tests further down); without it the
    fitted width is a few per cent broad."""
    assert not reference_run.errors
    by_name = {q.name: q for q in reference_run.quantities}
    for name in ("occupation:asymmetry", "occupation:anti_stokes_area", "occupation:damping"):
        q = by_name[name]
        assert q.trials == 20 and q.failures == 0
        # the damping estimate, a ratio through the fitted width, is the most
        # sensitive to small-sample fit bias: 4 standard errors at 20 trials
        # (a 100-trial run puts it at +0.7 % ± 1.0 %)
        assert abs(q.bias) < (4 if name.endswith("damping") else 3) * q.bias_error, q
        assert abs(q.pull_width - 1) < 3 / np.sqrt(2 * 19), q
        assert q.verdict.startswith("consistent") or name.endswith("damping")
    report = (reference_run.out / "report.html").read_text()
    assert "occupation:asymmetry" in report and "data:image/png;base64" in report


def test_deliberately_biased_estimator_is_flagged(scenario, tmp_path):
    result = run_trials(scenario, "tests.estimators_for_tests:biased_thermometry", 10,
                        tmp_path, workers=2, progress=False)
    (q,) = result.quantities
    assert q.name == "occupation:inflated"
    assert "BIASED" in q.verdict and q.bias > 0


def test_failures_are_recorded_and_runs_resume_and_extend(scenario, tmp_path):
    spec = "tests.estimators_for_tests:shot_noise_level"
    first = run_trials(scenario, spec, 6, tmp_path, duration_s=0.01, workers=1,
                       progress=False)
    stored = {p.name: p.read_text() for p in (tmp_path / "trials").glob("*.json")}
    failed = [i for i, e in first.errors]
    assert failed and len(stored) == 6 - len(failed)  # only successes are kept
    assert all("deliberate failure" in e for _, e in first.errors)
    (q,) = first.quantities
    assert q.failures == len(failed) and q.trials == 6 - len(failed)
    assert q.truth is None and "no truth" in q.verdict
    more = run_trials(scenario, spec, 9, tmp_path, duration_s=0.01, workers=1,
                      progress=False)
    for name, text in stored.items():  # finished trials kept, not recomputed
        assert (tmp_path / "trials" / name).read_text() == text
    assert [i for i, _ in more.errors if i < 6] == failed  # failures tried again, same seeds
    np.testing.assert_array_equal(more.dataset["estimate"].values[:6],
                                  first.dataset["estimate"].values)
    with pytest.raises(InputError, match="different scenario"):
        run_trials(scenario, spec, 6, tmp_path, duration_s=0.02, workers=1, progress=False)


def test_seeds_are_stable_and_independent(scenario):
    assert trial_seeds(scenario, 5) == trial_seeds(scenario, 12)[:5]
    assert len(set(trial_seeds(scenario, 200))) == 200


def test_summary_statistics_on_known_draws():
    """Pulls of Gaussian draws with the true σ have unit width and 68.3 % coverage."""
    rng = np.random.default_rng(4)
    est = 3.0 + 0.5 * rng.standard_normal(4000)
    q = summarise("x", est, np.full(est.size, 0.5), 3.0, 0)
    assert q.pull_width == pytest.approx(1.0, abs=0.04)
    assert q.coverage_1sigma == pytest.approx(0.6827, abs=0.03)
    assert q.coverage_2sigma == pytest.approx(0.9545, abs=0.015)
    assert q.verdict.startswith("consistent")
    loose = summarise("x", est, np.full(est.size, 0.25), 3.0, 0)
    assert "UNDERSTATED" in loose.verdict


def test_bad_estimator_specs_are_clear_errors():
    for spec, words in (("nocolon", "module:function"), ("os:not_there", "no function"),
                        ("missing/file.py:f", "not found"),
                        ("no_such_module_x:f", "ModuleNotFoundError")):
        with pytest.raises(InputError, match=words):
            load_estimator(spec)


def test_cli_trial_json(tmp_path):
    run = subprocess.run([sys.executable, "-m", "simulator", "trial", str(FAST),
                          "--estimator", "tests.estimators_for_tests:shot_noise_level",
                          "--trials", "3", "--duration", "0.005", "--out", str(tmp_path),
                          "--workers", "1", "--quiet", "--json"],
                         capture_output=True, text=True, cwd=Path(__file__).parent.parent)
    assert run.returncode == 0, run.stderr
    summary = json.loads(run.stdout)
    assert summary["trials"] == 3 and (tmp_path / "trial.nc").exists()


def _noisy(scenario, floor):
    """The harness scenario with a laser phase-noise floor (common local oscillator)."""
    from simulator.scenario.loader import scenario_from_dict

    data = scenario.to_dict()
    data["drive"]["phase_noise"] = {"floor_rad2_per_hz": floor, "floor_low_hz": 1e3,
                                    "floor_high_hz": 1e6}
    return scenario_from_dict(data, source="<noisy harness scenario>")


@pytest.mark.parametrize("floor", [1e-10, 3e-10])
def test_fano_fit_of_the_exact_record_spectrum_gives_the_summary_weights(scenario, floor):
    """The Fano-aware thermometry fitted to the exact expected periodogram of a
    record with phase noise (the chain's sampled spectrum, very many averages)
    returns the sideband summary's Lorentzian and dispersive weights: records
    chain, likelihood fit and the spectrum's pole residues agree (three
    methods); the Lorentzian-only fit is thrown by the shaped floor."""
    from simulator.analysis.psd import PSDEstimate
    from simulator.analysis.thermometry import Calibration, measure_occupation
    from simulator.linear.sidebands import sideband_summary
    from simulator.records.generate import plan_record

    noisy = _noisy(scenario, floor)
    plan = plan_record(noisy)
    fs = plan.sample_rate_hz
    cal = Calibration.from_scenario(noisy)
    summary = sideband_summary(noisy)[0]
    resolution = summary.anti_stokes.linewidth_hz / 8
    f = np.arange(-fs / 2, fs / 2, resolution)
    psd = PSDEstimate(frequency_hz=f, density=plan.chain.sampled_spectrum(f, fs, aliases=30),
                      averages=10**6, sided="two-sided", resolution_hz=resolution,
                      noise_bandwidth_hz=resolution, window="boxcar")
    result = measure_occupation(psd, cal, sample_rate_hz=fs, fano=True)
    weights = result.fit.as_dict()
    per_quantum = cal.area_per_quantum()
    for key, side in (("anti_stokes", summary.anti_stokes), ("stokes", summary.stokes)):
        assert weights[f"{key}_area"][0] / per_quantum == pytest.approx(side.area_quanta,
                                                                          rel=0.01, abs=2e-3)
        assert weights[f"{key}_dispersive"][0] / per_quantum == pytest.approx(
            side.dispersive_quanta, rel=0.03)
    assert result.occupation_asymmetry == pytest.approx(summary.occupation_from_ratio, rel=0.02,
                                                        abs=2e-3)
    if floor > 1e-10:  # the noise pushes the anti-Stokes weight below zero: still fitted
        assert summary.anti_stokes.area_quanta < 0 and result.occupation_asymmetry < 0
    assert summary.occupation_from_ratio < 0.5 * summary.steady_state_occupation
    plain = measure_occupation(psd, cal, sample_rate_hz=fs)
    # The Lorentzian-only fit takes the shaped floor for a broad line: its
    # anti-Stokes weight comes out tens to hundreds of quanta off. It must be a
    # number (a NaN would be a failure, not a thrown fit); its asymmetry
    # estimate is not used here, because a Stokes weight fitted to zero makes
    # r/(1 − r) undefined.
    thrown = plain.fit.as_dict()["anti_stokes_area"][0] / per_quantum
    assert np.isfinite(thrown), f"Lorentzian-only fit returned {thrown}"
    assert abs(thrown - summary.anti_stokes.area_quanta) > 10, (thrown, summary.anti_stokes)


def test_laser_noise_shows_as_a_bias_against_the_truth_not_the_apparent_value(
        scenario, tmp_path):
    """Records with phase noise through the harness: the Fano-aware asymmetry
    estimate is consistent with the apparent occupation the summary predicts
    (weights shifted by the noise's interference) and flagged as biased
    against the true occupation."""
    from simulator.linear.sidebands import sideband_summary

    noisy = _noisy(scenario, 1e-10)
    summary = sideband_summary(noisy)[0]
    run = run_trials(noisy, "simulator.analysis.reference:fano_sideband_thermometry", 16,
                     tmp_path, workers=2, progress=False)
    assert not run.errors
    q = {q.name: q for q in run.quantities}["occupation:asymmetry"]
    assert q.truth == pytest.approx(summary.steady_state_occupation)
    assert "BIASED" in q.verdict
    assert abs(q.mean - summary.occupation_from_ratio) < 3 * q.bias_error


def test_the_window_kernel_in_the_model_removes_the_width_bias(scenario):
    """Fitted to the exact expected boxcar periodogram of a record (resolution an
    eighth of the linewidth), the bare Lorentzian model reads the line about
    3 % broad (the Fejér kernel's broadening), and the damping estimate low by
    as much; with the kernel in the model the width is the eigenvalue's to
    1e-4 (Percival & Walden 1993, Sec. 6.3)."""
    from simulator.analysis.psd import PSDEstimate, WindowedExpectation
    from simulator.analysis.thermometry import Calibration, measure_occupation
    from simulator.linear.steady_state import steady_state
    from simulator.records.generate import plan_record

    plan = plan_record(scenario)
    fs = plan.sample_rate_hz
    truth = steady_state(scenario).modes[0].effective_linewidth_hz
    segment = int(2 ** np.ceil(np.log2(fs / (truth / 8))))
    # the exact expected boxcar periodogram of the record (before rounding),
    # from the sampled model's autocovariance
    exact = expected_welch(plan, segment, window="boxcar", quantisation=False)
    order = np.argsort(np.fft.fftfreq(segment, d=1 / fs))
    smear = WindowedExpectation(fs, segment, "boxcar")
    psd = PSDEstimate(frequency_hz=smear.frequency_hz, density=exact[order],
                      averages=10**6, sided="two-sided", resolution_hz=fs / segment,
                      noise_bandwidth_hz=fs / segment, window="boxcar")
    assert np.allclose(exact[order], smear(
        lambda f: plan.chain.sampled_spectrum(f, fs, aliases=30)), rtol=1e-6)
    cal = Calibration.from_scenario(scenario)
    plain = measure_occupation(psd, cal, sample_rate_hz=fs)
    kernel = measure_occupation(psd, cal, sample_rate_hz=fs, smear=smear)
    assert plain.fit.values[2] > 1.02 * truth
    assert kernel.fit.values[2] == pytest.approx(truth, rel=1e-4)
    for wrong in (WindowedExpectation(fs, segment // 2, "boxcar"),
                  WindowedExpectation(fs, segment, "hann")):
        with pytest.raises(InputError, match="bins or window are not those"):
            measure_occupation(psd, cal, smear=wrong)


@pytest.mark.parametrize("name, reason", [
    ("exits", "the estimator called sys.exit(0)"),
    ("ends_the_process", "ended with exit status 0 without returning a result"),
    ("hangs", "no result within 1.5 s"),
    ("runs_out_of_memory", "MemoryError: cannot allocate"),
    ("returns_flags", "expected a pair of real numbers"),
    ("returns_nan_for_one", "'broken' is (nan, 1.0); expected a finite value"),
])
def test_estimator_misbehaviour_makes_failed_trials_with_the_reason(scenario, tmp_path,
                                                                    name, reason):
    """The estimator runs in a child process per trial: exiting, hanging or
    raising fails that trial (never the run, never silently), nothing failed
    is stored, and a rerun tries the failed trials again."""
    spec = f"tests.estimators_for_tests:{name}"
    result = run_trials(scenario, spec, 2, tmp_path, duration_s=0.005, workers=1,
                        progress=False, timeout_s=1.5)
    assert [i for i, _ in result.errors] == [0, 1]
    assert all(reason in e for _, e in result.errors), result.errors
    assert list((tmp_path / "trials").glob("*.json")) == []
    if name == "returns_nan_for_one":  # the good quantity is kept
        assert [q.name for q in result.quantities] == ["level"]
        assert result.quantities[0].trials == 2


def test_estimator_that_exits_on_import_is_a_clear_error(tmp_path):
    module = tmp_path / "quits.py"
    module.write_text("import sys\nsys.exit(0)\n\ndef estimate(record):\n    return {}\n")
    run = subprocess.run([sys.executable, "-m", "simulator", "trial", str(FAST),
                          "--estimator", f"{module}:estimate", "--trials", "2",
                          "--duration", "0.005", "--out", str(tmp_path / "out"),
                          "--workers", "1", "--quiet"],
                         capture_output=True, text=True, cwd=Path(__file__).parent.parent)
    assert run.returncode == 2, run.stderr
    assert "sys.exit(0)" in run.stderr and "Traceback" not in run.stderr
    assert not (tmp_path / "out" / "trial.nc").exists()
