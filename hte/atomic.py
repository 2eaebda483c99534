"""Atomic file output: write to a temporary file beside the target, then rename it onto the target.

A reader never sees a half-written file, and a failure leaves the old file (or none) in place.
"""

from __future__ import annotations

import os
import tempfile


def write_atomically(path, write) -> None:
    """Call ``write(temporary_path)``, then rename the temporary file onto `path`; remove it on failure.

    The temporary file sits in the target's folder (so the rename is atomic) and keeps the target's suffix
    (so writers that choose a format by suffix, such as matplotlib, behave the same); the result gets the
    usual permissions of a new file (0666 minus the umask).
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    handle, temporary = tempfile.mkstemp(dir=folder, prefix=".tmp-", suffix=os.path.splitext(path)[1])
    os.close(handle)
    try:
        write(temporary)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(temporary, 0o666 & ~umask)
        os.replace(temporary, path)
    finally:
        if os.path.exists(temporary):
            os.remove(temporary)


def write_text_atomically(path, write_stream) -> None:
    """Like :func:`write_atomically` for text: ``write_stream(stream)`` writes into an open text file."""

    def write(temporary):
        with open(temporary, "w", newline="") as stream:
            write_stream(stream)

    write_atomically(path, write)
