"""Binary captures: NumPy ``.npy`` arrays and Parquet tables.

``.npy``: a 2-D float array, one row per sample and one column per channel (a 1-D array is one
channel). Columns are named ``col1``, ``col2``, ... unless a JSON file of the same name beside it
(``capture.npy`` -> ``capture.json``) holds ``{"columns": [...], "sample_rate_hz": ...}``.
Opened with ``allow_pickle=False`` and read block by block.

Parquet: one column per channel; a time column is recognised by name (``time``, ``t``, ...) or
unit (``time [s]``); otherwise the sample rate comes from ``sample_rate_hz`` or the key
``sample_rate_hz`` in the file's key-value metadata. Read row group by row group.
"""

from __future__ import annotations

import json
import zipfile
from pathlib import Path

import numpy as np

from ..capture import CaptureStream, Channel, Provenance, guess_role
from ..errors import CaptureFormatError
from ..files.inputs import require_regular_file
from .layouts import TIME_NAMES as _TIME_NAMES
from .layouts import split_unit as _split_unit

__all__ = ["open_npy", "open_parquet"]


def _channels(names, units):
    chans = []
    for name, unit in zip(names, units):
        quantity, phase = guess_role(name, unit)
        chans.append(Channel(name, quantity, phase,
                             unit or {"current": "A", "voltage": "V"}.get(quantity, ""), "guess"))
    return chans


def _time_base(t, path, field):
    dt = np.diff(t)
    if t.size < 2 or not np.all(np.isfinite(t)):
        raise CaptureFormatError("the time column needs at least two finite values", path=path,
                                 field=field)
    med = float(np.median(dt))
    if med <= 0 or np.any(np.abs(dt - med) > 0.01 * med):
        raise CaptureFormatError(
            "the time column is not uniform; give uniformly sampled data or drop the time "
            "column and give `sample_rate_hz`", path=path, field=field)
    return (t.size - 1) / (t[-1] - t[0]), float(t[0])


def open_npy(path, *, sample_rate_hz=None, time_column=None, sha256="") -> CaptureStream:
    """Open a ``.npy`` capture (see module docstring)."""
    path = str(path)
    try:
        arr = np.load(path, mmap_mode="r", allow_pickle=False)
    except (ValueError, OSError, EOFError, zipfile.BadZipFile) as exc:  # EOFError: empty file
        raise CaptureFormatError(f"not a readable .npy array ({exc}); save it with numpy.save "
                                 "as a float array", path=path) from None
    if not isinstance(arr, np.ndarray):  # an .npz archive under a .npy name
        arr.close()
        raise CaptureFormatError("this is an .npz archive of several arrays, not one .npy "
                                 "array; save the samples with numpy.save", path=path)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2 or not np.issubdtype(arr.dtype, np.number) or np.issubdtype(
            arr.dtype, np.complexfloating):
        raise CaptureFormatError(
            f"expected a 2-D numeric array (samples x channels), got shape {arr.shape} of "
            f"{arr.dtype}", path=path)
    side = Path(path).with_suffix(".json")
    meta = {}
    side_bytes = None
    if side.exists():
        require_regular_file(side, what="side-car JSON", max_bytes=16 << 20,
                             error=CaptureFormatError)
        try:
            side_bytes = side.read_bytes()
            meta = json.loads(side_bytes.decode("utf-8"))
        except (OSError, ValueError) as exc:
            raise CaptureFormatError(f"side-car JSON is not valid ({exc})", path=str(side)) \
                from None
    raw_names = list(meta.get("columns") or [f"col{i + 1}" for i in range(arr.shape[1])])
    if len(raw_names) != arr.shape[1]:
        raise CaptureFormatError(
            f"side-car lists {len(raw_names)} columns but the array has {arr.shape[1]}",
            path=str(side), field="columns")
    parsed = [_split_unit(n) for n in raw_names]
    names = [p[0] for p in parsed]
    feed = None
    if not sha256 and arr.flags.c_contiguous and getattr(arr, "offset", None) is not None:
        feed = _ReadsHashed(path, arr.offset, arr.offset + arr.nbytes, side_bytes,
                            arr.dtype.itemsize * arr.shape[1] * _READ_ROWS)
    cap = _open_table(path, names, [p[1] for p in parsed], np.array([p[2] for p in parsed]),
                      _npy_rows(path, arr, feed), arr.shape[0],
                      sample_rate_hz or meta.get("sample_rate_hz"), time_column, sha256, "npy")
    if feed is not None:
        cap.hash_pending(feed)
    return cap


_READ_ROWS = 1 << 18
"""Rows read from a ``.npy`` file at a time (the transient buffer of a block read)."""


class _ReadsHashed:
    """The SHA-256 of a ``.npy`` capture (its bytes, then its side-car's, as
    :func:`pqcheck.readers.capture_sha256` hashes them) from the bytes its rows are read
    with: the file is read once, not a second time beside the analysis, and the digest is
    of exactly the bytes analysed. A :class:`pqcheck.readers.FedHash` is handed the header
    when the file is opened, each piece of rows as it is read where it follows on from the
    last one handed over (the first pass, in file order), and at the end of the rows
    whatever follows them in the file and the side-car's bytes as read when the file was
    opened. A read out of order (a second pass) hands over nothing; where no pass reaches
    the end, :meth:`result` hashes the file itself. ``result()`` and ``done()`` as for
    :meth:`pqcheck.capture.CaptureStream.hash_pending`; the hashing thread is stopped when
    this object is dropped unfinished (an analysis that failed half-way)."""

    def __init__(self, path, offset: int, data_end: int, side: bytes | None,
                 piece_bytes: int):
        import weakref

        from . import FedHash

        # at most about 64 MB of pieces waiting: the reader waits beyond that
        self._hasher = FedHash(path, depth=max(2, (64 << 20) // max(piece_bytes, 1)))
        weakref.finalize(self, self._hasher.cancel)
        self._path = path
        self._end = data_end
        self._side = side
        self._finished = False
        with open(path, "rb") as fh:
            head = fh.read(offset)
        self._pos = len(head)
        self._hasher.feed(head)
        if self._pos == data_end:
            self._finish()

    def piece(self, at: int, part: np.ndarray) -> None:
        """``part`` (an array read from the file, kept unchanged) holds the bytes from file
        offset ``at`` on."""
        if self._finished or at != self._pos:
            return
        self._hasher.feed(part)
        self._pos += part.nbytes
        if self._pos == self._end:
            self._finish()

    def _finish(self) -> None:
        self._finished = True
        with open(self._path, "rb") as fh:
            fh.seek(self._end)
            while rest := fh.read(1 << 22):  # anything after the array's rows
                self._hasher.feed(rest)
        if self._side is not None:
            self._hasher.feed(self._side)
        self._hasher.complete()

    def done(self) -> bool:
        return self._hasher.done()

    def result(self) -> str:
        return self._hasher.result()


def _npy_rows(path, arr, feed: _ReadsHashed | None = None):
    """``read(cols, rows)`` for a ``.npy`` array: the wanted columns of the rows as float64,
    channel-major (shape ``(len(cols), rows)``), read from the file piece by piece with
    ``numpy.fromfile`` (not through the memory map, whose pages would stay resident and count
    against the process's memory for the whole record); each column of a piece is copied
    straight into its row of the block (one strided copy, no gathered temporary). Each piece
    is handed to ``feed`` (the file's hash) as read. A Fortran-ordered array is read through
    the memory map."""
    row_bytes = arr.dtype.itemsize * arr.shape[1]
    offset = getattr(arr, "offset", None)
    if not arr.flags.c_contiguous or offset is None:
        return lambda cols, rows: np.array(arr[rows][:, cols].T, dtype=np.float64, order="C")

    def read(cols, rows):
        start, stop, _ = rows.indices(arr.shape[0])
        out = np.empty((len(cols), max(stop - start, 0)))
        with open(path, "rb") as fh:
            for lo in range(start, stop, _READ_ROWS):
                n = min(_READ_ROWS, stop - lo)
                fh.seek(offset + lo * row_bytes)
                part = np.fromfile(fh, dtype=arr.dtype, count=n * arr.shape[1])
                if part.size != n * arr.shape[1]:
                    raise CaptureFormatError(
                        f"the file ends after {lo + part.size // arr.shape[1]} of "
                        f"{arr.shape[0]} rows; it was truncated or is being written",
                        path=path)
                if feed is not None:
                    feed.piece(offset + lo * row_bytes, part)
                part = part.reshape(n, arr.shape[1])
                for j, c in enumerate(cols):
                    out[j, lo - start:lo - start + n] = part[:, c]
        return out

    return read


def open_parquet(path, *, sample_rate_hz=None, time_column=None, sha256="") -> CaptureStream:
    """Open a Parquet capture (see module docstring)."""
    import pyarrow.parquet as pq

    path = str(path)
    try:
        pf = pq.ParquetFile(path)
    except Exception as exc:  # pyarrow raises several types for a damaged file
        raise CaptureFormatError(f"not a readable Parquet file ({exc})", path=path) from None
    raw_names = pf.schema_arrow.names
    md = pf.schema_arrow.metadata or {}
    declared = md.get(b"sample_rate_hz")
    parsed = [_split_unit(n) for n in raw_names]
    names = [p[0] for p in parsed]

    def read(cols, rows):
        """The columns ``cols`` of ``rows``, channel-major ``(len(cols), rows)``: each
        column of each row group that overlaps the rows copied once, straight into its row
        of the block."""
        start, stop = rows.start, min(rows.stop, pf.metadata.num_rows)
        out = np.empty((len(cols), max(stop - start, 0)))
        pos = 0
        for g in range(pf.num_row_groups):
            n = pf.metadata.row_group(g).num_rows
            if pos + n > start and pos < stop:
                tb = pf.read_row_group(g, columns=[raw_names[c] for c in cols])
                lo, hi = max(start - pos, 0), min(stop - pos, n)
                for i, c in enumerate(cols):
                    col = _as_float(tb.column(i), raw_names[c], path)
                    out[i, pos + lo - start:pos + hi - start] = col[lo:hi]
            pos += n
            if pos >= stop:
                break
        return out

    fs = sample_rate_hz or (float(declared) if declared else None)
    return _open_table(path, names, [p[1] for p in parsed], np.array([p[2] for p in parsed]),
                       read, pf.metadata.num_rows, fs, time_column, sha256, "parquet")


def _as_float(column, name, path):
    """A Parquet column as float64; a column of text or nested values is a clear error."""
    try:
        return column.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)
    except (ValueError, TypeError) as exc:
        raise CaptureFormatError(
            f"column {name!r} ({column.type}) holds values that are not numbers ({exc}); "
            "store the samples as float columns", path=path, field=name) from None


def _time_like_hint(read, names, n_rows) -> str:
    """``"; column 'col1' increases in uniform steps ..."`` where the first column of the
    first rows looks like a time base (finite, increasing in steps equal within 1 %), else
    ``""``: a time column saved without a name is then named in the message."""
    t = read([0], slice(0, min(n_rows, 4096)))[0]
    step = np.diff(t)
    if t.size < 3 or not np.all(np.isfinite(t)) or not np.all(step > 0):
        return ""
    med = float(np.median(step))
    if np.any(np.abs(step - med) > 0.01 * med):
        return ""
    return (f"; column {names[0]!r} increases in uniform steps of {med:.6g} like a time "
            f"column: if it is time in seconds, give `time_column` ({names[0]})")


def _open_table(path, names, units, scales, read, n_rows, fs, time_column, sha256, reader):
    t_idx = None
    if time_column is not None:
        if time_column not in names:
            raise CaptureFormatError(f"no column named {time_column!r}; columns are: "
                                     f"{', '.join(names)}", path=path, field="time_column")
        t_idx = names.index(time_column)
    else:
        for i, (n, u) in enumerate(zip(names, units)):
            if u == "s" or _TIME_NAMES.match(n):
                t_idx = i
                break
    t0 = 0.0
    settings = {"columns": list(names)}
    if t_idx is not None and fs is None:
        t = read([t_idx], slice(0, n_rows))[0] * scales[t_idx]
        fs, t0 = _time_base(t, path, names[t_idx])
        settings["time_base"] = "column"
    elif fs is None:
        raise CaptureFormatError(
            "no time column and no sample rate; give `sample_rate_hz`"
            + _time_like_hint(read, names, n_rows), path=path, field="sample rate")
    else:
        settings["time_base"] = "given"
    fs = float(fs)
    settings["sample_rate_hz"] = fs
    keep = [j for j in range(len(names)) if j != t_idx]
    if not keep:
        raise CaptureFormatError("no signal columns", path=path)
    chans = _channels([names[j] for j in keep], [units[j] for j in keep])
    sc = scales[keep][:, None]
    unscaled = bool(np.all(sc == 1.0))

    def factory(block_samples):
        for lo in range(0, n_rows, block_samples):
            rows = slice(lo, min(n_rows, lo + block_samples))
            block = read(keep, rows)  # (channels, rows), owned: scaled in place
            if not unscaled:
                block *= sc
            yield block

    return CaptureStream(fs, chans, factory, Provenance(path, sha256, reader, settings), (), t0,
                         n_rows)
