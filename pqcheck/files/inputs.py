"""The one check every input file passes before it is opened: a regular file of bounded size.

Special files never reach a reader: a FIFO (with or without a writer) would block the open or
the read for ever, ``/dev/zero`` and ``/dev/urandom`` never end, a folder is not a file. The
check uses ``os.stat`` only, which never blocks on a FIFO. Capture readers and the TOML
loaders (limit tables, plans, site files) call :func:`require_regular_file`.
"""

from __future__ import annotations

import os
import stat

from ..errors import InputError

__all__ = ["require_regular_file", "MAX_INPUT_BYTES"]

MAX_INPUT_BYTES = 64 << 30
"""Largest input file accepted (64 GiB): far beyond any capture a recorder writes, small
enough that hashing it ends."""


def require_regular_file(path, *, what: str = "file", max_bytes: int = MAX_INPUT_BYTES,
                         error=InputError) -> int:
    """Refuse anything but an existing regular file of at most ``max_bytes``.

    Parameters
    ----------
    path : str or Path
        The input (a symbolic link is followed).
    what : str
        What the file is, for the message (``"capture"``, ``"limit table"``, ...).
    max_bytes : int
        Largest size accepted. [bytes]
    error : type
        The :class:`~pqcheck.errors.InputError` subclass to raise.

    Returns
    -------
    int
        The file's size. [bytes]

    Raises
    ------
    InputError (or ``error``)
        Missing, a folder, a pipe, a device, a socket, unreadable or too large.
    """
    p = os.fspath(path)
    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise error("file not found; check the path", path=p) from None
    except OSError as exc:
        raise error(f"cannot read the {what}: {exc.strerror or exc}", path=p) from None
    mode = st.st_mode
    if stat.S_ISDIR(mode):
        raise error(f"is a folder, not a {what} file; give the file inside it", path=p)
    if stat.S_ISFIFO(mode):
        raise error(f"is a pipe (FIFO or piped standard input), not a regular file; save the "
                    f"{what} to a file first and give that file", path=p)
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        raise error(f"is a device, not a regular file; give a saved {what} file", path=p)
    if stat.S_ISSOCK(mode):
        raise error(f"is a socket, not a regular file; give a saved {what} file", path=p)
    if not stat.S_ISREG(mode):
        raise error(f"is not a regular file; give a saved {what} file", path=p)
    if st.st_size > max_bytes:
        raise error(f"the {what} is {st.st_size / 2**30:.1f} GiB, more than the "
                    f"{max_bytes / 2**30:.0f} GiB pqcheck reads; split it", path=p)
    return int(st.st_size)
