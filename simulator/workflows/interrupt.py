"""Stop requests (Ctrl-C, SIGTERM) that long loops honour at safe points.

Python delivers a KeyboardInterrupt at the next bytecode, but one raised
while a library runs a callback of its own (a weak-reference finaliser inside
the HDF5 writer, for example) is printed and swallowed, and the work would
go on. The command line therefore installs :func:`request` as the handler:
it records the request and raises as usual, and loops that may hit that case
call :func:`check` between chunks, so the request always takes effect and
the writers' clean-up (removing a partial file) runs. The signal is
remembered so that the program exits with the conventional status
128 + signal number (130 for SIGINT, 143 for SIGTERM).
"""

import signal
import threading

_requested = threading.Event()
_signal = [signal.SIGINT]  # the last stop signal received (Ctrl-C unless told otherwise)


def request(signum=None, frame=None):
    """Signal handler: remember the stop request, then interrupt as Python would."""
    if signum is not None:
        _signal[0] = signum
    _requested.set()
    raise KeyboardInterrupt(f"stopped by signal {signum}")


def check():
    """Raise KeyboardInterrupt if a stop was requested (call between chunks of work)."""
    if _requested.is_set():
        raise KeyboardInterrupt("stopped on request")


def requested():
    """True once a stop was requested (whatever became of its KeyboardInterrupt)."""
    return _requested.is_set()


def exit_status():
    """Exit status after a stop: 128 + the signal number."""
    return 128 + int(_signal[0])


def install():
    """Make SIGINT and SIGTERM stop the program cleanly (command line only).

    SIGXFSZ (a file-size limit reached) is ignored, so the write that hits
    the limit fails with an error that is reported, instead of the signal
    killing the process and leaving a partial file.
    """
    signal.signal(signal.SIGINT, request)
    signal.signal(signal.SIGTERM, request)
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
