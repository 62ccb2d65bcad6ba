"""Stop requests (Ctrl-C, SIGTERM) that long loops honour at safe points.

Python delivers a KeyboardInterrupt at the next bytecode, but one raised
while a library runs a callback of its own (a weak-reference finaliser inside
the HDF5 writer, for example) is printed and swallowed, and the work would
go on. The command line therefore installs :func:`request` as the handler:
it records the request and raises as usual, and loops that may hit that case
call :func:`check` between chunks, so the request always takes effect and
the writers' clean-up (removing a partial file) runs.
"""

import signal
import threading

_requested = threading.Event()


def request(signum=None, frame=None):
    """Signal handler: remember the stop request, then interrupt as Python would."""
    _requested.set()
    raise KeyboardInterrupt(f"stopped by signal {signum}")


def check():
    """Raise KeyboardInterrupt if a stop was requested (call between chunks of work)."""
    if _requested.is_set():
        raise KeyboardInterrupt("stopped on request")


def install():
    """Make SIGINT and SIGTERM stop the program cleanly (command line only)."""
    signal.signal(signal.SIGINT, request)
    signal.signal(signal.SIGTERM, request)
