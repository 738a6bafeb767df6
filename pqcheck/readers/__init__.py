"""Readers: the only code that opens capture files.

:func:`load_capture` picks a reader by the file's name and content and returns a
:class:`~pqcheck.capture.Capture` with provenance (path, SHA-256 of the bytes, reader settings).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from ..capture import Capture, assign_roles
from ..errors import CaptureFormatError

__all__ = ["load_capture", "file_sha256"]

_TEXT_SUFFIXES = {".csv", ".txt", ".tsv", ".dat", ".asc", ".gz"}


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes, hex. Reads in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def load_capture(
    path,
    *,
    sample_rate_hz: float | None = None,
    current=None,
    voltage=None,
    time_column: str | None = None,
) -> Capture:
    """Read a capture file.

    Parameters
    ----------
    path : str or Path
        Delimited text (``.csv``, ``.txt``, ``.tsv``) or COMTRADE (``.cfg`` with its ``.dat``).
    sample_rate_hz : float or None
        Sample rate for files without a time column or declared interval. [Hz]
    current, voltage : sequence of str or None
        Column names in phase order a, b, c; when both are None the roles guessed from
        names and units are used.
    time_column : str or None
        Name of the time column when it is not recognisable.

    Returns
    -------
    Capture

    Raises
    ------
    CaptureFormatError
        Missing, unreadable or malformed file (the message names the file and line).
    """
    p = Path(path)
    if not p.exists():
        raise CaptureFormatError("file not found; check the path", path=str(path))
    if p.is_dir():
        raise CaptureFormatError("is a folder, not a capture file", path=str(path))
    if sample_rate_hz is not None and not (sample_rate_hz > 0):
        raise CaptureFormatError(f"sample rate must be positive, got {sample_rate_hz!r}",
                                 field="--sample-rate")
    suffix = p.suffix.lower()
    try:
        sha = file_sha256(p)
    except OSError as exc:
        raise CaptureFormatError(f"cannot read the file: {exc.strerror}", path=str(path)) from None
    if suffix == ".cfg" or (suffix == ".dat" and _has_sibling(p, ".cfg")):
        from .comtrade import read_comtrade

        cap = read_comtrade(p)
    else:
        from .delimited import read_delimited

        cap = read_delimited(p, sample_rate_hz=sample_rate_hz, time_column=time_column, sha256=sha)
    return assign_roles(cap, current=current, voltage=voltage)


def _has_sibling(p: Path, suffix: str) -> bool:
    for q in p.parent.glob(p.stem + ".*"):
        if q.suffix.lower() == suffix:
            return True
    return False
