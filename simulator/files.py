"""File writing that never leaves a half-written file that looks complete."""

import os
import tempfile
from pathlib import Path


def atomic_write_text(path, text, *, durable=True):
    """Write ``text`` to ``path`` through a temporary file and an atomic rename.

    A killed process leaves either the old file or the new one, never a
    partial one. ``durable`` also flushes the data to disk before the rename
    (survives a power cut); small, recomputable files may skip that cost.
    """
    path = Path(path)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".part")
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # mkstemp's 0600 would hide results from others
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(text)
            if durable:
                handle.flush()
                os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask
