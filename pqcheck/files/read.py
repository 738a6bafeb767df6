"""Bounded reads of the small files users write: limit tables, test plans, site files and the
results JSON of a site unit.

These files are read whole. A device (``/dev/zero`` never ends), a FIFO (opening one without a
writer blocks for ever) or a huge file named by mistake must be refused before reading, with a
clear error, not read until memory runs out. :func:`read_bounded` checks that the path is a
regular file (:func:`pqcheck.files.inputs.require_regular_file`, the check every input
passes) of at most ``max_bytes``, opens it without blocking, checks the opened file again (a
file swapped in between is caught too) and reads at most that much.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from ..errors import InputError

__all__ = ["read_bounded", "MAX_DOCUMENT_BYTES", "describe_mode"]

MAX_DOCUMENT_BYTES = 16 << 20
"""Largest limit table, plan or site file read [bytes] (the bundled tables are under 20 kB)."""


def describe_mode(mode: int) -> str:
    """``"a device"``, ``"a FIFO (named pipe)"``, ... for a file that is not a regular file."""
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def read_bounded(path, *, what: str, max_bytes: int = MAX_DOCUMENT_BYTES,
                 error=InputError) -> bytes:
    """Read a small regular file whole.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    what : str
        What the file is, for messages (``"limit table"``, ``"test plan"``).
    max_bytes : int
        Largest size accepted. [bytes]
    error : type
        :class:`~pqcheck.errors.InputError` subclass raised.

    Returns
    -------
    bytes

    Raises
    ------
    InputError (``error``)
        Missing, a folder, not a regular file (device, FIFO, socket), larger than
        ``max_bytes``, or unreadable; the message names the file.
    """
    from .inputs import require_regular_file

    p = Path(path)
    if not os.path.exists(p):
        raise error(f"{what} not found", path=str(p))
    if p.is_dir():
        raise error(f"is a folder, not a {what}", path=str(p))
    size = require_regular_file(p, what=what, error=error)  # devices, FIFOs, sockets
    if size > max_bytes:
        raise error(_too_large(what, size, max_bytes), path=str(p))
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(p, flags)
    except OSError as exc:
        raise error(f"cannot read the {what}: {exc.strerror or exc}", path=str(p)) from None
    try:
        _check(os.fstat(fd), p, what, max_bytes, error)  # the file actually opened
        chunks, n = [], 0
        while n <= max_bytes:
            block = os.read(fd, min(1 << 20, max_bytes + 1 - n))
            if not block:
                break
            chunks.append(block)
            n += len(block)
    except OSError as exc:
        raise error(f"cannot read the {what}: {exc.strerror or exc}", path=str(p)) from None
    finally:
        os.close(fd)
    if n > max_bytes:  # grew while being read
        raise error(_too_large(what, n, max_bytes), path=str(p))
    return b"".join(chunks)


def _too_large(what: str, size: int, max_bytes: int) -> str:
    return (f"too large for a {what} ({size} bytes; at most {max_bytes}); is this the right "
            "file?")


def _check(st, p: Path, what: str, max_bytes: int, error) -> None:
    if stat.S_ISDIR(st.st_mode):
        raise error(f"is a folder, not a {what}", path=str(p))
    if not stat.S_ISREG(st.st_mode):
        raise error(f"is {describe_mode(st.st_mode)}, not a regular file; a {what} must be a "
                    "regular file", path=str(p))
    if st.st_size > max_bytes:
        raise error(_too_large(what, st.st_size, max_bytes), path=str(p))
