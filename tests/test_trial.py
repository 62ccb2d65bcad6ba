"""The validation harness: reference estimator unbiased with honest errors, a biased
one flagged, failures recorded, resumable, same answer on every executor."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from simulator.errors import InputError
from simulator.scenario import load_scenario
from simulator.trial import load_estimator, run_trials, summarise, trial_seeds

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
    """In weak coupling (g/κ ≈ 0.03) the asymmetry and calibrated-area estimates
    recover the Lyapunov occupation: bias within 3 standard errors, pull width
    within 3 standard errors of one (standard asymptotic theory)."""
    assert not reference_run.errors
    by_name = {q.name: q for q in reference_run.quantities}
    for name in ("occupation:asymmetry", "occupation:anti_stokes_area"):
        q = by_name[name]
        assert q.trials == 20 and q.failures == 0
        assert abs(q.bias) < 3 * q.bias_error, q
        assert abs(q.pull_width - 1) < 3 / np.sqrt(2 * 19), q
        assert q.verdict.startswith("consistent")
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
    assert len(stored) == 6
    failed = [i for i, e in first.errors]
    assert all("deliberate failure" in e for _, e in first.errors)
    (q,) = first.quantities
    assert q.failures == len(failed) and q.trials == 6 - len(failed)
    assert q.truth is None and "no truth" in q.verdict
    more = run_trials(scenario, spec, 9, tmp_path, duration_s=0.01, workers=1,
                      progress=False)
    for name, text in stored.items():  # finished trials kept, not recomputed
        assert (tmp_path / "trials" / name).read_text() == text
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
