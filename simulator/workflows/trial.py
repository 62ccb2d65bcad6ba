"""Validation harness: run an estimator on many records and compare with the truth.

The user writes ``estimator(record) -> {name: (value, uncertainty)}``. It
receives a :class:`simulator.workflows.estimator.PublicRecord` — the samples, the sample rate, the
calibration factors and the scenario as the experimenter describes it — and
never the ground truth. ``noisechain trial`` generates N independent records
(seeds from :class:`numpy.random.SeedSequence` spawned from the scenario's
seed), runs the estimator on each through the same resumable executors as
sweeps (local processes or Dask), and reports per quantity: bias, spread,
root-mean-square error, the pull (estimate − truth)/uncertainty, coverage of
the one- and two-sigma intervals, and failures, with a verdict from
statistical tests of each (Student t for the bias, χ² for the pull width,
Clopper–Pearson for the coverage, Bonferroni-corrected across the quantities:
:mod:`simulator.workflows.trial_verdicts`). The estimator runs in an
isolated child process per trial (:mod:`simulator.workflows.estimator`); only
successful trials are stored, so a rerun tries the failed ones again.

A quantity is compared with the truth by its name: ``occupation`` (first
mode), ``occupation[<mode>]``, ``effective_frequency_hz``,
``effective_linewidth_hz``, ``coupling_rate_hz`` (also with ``[<mode>]``) and
``cavity_occupation``; for a scenario with a ``[schedule]`` also
``effective_linewidth_hz@<segment>``, ``effective_frequency_hz@<segment>``
and ``occupation@<segment>`` (the segment's steady state),
``heating_rate_phonons_per_s@<segment>`` (its initial slope),
``bath_heating_rate_phonons_per_s`` and ``mechanical_linewidth_hz``. Text
after a colon labels a variant, so
``occupation:asymmetry`` and ``occupation:damping`` are both compared with
the occupation. With several detected tones (``detection.tones``) an
estimator runs on each tone's channel alone and its quantities are labelled
with the tone (``occupation:red_probe``: the device's occupation); the
coupling rate differs from tone to tone, and ``coupling_rate_hz:<tone>``
(also with ``[<mode>]``, and after any label of the estimator's) is compared
with that tone's. Other names are reported without a truth (spread only).
"""

import dataclasses
import math
from pathlib import Path

import numpy as np

from simulator.errors import InputError
from simulator.workflows import tasks
from simulator.workflows.estimator import DEFAULT_TIMEOUT_S, check_estimator, estimate
from simulator.workflows.trial_verdicts import checks, level_for

FORMAT = "noisechain-trial"
FORMAT_VERSION = 1
MIN_TRIALS_FOR_VERDICT = 10  # fewer: statistics are reported, no verdict
# Most trials in one run: each is a record and a file, and their seeds are spawned at
# once (10⁹ exhausted the memory); 10⁵ pin a bias to 1/√N = 0.3 % of the spread.
MAX_TRIALS = 100_000


def trial_seeds(scenario, n):
    """Independent record seeds for trials 0..n−1 (the first k never change with n)."""
    children = np.random.SeedSequence(scenario.scenario.seed).spawn(n)
    return [int(c.generate_state(1, dtype=np.uint32)[0]) for c in children]


def _trial_task(common, seed):
    """One trial: generate a record, run the estimator in isolation; JSON-able result."""
    import warnings

    from simulator.scenario.loader import parse_scenario
    from simulator.workflows.record import simulate_averaged_spectrum, simulate_record

    text, spec, duration, timeout_s, averaged = common
    try:
        scenario = parse_scenario(text, source="<trial>")
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            record = (simulate_record(scenario, seed=seed, duration_s=duration, workers=1)
                      if averaged is None else simulate_averaged_spectrum(
                          scenario, seed=seed, duration_s=duration,
                          segment_samples=averaged[0], window=averaged[1]))
    except Exception as exc:  # noqa: BLE001 - one trial fails, not the run
        return {"estimates": {}, "error": f"{type(exc).__name__}: {exc}", "warnings": []}
    estimates, failure = estimate(spec, record, timeout_s)
    return {"estimates": estimates, "error": failure,
            "warnings": [str(w.message) for w in caught]}


def succeeded(result):
    """Only a whole trial without an error is kept; a failed one is run again on a
    rerun, and so is a stored file damaged into another layout of valid JSON (which
    used to end the run with a traceback, or reach the statistics)."""
    def pair(v):
        return (isinstance(v, (list, tuple)) and len(v) == 2
                and all(x is None or (isinstance(x, (int, float)) and not isinstance(x, bool))
                        for x in v))

    return (isinstance(result, dict) and result.get("error") == ""
            and isinstance(result.get("estimates"), dict)
            and all(isinstance(k, str) and pair(v) for k, v in result["estimates"].items())
            and isinstance(result.get("warnings"), list))


def truth_table(scenario):
    """Truth by quantity name (see the module notes)."""
    from simulator.linear.steady_state import steady_state
    from simulator.model.system import as_system

    system = as_system(scenario, several_tones="detected")
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
    table.update(segment_truths(system.scenario))
    table.update(tone_truths(system))
    return table


def tone_truths(system):
    """``coupling_rate_hz:<tone>`` (and ``[<mode>]``) of each detected tone of a record
    of several (``detection.tones``); empty otherwise."""
    from simulator.model.detected_tone import detected_tone_names, tone_indices, tone_point_of

    names = detected_tone_names(system.scenario)
    if len(names) < 2:
        return {}
    table = {}
    for name, k in zip(names, tone_indices(system.point, names), strict=True):
        for j, mode in enumerate(tone_point_of(system.scenario, system.point, k).modes):
            table[f"coupling_rate_hz[{mode.name}]:{name}"] = mode.coupling_rate_hz
            if j == 0:
                table[f"coupling_rate_hz:{name}"] = mode.coupling_rate_hz
    return table


def segment_truths(scenario):
    """Truth of each ``[schedule]`` segment, first mode: ``<quantity>@<segment name>``.

    The segment's steady-state effective linewidth and frequency (a ring-down
    measures them) and occupation (where a transient ends); the initial heating
    rate in phonons/s of every un-kicked segment after the first
    (:func:`simulator.analysis.heating.initial_heating_rates`); the bath's own
    heating rate Γm n_th and Γm/2π (``bath_heating_rate_phonons_per_s``,
    ``mechanical_linewidth_hz``); for an unstable
    segment the linewidth (negative) and frequency of its drift's poles only.
    """
    if getattr(scenario, "schedule", None) is None:
        return {}
    from simulator.analysis.heating import initial_heating_rates
    from simulator.linear.steady_state import steady_state
    from simulator.records.protocol import segment_systems
    from simulator.records.unstable import effective_from_eigenvalues

    table, systems = {}, segment_systems(scenario)
    for name, system in systems:
        if not system.stable:  # a growing pulse: its poles, and no occupation to end at
            freq, width = effective_from_eigenvalues(system)
            table.update({f"effective_linewidth_hz@{name}": width[0],
                          f"effective_frequency_hz@{name}": freq[0]})
            continue
        mode = steady_state(system).modes[0]
        table.update({f"effective_linewidth_hz@{name}": mode.effective_linewidth_hz,
                      f"effective_frequency_hz@{name}": mode.effective_frequency_hz,
                      f"occupation@{name}": mode.occupation})
    table.update({f"heating_rate_phonons_per_s@{name}": rate
                  for name, rate in initial_heating_rates(scenario).items()})
    mode = scenario.mechanics[0]  # what heats it: the bath alone, and its own damping
    table.update({"bath_heating_rate_phonons_per_s": 2 * np.pi * mode.linewidth_hz
                  * systems[0][1].point.modes[0].bath_occupation,
                  "mechanical_linewidth_hz": mode.linewidth_hz})
    return table


def checked_averaged(scenario, averaged, duration_s):
    """``(segment samples, window)`` of ``--averaged`` checked against the record before
    any trial runs (else every trial would fail alike, as if the estimator had)."""
    from simulator.analysis.psd import taper
    from simulator.model.sample_rate import record_sample_rate
    from simulator.model.system import System

    segment, window = averaged
    system = System(scenario)  # several detected tones: the record of every channel
    samples = round(duration_s * record_sample_rate(scenario, system.channels or system.chain))
    if isinstance(segment, bool) or not isinstance(segment, (int, np.integer)) or not (
            2 <= segment <= samples):
        raise InputError(f"--averaged {segment!r}: expected segments of 2 to the record's "
                         f"{samples} samples")
    taper(str(window), int(segment))  # an unknown window: InputError naming it
    return int(segment), str(window)


def truth_of(name, table):
    """Truth for quantity ``name`` (``base`` or ``base:label``), or None; a last label
    naming a detected tone with a truth of its own (``base:<tone>``) takes that."""
    base, _, label = name.partition(":")
    tone = label.rpartition(":")[2]
    return table.get(f"{base}:{tone}", table.get(base)) if label else table.get(base)


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
    # the tests behind the verdict (simulator.workflows.trial_verdicts); None without one
    level: float | None = None  # two-sided level of each test for this quantity
    bias_t: float | None = None  # bias / standard error
    bias_threshold: float | None = None  # Student-t critical value of |bias_t|
    pull_width_interval: tuple | None = None  # χ² confidence interval of the pull width
    coverage_1sigma_interval: tuple | None = None  # Clopper–Pearson intervals
    coverage_2sigma_interval: tuple | None = None

    def to_dict(self):
        """Plain data for JSON."""
        return dataclasses.asdict(self)


def summarise(name, estimates, uncertainties, truth, failures, *, compared=1):
    """Statistics of one quantity; ``estimates`` and ``uncertainties`` finite arrays.

    ``compared`` is the number of quantities of the run that have a truth:
    the verdict's tests are Bonferroni-corrected across them
    (:mod:`simulator.workflows.trial_verdicts`).
    """
    n = estimates.size
    mean = float(estimates.mean()) if n else math.nan
    spread = float(estimates.std(ddof=1)) if n > 1 else math.nan
    if truth is None or n == 0:
        return QuantityReport(name=name, truth=truth, trials=n, failures=failures, mean=mean,
                              spread=spread, bias=None, bias_error=None, rmse=None,
                              pull_mean=None, pull_width=None, coverage_1sigma=None,
                              coverage_2sigma=None, verdict="no truth to compare with"
                              if truth is None else "no successful trial")
    pulls = (estimates - truth) / uncertainties
    statistics = dict(
        name=name, truth=float(truth), trials=n, failures=failures, mean=mean, spread=spread,
        bias=float(mean - truth), bias_error=float(spread / math.sqrt(n)) if n > 1 else None,
        rmse=float(np.sqrt(np.mean((estimates - truth) ** 2))),
        pull_mean=float(pulls.mean()), pull_width=float(pulls.std(ddof=1)) if n > 1 else None,
        coverage_1sigma=float(np.mean(np.abs(pulls) <= 1)),
        coverage_2sigma=float(np.mean(np.abs(pulls) <= 2)))
    if n < MIN_TRIALS_FOR_VERDICT:  # the statistics, but too few trials to test them
        return QuantityReport(**statistics, verdict=f"too few trials for a verdict "
                              f"({n} < {MIN_TRIALS_FOR_VERDICT})")
    tested = checks(estimates, uncertainties, truth, level_for(compared))
    return QuantityReport(
        **statistics, verdict=tested.verdict, level=tested.level, bias_t=tested.bias_t,
        bias_threshold=tested.bias_threshold, pull_width_interval=tested.pull_width_interval,
        coverage_1sigma_interval=tested.coverage_1sigma_interval,
        coverage_2sigma_interval=tested.coverage_2sigma_interval)


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
               dask=None, progress=True, timeout_s=DEFAULT_TIMEOUT_S, averaged=None):
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
        As for :func:`simulator.workflows.tasks.run_tasks`.
    timeout_s : float
        Seconds the estimator may take on one record (and to import) before
        its process is stopped and the trial counts as failed.
    averaged : (int, str), optional
        (segment samples, window): give the estimator a synthetic averaged
        periodogram of each record, drawn from its exact law
        (:class:`simulator.workflows.estimator.PublicSpectrum`), instead of
        the record itself.

    Returns
    -------
    TrialResult
    """
    if (isinstance(n_trials, bool) or not isinstance(n_trials, int)
            or not 2 <= n_trials <= MAX_TRIALS):
        raise InputError(f"--trials {n_trials!r}: expected an integer from 2 to {MAX_TRIALS} "
                         "(each trial is a record and a file; 10⁵ trials pin a bias to 0.3 % "
                         "of the spread)")
    if not (isinstance(timeout_s, (int, float)) and not isinstance(timeout_s, bool)
            and math.isfinite(timeout_s) and timeout_s > 0):
        raise InputError(f"--timeout-s {timeout_s!r}: expected a positive number of seconds")
    out = Path(out)
    text = scenario.to_toml()
    table = truth_table(scenario)
    duration = scenario.record.duration_s if duration_s is None else float(duration_s)
    if not (math.isfinite(duration) and duration > 0):
        raise InputError(f"--duration {duration_s!r}: expected a positive number of seconds")
    # fail fast with a clear message; the estimator's code is part of the identity, so
    # edited code never reuses old results
    source = check_estimator(estimator, timeout_s)
    if averaged is not None:
        averaged = checked_averaged(scenario, averaged, duration)
    identity = f"{text}\n{estimator}\n{duration!r}\n{source}" + (
        "" if averaged is None else f"\naveraged {averaged!r}")
    with tasks.claim_folder(out, "trial.json", {
            "format": FORMAT, "format_version": FORMAT_VERSION,
            "sha256": tasks.digest(identity), "scenario_toml": text, "estimator": estimator,
            "duration_s": duration, "averaged": averaged}, "trial"):
        seeds = trial_seeds(scenario, n_trials)
        results = tasks.run_tasks(out / "trials", _trial_task,
                                  (text, estimator, duration, float(timeout_s), averaged),
                                  [(f"{i:06d}", s) for i, s in enumerate(seeds)],
                                  workers=workers, dask=dask, progress=progress,
                                  desc="trials", unit="trial", keep=succeeded)
        ordered = [results[f"{i:06d}"] for i in range(n_trials)]
        dataset, reports, errors = _assemble(scenario, estimator, duration, seeds, ordered,
                                             table)
        from simulator.workflows.sweep import write_dataset

        write_dataset(dataset, out / "trial.nc")
        result = TrialResult(quantities=tuple(reports), dataset=dataset, errors=tuple(errors),
                             out=out)
        from simulator.report.trial_report import write_trial_report

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
    compared = sum(truth_of(q, table) is not None for q in names)
    for j, name in enumerate(names):
        ok = np.isfinite(est[:, j]) & np.isfinite(unc[:, j]) & (unc[:, j] > 0)
        reports.append(summarise(name, est[ok, j], unc[ok, j], truth_of(name, table),
                                 int(n - ok.sum()), compared=compared))
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
