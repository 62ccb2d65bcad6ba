"""Output files that are either complete or absent, and folders used by one run at a time.

Every file noisechain writes (text, HDF5 through h5py, NetCDF through
xarray, figures) goes through :class:`AtomicFile`: the content is written
under a temporary name in the target folder, closed, flushed to disk, and
renamed onto the target, so a reader never sees a half-written file.

- The temporary name is ``.NAME.HOST-PID-TOKEN.part``: unique per process
  and per file, so two runs never share one. A ``.part`` file of this host
  whose process is gone (a killed run) is removed the next time noisechain
  writes into that folder.
- The temporary file is created with mode 0o666 like any new file, so the
  operating system applies the user's umask; nothing reads or changes the
  process-wide umask.
- An existing target is replaced only when the caller says so
  (``overwrite=True``, the command line's ``--force``); otherwise the rename
  refuses atomically (a hard link that fails if the name is taken).
- A failed write (disk full, file-size limit, permissions changed mid-run)
  removes the temporary file and raises :class:`OutputError` naming the file.

:class:`simulator.io.folders.FolderLock` gives one process at a time a
results folder (sweeps, trials, runs); see there.
"""

import atexit
import errno
import functools
import os
import re
import secrets
import socket
import sys
from pathlib import Path

from simulator.errors import InputError

HOST = re.sub(r"\W", "_", socket.gethostname().split(".")[0], flags=re.ASCII) or "host"
_PART = re.compile(r"^\.(?P<name>.+)\.(?P<host>\w+)-(?P<pid>\d+)-[0-9a-f]{8}\.part$",
                   re.ASCII)
_swept_folders = set()
_pending = set()  # this process's temporary files not yet committed or discarded


class OutputError(InputError):
    """An output that cannot be written: exists, read-only, disk full, folder in use."""


def process_alive(pid):
    """True if process ``pid`` exists on this host (one of another user counts)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_parts(folder, *, rescan=False):
    """Delete the temporary files that dead processes of this host left in ``folder``.

    Only names of the form written by :class:`AtomicFile` are touched, and
    only when their process is gone; a live run's files are left alone.
    Each folder is scanned once per process unless ``rescan`` is given.
    """
    folder = Path(folder)
    if folder in _swept_folders and not rescan:
        return
    _swept_folders.add(folder)
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return  # not there yet, or not listable: nothing of ours to clean
    for entry in entries:
        match = _PART.match(entry.name)
        if match and match["host"] == HOST and not process_alive(int(match["pid"])):
            try:
                os.unlink(entry.path)
            except OSError:
                pass  # a read-only folder or another cleaner was first: harmless


def refuse_existing(path, *, overwrite, option="output"):
    """Raise :class:`OutputError` if ``path`` exists and may not be replaced.

    Parameters
    ----------
    path : path
    overwrite : bool
        The caller owns the file or the user passed ``--force``. A read-only
        file is refused even then.
    option : str
        Words for the message, e.g. ``"--out"``.
    """
    path = Path(path)
    if not path.exists():
        return
    if path.is_dir():
        raise OutputError(f"{option} {str(path)!r} is a folder; expected a file name")
    if not overwrite:
        raise OutputError(f"{option} {str(path)!r} already exists; pass --force to "
                          "replace it, or choose another file name")
    # no write bit for anyone counts too: a superuser may write anything
    if not os.access(path, os.W_OK) or not path.stat().st_mode & 0o222:
        raise OutputError(f"{option} {str(path)!r} already exists and is read-only; it is "
                          "not replaced (make it writable first if you mean to)")


SYNC_FILE_RANGE_WRITE = 2  # <linux/fs.h>: start write-out of dirty pages, do not wait


@functools.cache
def _sync_file_range():
    """Linux's sync_file_range from the C library, or None where there is none."""
    if not sys.platform.startswith("linux"):
        return None
    import ctypes

    try:
        function = ctypes.CDLL(None, use_errno=True).sync_file_range
    except (OSError, AttributeError):
        return None
    function.argtypes = (ctypes.c_int, ctypes.c_int64, ctypes.c_int64, ctypes.c_uint)
    function.restype = ctypes.c_int
    return function


class AtomicFile:
    """A temporary file that becomes ``path`` on :meth:`commit`, or vanishes on :meth:`discard`.

    Use as a context manager (commit on a clean exit, discard on an
    exception) or call the two methods (streaming writers). Write to
    :attr:`tmp` with any library; close it before committing.

    Parameters
    ----------
    path : path
        The final file; its folder must exist.
    overwrite : bool
        Replace an existing file at ``path`` (else :class:`OutputError`).
    durable : bool
        Flush the content to the disk before the rename (survives a power
        cut); small files that are recomputed if damaged may skip it.
    """

    def __init__(self, path, *, overwrite=False, durable=True):
        self.path, self.overwrite, self.durable = Path(path), overwrite, durable
        refuse_existing(self.path, overwrite=overwrite)
        remove_stale_parts(self.path.parent)
        self.tmp = self.path.with_name(
            f".{self.path.name}.{HOST}-{os.getpid()}-{secrets.token_hex(4)}.part")
        _pending.add(self.tmp)  # before it exists: a stop request may come at any bytecode
        try:
            os.close(os.open(self.tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))
        except OSError as exc:
            _pending.discard(self.tmp)
            raise _output_error(self.path, exc) from None
        self._reader, self._written_back = None, 0

    def start_write_back(self):
        """Start writing the temporary file's new content to the disk, without waiting.

        A durable file otherwise reaches the disk at :meth:`commit`, whose
        flush then waits for all of it (0.11 s for 160 MB on the development
        machine). Called as a long file grows, the disk writes it while the
        work that fills it goes on, and the final flush waits for the last
        part only. Linux's sync_file_range(2) with SYNC_FILE_RANGE_WRITE
        starts the write-back of the new range and returns; elsewhere, or for
        a file that is not durable, nothing happens. The content is the same
        either way, and the pages stay in the cache for a reader.
        """
        start_range = _sync_file_range()
        if not self.durable or start_range is None:
            return
        try:
            if self._reader is None:
                self._reader = os.open(self.tmp, os.O_RDONLY)
            size = os.fstat(self._reader).st_size
            if size > self._written_back:
                start_range(self._reader, self._written_back, size - self._written_back,
                            SYNC_FILE_RANGE_WRITE)
                self._written_back = size
        except OSError:  # advice only: the final flush still writes everything
            pass

    def _close_reader(self):
        reader, self._reader = self._reader, None
        if reader is not None:
            os.close(reader)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            self.commit()
            return False
        self.discard()
        if isinstance(exc, OSError) and not isinstance(exc, OutputError):
            raise _output_error(self.path, exc) from None
        return False

    def commit(self):
        """Flush (if durable) and rename the finished temporary file onto the target."""
        self._close_reader()
        try:
            if self.durable:
                fd = os.open(self.tmp, os.O_RDONLY)
                try:
                    os.fsync(fd)
                finally:
                    os.close(fd)
            self._publish()
        except BaseException as exc:
            self.discard()
            if isinstance(exc, OSError) and not isinstance(exc, OutputError):
                raise _output_error(self.path, exc) from None
            raise

    def discard(self):
        """Remove the temporary file (nothing appears at the target).

        If the folder no longer lets us (its permissions changed mid-run),
        the file stays and a later run removes it (:func:`remove_stale_parts`).
        """
        self._close_reader()
        try:
            self.tmp.unlink(missing_ok=True)
        except OSError:
            pass
        _pending.discard(self.tmp)

    def _publish(self):
        if self.overwrite:
            refuse_existing(self.path, overwrite=True)
            os.replace(self.tmp, self.path)
            _pending.discard(self.tmp)
            return
        try:
            os.link(self.tmp, self.path)  # fails if the name was taken meanwhile
        except FileExistsError:
            refuse_existing(self.path, overwrite=False)
            raise
        except OSError as exc:
            if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EMLINK):
                raise
            refuse_existing(self.path, overwrite=False)  # no hard links on this file system
            os.replace(self.tmp, self.path)
            _pending.discard(self.tmp)
            return
        self.tmp.unlink()
        _pending.discard(self.tmp)


def discard_abandoned(folders=None):
    """Remove this process's temporary files that were neither committed nor discarded.

    A stop request (Ctrl-C, SIGTERM) raises at any bytecode: one that comes
    after a temporary file was created but before its ``with`` block began
    leaves the file behind, and :func:`remove_stale_parts` keeps it because
    its process is alive. :class:`FolderLock` calls this for its folder when
    the run that held it ends, and the interpreter's exit for all of them.

    Parameters
    ----------
    folders : iterable of path, optional
        Only temporary files directly in these folders (default: all).
    """
    folders = None if folders is None else {Path(f) for f in folders}
    for tmp in list(_pending):
        if folders is None or tmp.parent in folders:
            try:
                tmp.unlink(missing_ok=True)
            except OSError:
                pass  # a later run removes it once this process is gone
            _pending.discard(tmp)


atexit.register(discard_abandoned)


def open_hdf5(path, what, written_by):
    """``path`` opened read-only with h5py, or :class:`InputError` if it is missing or not
    HDF5; ``what`` names the file ("record file") and ``written_by`` its writer."""
    import h5py

    path = Path(path)
    if path.is_dir():
        raise InputError(f"{what} {str(path)!r} is a folder; expected an HDF5 file written "
                         f"by {written_by}")
    if not path.is_file():
        raise InputError(f"{what} {str(path)!r} not found; expected an HDF5 file written by "
                         f"{written_by}")
    try:
        return h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{str(path)!r} is not a readable HDF5 file ({exc})") from None


# The reader of each noisechain file format, named when a file reaches another one.
READERS = {"noisechain-record": "simulator.io.recordfile.load_record",
           "noisechain-averaged-spectrum": "simulator.io.averagedfile.load_averaged_spectrum",
           "noisechain-sweep": "xarray.load_dataset",
           "noisechain-trial": "xarray.load_dataset"}


def require_format(attrs, path, expected, incomplete):
    """Refuse an opened file whose ``format`` attribute is not ``expected``.

    A file of another noisechain format (an averaged spectrum given where a record
    belongs, a sweep's NetCDF) is named as such; a file with no format at all gets
    ``incomplete``, the reader's own words for an interrupted or foreign file.
    """
    found = attrs.get("format")
    if isinstance(found, bytes):
        found = found.decode("utf-8", "replace")
    if found == expected:
        return
    if isinstance(found, str) and found.startswith("noisechain-"):
        reader = READERS.get(found, "the reader of that format")
        raise InputError(f"{str(path)!r} holds format {found!r}, not {expected!r}; expected "
                         f"a {expected} file (read this one with {reader})")
    raise InputError(f"{str(path)!r} {incomplete}")


def _output_error(path, exc):
    # HDF5 puts the system's error number inside its message ("errno = 28, ...")
    number = exc.errno or next(map(int, re.findall(r"errno = (\d+)", str(exc))), None)
    reason = os.strerror(number) if number else str(exc)
    return OutputError(f"cannot write {str(path)!r}: {reason}; nothing was written there "
                       "(check the free space, the file-size limit and the folder's "
                       "permissions)")


def atomic_write_bytes(path, data, *, overwrite=True, durable=True):
    """Write ``data`` (bytes or a memoryview) to ``path`` through :class:`AtomicFile`.

    Replaces by default: its callers write the manifests, results, reports
    and datasets of folders they hold (see :class:`FolderLock`).
    """
    with AtomicFile(path, overwrite=overwrite, durable=durable) as out:
        out.tmp.write_bytes(data)
    return Path(path)


def atomic_write_text(path, text, *, overwrite=True, durable=True):
    """Write ``text`` (UTF-8) to ``path``, as :func:`atomic_write_bytes`."""
    return atomic_write_bytes(path, text.encode("utf-8"), overwrite=overwrite,
                              durable=durable)


def write_netcdf(dataset, path, *, overwrite=True):
    """Write an :class:`xarray.Dataset` as NetCDF-4 to ``path``, atomically.

    xarray builds the file in memory (h5netcdf engine) and it is written
    with :func:`atomic_write_bytes`. HDF5 writing straight to a disk that
    fills up cannot close the file afterwards and crashes the interpreter at
    exit; in memory it cannot fail that way, and a full disk is then an
    ordinary write error. Sweep, trial and spectrum datasets are small.
    """
    return atomic_write_bytes(path, dataset.to_netcdf(engine="h5netcdf"),
                              overwrite=overwrite)
