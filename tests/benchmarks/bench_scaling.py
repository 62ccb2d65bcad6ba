"""Benchmark: trials and sweeps on 1 and 2 workers, by every executor the task runner has.

Prints, measured side by side in one run, for each executor — local worker
processes (``--workers N``), a Dask LocalCluster (``--dask local``, one
worker per core) and a Dask scheduler at an address
(``--dask tcp://HOST:PORT``; the benchmark starts the scheduler and its N
worker processes itself, as a cluster would run them):

1. the per-task overhead: wall time per task of a task that does nothing
   (``operator.add``), storage of each result included;
2. a detuning sweep (steady state and diagnostics per point) and a batch of
   validation trials (record + reference thermometry per trial): wall time
   per task and the speed-up of 2 workers over 1 on the same executor.

BLAS runs on one thread in every worker (local processes and Dask alike)
and, for the rows with one worker, in this process too; the first line
shows why: one reference-thermometry fit with the default BLAS threads
against one thread, side by side.

Starting the workers is included for local processes and the
LocalCluster (part of what a user waits for); the scheduler at an address is
started, with its workers, before the clock runs, as a cluster would be.
The machine may be shared with other work: the ratios measured side by side
in one run are what count, not the absolute times.

Run: ``.venv/bin/python tests/benchmarks/bench_scaling.py [--points N]
[--trials N] [--noop N]``.
"""

import argparse
import contextlib
import operator
import sys
import tempfile
import time
from pathlib import Path

from simulator.scenario.loader import load_scenario, parse_scenario
from simulator.workflows import tasks
from simulator.workflows.sweep import run_sweep
from simulator.workflows.trial import run_trials

DATA = Path(__file__).parent.parent / "data"
SWEEP = (DATA / "sweep_base.toml").read_text() + """
[sweep]
[sweep.parameters]
"drive.detuning_hz" = { start = -2, stop = 2, num = NUM, unit = "mechanics[0].frequency_hz" }
"""
ESTIMATOR = "simulator.analysis.reference:sideband_thermometry"
TRIAL_SECONDS = 0.5  # record length per trial: 125 k samples of the fast scenario


@contextlib.contextmanager
def scheduler_address(workers):
    """A Dask scheduler with ``workers`` single-threaded worker processes; yields its address."""
    from distributed import LocalCluster

    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                           dashboard_address=None)
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()


def executors():
    """(label, workers, context manager yielding the run_tasks keywords)."""
    @contextlib.contextmanager
    def local(n):
        yield {"workers": n}

    @contextlib.contextmanager
    def address(n):
        with scheduler_address(n) as where:
            yield {"dask": where}

    @contextlib.contextmanager
    def local_cluster():
        yield {"dask": "local"}

    out = [(f"processes, {n}", n, lambda n=n: local(n)) for n in (1, 2)]
    out += [(f"scheduler address, {n}", n, lambda n=n: address(n)) for n in (1, 2)]
    out.append(("LocalCluster (all cores)", 2, local_cluster))
    return out


def timed(fn):
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def measure(out, where, args, sweep, trial):
    """Seconds per empty task, per sweep point and per trial on one executor."""
    noop = timed(lambda: tasks.run_tasks(
        out / "noop", operator.add, 1, [(f"{i:06d}", i) for i in range(args.noop)],
        progress=False, **where)) / args.noop
    swept = timed(lambda: run_sweep(sweep, out / "sweep", progress=False,
                                    **where)) / args.points
    tried = timed(lambda: run_trials(trial, ESTIMATOR, args.trials, out / "trial",
                                     duration_s=TRIAL_SECONDS, progress=False,
                                     **where)) / args.trials
    return noop, swept, tried


def blas_threads(trial):
    """Seconds of one thermometry fit with the default BLAS threads and with one."""
    import warnings

    from threadpoolctl import threadpool_limits

    from simulator.analysis.reference import sideband_thermometry
    from simulator.workflows.estimator import public_view
    from simulator.workflows.record import simulate_record

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        view = public_view(simulate_record(trial, seed=1, duration_s=TRIAL_SECONDS))
    sideband_thermometry(view)
    default = timed(lambda: sideband_thermometry(view))
    with threadpool_limits(limits=1):
        one = timed(lambda: sideband_thermometry(view))
    return default, one


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=200, help="sweep points")
    parser.add_argument("--trials", type=int, default=8, help="trials")
    parser.add_argument("--noop", type=int, default=400, help="empty tasks for the overhead")
    args = parser.parse_args()
    sweep = parse_scenario(SWEEP.replace("NUM", str(args.points)))
    trial = load_scenario(DATA / "fast_thermometry.toml")
    with tempfile.TemporaryDirectory() as out:  # one-time imports and numba compilation
        run_trials(trial, ESTIMATOR, 2, Path(out) / "t", duration_s=0.01, workers=1,
                   progress=False)
        run_sweep(parse_scenario(SWEEP.replace("NUM", "2")), Path(out) / "s", workers=1,
                  progress=False)
    default, one = blas_threads(trial)
    from threadpoolctl import threadpool_limits

    threadpool_limits(limits=1)  # as in the workers: one BLAS thread per task
    rows = {}
    for label, workers, context in executors():
        with context() as where, tempfile.TemporaryDirectory() as out:
            noop, swept, tried = measure(Path(out), where, args, sweep, trial)
        rows[label] = (workers, noop, swept, tried)
        print(f"   done: {label}", file=sys.stderr)
    print(f"Scaling of the task runner: {args.noop} empty tasks, a {args.points}-point sweep, "
          f"{args.trials} trials of {TRIAL_SECONDS:g} s records")
    print(f"   one thermometry fit: {default:.3f} s with the default BLAS threads, {one:.3f} s "
          f"with one (ratio {default / one:.2f})")
    print(f"   {'executor, workers':28s} {'overhead ms/task':>17s} {'sweep ms/point':>15s} "
          f"{'speed-up':>9s} {'trial s/trial':>14s} {'speed-up':>9s}")
    for label, (workers, noop, swept, tried) in rows.items():
        base = rows[label.replace(f", {workers}", ", 1") if "," in label else "processes, 1"]
        print(f"   {label:28s} {noop * 1e3:17.2f} {swept * 1e3:15.2f} {base[2] / swept:9.2f} "
              f"{tried:14.3f} {base[3] / tried:9.2f}")
    print("   (speed-up: against 1 worker of the same executor; LocalCluster against one "
          "local process)")


if __name__ == "__main__":
    main()
