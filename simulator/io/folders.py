"""Results folders used by one noisechain run at a time (:class:`FolderLock`).

Sweeps, trials and runs write many files into one folder and resume from
what an earlier run left; two runs in one folder at once would mix their
results. The lock, and the removal of what writes stopped mid-way left
behind, live here; the files themselves are written by
:mod:`simulator.io.files`.
"""

import datetime
import fcntl
import json
import os
import socket
from pathlib import Path

from simulator.io.files import OutputError, discard_abandoned, remove_stale_parts


class FolderLock:
    """Exclusive use of a results folder by one process, for the ``with`` block.

    The lock is an advisory ``flock`` on ``FOLDER/.noisechain.lock``, which
    holds the process id, host and start time of the holder for the message
    another run prints when it is refused. The operating system releases the
    lock when its process ends, however it ends, so a lock left by a killed
    run is simply taken over. Entering and leaving remove the stale temporary
    files of dead processes from the folder and its first-level subfolders.

    Parameters
    ----------
    folder : path
        Must exist.
    what : str
        Words for the message, e.g. ``"sweep"``.
    """

    NAME = ".noisechain.lock"

    def __init__(self, folder, what):
        self.folder, self.what, self.fd = Path(folder), what, None

    def __enter__(self):
        path = self.folder / self.NAME
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = os.read(fd, 4096).decode("utf-8", "replace")
            os.close(fd)
            raise OutputError(
                f"{str(self.folder)!r} is in use by another noisechain run ({_holder(holder)})"
                f"; wait for it to finish or choose another --out folder (lock file "
                f"{path})") from None
        self.fd = fd
        since = datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")
        os.ftruncate(fd, 0)
        os.pwrite(fd, json.dumps({"pid": os.getpid(), "host": socket.gethostname(),
                                  "since": since, "what": self.what}).encode(), 0)
        self._clean()
        return self

    def __exit__(self, exc_type, exc, tb):
        self._clean(own=True)  # what workers, or this process, stopped mid-write left
        os.ftruncate(self.fd, 0)
        os.close(self.fd)  # releases the lock
        self.fd = None
        return False


    def _clean(self, own=False):
        remove_stale_parts(self.folder, rescan=True)
        try:
            subfolders = [sub for sub in self.folder.iterdir() if sub.is_dir()]
        except OSError:
            subfolders = []  # the folder went away mid-run: the error that follows says so
        for sub in subfolders:
            remove_stale_parts(sub, rescan=True)
        if own:  # the run is over: none of its writes in here is still going on
            discard_abandoned([self.folder, *subfolders])


def _holder(text):
    try:
        info = json.loads(text)
        return (f"{info['what']} of process {info['pid']} on host {info['host']}, started "
                f"{info['since']}")
    except (ValueError, KeyError, TypeError):
        return "a process that is just starting"
