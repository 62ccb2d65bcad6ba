"""Validation harness: run an estimator on many records and compare with the truth.

The user writes ``estimator(record) -> {name: (value, uncertainty)}``. It
receives a :class:`PublicRecord` — the samples, the sample rate, the
calibration factors and the scenario as the experimenter describes it — and
never the ground truth. ``noisechain trial`` generates N independent records
(seeds from :class:`numpy.random.SeedSequence` spawned from the scenario's
seed), runs the estimator on each through the same resumable executors as
sweeps (local processes or Dask), and reports per quantity: bias, spread,
root-mean-square error, the pull (estimate − truth)/uncertainty, coverage of
the one- and two-sigma intervals, and failures.

A quantity is compared with the truth by its name: ``occupation`` (first
mode), ``occupation[<mode>]``, ``effective_frequency_hz``,
``effective_linewidth_hz``, ``coupling_rate_hz`` (also with ``[<mode>]``) and
``cavity_occupation``. Text after a colon labels a variant, so
``occupation:asymmetry`` and ``occupation:damping`` are both compared with
the occupation. Other names are reported without a truth (spread only).
"""

import dataclasses
import importlib
import importlib.util
import math
import re
import sys
from pathlib import Path

import numpy as np

from simulator import tasks
from simulator.errors import InputError

FORMAT = "noisechain-trial"
FORMAT_VERSION = 1
ONE_SIGMA, TWO_SIGMA = 0.682689492137, 0.954499736104  # Gaussian interval contents
MIN_TRIALS_FOR_VERDICT = 10  # fewer: statistics are reported, no verdict


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class PublicRecord:
    """What an estimator may see: the data and the public description, no truth.

    ``samples`` are in shot-noise units (two-sided shot-noise density 1 per
    Hz): complex I + iQ for an ``iq`` record (anti-Stokes at positive
    frequency in an FFT), real for an ``if`` record.
    """

    samples: np.ndarray
    kind: str
    scheme: str
    sample_rate_hz: float
    intermediate_frequency_hz: float
    local_oscillator_side: str
    volts_per_count: float
    shot_noise_per_count: float
    scenario: object


def public_view(record):
    """The :class:`PublicRecord` of a :class:`simulator.records.Record`."""
    return PublicRecord(samples=record.shot_noise_units(), kind=record.kind,
                        scheme=record.scheme, sample_rate_hz=record.sample_rate_hz,
                        intermediate_frequency_hz=record.intermediate_frequency_hz,
                        local_oscillator_side=record.local_oscillator_side,
                        volts_per_count=record.volts_per_count,
                        shot_noise_per_count=record.shot_noise_per_count,
                        scenario=record.scenario)


_ESTIMATORS = {}


def load_estimator(spec):
    """Import ``module:function`` or ``path/to/file.py:function``."""
    if spec in _ESTIMATORS:
        return _ESTIMATORS[spec]
    module_name, sep, func_name = str(spec).rpartition(":")
    if not sep or not module_name or not func_name:
        raise InputError(f"--estimator {spec!r}: expected 'module:function' or "
                         "'path/to/file.py:function'")
    try:
        if module_name.endswith(".py"):
            path = Path(module_name)
            if not path.is_file():
                raise InputError(f"--estimator {spec!r}: file {path} not found")
            name = f"_noisechain_estimator_{abs(hash(str(path.resolve())))}"
            module_spec = importlib.util.spec_from_file_location(name, path)
            module = importlib.util.module_from_spec(module_spec)
            sys.modules[name] = module
            module_spec.loader.exec_module(module)
        else:
            module = importlib.import_module(module_name)
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001 - user code: report, don't crash
        raise InputError(f"--estimator {spec!r}: importing {module_name} failed "
                         f"({type(exc).__name__}: {exc})") from None
    func = getattr(module, func_name, None)
    if not callable(func):
        raise InputError(f"--estimator {spec!r}: {module_name} has no function "
                         f"{func_name!r}")
    _ESTIMATORS[spec] = func
    return func


def _estimator_source_digest(spec):
    """Digest of the file that defines the estimator (empty if it has no file)."""
    func = load_estimator(spec)
    module = sys.modules.get(getattr(func, "__module__", ""), None)
    path = getattr(module, "__file__", None)
    try:
        return tasks.digest(Path(path).read_text(encoding="utf-8")) if path else ""
    except OSError:
        return ""


def trial_seeds(scenario, n):
    """Independent record seeds for trials 0..n−1 (the first k never change with n)."""
    children = np.random.SeedSequence(scenario.scenario.seed).spawn(n)
    return [int(c.generate_state(1, dtype=np.uint32)[0]) for c in children]


def _trial_task(common, seed):
    """One trial: generate a record, run the estimator; JSON-able result."""
    import warnings

    from simulator.records import simulate_record
    from simulator.scenario import parse_scenario

    text, spec, duration = common
    try:
        scenario = parse_scenario(text, source="<trial>")
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            record = simulate_record(scenario, seed=seed, duration_s=duration)
        estimates = load_estimator(spec)(public_view(record))
        if not isinstance(estimates, dict) or not estimates:
            raise TypeError(f"the estimator returned {type(estimates).__name__} "
                            f"{str(estimates)[:80]!r}; expected a non-empty dict "
                            "{name: (value, uncertainty)}")
        out = {}
        for name, pair in estimates.items():
            if (not isinstance(pair, (tuple, list)) or len(pair) != 2
                    or not all(isinstance(x, (int, float, np.number)) for x in pair)):
                raise TypeError(f"estimate {name!r} is {pair!r}; expected a pair of numbers "
                                "(value, uncertainty)")
            value, error = pair
            out[str(name)] = [float(value), float(error)]
        return {"estimates": out, "error": "",
                "warnings": [str(w.message) for w in caught]}
    except (Exception, SystemExit) as exc:  # noqa: BLE001 - user code: one trial fails, not the run
        return {"estimates": {}, "error": f"{type(exc).__name__}: {exc}", "warnings": []}


def truth_table(scenario):
    """Truth by quantity name (see the module notes)."""
    from simulator.steady_state import steady_state
    from simulator.system import as_system

    system = as_system(scenario)
    point, steady = system.point, steady_state(system)
    table = {"cavity_occupation": steady.cavity_occupation}
    for j, (mp, ms) in enumerate(zip(point.modes, steady.modes, strict=True)):
        values = {"occupation": ms.occupation,
                  "effective_frequency_hz": ms.effective_frequency_hz,
                  "effective_linewidth_hz": ms.effective_linewidth_hz,
                  "coupling_rate_hz": mp.coupling_rate_hz}
        for key, value in values.items():
            table[f"{key}[{mp.name}]"] = value
            if j == 0:
                table[key] = value
    return table


def truth_of(name, table):
    """Truth for quantity ``name`` (``base`` or ``base:label``), or None."""
    return table.get(name.split(":", 1)[0])


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class QuantityReport:
    """Performance of an estimator for one quantity over the trials."""

    name: str
    truth: float | None
    trials: int  # trials that returned a finite value and uncertainty
    failures: int
    mean: float
    spread: float  # sample standard deviation
    bias: float | None
    bias_error: float | None  # standard error of the bias
    rmse: float | None
    pull_mean: float | None
    pull_width: float | None
    coverage_1sigma: float | None
    coverage_2sigma: float | None
    verdict: str

    def to_dict(self):
        """Plain data for JSON."""
        return dataclasses.asdict(self)


def summarise(name, estimates, uncertainties, truth, failures):
    """Statistics of one quantity; ``estimates`` and ``uncertainties`` finite arrays."""
    n = estimates.size
    mean = float(estimates.mean()) if n else math.nan
    spread = float(estimates.std(ddof=1)) if n > 1 else math.nan
    if truth is None or n < MIN_TRIALS_FOR_VERDICT:
        return QuantityReport(name=name, truth=truth, trials=n, failures=failures, mean=mean,
                              spread=spread, bias=None, bias_error=None, rmse=None,
                              pull_mean=None, pull_width=None, coverage_1sigma=None,
                              coverage_2sigma=None, verdict="no truth to compare with"
                              if truth is None else f"too few trials for a verdict "
                              f"({n} < {MIN_TRIALS_FOR_VERDICT})")
    bias = mean - truth
    bias_error = spread / math.sqrt(n)
    pulls = (estimates - truth) / uncertainties
    width = float(pulls.std(ddof=1))
    verdict = []
    if bias_error == 0:  # identical estimates: any bias is exact
        if bias != 0:
            verdict.append(f"BIASED: every trial returned {mean:.6g} against the truth "
                           f"{truth:.6g}")
    elif abs(bias) > 3 * bias_error:
        verdict.append(f"BIASED: bias {bias:.4g} is {abs(bias) / bias_error:.1f} standard "
                       "errors from zero")
    tolerance = 3 / math.sqrt(2 * (n - 1))  # 3 standard errors of a standard deviation
    if width > 1 + tolerance:
        verdict.append(f"uncertainties UNDERSTATED: pull width {width:.3g}")
    elif width < 1 - tolerance:
        verdict.append(f"uncertainties OVERSTATED: pull width {width:.3g}")
    return QuantityReport(
        name=name, truth=float(truth), trials=n, failures=failures, mean=mean, spread=spread,
        bias=float(bias), bias_error=float(bias_error),
        rmse=float(np.sqrt(np.mean((estimates - truth) ** 2))),
        pull_mean=float(pulls.mean()), pull_width=width,
        coverage_1sigma=float(np.mean(np.abs(pulls) <= 1)),
        coverage_2sigma=float(np.mean(np.abs(pulls) <= 2)),
        verdict="; ".join(verdict) or "consistent: no bias, honest uncertainties")


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class TrialResult:
    """Per-quantity reports, the per-trial data and where they were written."""

    quantities: tuple
    dataset: object
    errors: tuple  # (trial, message) of failed trials
    out: Path

    def to_dict(self):
        """Plain data for JSON."""
        return {"out": str(self.out.resolve()), "trials": int(self.dataset.sizes["trial"]),
                "failed_trials": len(self.errors),
                "quantities": [q.to_dict() for q in self.quantities],
                "errors": [list(e) for e in self.errors[:20]]}


def run_trials(scenario, estimator, n_trials, out, *, duration_s=None, workers=None,
               dask=None, progress=True):
    """Run ``estimator`` on ``n_trials`` independent records of ``scenario``.

    Parameters
    ----------
    scenario : Scenario
    estimator : str
        ``module:function`` or ``path/to/file.py:function``.
    n_trials : int
    out : path
        Folder: ``trial.json`` (manifest), ``trials/`` (one file per trial,
        so an interrupted run resumes), ``trial.nc`` and ``report.html``.
    duration_s : float, optional
        Record length; default ``record.duration_s`` of the scenario.
    workers, dask, progress
        As for :func:`simulator.tasks.run_tasks`.

    Returns
    -------
    TrialResult
    """
    if isinstance(n_trials, bool) or not isinstance(n_trials, int) or n_trials < 2:
        raise InputError(f"--trials {n_trials!r}: expected an integer of at least 2")
    load_estimator(estimator)  # fail fast, in this process, with a clear message
    out = Path(out)
    text = scenario.to_toml()
    table = truth_table(scenario)
    duration = scenario.record.duration_s if duration_s is None else float(duration_s)
    if not (math.isfinite(duration) and duration > 0):
        raise InputError(f"--duration {duration_s!r}: expected a positive number of seconds")
    # the estimator's code is part of the identity: edited code never reuses old results
    identity = f"{text}\n{estimator}\n{duration!r}\n{_estimator_source_digest(estimator)}"
    tasks.prepare_folder(out, "trial.json", {
        "format": FORMAT, "format_version": FORMAT_VERSION, "sha256": tasks.digest(identity),
        "scenario_toml": text, "estimator": estimator, "duration_s": duration}, "trial")
    seeds = trial_seeds(scenario, n_trials)
    results = tasks.run_tasks(out / "trials", _trial_task, (text, estimator, duration),
                              [(f"{i:06d}", s) for i, s in enumerate(seeds)],
                              workers=workers, dask=dask, progress=progress, desc="trials",
                              unit="trial")
    ordered = [results[f"{i:06d}"] for i in range(n_trials)]
    dataset, reports, errors = _assemble(scenario, estimator, duration, seeds, ordered, table)
    from simulator.sweep import write_dataset

    write_dataset(dataset, out / "trial.nc")
    result = TrialResult(quantities=tuple(reports), dataset=dataset, errors=tuple(errors),
                         out=out)
    from simulator.trial_report import write_trial_report

    write_trial_report(result, scenario, estimator, out / "report.html")
    return result


def _assemble(scenario, estimator, duration, seeds, ordered, table):
    import xarray as xr

    from simulator import __version__

    names = sorted({k for r in ordered for k in r["estimates"]})
    n = len(ordered)
    est = np.full((n, len(names)), np.nan)
    unc = np.full((n, len(names)), np.nan)
    errors = [(i, r["error"]) for i, r in enumerate(ordered) if r["error"]]
    for i, r in enumerate(ordered):
        for j, name in enumerate(names):
            if name in r["estimates"]:
                est[i, j], unc[i, j] = r["estimates"][name]
    truths = np.array([np.nan if truth_of(q, table) is None else truth_of(q, table)
                       for q in names])
    reports = []
    for j, name in enumerate(names):
        ok = np.isfinite(est[:, j]) & np.isfinite(unc[:, j]) & (unc[:, j] > 0)
        reports.append(summarise(name, est[ok, j], unc[ok, j], truth_of(name, table),
                                 int(n - ok.sum())))
    dataset = xr.Dataset(
        {"estimate": (("trial", "quantity"), est),
         "uncertainty": (("trial", "quantity"), unc),
         "truth": (("quantity",), truths),
         "seed": (("trial",), np.array(seeds, dtype=np.int64)),
         "error": (("trial",), np.array([r["error"] for r in ordered], dtype=str))},
        coords={"trial": np.arange(n), "quantity": np.array(names, dtype=str)},
        attrs={"format": FORMAT, "format_version": FORMAT_VERSION,
               "scenario_toml": scenario.to_toml(), "estimator": estimator,
               "duration_s": duration, "software_version": __version__})
    return dataset, reports, errors


def sanitize(name):
    """File-name-safe version of a quantity name."""
    return re.sub(r"[^A-Za-z0-9_.-]", "_", name)
