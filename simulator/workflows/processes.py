"""Child processes: workers that end with their parent, and isolated calls of user code.

Two guarantees for the work noisechain hands to other processes:

- :func:`end_with_parent`: a worker process is killed by the operating
  system the moment its parent ends, however the parent ends (``kill -9``
  included). On Linux this is ``prctl(PR_SET_PDEATHSIG, SIGKILL)``; on other
  systems a daemon thread polls the parent's id once a second.
- :func:`call_isolated`: a function (the user's estimator) runs in a forked
  child with a time limit. Whatever it does (raise, call ``sys.exit`` or
  ``os._exit``, hang, crash the interpreter, exhaust memory) the caller gets
  either its JSON-able result or a sentence saying what went wrong. The
  result comes back as JSON text through a pipe; the child inherits the data
  it needs from the fork, so nothing is pickled.
"""

import ctypes
import os
import select
import signal
import sys
import threading
import time

from simulator.io import jsontext

_PR_SET_PDEATHSIG = 1  # linux/prctl.h


def end_with_parent(parent_pid):
    """Make this process end when process ``parent_pid`` (its parent) ends."""
    if sys.platform.startswith("linux"):
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(_PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
    else:
        threading.Thread(target=_watch_parent, args=(parent_pid,), daemon=True).start()
    if os.getppid() != parent_pid:  # the parent ended before the request took hold
        os._exit(1)


def worker_start(parent_pid):
    """Start a pool worker: end with the parent, and run BLAS on one thread.

    N workers on N cores each with N BLAS threads oversubscribe the machine;
    OpenBLAS threads then spin waiting for cores (a fit in a trial ran 10 to
    20 times slower on a busy 2-core machine, tests/benchmarks/bench_scaling.py).
    One thread per worker is what Dask's workers use too (its nanny sets
    OMP_NUM_THREADS and friends to 1).
    """
    from threadpoolctl import threadpool_limits

    end_with_parent(parent_pid)
    threadpool_limits(limits=1)


def _watch_parent(parent_pid):
    while os.getppid() == parent_pid:
        time.sleep(1.0)
    os._exit(1)


def call_isolated(func, timeout_s):
    """Run ``func()`` in a forked child; return ``(result, failure)``.

    Parameters
    ----------
    func : callable
        Called with no argument in the child; returns JSON-able data
        (non-finite floats allowed).
    timeout_s : float
        Seconds before the child is killed.

    Returns
    -------
    result : object or None
        What ``func`` returned, or None if it failed.
    failure : str
        Empty on success, else what happened, in words.
    """
    parent = os.getpid()
    for stream in (sys.stdout, sys.stderr):
        stream.flush()  # else the child would repeat what is still buffered
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:
        os.close(read_end)
        _child(func, write_end, parent)
    os.close(write_end)
    deadline = time.monotonic() + timeout_s
    text, timed_out = "", True  # what an interruption of the wait leaves
    try:
        text, timed_out = _read_until(read_end, deadline)
    finally:
        os.close(read_end)
        # after the end of the pipe the child is exiting: give it until the deadline
        status = _reap(pid, time.monotonic() if timed_out else deadline)
    if timed_out:
        return None, (f"no result within {timeout_s:g} s (--timeout-s); the estimator's "
                      "process was stopped")
    if text:
        try:
            reply = jsontext.loads(text)
            return reply.get("result"), str(reply.get("failure", ""))
        except (ValueError, AttributeError):
            return None, "the estimator's process sent back something that is not a result"
    if os.WIFSIGNALED(status):
        name = signal.Signals(os.WTERMSIG(status)).name
        return None, (f"the estimator's process was killed by {name} (out of memory, a "
                      "crash in compiled code, or killed from outside)")
    return None, (f"the estimator's process ended with exit status "
                  f"{os.waitstatus_to_exitcode(status)} without returning a result "
                  "(os._exit in the estimator?)")


def _child(func, write_end, parent):
    """Body of the forked child: never returns into the caller's code."""
    status = 1
    try:
        signal.signal(signal.SIGINT, signal.SIG_DFL)  # stop with the parent's run
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        end_with_parent(parent)
        try:
            reply = {"result": func(), "failure": ""}
        except SystemExit as exc:
            reply = {"result": None, "failure": f"the estimator called sys.exit({exc.code!r})"}
        except BaseException as exc:  # noqa: BLE001 - the user's code: report, never crash
            reply = {"result": None, "failure": f"{type(exc).__name__}: {exc}"}
        data = jsontext.dumps(reply, keep_non_finite=True).encode("utf-8")
        while data:
            data = data[os.write(write_end, data):]
        status = 0
    finally:
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except (OSError, ValueError):
                pass  # a closed stream must not turn a result into a failure
        os._exit(status)


def _read_until(fd, deadline):
    """Everything from ``fd`` until end of file, or ``(partial, True)`` at the deadline."""
    chunks = []
    while True:
        left = deadline - time.monotonic()
        if left <= 0:
            return "", True
        ready, _, _ = select.select([fd], [], [], left)
        if not ready:
            return "", True
        chunk = os.read(fd, 1 << 16)
        if not chunk:
            return b"".join(chunks).decode("utf-8", "replace"), False
        chunks.append(chunk)


def _reap(pid, deadline):
    """Wait status of child ``pid``, killing it once ``deadline`` has passed."""
    while True:
        done, status = os.waitpid(pid, os.WNOHANG)
        if done:
            return status
        if time.monotonic() >= deadline:
            os.kill(pid, signal.SIGKILL)
            return os.waitpid(pid, 0)[1]
        time.sleep(0.005)
