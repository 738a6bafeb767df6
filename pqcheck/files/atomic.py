"""Atomic file writing that never overwrites by accident.

Every command that writes a file goes through :func:`atomic_open` (or :func:`write_atomic`):
the content goes to a temporary file in the target's folder, is flushed to disk, and only then
takes the target's name with one rename. An interrupted or failed run therefore leaves either
the previous file or the complete new one, never a half-written file. An existing target is
replaced only when ``force`` is true; otherwise :class:`~pqcheck.errors.ReportError` is raised
before anything is written (the command line turns it into exit code 2).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import ReportError

__all__ = ["check_target", "atomic_open", "write_atomic"]


def check_target(path, *, force: bool = False, option: str | None = None) -> Path:
    """Check that ``path`` can be written, before any work is done.

    Parameters
    ----------
    path : str or os.PathLike
        File to be written.
    force : bool
        Allow replacing an existing file.
    option : str or None
        Command-line option that named the file (used in the message), e.g. ``"-o"``.

    Returns
    -------
    pathlib.Path
        The path.

    Raises
    ------
    ReportError
        The file exists and ``force`` is false, the path is a folder, or its folder is missing.
    """
    p = Path(path)
    named = f"{option} {p}" if option else str(p)
    if p.is_dir():
        raise ReportError(f"{named}: is a folder; give a file name")
    if p.exists() and not force:
        raise ReportError(f"{named}: file exists; give `force` to replace it (left unchanged)")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise ReportError(f"{named}: folder {parent} does not exist; create it first")
    return p


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


@contextlib.contextmanager
def atomic_open(path, mode: str = "wb", *, force: bool = False, option: str | None = None,
                encoding: str | None = None):
    """Open a temporary file that becomes ``path`` when the block ends without an exception.

    Parameters
    ----------
    path : str or os.PathLike
        Target file.
    mode : {"wb", "w"}
        Binary or text.
    force : bool
        Replace an existing target.
    option : str or None
        Option that named the file, for messages.
    encoding : str or None
        Text encoding for mode ``"w"`` (default UTF-8).

    Yields
    ------
    file object
        Write the whole content to it.

    Raises
    ------
    ReportError
        As :func:`check_target`, or when the target appears while writing and ``force`` is
        false, or the operating system refuses the write (disk full, permissions).

    Notes
    -----
    Without ``force`` the finished temporary file is *linked* to the target name, which fails
    if the name exists at that moment, so a file created concurrently is never replaced. With
    ``force`` it is renamed over the target (``os.replace``, atomic on POSIX and Windows).
    """
    if mode not in ("wb", "w"):
        raise ValueError(f"mode must be 'wb' or 'w', got {mode!r}")
    target = check_target(path, force=force, option=option)
    parent = target.parent if str(target.parent) else Path(".")
    named = f"{option} {target}" if option else str(target)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=parent)
    except OSError as exc:
        raise ReportError(f"{named}: cannot write in {parent}: {exc.strerror or exc}") from exc
    try:
        if mode == "w":
            fh = os.fdopen(fd, "w", encoding=encoding or "utf-8", newline="")
        else:
            fh = os.fdopen(fd, "wb")
        with fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_umask())
        if force:
            os.replace(tmp, target)
        else:
            try:
                os.link(tmp, target)
            except FileExistsError:
                raise ReportError(
                    f"{named}: file appeared while writing; give `force` to replace it "
                    "(left unchanged)") from None
            except OSError:  # file system without hard links
                if target.exists():
                    raise ReportError(f"{named}: file exists; give `force` to replace it "
                                      "(left unchanged)") from None
                os.replace(tmp, target)
    except ReportError:
        raise
    except OSError as exc:
        raise ReportError(f"{named}: could not be written: {exc.strerror or exc}") from exc
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)


def write_atomic(path, data, *, force: bool = False, option: str | None = None) -> Path:
    """Write ``data`` (bytes or str, UTF-8) to ``path`` atomically; see :func:`atomic_open`.

    Returns
    -------
    pathlib.Path
        The written path.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = write_atomic(d / "a.txt", "one")
    >>> _ = write_atomic(d / "a.txt", "two", force=True)
    >>> (d / "a.txt").read_text()
    'two'
    """
    payload = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    with atomic_open(path, "wb", force=force, option=option) as fh:
        fh.write(payload)
    return Path(path)
