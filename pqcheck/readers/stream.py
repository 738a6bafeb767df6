"""Long delimited-text captures read block by block, hashed on the side.

:func:`stream_delimited` returns a :class:`~pqcheck.capture.CaptureStream` whose blocks come
from the compiled parser of :mod:`pqcheck.readers._numcsv`: the data rows are cut into pieces
ending on a line end, parsed on two threads (at most two pieces in flight, in file order) and
reassembled into tables of exactly the rows pandas' ``chunksize`` would give, so peak memory
does not grow with the length of the file and the analysis gets the same blocks either way.
A piece the compiled parser refuses is parsed by pandas (with its line offset); when pandas
fails on it, the rest of the file is read by pandas' chunked reader, so every message names
the line it names without the compiled parser. Without it (``PQCHECK_NO_JIT=1``) the text is
parsed by pandas' C parser in chunks, in a forked process on Linux (see benchmarks/README.md). The file's SHA-256 is computed on
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

from ..capture import CaptureStream, Provenance
from ..errors import CaptureFormatError
from ..findings import Finding
from . import BackgroundHash, FedHash
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
    fast = _compiled_layout(d)
    first = _first_chunk(path, d, min(block_rows, 1 << 16), fast)
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
            "scales": scales, "fs": fs, "colmap": fast,
            "row_bytes": _avg_row_bytes(path, d)}

    def factory(block_samples):
        teeing = tee is not None and state["passes"] == 0
        state["passes"] += 1
        rows = max(1024, min(int(block_samples), CHUNK_ROWS))
        out = {}
        if fast is not None:
            runner = _run_compiled_ahead
        else:
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
    import pandas as pd

    path, d, names = spec["path"], spec["dialect"], spec["names"]
    findings = []
    # The parser reads from a handle that hashes every byte it passes on, positioned at the
    # first data row (pandas' skiprows is much slower than skipping the lines here).
    raw = _HashingRaw(path, hashing=spec.get("hash", True))
    fh = io.BufferedReader(raw, 1 << 20)
    try:
        for _ in range(d.data_line - 1):
            fh.readline()
        reader = pd.read_csv(fh, **_d.pandas_options(d), chunksize=spec["rows"])
        yield from _blocks_of_tables(_chunks(reader, path, d, names), spec, findings)
        out["sha256"] = raw.finish()
        out["findings"] = findings
    finally:
        fh.close()


def _blocks_of_tables(tables, spec: dict, findings: list):
    """SI blocks (C, n) from parsed tables (rows, kept columns) in file order: the last row
    is held back until it is known to be the file's last (an incomplete last row is dropped
    with a finding), and the time column is checked across the tables."""
    path, d = spec["path"], spec["dialect"]
    t_idx, keep, scales, fs = spec["t_idx"], spec["keep"], spec["scales"], spec["fs"]
    last_t = None
    row0 = 0
    pending = None
    for chunk in tables:
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
        if _incomplete(pending[0], t_idx, keep):
            findings.append(_TRUNCATED)
        else:
            yield _block(pending, t_idx, keep, scales, fs, last_t, path, d, row0, findings)


_TRUNCATED = Finding("truncated-row", "warning",
                     "the last row is incomplete (file cut short?) and was dropped.")


def _incomplete(row, t_idx, keep) -> bool:
    """The file's last row (its parsed columns) is cut short: some signal cells empty and
    others not, or no time."""
    sig = row[keep]
    return bool(np.isnan(sig).any() and not np.isnan(sig).all()
                or (t_idx is not None and not np.isfinite(row[t_idx])))


_ASCII_ENCODINGS = {"utf-8", "utf8", "utf-8-sig", "latin-1", "latin1", "iso-8859-1", "ascii",
                    "cp1252"}
"""Encodings in which the bytes of digits, signs, delimiters and line ends are their ASCII
codes, so the compiled parser reads the bytes directly (it refuses any other byte)."""


def _compiled_layout(d):
    """The field-to-column map of the compiled parser for this layout (see
    :func:`pqcheck.readers._numcsv.parse_chunk`), or None when the file goes through pandas:
    the compiled parser is unavailable (``PQCHECK_NO_JIT=1``), or the encoding or separators
    are ones it does not read."""
    opts = _d.pandas_options(d)
    sep, dec = opts["sep"], opts["decimal"]
    if (len(sep) != 1 or len(dec) != 1 or sep == dec or sep in "0123456789+-.eE\" \r\n"
            or (d.encoding or "utf-8").lower() not in _ASCII_ENCODINGS):
        return None
    from . import _numcsv

    if not _numcsv.available():
        return None
    nf = len(d.pandas_names)
    cols = opts.get("usecols", list(range(nf)))
    if not cols or max(cols) >= nf:
        return None
    colmap = np.full(nf, -1, dtype=np.int64)
    for k, j in enumerate(sorted(cols)):
        colmap[j] = k
    return colmap


def _byte_chunks(path, d, size: int, hasher=None):
    """The data lines of the file as chunks of about ``size`` bytes ending on a line end:
    ``(buffer, bytes used, file offset [bytes], last)``. The first data row is found as the
    pandas path finds it (whole lines before it skipped); the last chunk has its trailing
    line ends taken off (blank lines at the end, which pandas skips). With ``hasher`` (a
    :class:`pqcheck.readers.FedHash`) every byte read is handed to it, in file order, and
    its ``complete`` is called once the end of the file is reached."""
    with open(path, "rb") as fh:
        for _ in range(d.data_line - 1):
            line = fh.readline()
            if hasher is not None:
                hasher.feed(line)
        offset = fh.tell()
        carry = b""
        while True:
            buf = np.empty(len(carry) + size, dtype=np.uint8)
            buf[:len(carry)] = np.frombuffer(carry, dtype=np.uint8)
            view = memoryview(buf)
            n = len(carry)
            while n < buf.size:
                got = fh.readinto(view[n:])
                if not got:
                    break
                if hasher is not None:
                    hasher.feed(view[n:n + got])
                n += got
            if n < buf.size:  # the end of the file
                if hasher is not None:
                    hasher.complete()
                while n and buf[n - 1] in (10, 13):
                    n -= 1
                if n:
                    yield buf, n, offset, True
                return
            # the last line end within the buffer (a line longer than the tail: search all)
            k = -1
            lo = n
            while k < 0 and lo > 0:
                lo = max(0, lo - (1 << 16))
                k = bytes(view[lo:n]).rfind(b"\n")
            if k < 0:  # one line longer than the chunk: take a bigger chunk
                size *= 2
                carry = bytes(view[:n])
                continue
            end = lo + k + 1
            carry = bytes(view[end:n])
            yield buf, end, offset, False
            offset += end


def _fallback_prefix(d) -> bytes:
    """A line of ``0`` in every field, put in front of a chunk that pandas parses on its own:
    pandas takes a first row with one field too many as an index column, where in the middle
    of the file the same row is an error naming its line."""
    sep = _d.pandas_options(d)["sep"]
    return sep.join(["0"] * len(d.pandas_names)).encode("ascii") + b"\n"


class _Prefixed(io.RawIOBase):
    """The file from ``offset`` on, with ``prefix`` in front."""

    def __init__(self, path, offset: int, prefix: bytes):
        self._fh = open(path, "rb")
        self._fh.seek(offset)
        self._prefix = memoryview(prefix)

    def readable(self):
        return True

    def readinto(self, b):
        if len(self._prefix):
            k = min(len(b), len(self._prefix))
            b[:k] = self._prefix[:k]
            self._prefix = self._prefix[k:]
            return k
        return self._fh.readinto(b)

    def close(self):
        self._fh.close()
        super().close()


def _pandas_rest(spec: dict, offset: int, lines_before: int, first: bool):
    """Tables of the file from byte ``offset`` (a line start, ``lines_before`` lines into
    the file) to its end, parsed by pandas' chunked reader as the pandas path parses them:
    after a chunk pandas could not parse on its own, the rest of the file is read this way,
    so that a problem spanning chunks (a quote) is reported exactly as without the compiled
    parser."""
    import pandas as pd

    path, d = spec["path"], spec["dialect"]
    prefix = b"" if first else _fallback_prefix(d)
    fh = io.BufferedReader(_Prefixed(path, offset, prefix), 1 << 20)
    try:
        reader = pd.read_csv(fh, **_d.pandas_options(d), chunksize=spec["rows"])
        yield from _chunks(reader, path, d, spec["names"],
                           line_offset=lines_before - (1 if prefix else 0),
                           drop_first=bool(prefix))
    finally:
        fh.close()


def _pandas_chunk(spec: dict, buf, n: int, first: bool):
    """One refused chunk parsed by pandas; None when pandas fails on it (the caller then
    reads the rest of the file with :func:`_pandas_rest`)."""
    import pandas as pd

    d = spec["dialect"]
    prefix = b"" if first else _fallback_prefix(d)
    try:
        df = pd.read_csv(io.BytesIO(prefix + bytes(memoryview(buf)[:n])),
                         **_d.pandas_options(d))
    except (ValueError, pd.errors.ParserError):
        return None
    table = df.to_numpy(dtype=np.float64)
    return table[1:] if prefix else table


def _parse_job(buf, n: int, colmap, sep: str, dec: str):
    """Worker: the compiled parse of one chunk; ``(table or None, line ends in it)``."""
    from . import _numcsv

    lines = _numcsv.count_lines(buf, n)
    table = _numcsv.parse_chunk(buf, n, sep, dec, colmap, lines=lines, by_column=True)
    return table, lines


PARSE_THREADS: int | None = None
"""Parser threads of a streamed CSV; None: by the CPUs (:func:`_parse_threads`). Batch worker
processes set 2 (their pool already uses every core)."""


def _parse_threads() -> int:
    """Parser threads: :data:`PARSE_THREADS`, else one per CPU this process may run on, two
    at least (the SHA-256 and the analysis run beside them) and eight at most (the text is
    read and handed out by one thread, the hash is one stream)."""
    if PARSE_THREADS is not None:
        return max(1, int(PARSE_THREADS))
    try:
        cpus = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        cpus = os.cpu_count() or 2
    return max(2, min(cpus, 8))


_QUEUED_PER_THREAD = 2
"""Chunks in flight per parser thread. With one (two chunks for two threads), a thread that
had finished its chunk waited while the chunk before it was collected and the next one read:
the workers were idle half the time (sampled with py-spy). With two each has one queued:
5-10 % less wall time at 10 minutes on two cores (benchmarks/README.md), for about 4 MB more
text in memory per thread."""


def _compiled_tables(spec: dict):
    """Tables (kept columns, rows) of the data rows in file order, parsed by the compiled
    parser on :func:`_parse_threads` threads (it releases the GIL), at most
    ``_QUEUED_PER_THREAD`` chunks in flight per thread; a chunk it refuses is parsed by
    pandas, with the lines before it counted for its messages. The tables are column by
    column (each column's values contiguous), as the blocks are."""
    from collections import deque
    from concurrent.futures import ThreadPoolExecutor

    path, d = spec["path"], spec["dialect"]
    opts = _d.pandas_options(d)
    sep, dec = opts["sep"], opts["decimal"]
    # pieces of a sixteenth of a block (4 MB at most): a few in flight cost little memory, and
    # the table of each block is assembled from them in one copy (_exact_rows)
    size = int(min(4 << 20, max(1 << 18, spec["rows"] * spec["row_bytes"] / 16)))
    source = _byte_chunks(path, d, size, spec.get("hasher"))
    threads = _parse_threads()
    in_flight = _QUEUED_PER_THREAD * threads
    pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="pqcheck-parse")
    flight: deque = deque()

    def top_up():
        while len(flight) < in_flight:
            item = next(source, None)
            if item is None:
                return
            buf, n, offset, _last = item
            flight.append((buf, n, offset,
                           pool.submit(_parse_job, buf, n, spec["colmap"], sep, dec)))

    lines_before = d.data_line - 1
    first = True
    try:
        top_up()
        while flight:
            buf, n, offset, fut = flight.popleft()
            table, lines = fut.result()
            top_up()
            if table is None:
                table = _pandas_chunk(spec, buf, n, first)
                if table is None:
                    for rest in _pandas_rest(spec, offset, lines_before, first):
                        yield rest.T
                    return
                yield _d.checked_columns(table, d, path).T
            else:
                # it converts no number to infinity (it refuses an overflow): all finite
                yield _d.checked_columns(table, d, path, by_column=True, finite=True)
            lines_before += lines
            first = False
    finally:
        for *_, fut in flight:
            fut.cancel()
        pool.shutdown(wait=True)
        source.close()


def _pandas_blocks(tables, rows: int):
    """Column-by-column blocks (kept columns, n) cut from ``tables`` (kept columns, rows; in
    file order) where the pandas path cuts its blocks, and the file's last row on its own:
    ``(block, is_last_row)``.

    The pandas path parses ``rows`` rows per table and holds back each table's last row
    until the next arrives (:func:`_blocks_of_tables`), so its blocks are rows
    ``[0, rows-1), [rows-1, 2*rows-1), ...`` and the last row alone. Cutting the same blocks
    gives the analysis the same numbers to the last bit whichever parser read the text.
    Each block is filled once, column by column, in a fresh array of its own."""
    target = rows - 1
    buf = None
    have = 0
    for table in tables:
        k = 0
        m = table.shape[1]
        while k < m:
            if buf is not None and have == target:
                # full, and a row follows: the block ends before the file's last row
                yield buf, False
                buf, target = None, rows
            if buf is None:
                buf = np.empty((table.shape[0], target))
                have = 0
            take = min(target - have, m - k)
            buf[:, have:have + take] = table[:, k:k + take]
            have += take
            k += take
    if buf is not None and have:
        if have > 1:
            yield buf[:, :have - 1], False
        yield buf[:, have - 1:have], True


def _run_compiled(spec: dict, out: dict):
    """Blocks from the compiled parser (:func:`_compiled_tables`), hashed on a thread; the
    same blocks and checks as :func:`_blocks_of_tables` on the pandas path."""
    path, d = spec["path"], spec["dialect"]
    t_idx, keep, scales, fs = spec["t_idx"], spec["keep"], spec["scales"], spec["fs"]
    # hashed from the bytes the parser reads (the file is read once); where the parser
    # hands the rest of the file to pandas, the hash reads the file itself
    hasher = FedHash(path)
    try:
        findings = []
        last_t = None
        row0 = 0
        for tab, last in _pandas_blocks(_compiled_tables(dict(spec, hasher=hasher)),
                                        spec["rows"]):
            if last and _incomplete(tab[:, 0], t_idx, keep):
                findings.append(_TRUNCATED)
                break
            yield _block_by_column(tab, t_idx, keep, scales, fs, last_t, path, d, row0,
                                   findings)
            if t_idx is not None:
                last_t = tab[t_idx, -1] * d.scales[t_idx]
            row0 += tab.shape[1]
        out["sha256"] = hasher.result()
        out["findings"] = findings
    finally:
        hasher.cancel()


def _run_compiled_ahead(spec: dict, out: dict):
    """The blocks of :func:`_run_compiled`, cut on a background thread ahead of the
    analysis (see :func:`_prefetch`). Driven from the analysis thread, the parser's two
    chunks in flight ran dry while the analysis tracked a block, and its workers were idle
    two thirds of the time; two blocks ahead, the cores stay busy (measured in
    benchmarks/README.md)."""
    yield from _prefetch(_run_compiled(spec, out))


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

    def put(entry) -> bool:
        """Hand ``entry`` over, unless the consumer has stopped (a full queue then stays
        full: never block on it)."""
        while not stop.is_set():
            try:
                q.put(entry, timeout=0.1)
                return True
            except queue.Full:
                continue
        return False

    def work():
        try:
            for item in iterator:
                if not put(("item", item)):
                    return
            put(("end", done))
        except BaseException as exc:  # handed to the consumer
            put(("error", exc))
        finally:
            # a generator closed here, on the thread that runs it: its own clean-up (parser
            # pool, hash thread) is done before the consumer's join returns
            close = getattr(iterator, "close", None)
            if close is not None:
                close()

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


def _first_chunk(path, d, rows, colmap=None):
    """The first ``rows`` data rows as a float table (rows, kept columns), for the layout
    checks: by the compiled parser where it reads them (``colmap`` of
    :func:`_compiled_layout`; pandas is then not imported at all), else by pandas."""
    table = None if colmap is None else _first_chunk_compiled(path, d, rows, colmap)
    if table is not None:
        return _d.checked_columns(table, d, path)
    import pandas as pd

    try:
        df = pd.read_csv(path, **_d.pandas_options(d), skiprows=d.data_line - 1, nrows=rows)
    except (ValueError, pd.errors.ParserError):
        raise NotStreamable("first chunk") from None
    return _d.checked_columns(df.to_numpy(dtype=np.float64), d, path)


def _first_chunk_compiled(path, d, rows, colmap):
    """The table of :func:`_first_chunk` from the compiled parser, or None where it refuses
    the lines (a blank line, a quote, a cell that is not a plain number...): pandas then
    reads them, with its own messages."""
    from . import _numcsv

    opts = _d.pandas_options(d)
    with open(path, "rb") as fh:
        for _ in range(d.data_line - 1):
            fh.readline()
        text = _whole_lines(fh, rows)
    # line ends at the end of the text: the line end of its last row, or blank lines at the
    # end of the file (pandas skips both)
    text = text.rstrip(b"\r\n")
    if not text:
        return None
    buf = np.frombuffer(text, dtype=np.uint8)
    return _numcsv.parse_chunk(buf, len(text), opts["sep"], opts["decimal"], colmap)


def _whole_lines(fh, rows: int, piece_bytes: int = 1 << 20) -> bytes:
    """The next ``rows`` lines of ``fh`` (fewer at the end of the file), each with its line
    end, as ``rows`` calls of ``readline`` give them; read in large pieces."""
    parts, found = [], 0
    while found < rows:
        piece = fh.read(piece_bytes)
        if not piece:
            break
        k = piece.count(b"\n")
        if found + k >= rows:  # the rows-th line end is in this piece
            ends = np.flatnonzero(np.frombuffer(piece, dtype=np.uint8) == 10)
            parts.append(piece[:int(ends[rows - found - 1]) + 1])
            found = rows
            break
        parts.append(piece)
        found += k
    return b"".join(parts)


def _avg_row_bytes(path, d) -> float:
    with open(path, "rb") as fh:
        head = fh.read(1 << 16)
    lines = head.splitlines()[d.data_line - 1:-1]
    if not lines:
        return 64.0
    return sum(len(x) + 1 for x in lines) / len(lines)


def _chunks(reader, path, d, names, line_offset=None, drop_first=False):
    """Chunks as float arrays, turning parser errors into errors naming the line.

    ``line_offset``: lines of the file before the text pandas reads (default: those above
    the first data row); ``drop_first``: the first row is a line put in front of the text
    (see :func:`_fallback_text`) and is dropped."""
    import pandas as pd

    if line_offset is None:
        line_offset = d.data_line - 1
    while True:
        try:
            chunk = next(reader)
        except StopIteration:
            return
        except (ValueError, pd.errors.ParserError) as exc:
            raise _d.parse_error(path, d, exc, line_offset=line_offset) from None
        table = chunk.to_numpy(dtype=np.float64)
        if drop_first:
            table, drop_first = table[1:], False
        yield _d.checked_columns(table, d, path)


def _block(table, t_idx, keep, scales, fs, last_t, path, d, row0, findings):
    """(C, n) SI block from a table chunk; time gaps become NaN, other irregularity an error."""
    data = np.ascontiguousarray(table[:, keep].T * scales)
    t = None if t_idx is None else table[:, t_idx] * d.scales[t_idx]
    return _timed_block(data, t, fs, last_t, path, d, row0, findings)


def _block_by_column(tab, t_idx, keep, scales, fs, last_t, path, d, row0, findings):
    """As :func:`_block` for a table column by column (parsed columns, n) that the block
    may reuse: the kept columns are taken as a view where they are adjacent, and scaled in
    place."""
    t = None if t_idx is None else tab[t_idx] * d.scales[t_idx]
    k0 = keep[0]
    if keep == list(range(k0, k0 + len(keep))) and tab.flags.c_contiguous:
        data = tab[k0:k0 + len(keep)]
        if np.any(scales != 1.0):
            data *= scales
    else:
        data = tab[keep] * scales
    return _timed_block(data, t, fs, last_t, path, d, row0, findings)


def _timed_block(data, t, fs, last_t, path, d, row0, findings):
    """The block ``data`` (C, n) after the checks of its SI time column ``t`` (or None):
    time gaps become NaN samples, other irregularity an error."""
    if t is None:
        return data
    tt = t if last_t is None else np.concatenate(([last_t], t))
    step = np.diff(tt) * fs
    if step.size == 0 or (np.all(np.abs(step - 1.0) <= 0.01)):
        return data
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
