"""Readers: the only code that opens capture files.

:func:`load_capture` picks a reader by the file's name and content and returns a
:class:`~pqcheck.capture.Capture` with provenance (path, SHA-256 of the bytes, reader settings).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from ..capture import Capture, assign_roles
from ..errors import CaptureFormatError

__all__ = ["load_capture", "open_capture", "file_sha256", "capture_sha256", "capture_files",
           "STREAM_OVER_BYTES"]

def file_sha256(path) -> str:
    """SHA-256 of a file's bytes, hex. Reads in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def capture_files(path) -> list:
    """The files a capture is read from, in hashing order: a COMTRADE record's .cfg and .dat,
    a ``.npy`` array and its side-car ``.json``, else the file itself.

    Raises
    ------
    CaptureFormatError
        The other file of a COMTRADE pair is missing.
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix == ".cfg" or (suffix == ".dat" and _has_sibling(p, ".cfg")):
        from .comtrade import _pair  # the reader's own pairing rule

        return list(_pair(p))
    if suffix == ".npy" and p.with_suffix(".json").is_file():
        return [p, p.with_suffix(".json")]
    return [p]


def capture_sha256(path) -> str:
    """SHA-256 of a capture as its reader records it in the provenance (hex).

    A COMTRADE record (its ``.cfg`` or ``.dat``): one hash over the .cfg bytes followed by the
    .dat bytes. A ``.npy`` array with a side-car ``.json`` (column names, sample rate): the
    array's bytes followed by the side-car's, so editing either changes the hash. Any other
    file: the hash of its bytes.

    Raises
    ------
    CaptureFormatError
        The file, or the other file of a COMTRADE pair, is missing or cannot be read.
    """
    p = Path(path)
    try:
        parts = capture_files(p)
        h = hashlib.sha256()
        for f in parts:
            with open(f, "rb") as fh:
                for block in iter(lambda fh=fh: fh.read(1 << 20), b""):
                    h.update(block)
        return h.hexdigest()
    except FileNotFoundError:
        raise CaptureFormatError("file not found; check the path", path=str(p)) from None
    except IsADirectoryError:
        raise CaptureFormatError("is a folder, not a capture file", path=str(p)) from None
    except OSError as exc:
        raise CaptureFormatError(f"cannot read the file: {exc.strerror or exc}",
                                 path=str(p)) from None


def load_capture(
    path,
    *,
    sample_rate_hz: float | None = None,
    current=None,
    voltage=None,
    time_column: str | None = None,
) -> Capture:
    """Read a capture file into memory.

    Parameters
    ----------
    path : str or Path
        Delimited text (``.csv``, ``.txt``, ``.tsv``), COMTRADE (``.cfg`` with its ``.dat``),
        NumPy ``.npy`` or Parquet.
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

    See Also
    --------
    open_capture : the same, read block by block for long files, with an optional cache.
    """
    cap = open_capture(path, sample_rate_hz=sample_rate_hz, time_column=time_column,
                       stream_over_bytes=None)
    if not isinstance(cap, Capture):
        cap = cap.load()
    return assign_roles(cap, current=current, voltage=voltage)


STREAM_OVER_BYTES = 16 << 20
"""Text captures larger than this are read block by block (and cached when a cache is given)."""


def open_capture(
    path,
    *,
    sample_rate_hz: float | None = None,
    current=None,
    voltage=None,
    time_column: str | None = None,
    cache=None,
    stream_over_bytes: int | None | str = "default",
):
    """Open a capture for analysis: in memory when small, block by block when large.

    Parameters
    ----------
    path, sample_rate_hz, current, voltage, time_column
        As for :func:`load_capture`.
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed samples. On a hit the text file is not parsed again; on a miss the
        parsed blocks are stored while they are read.
    stream_over_bytes : int or None
        Text files larger than this are streamed; None never streams text; the default is
        :data:`STREAM_OVER_BYTES`.

    Returns
    -------
    Capture or CaptureStream
    """
    p = Path(path)
    if not p.exists():
        raise CaptureFormatError("file not found; check the path", path=str(path))
    if p.is_dir():
        raise CaptureFormatError("is a folder, not a capture file", path=str(path))
    if sample_rate_hz is not None and not (sample_rate_hz > 0):
        raise CaptureFormatError(f"sample rate must be positive, got {sample_rate_hz!r}",
                                 field="--sample-rate")
    if stream_over_bytes == "default":
        stream_over_bytes = STREAM_OVER_BYTES
    suffix = p.suffix.lower()
    reader_opts = {"sample_rate_hz": sample_rate_hz, "time_column": time_column}
    try:
        size = p.stat().st_size
    except OSError as exc:
        raise CaptureFormatError(f"cannot read the file: {exc.strerror}", path=str(path)) from None
    if suffix == ".cfg" or (suffix == ".dat" and _has_sibling(p, ".cfg")):
        from .comtrade import read_comtrade

        cap = read_comtrade(p)
    elif suffix in (".npy", ".parquet", ".pq"):
        from .binary import open_npy, open_parquet

        opener = open_npy if suffix == ".npy" else open_parquet
        cap = opener(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                     sha256=capture_sha256(p))
    else:
        cap = None
        if stream_over_bytes is not None and size > stream_over_bytes:
            cap = _open_text_stream(p, sample_rate_hz, time_column, cache, reader_opts)
        if cap is None:
            from .delimited import read_delimited

            cap = read_delimited(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                                 sha256=_sha(p))
    return assign_roles(cap, current=current, voltage=voltage)


def _sha(p: Path) -> str:
    try:
        return file_sha256(p)
    except OSError as exc:
        raise CaptureFormatError(f"cannot read the file: {exc.strerror}", path=str(p)) from None


def _open_text_stream(p, sample_rate_hz, time_column, cache, reader_opts):
    from .stream import NotStreamable, stream_delimited

    if cache is not None:
        sha = cache.known_sha256(p, reader_opts)
        if sha is not None:
            hit = cache.open_samples(sha, reader_opts, source=str(p))
            if hit is not None:
                return hit
    writer = cache.sample_writer() if cache is not None else None

    def done(stream, teed):
        if cache is None or not teed:
            return
        cache.remember_sha256(p, reader_opts, stream.provenance.sha256)
        writer.commit(stream.provenance.sha256, reader_opts, fs_hz=stream.fs_hz,
                      channels=stream.channels, t0_s=stream.t0_s,
                      reader=stream.provenance.reader, settings=stream.provenance.settings,
                      findings=stream.findings)

    try:
        return stream_delimited(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                                on_complete=done, tee=writer)
    except NotStreamable:
        return None


def _has_sibling(p: Path, suffix: str) -> bool:
    try:
        return any(q.stem == p.stem and q.suffix.lower() == suffix for q in p.parent.iterdir())
    except OSError:
        return False
