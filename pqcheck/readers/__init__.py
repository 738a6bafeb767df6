"""Readers: the only code that opens capture files.

:func:`load_capture` picks a reader by the file's name and content and returns a
:class:`~pqcheck.capture.Capture` with provenance (path, SHA-256 of the bytes, reader settings).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from ..capture import Capture, Provenance, assign_roles
from ..errors import CaptureFormatError
from ..files.inputs import require_regular_file

__all__ = ["load_capture", "open_capture", "combine_captures", "file_sha256", "capture_sha256",
           "capture_files",
           "STREAM_OVER_BYTES"]

def file_sha256(path) -> str:
    """SHA-256 of a file's bytes, hex. Reads in 1 MiB blocks (a regular file only)."""
    require_regular_file(path, error=CaptureFormatError)
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


class BackgroundHash:
    """:func:`capture_sha256` of a file computed on a thread (hashlib releases the GIL), so
    that a capture is hashed on one core while its blocks are parsed or analysed on the
    other; :meth:`result` waits for it and raises what the hashing raised, :meth:`cancel`
    stops it early (after an error elsewhere)."""

    def __init__(self, path):
        import threading

        self._out = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, args=(path,), daemon=True,
                                        name="pqcheck-hash")
        self._thread.start()

    def _run(self, path):
        try:
            self._out["sha"] = capture_sha256(path, stop=self._stop)
        except BaseException as exc:  # noqa: BLE001 - handed to the caller in result()
            self._out["error"] = exc

    def done(self) -> bool:
        """True once the hashing has ended (:meth:`result` then returns at once)."""
        return not self._thread.is_alive()

    def result(self) -> str:
        """The hex digest (waits for the thread)."""
        self._thread.join()
        if "error" in self._out:
            raise self._out["error"]
        return self._out["sha"]

    def cancel(self) -> None:
        """Stop reading (the digest is then not available)."""
        self._stop.set()


class FedHash:
    """SHA-256 of a file from the bytes its reader reads anyway, hashed on a thread in the
    order they are handed over: the file is not read a second time, and the bytes are hashed
    while they are still in the processor's cache.

    The reader calls :meth:`feed` with every byte of the file in order and :meth:`complete`
    at its end; :meth:`result` gives the digest, or, where the reader stopped early or read
    part of the file another way (a fallback parser), the :func:`capture_sha256` of the file
    itself. :meth:`cancel` stops the thread (after an error elsewhere)."""

    _DEPTH = 32
    """Pieces waiting to be hashed, at most, unless ``depth`` is given (each a few MB; the
    reader waits beyond that)."""

    def __init__(self, path, depth: int | None = None):
        import queue
        import threading

        self._path = path
        self._h = hashlib.sha256()
        self._q = queue.Queue(depth or self._DEPTH)
        self._done = False
        self._cancelled = False
        self._fed = 0
        self._hashed = 0
        self._closed = False
        self._thread = threading.Thread(target=self._run, daemon=True, name="pqcheck-hash")
        self._thread.start()

    def _run(self):
        while True:
            item = self._q.get()
            if item is None:
                return
            if not self._cancelled:
                self._h.update(item)
            self._hashed += 1

    def feed(self, data) -> None:
        """The next bytes of the file (any buffer; kept alive until hashed). Ignored once
        :meth:`result` or :meth:`cancel` has been called (nothing would take them)."""
        import queue

        if self._closed:
            return
        self._fed += 1
        while True:  # never blocked for good by a queue that nothing takes from any more
            try:
                self._q.put(data, timeout=0.1)
                return
            except queue.Full:
                if self._closed:
                    return

    def done(self) -> bool:
        """True once every byte has been fed and hashed (:meth:`result` then returns at
        once)."""
        return self._done and self._hashed == self._fed

    def complete(self) -> None:
        """Every byte of the file has been fed."""
        self._done = True

    def result(self) -> str:
        """The hex digest (waits for the thread)."""
        if not self._closed:
            self._closed = True
            self._q.put(None)
        self._thread.join()
        if self._done and not self._cancelled:
            return self._h.hexdigest()
        return capture_sha256(self._path)

    def cancel(self) -> None:
        """Stop hashing (the digest is then not available)."""
        import queue

        self._cancelled = True
        self._closed = True
        while True:  # the end mark, making room for it if the queue is full
            try:
                self._q.put_nowait(None)
                return
            except queue.Full:
                try:
                    self._q.get_nowait()
                except queue.Empty:
                    pass


def capture_sha256(path, *, stop=None) -> str:
    """SHA-256 of a capture as its reader records it in the provenance (hex).

    A COMTRADE record (its ``.cfg`` or ``.dat``): one hash over the .cfg bytes followed by the
    .dat bytes. A ``.npy`` array with a side-car ``.json`` (column names, sample rate): the
    array's bytes followed by the side-car's, so editing either changes the hash. Any other
    file: the hash of its bytes.

    ``stop`` (a ``threading.Event``) ends the reading early when set; the result is then
    not the file's hash (see :class:`BackgroundHash`).

    Raises
    ------
    CaptureFormatError
        The file, or the other file of a COMTRADE pair, is missing or cannot be read.
    """
    p = Path(path)
    require_regular_file(p, what="capture", error=CaptureFormatError)
    try:
        parts = capture_files(p)
        h = hashlib.sha256()
        buf = bytearray(1 << 22)  # one buffer, refilled: no allocation per block
        view = memoryview(buf)
        for f in parts:
            require_regular_file(f, what="capture", error=CaptureFormatError)
            with open(f, "rb", buffering=0) as fh:
                while n := fh.readinto(buf):
                    if stop is not None and stop.is_set():
                        return ""
                    h.update(view[:n])
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
    encoding: str | None = None,
) -> Capture:
    """Read a capture file into memory.

    Parameters
    ----------
    path : str or Path, or a list of them
        Delimited text (``.csv``, ``.txt``, ``.tsv``), COMTRADE (``.cfg`` with its ``.dat``,
        or a single ``.cff``), SPICE raw (``.raw``), NumPy ``.npy`` or Parquet. A list of
        files forms one capture (one file per channel, same time base; see
        :func:`combine_captures`).
    sample_rate_hz : float or None
        Sample rate for files without a time column or declared interval. [Hz]
    current, voltage : sequence of str or None
        Column names in phase order a, b, c; when both are None the roles guessed from
        names and units are used.
    time_column : str or None
        Name of the time column when it is not recognisable.
    encoding : str or None
        Text encoding of a delimited file or of a COMTRADE ``.cfg`` (``"cp1251"``,
        ``"gbk"``, ...); None detects it.

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
                       stream_over_bytes=None, encoding=encoding)
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
    encoding: str | None = None,
):
    """Open a capture for analysis: in memory when small, block by block when large.

    Parameters
    ----------
    path, sample_rate_hz, current, voltage, time_column, encoding
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
    if isinstance(path, (list, tuple)):
        parts = [open_capture(q, sample_rate_hz=sample_rate_hz, time_column=time_column,
                              stream_over_bytes=None, encoding=encoding) for q in path]
        return assign_roles(combine_captures(parts), current=current, voltage=voltage)
    p = Path(path)
    size = require_regular_file(p, what="capture", error=CaptureFormatError)
    if sample_rate_hz is not None and not (np.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise CaptureFormatError(f"sample rate must be a positive number, got "
                                 f"{sample_rate_hz!r}", field="sample_rate_hz")
    if stream_over_bytes == "default":
        stream_over_bytes = STREAM_OVER_BYTES
    suffix = p.suffix.lower()
    reader_opts = {"sample_rate_hz": sample_rate_hz, "time_column": time_column}
    if encoding is not None:
        reader_opts["encoding"] = encoding
    from .spice import looks_like_spice_raw

    if suffix in (".cfg", ".cff") or (suffix == ".dat" and _has_sibling(p, ".cfg")):
        from .comtrade import read_comtrade

        if suffix == ".cfg":
            require_regular_file(p, what="capture", error=CaptureFormatError)
        cap = read_comtrade(p, encoding=encoding)
    elif suffix in (".npy", ".parquet", ".pq"):
        from .binary import open_npy, open_parquet

        opener = open_npy if suffix == ".npy" else open_parquet
        known = cache.known_sha256(p, reader_opts) if cache is not None else None
        cap = opener(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                     sha256=known or "")
        if not known and not cap.hashed_in_this_run:
            # hashed on a thread while the blocks are analysed (a .npy file hashes the bytes
            # its rows are read with: see binary._ReadsHashed)
            cap.hash_pending(BackgroundHash(p))
    elif looks_like_spice_raw(p):
        from .spice import read_spice_raw

        cap = read_spice_raw(p, sha256=_sha(p))
    else:
        cap = None
        if stream_over_bytes is not None and size > stream_over_bytes:
            cap = _open_text_stream(p, sample_rate_hz, time_column, cache, reader_opts)
        if cap is None:
            from .delimited import read_delimited

            cap = read_delimited(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                                 sha256=_sha(p), encoding=encoding)
    return assign_roles(cap, current=current, voltage=voltage)


def combine_captures(parts) -> Capture:
    """One capture from several files of the same record (one file per channel, say).

    Parameters
    ----------
    parts : sequence of Capture
        Captures read from the files, in the order given.

    Returns
    -------
    Capture
        Their channels side by side. Provenance: the sources joined by `` + ``, a SHA-256 over
        the files' SHA-256 values in order, and each file's reader settings under ``files``.

    Raises
    ------
    CaptureFormatError
        The time bases differ (sample rate, first sample time or number of samples), or two
        files hold a channel of the same name.
    """
    parts = [p.load() if not isinstance(p, Capture) else p for p in parts]
    if len(parts) == 1:
        return parts[0]
    first = parts[0]
    src0 = first.provenance.source
    names = list(first.names)
    for other in parts[1:]:
        src = other.provenance.source
        if abs(other.fs_hz - first.fs_hz) > 1e-9 * first.fs_hz:
            raise CaptureFormatError(
                f"sample rate {other.fs_hz:.9g} Hz differs from {first.fs_hz:.9g} Hz in "
                f"{src0}; files combined into one capture need the same time base",
                path=src, field="sample_rate_hz")
        if other.n_samples != first.n_samples:
            raise CaptureFormatError(
                f"{other.n_samples} samples against {first.n_samples} in {src0}; files "
                "combined into one capture need the same time base (same length)", path=src)
        if abs(other.t0_s - first.t0_s) > 0.5 / first.fs_hz:
            raise CaptureFormatError(
                f"first sample at {other.t0_s:.9g} s against {first.t0_s:.9g} s in {src0}; "
                "files combined into one capture need the same time base (same start)",
                path=src)
        for n in other.names:
            if n in names:
                raise CaptureFormatError(
                    f"channel {n!r} is also in an earlier file of the capture; rename one so "
                    "every channel has its own name", path=src, field=n)
            names.append(n)
    h = hashlib.sha256()
    for part in parts:
        h.update(part.provenance.sha256.encode("ascii"))
    settings = {"files": [{"source": q.provenance.source, "sha256": q.provenance.sha256,
                           "reader": q.provenance.reader, **q.provenance.settings}
                          for q in parts],
                "time_base": "the same in every file (checked)",
                "sample_rate_hz": first.fs_hz}
    prov = Provenance(" + ".join(q.provenance.source for q in parts), h.hexdigest(),
                      "combined", settings)
    findings = tuple(f for q in parts for f in q.findings)
    return Capture(np.vstack([q.samples for q in parts]), first.fs_hz,
                   tuple(c for q in parts for c in q.channels), first.t0_s, prov, findings)


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
                                on_complete=done, tee=writer,
                                encoding=reader_opts.get("encoding"))
    except NotStreamable:
        return None


def _has_sibling(p: Path, suffix: str) -> bool:
    try:
        return any(q.stem == p.stem and q.suffix.lower() == suffix for q in p.parent.iterdir())
    except OSError:
        return False
