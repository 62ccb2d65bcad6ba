"""Resumable execution of many independent tasks on local processes or Dask.

Sweeps and Monte Carlo trials share this runner. Each task has a key and a
payload; ``func(common, payload)`` must be a pure function returning
JSON-serialisable data, so results are the same bit for bit whichever
executor runs it and however many workers there are. Every finished task is
stored atomically as ``FOLDER/<tasks>/<key>.json``; a rerun with the same
folder skips them, and a folder that belongs to different work (its manifest
differs) is refused rather than mixed.
"""

import contextlib
import hashlib
import json
import math
import os
from pathlib import Path

from simulator.errors import ExecutionError, InputError
from simulator.io import jsontext
from simulator.io.files import OutputError, atomic_write_text
from simulator.io.folders import FolderLock


def digest(text):
    """SHA-256 of ``text``: identifies the work a folder belongs to."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@contextlib.contextmanager
def claim_folder(folder, manifest_name, manifest, what):
    """Hold ``folder`` for this run: lock it, then create or check its manifest.

    The folder is created if needed. While the ``with`` block runs, another
    run into the same folder is refused (:class:`simulator.io.files.FolderLock`).
    A folder with a manifest of other work, or one that holds files but no
    manifest (it is not ours), is refused: results are never mixed and
    nobody else's files are replaced.

    Parameters
    ----------
    manifest : dict
        Must contain ``"sha256"``, the digest identifying the work.
    what : str
        Words for error messages, e.g. ``"sweep"``.
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create the output folder {str(folder)!r}: "
                          f"{exc.strerror or exc}") from None
    with FolderLock(folder, what):
        path = folder / manifest_name
        if path.exists():
            try:
                found = json.loads(path.read_text(encoding="utf-8"))
            except (OSError, ValueError) as exc:
                raise InputError(f"{path}: unreadable {what} manifest ({exc}); expected a "
                                 f"folder written by noisechain {what}, or a new folder") from None
            if found.get("sha256") != manifest["sha256"]:
                raise InputError(
                    f"{folder}: this folder holds a {what} of a different scenario or set-up "
                    f"(its {manifest_name} does not match); results are never mixed. Choose a "
                    "new --out folder or delete the old one.")
        else:
            foreign = sorted(p.name for p in folder.iterdir() if p.name != FolderLock.NAME)
            if foreign:
                raise InputError(
                    f"{folder}: the folder is not empty ({', '.join(foreign[:3])}"
                    f"{', ...' if len(foreign) > 3 else ''}) and holds no {manifest_name}, so "
                    f"it is not a noisechain {what} folder; its files are not ours to replace. "
                    "Choose a new or empty --out folder.")
            atomic_write_text(path, jsontext.dumps(manifest, indent=2))
        yield folder


def _read(path, keep):
    try:
        result = jsontext.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None  # missing or damaged: recomputed
    return result if keep(result) else None


def _always(result):
    return True


def run_tasks(folder, func, common, tasks, *, workers=None, dask=None, progress=True,
              desc="tasks", unit="task", keep=_always):
    """Run (or resume) ``tasks``, storing each result under ``folder``.

    Parameters
    ----------
    folder : pathlib.Path
        Results go to ``folder/<key>.json``.
    func : callable
        Top-level function ``func(common, payload) -> JSON-serialisable``.
    common : picklable
        Shared argument (e.g. the scenario as TOML text).
    tasks : sequence of (str, payload)
    workers : int, optional
        Local worker processes (default: all cores); 1 runs in this process.
    dask : str, optional
        ``"local"`` for a Dask LocalCluster or a scheduler address
        ``tcp://host:port``; overrides ``workers``.
    progress : bool
        Show a progress bar with rate and time remaining.
    keep : callable
        ``keep(result)`` is true for a result worth storing; the others (a
        failure that may pass on a second try) are returned but computed
        again by the next run.

    Returns
    -------
    dict
        Result per key, for every task.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    results, todo = {}, []
    for key, payload in tasks:
        stored = _read(folder / f"{key}.json", keep)
        if stored is not None:
            results[key] = stored
        else:
            todo.append((key, payload))
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=len(tasks), initial=len(tasks) - len(todo), unit=unit, desc=desc,
                   smoothing=0.1)
    try:
        for key, result in _execute(func, common, todo, workers, dask):
            text = jsontext.dumps(result, keep_non_finite=True)
            if keep(result):
                # a task file is recomputed if damaged, so skip the fsync per task
                atomic_write_text(folder / f"{key}.json", text, durable=False)
            results[key] = jsontext.loads(text)  # what a resumed run reads, exactly
            if bar is not None:
                bar.update(1)
    finally:
        if bar is not None:
            bar.close()
    return results


def run_batch(func, common, batch):
    """Run a batch of tasks in one worker call: ``[(key, func(common, payload))]``."""
    return [(key, func(common, payload)) for key, payload in batch]


def _batches(todo, n):
    size = max(1, min(64, math.ceil(len(todo) / max(1, 8 * n))))
    return [todo[i:i + size] for i in range(0, len(todo), size)]


# Most local worker processes per core: the tasks are CPU-bound, so more only wait for
# a core while each holds its own interpreter and libraries (~100 MB); 100000 started
# one process per batch of a sweep.
PROCESSES_PER_CORE = 4


def checked_workers(workers):
    """``workers`` local processes (default: one per core), or the error naming it."""
    cores = os.cpu_count() or 1
    if workers is None:
        return cores
    if isinstance(workers, bool) or int(workers) != workers or workers < 1:
        raise InputError(f"--workers {workers}: expected a positive number of worker "
                         "processes")
    if workers > PROCESSES_PER_CORE * cores:
        raise InputError(f"--workers {workers}: expected at most {PROCESSES_PER_CORE * cores} "
                         f"({PROCESSES_PER_CORE} per core of this machine: more only wait for "
                         "a core, each holding its own memory)")
    return int(workers)


def _execute(func, common, todo, workers, dask):
    """Yield ``(key, result)`` as tasks finish, from the chosen executor."""
    if not todo:
        return
    if dask is not None:
        yield from _execute_dask(func, common, todo, dask)
        return
    workers = checked_workers(workers)
    if workers == 1:
        for key, payload in todo:
            yield key, func(common, payload)
        return
    import concurrent.futures as cf
    import multiprocessing

    from simulator.workflows.processes import worker_start

    # workers end with this process, however it ends (kill -9 included); one BLAS thread each
    pool = cf.ProcessPoolExecutor(max_workers=workers,
                                  mp_context=multiprocessing.get_context("spawn"),
                                  initializer=worker_start, initargs=(os.getpid(),))
    try:
        futures = [pool.submit(run_batch, func, common, b) for b in _batches(todo, workers)]
        for future in cf.as_completed(futures):
            yield from future.result()
    except cf.process.BrokenProcessPool:
        _stop(pool)
        raise ExecutionError(
            "a worker process died (out of memory, or killed); every finished task is "
            "saved, so rerun the same command to resume, perhaps with fewer --workers"
        ) from None
    except KeyboardInterrupt:  # Ctrl-C or SIGTERM: stop now, not after the current batches
        _stop(pool)
        raise
    except BaseException:  # a task's error (a full disk): let the running batches finish
        pool.shutdown(cancel_futures=True)
        raise
    pool.shutdown()


def _stop(pool):
    """Kill the workers, then shut the executor down (it has no public kill)."""
    for process in list((pool._processes or {}).values()):
        process.kill()
    pool.shutdown(cancel_futures=True)


def _execute_dask(func, common, todo, address):
    from distributed import Client, LocalCluster, as_completed

    if address == "local":
        cluster = LocalCluster(n_workers=os.cpu_count() or 1, threads_per_worker=1,
                               processes=True, dashboard_address=None)
        client = Client(cluster)
    elif address.startswith("tcp://"):
        cluster = None
        try:
            client = Client(address, timeout=20)
        except OSError as exc:
            raise InputError(f"--dask {address}: cannot reach the Dask scheduler ({exc}); "
                             "expected a running scheduler at this address") from None
    else:
        raise InputError(f"--dask {address!r}: expected 'local' or a scheduler address "
                         "like tcp://host:8786")
    try:
        batches = _batches(todo, len(client.scheduler_info().get("workers", {})) or 1)
        futures = [client.submit(run_batch, func, common, b, pure=False) for b in batches]
        for future in as_completed(futures):
            yield from future.result()
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def run_in_memory(func, common, payloads, *, workers=None, dask=None):
    """``[func(common, p) for p in payloads]`` on the chosen executor, in order.

    Nothing is stored: for short batches (a planner's coarse grid) that are
    cheaper to redo than to resume.
    """
    keyed = [(str(i), p) for i, p in enumerate(payloads)]
    done = dict(_execute(func, common, keyed, workers, dask))
    return [done[key] for key, _ in keyed]
