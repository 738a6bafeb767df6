"""Long delimited-text captures read block by block, hashed on the side.

:func:`stream_delimited` returns a :class:`~pqcheck.capture.CaptureStream` whose blocks come
from pandas' C parser in chunks (the fastest reader measured on our 2-core machines, see
benchmarks/README.md), parsed on a background thread two chunks ahead of the analysis, so
peak memory does not grow with the length of the file. The file's SHA-256 is computed on
another thread from a second read of the same bytes (from the page cache). Layout detection is shared with
:mod:`pqcheck.readers.delimited`; files whose time base is not uniform (variable-step
simulator exports) are small and go through the in-memory reader instead.
"""

from __future__ import annotations

import hashlib
import io
import os
import sys
from dataclasses import replace

import numpy as np
import pandas as pd

from ..capture import CaptureStream, Provenance
from ..errors import CaptureFormatError
from ..findings import Finding
from . import BackgroundHash
from . import delimited as _d

__all__ = ["stream_delimited", "NotStreamable"]

_MAX_GAP_S = 600.0
CHUNK_ROWS = 1 << 18
"""Rows parsed per chunk: with two chunks queued ahead, parser memory stays near 200 MB for
seven columns whatever the length of the file."""


class NotStreamable(Exception):
    """The file needs the whole-file reader (non-uniform time base, compressed, UTF-16)."""


class _HashingRaw(io.RawIOBase):
    """Raw file that feeds every byte read into a SHA-256."""

    def __init__(self, path, hashing: bool = True):
        self._fh = open(path, "rb")
        self.sha = hashlib.sha256() if hashing else None

    def readable(self):
        return True

    def readinto(self, b):
        n = self._fh.readinto(b)
        if n and self.sha is not None:
            self.sha.update(memoryview(b)[:n])
        return n

    def finish(self) -> str:
        """Hash whatever the parser did not read and return the hex digest ("" when not
        hashing)."""
        if self.sha is None:
            return ""
        for block in iter(lambda: self._fh.read(1 << 20), b""):
            self.sha.update(block)
        return self.sha.hexdigest()

    def close(self):
        self._fh.close()
        super().close()


def stream_delimited(path, *, sample_rate_hz=None, time_column=None, block_rows=1 << 18,
                     on_complete=None, tee=None, encoding=None) -> CaptureStream:
    """Open a uniform delimited capture for block-by-block reading.

    Parameters
    ----------
    path : str or Path
    sample_rate_hz, time_column, encoding
        As for :func:`pqcheck.readers.delimited.read_delimited`.
    block_rows : int
        Rows parsed per chunk.
    on_complete : callable or None
        Called as ``on_complete(stream, teed)`` after each full pass, when the SHA-256 is
        known; ``teed`` is True for the pass that fed ``tee``.
    tee : object or None
        Receives every block through ``tee.write(block)`` during the first pass (cache).

    Raises
    ------
    NotStreamable
        The file must be read whole (see module docstring).
    CaptureFormatError
        Layout problems found in the first chunk; later problems surface while iterating.
    """
    path = str(path)
    d = _d.sniff(path, encoding=encoding)
    if d.compression or d.encoding.startswith("utf-16"):
        raise NotStreamable(d.compression or d.encoding)
    names = list(d.names)
    dropped = []
    t_idx = _d.find_time_column(d, time_column, path)
    settings = _d.base_settings(d)
    first = _first_chunk(path, d, min(block_rows, 1 << 16))
    if first.shape[0] < 2:
        raise NotStreamable("tiny")
    if t_idx is not None:
        t = first[:, t_idx] * d.scales[t_idx]
        if not np.all(np.isfinite(t)):
            raise NotStreamable("time")
        dt = np.diff(t)
        med = float(np.median(dt)) if dt.size else 0.0
        if med <= 0 or np.any(np.abs(dt - med) > 0.01 * med):
            raise NotStreamable("non-uniform")
        fs = float(sample_rate_hz) if sample_rate_hz else (t.size - 1) / (t[-1] - t[0])
        t0 = float(t[0])
        settings.update(_d.time_settings(names[t_idx], d.scales[t_idx]))
        settings["time_base"] = "column"
    else:
        declared = _d.declared_interval(d.metadata)
        _, kept, _, _ = _d._drop_counter(first, names, list(d.units), list(d.scales), d, path,
                                         sample_rate_hz, declared, settings)
        if len(kept) < len(names):
            dropped = [0]  # a sample-index column
        if sample_rate_hz:
            fs = sample_rate_hz
            settings["time_base"] = "sample_rate_hz"
        elif declared is not None:
            fs = 1.0 / declared[0]
            settings["time_base"] = "declared in metadata"
            settings["declared_by"] = declared[1]
        else:
            raise _d.no_time_base(path, d)
        t0 = _d.declared_start(d.metadata)
    fs = float(fs)
    settings["sample_rate_hz"] = fs
    settings["streamed"] = True
    keep = [j for j in range(len(names)) if j != t_idx and j not in dropped]
    if not keep:
        raise CaptureFormatError("the file has a time column but no signal columns", path=path,
                                 line=d.header_line)
    chans = [_d.channel_for(names[j], d.units[j]) for j in keep]
    scales = np.array([d.scales[j] for j in keep])[:, None]
    hint = int(os.path.getsize(path) / max(1.0, _avg_row_bytes(path, d)))
    stream = CaptureStream(fs, chans, None, Provenance(path, "", "delimited", settings),
                           (), t0, hint)
    state = {"passes": 0}

    spec = {"path": path, "dialect": d, "names": names, "t_idx": t_idx, "keep": keep,
            "scales": scales, "fs": fs}

    def factory(block_samples):
        teeing = tee is not None and state["passes"] == 0
        state["passes"] += 1
        rows = max(1024, min(int(block_samples), CHUNK_ROWS))
        out = {}
        runner = _run_in_process if _can_fork() else _run_in_thread
        for block in runner(dict(spec, rows=rows), out):
            if teeing:
                tee.write(block)
            yield block
        stream.provenance = replace(stream.provenance, sha256=out["sha256"])
        stream.findings = tuple(out["findings"])
        if on_complete is not None:
            on_complete(stream, teeing)

    stream._factory = factory
    return stream


def _produce_blocks(spec: dict, out: dict):
    """Parse the file chunk by chunk into SI blocks (C, n), hashing the bytes read.

    Runs on the parse thread or in the parse process; at the end ``out`` holds ``sha256`` and
    ``findings``. Errors are raised as :class:`CaptureFormatError` naming the line.
    """
    path, d, names = spec["path"], spec["dialect"], spec["names"]
    t_idx, keep, scales, fs = spec["t_idx"], spec["keep"], spec["scales"], spec["fs"]
    findings = []
    # The parser reads from a handle that hashes every byte it passes on, positioned at the
    # first data row (pandas' skiprows is much slower than skipping the lines here).
    raw = _HashingRaw(path, hashing=spec.get("hash", True))
    fh = io.BufferedReader(raw, 1 << 20)
    try:
        for _ in range(d.data_line - 1):
            fh.readline()
        reader = pd.read_csv(fh, **_d.pandas_options(d), chunksize=spec["rows"])
        last_t = None
        row0 = 0
        pending = None
        for chunk in _chunks(reader, path, d, names):
            table = chunk
            if pending is not None:
                table = np.concatenate([pending, table])
                pending = None
            # hold back the last row until we know whether it is the file's last
            pending, table = table[-1:], table[:-1]
            if table.shape[0] == 0:
                continue
            block = _block(table, t_idx, keep, scales, fs, last_t, path, d, row0, findings)
            if t_idx is not None:
                last_t = table[-1, t_idx] * d.scales[t_idx]
            row0 += table.shape[0]
            yield block
        if pending is not None and pending.shape[0]:
            row = pending[0]
            sig = row[keep]
            if np.isnan(sig).any() and not np.isnan(sig).all() or (
                    t_idx is not None and not np.isfinite(row[t_idx])):
                findings.append(Finding(
                    "truncated-row", "warning",
                    "the last row is incomplete (file cut short?) and was dropped."))
            else:
                yield _block(pending, t_idx, keep, scales, fs, last_t, path, d, row0, findings)
        out["sha256"] = raw.finish()
        out["findings"] = findings
    finally:
        fh.close()


def _run_in_thread(spec: dict, out: dict):
    """Blocks parsed on a background thread, two chunks ahead of the analysis."""
    yield from _prefetch(_produce_blocks(spec, out))


_FORK_OK = sys.platform.startswith("linux")
"""On Linux the parser runs in a forked process: pandas' C parser holds the GIL for much of
its work, so on a thread it barely overlaps the analysis, while a process uses another core
(measured in benchmarks/). Elsewhere it runs on a thread."""


def _can_fork() -> bool:
    """A parser process can be started: Linux, and this process is not a daemonic worker (as
    multiprocessing pools and Dask workers are), which may not have children."""
    if not _FORK_OK:
        return False
    import multiprocessing as mp

    return not mp.current_process().daemon


def _parse_child(conn, spec: dict) -> None:  # pragma: no cover - runs in the child process
    out = {}
    try:
        for block in _produce_blocks(spec, out):
            conn.send(("block", block.shape))
            conn.send_bytes(memoryview(np.ascontiguousarray(block, dtype=np.float64)).cast("B"))
        conn.send(("end", out["sha256"], [f.to_dict() for f in out["findings"]]))
    except CaptureFormatError as exc:
        conn.send(("error", exc.problem, exc.path, exc.line, exc.field))
    except BaseException as exc:
        conn.send(("crash", f"{type(exc).__name__}: {exc}"))
    finally:
        conn.close()


def _run_in_process(spec: dict, out: dict):
    """Blocks parsed in a forked child process and received over a pipe; the child parses
    the next chunk while this process analyses the current one."""
    import multiprocessing as mp

    ctx = mp.get_context("fork")
    parent, child = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_parse_child, args=(child, dict(spec, hash=False)), daemon=True,
                       name="pqcheck-parse")
    proc.start()
    child.close()
    # the child only parses; the SHA-256 is computed here on a thread (started after the
    # fork), where the analysis leaves the core idle part of the time
    hasher = BackgroundHash(spec["path"])
    try:
        while True:
            try:
                msg = parent.recv()
            except EOFError:
                raise CaptureFormatError("the parser process stopped unexpectedly (out of "
                                         "memory?); check the file and run again",
                                         path=spec["path"]) from None
            kind = msg[0]
            if kind == "block":
                buf = bytearray(int(np.prod(msg[1])) * 8)
                parent.recv_bytes_into(buf)
                yield np.frombuffer(buf, dtype=np.float64).reshape(msg[1])
            elif kind == "end":
                out["sha256"] = hasher.result()
                out["findings"] = [Finding(f["code"], f["severity"], f["message"],
                                           tuple(f.get("channels", ())),
                                           tuple(f.get("orders", ())), f.get("value"),
                                           f.get("unit", "")) for f in msg[2]]
                return
            elif kind == "error":
                raise CaptureFormatError(msg[1], path=msg[2], line=msg[3], field=msg[4])
            else:
                raise CaptureFormatError(f"could not parse the file ({msg[1]})",
                                         path=spec["path"])
    finally:
        hasher.cancel()
        parent.close()
        if proc.is_alive():
            proc.kill()
        proc.join(timeout=5)


def _prefetch(iterator, depth: int = 2):
    """Run ``iterator`` in a background thread, ``depth`` items ahead.

    pandas' C parser and hashlib release the GIL, so parsing the next chunk overlaps the
    analysis of the current one on a multi-core machine; memory holds at most ``depth + 1``
    chunks. Exceptions are re-raised in the consumer.
    """
    import queue
    import threading

    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    done = object()

    def work():
        try:
            for item in iterator:
                while not stop.is_set():
                    try:
                        q.put(("item", item), timeout=0.1)
                        break
                    except queue.Full:
                        continue
                if stop.is_set():
                    return
            q.put(("end", done))
        except BaseException as exc:  # handed to the consumer
            q.put(("error", exc))

    th = threading.Thread(target=work, name="pqcheck-parse", daemon=True)
    th.start()
    try:
        while True:
            kind, item = q.get()
            if kind == "item":
                yield item
            elif kind == "end":
                return
            else:
                raise item
    finally:
        stop.set()
        th.join(timeout=5)


def _first_chunk(path, d, rows):
    try:
        df = pd.read_csv(path, **_d.pandas_options(d), skiprows=d.data_line - 1, nrows=rows)
    except (ValueError, pd.errors.ParserError):
        raise NotStreamable("first chunk") from None
    return _d.checked_columns(df.to_numpy(dtype=np.float64), d, path)


def _avg_row_bytes(path, d) -> float:
    with open(path, "rb") as fh:
        head = fh.read(1 << 16)
    lines = head.splitlines()[d.data_line - 1:-1]
    if not lines:
        return 64.0
    return sum(len(x) + 1 for x in lines) / len(lines)


def _chunks(reader, path, d, names):
    """Chunks as float arrays, turning parser errors into errors naming the line."""
    while True:
        try:
            chunk = next(reader)
        except StopIteration:
            return
        except (ValueError, pd.errors.ParserError) as exc:
            raise _d.parse_error(path, d, exc, line_offset=d.data_line - 1) from None
        yield _d.checked_columns(chunk.to_numpy(dtype=np.float64), d, path)


def _block(table, t_idx, keep, scales, fs, last_t, path, d, row0, findings):
    """(C, n) SI block from a table chunk; time gaps become NaN, other irregularity an error."""
    data = table[:, keep].T * scales
    if t_idx is None:
        return np.ascontiguousarray(data)
    t = table[:, t_idx] * d.scales[t_idx]
    tt = t if last_t is None else np.concatenate(([last_t], t))
    step = np.diff(tt) * fs
    if step.size == 0 or (np.all(np.abs(step - 1.0) <= 0.01)):
        return np.ascontiguousarray(data)
    bad = np.flatnonzero(~(np.abs(step - 1.0) <= 0.01))
    k = int(bad[0])
    line = d.data_line + row0 + k + (0 if last_t is not None else 1)
    if not np.all(np.isfinite(step)) or np.any(step[bad] < 1.5):
        raise CaptureFormatError(
            "the time column is not uniform here (a step of "
            f"{step[k] / fs:.6g} s against {1 / fs:.6g} s); pqcheck reads long files block by "
            "block and needs a uniform time base: resample the export, or drop the time column "
            "and give the sample rate (sample_rate_hz)", path=path, line=line, field="time")
    # gaps: insert NaN samples so later windows keep their place in time
    r = np.rint(step).astype(np.int64)
    missing = int((r - 1).sum())
    if missing / fs > _MAX_GAP_S:
        raise CaptureFormatError(
            f"the time column jumps by {missing / fs:.3g} s; split the capture at the gap",
            path=path, line=line, field="time")
    idx = np.cumsum(r) - 1 if last_t is not None else np.concatenate(([0], np.cumsum(r)))
    out = np.full((data.shape[0], int(idx[-1]) + 1), np.nan)
    out[:, idx] = data
    findings.append(Finding(
        "time-gap", "warning",
        f"the time column jumps near line {line}; {missing} missing samples are left "
        "empty and the windows they touch are not analysed.",
        value=float(missing), unit="samples"))
    return out
