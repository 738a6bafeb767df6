"""Batch runs: many captures checked against the same limit tables, one tidy table of results.

A charging-network operator or a utility may hold thousands of captures from a fleet.
:func:`run_batch` finds the captures in folders or glob patterns (:func:`find_captures`), and
checks each one exactly as ``pqcheck check`` does (:func:`pqcheck.run.check.check_capture`), collecting one row per
capture and check (:data:`SCHEMA`).

Parallel work
    The same module-level work function (:func:`check_task`, plain dicts in and out) runs
    in-process (one job), in a process pool (:class:`ProcessExecutor`) or on a Dask cluster
    (:class:`DaskExecutor`), so every executor gives the same table.

Resume
    Every capture is hashed first (:func:`pqcheck.readers.capture_sha256`: the file's SHA-256; for COMTRADE one
    hash over the .cfg bytes followed by the .dat bytes, the value the reader records). Captures
    whose SHA-256 is already in the results file are skipped; rows of captures analysed again
    replace their older rows. The results file is rewritten every minute while the batch runs,
    and when it is interrupted, so a re-run continues where it stopped. A results file made with
    other limits or options is not mixed with new rows: the run stops with an error instead.

Failures
    A capture that cannot be read or analysed becomes one row with verdict ``error`` and the
    message; the batch goes on. A worker process that dies (out of memory, a crash) is retried
    alone before its capture is recorded as an error.

Output
    Parquet (pyarrow) and/or CSV, written atomically (temporary file, then rename). Rows are
    sorted by capture path, checks in the order ``pqcheck check`` makes them.
"""

from __future__ import annotations

import collections
import contextlib
import dataclasses
import glob
import hashlib
import json
import math
import os
import time
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path

import pyarrow as pa

from ..errors import InputError, PqcheckError
from ..readers import capture_sha256

__all__ = [
    "SCHEMA",
    "CAPTURE_SUFFIXES",
    "batch_spec",
    "settings_key",
    "BatchRun",
    "find_captures",
    "hash_capture",
    "check_task",
    "run_batch",
    "read_results",
    "write_results",
    "summarize",
    "exit_code",
    "InlineExecutor",
    "ProcessExecutor",
    "DaskExecutor",
    "MissingExtraError",
]

CAPTURE_SUFFIXES = (".csv", ".csv.gz", ".tsv", ".tsv.gz", ".cfg", ".cff", ".raw", ".npy",
                    ".parquet", ".pq")
"""Names found in folders and glob patterns (case-insensitive). A COMTRADE record counts once,
by its .cfg; a .dat without a .cfg next to it is not a capture."""

SCHEMA = pa.schema([
    ("capture", pa.string()),            # path as found
    ("capture_sha256", pa.string()),     # hex; COMTRADE: over .cfg + .dat
    ("capture_verdict", pa.string()),    # pass, fail, inconclusive, not applicable, error
    ("table_id", pa.string()),
    ("table_sha256", pa.string()),
    ("quantity", pa.string()),           # harmonic, THD, TDD, ...
    ("order", pa.int64()),               # harmonic order, null for totals
    ("applies_to", pa.string()),         # current or voltage
    ("phase", pa.string()),
    ("channel", pa.string()),
    ("statistic", pa.string()),
    ("measured", pa.float64()),          # [unit]
    ("limit", pa.float64()),             # [unit]
    ("unit", pa.string()),
    ("margin_percent", pa.float64()),    # [%] (limit - measured) / limit
    ("verdict", pa.string()),            # of the check; "error" on an error row
    ("clause", pa.string()),
    ("verify", pa.bool_()),
    ("note", pa.string()),
    ("capture_notes", pa.string()),      # the assessment's notes, joined by "; "
    ("error", pa.string()),              # message on an error row
    ("settings_key", pa.string()),       # limits and options the row was made with
    ("schema_version", pa.int64()),      # pqcheck.results.SCHEMA_VERSION of the row
    ("run_spec", pa.string()),           # JSON of the capture's RunSpec (to re-run the row)
])
"""Columns of the results table. ``run_spec`` is the capture's
:class:`~pqcheck.record.RunSpec` as JSON (:meth:`~pqcheck.record.RunSpec.to_dict`, capture
path as opened), so any row can be checked again on its own
(:func:`pqcheck.results.batch_row_spec`)."""

CHECKPOINT_S = 60.0
"""Seconds between rewrites of the results files while a batch runs."""

_VERDICTS = ("fail", "inconclusive", "pass", "not applicable", "error")


class MissingExtraError(PqcheckError):
    """An optional dependency (an extra of the package) is not installed."""


# --- what every capture is checked with ---------------------------------------------------


def batch_spec(spec):
    """The template :class:`~pqcheck.record.RunSpec` of a batch: no capture path, and the
    paths of user limit tables made absolute (workers may run in another folder)."""
    from ..limits import table_path

    lims = tuple(dataclasses.replace(s, table=os.path.abspath(table_path(s.table)))
                 if table_path(s.table) is not None else s for s in spec.limits)
    return dataclasses.replace(spec, reader=dataclasses.replace(spec.reader, path=""),
                               limits=lims)


def settings_key(spec) -> str:
    """Short hash of everything that decides a row: the tables (id and SHA-256 of the file,
    the selectors used) and the spec without its capture path and report details.

    Raises
    ------
    InputError
        A table cannot be read, or a selector it needs is missing or out of range.
    """
    from .check import resolve_limits

    tables = [(t.table_id, t.sha256, [list(x) for x in t.selectors])
              for t in resolve_limits(spec)]
    d = spec.to_dict()
    d.pop("report")
    d["reader"].pop("path")
    for sel in d["limits"]:
        sel.pop("table")
    d["tables"] = tables
    text = json.dumps(d, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


# --- finding captures ---------------------------------------------------------------------


def _capture_name(name: str) -> bool:
    low = name.lower()
    return not name.startswith(".") and low.endswith(CAPTURE_SUFFIXES)


def _comtrade_cfg(dat: Path) -> Path | None:
    """The .cfg next to a .dat (same base name, extension in any case), or None."""
    try:
        for q in sorted(dat.parent.iterdir()):
            if q.stem == dat.stem and q.suffix.lower() == ".cfg" and q.is_file():
                return q
    except OSError:
        return None
    return None


def find_captures(inputs, *, exclude=()) -> tuple:
    """Find the captures named by folders, glob patterns or file paths.

    Parameters
    ----------
    inputs : sequence of str or os.PathLike
        A folder (searched recursively, hidden files and folders left out), a glob pattern
        (``**`` matches any depth) or a file (taken whatever its extension).
    exclude : sequence of str or os.PathLike
        Files never taken as captures (the results files of the batch).

    Returns
    -------
    (captures, ignored)
        ``captures``: tuple of str, paths as found, sorted within each input, each file once;
        a COMTRADE record is named by its .cfg even when its .dat matched. ``ignored``: tuple of
        str, .dat files skipped because no .cfg is next to them.

    Raises
    ------
    InputError
        An input is neither a file, a folder nor a pattern that matches something, or nothing
        was found at all.
    """
    skip = {os.path.realpath(p) for p in exclude if p is not None}
    seen, found, ignored = set(), [], []

    def add(p: Path, explicit: bool):
        if p.suffix.lower() == ".dat":
            cfg = _comtrade_cfg(p)
            if cfg is None:
                if not explicit:
                    ignored.append(str(p))
                    return
            else:
                p = cfg
        elif not explicit and not _capture_name(p.name):
            return
        real = os.path.realpath(p)
        if real in skip or real in seen:
            return
        seen.add(real)
        found.append(str(p))

    for item in inputs:
        text = os.fspath(item)
        p = Path(text)
        if p.is_dir():
            for q in sorted(_walk(p)):
                add(q, False)
        elif p.is_file():
            add(p, True)
        elif any(ch in text for ch in "*?["):
            hits = sorted(glob.glob(text, recursive=True))
            if not hits:
                raise InputError("the pattern matches no file", path=text)
            for h in hits:
                if os.path.isfile(h):
                    add(Path(h), False)
        else:
            raise InputError("no such file or folder", path=text)
    if not found:
        names = ", ".join(os.fspath(i) for i in inputs)
        raise InputError(f"no capture found (looked for {', '.join(CAPTURE_SUFFIXES)})",
                         path=names)
    return tuple(found), tuple(ignored)


def _refuse_captures_as_results(inputs, out, csv) -> None:
    """A results file that is one of the batch's own captures (and not a results table) is
    refused, whatever ``force`` says: it would replace a measurement."""
    from ..files.atomic import same_file

    named = [(p, opt) for p, opt in ((out, "out"), (csv, "csv"))
             if p is not None and os.path.exists(p)]
    if not named:
        return
    try:
        found, _ = find_captures(inputs)
    except InputError:
        return
    for p, opt in named:
        if any(same_file(p, c) for c in found) and not _is_results_table(p):
            raise InputError(
                "is one of the captures of this batch, not a results table; a capture is never "
                "replaced: give a results file outside the inputs or with another name",
                path=str(p), field=opt)


def _walk(root: Path):
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = [d for d in dirnames if not d.startswith(".")]
        for f in filenames:
            if not f.startswith("."):
                yield Path(dirpath) / f


# --- hashing ------------------------------------------------------------------------------


def hash_capture(path: str) -> dict:
    """Work function of the hashing pass: ``{"sha256": hex or None, "error": str or None}``."""
    try:
        return {"sha256": capture_sha256(path), "error": None}
    except Exception as exc:  # noqa: BLE001 - a batch records every failure as data
        return {"sha256": None, "error": _message(exc)}


# --- the work function --------------------------------------------------------------------


def _message(exc: BaseException) -> str:
    if isinstance(exc, InputError):
        return exc.location_message()
    if isinstance(exc, PqcheckError):
        return str(exc)
    if isinstance(exc, MemoryError):
        return "out of memory; try a shorter capture or fewer jobs"
    return f"internal error: {type(exc).__name__}: {exc}"


def _relabel(message: str, opened: str, capture: str) -> str:
    """Name files in a message as the table names the capture (workers open absolute paths,
    the user gave relative ones); also the .dat next to a .cfg."""
    folder, shown = os.path.dirname(opened), os.path.dirname(capture)
    message = message.replace(opened, capture)
    return message.replace(folder + os.sep, shown + os.sep if shown else "")


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def row_spec(spec: dict, path: str) -> str:
    """The ``run_spec`` column of a capture's rows: the batch's template spec (a
    :meth:`~pqcheck.record.RunSpec.to_dict`) for the capture at ``path``, as compact JSON."""
    from ..results import spec_json

    return spec_json({**spec, "reader": {**spec["reader"], "path": path}})


def _blank_row(capture: str, sha, key: str, spec: str | None) -> dict:
    from ..results import SCHEMA_VERSION

    row = dict.fromkeys(SCHEMA.names)
    row.update(capture=capture, capture_sha256=sha, settings_key=key,
               schema_version=SCHEMA_VERSION, run_spec=spec)
    return row


def error_row(capture: str, sha, key: str, message: str, spec: str | None = None) -> dict:
    """The one row that records a capture that could not be checked (``spec``: its
    :func:`row_spec`)."""
    row = _blank_row(capture, sha, key, spec)
    row.update(capture_verdict="error", verdict="error", error=message)
    return row


def check_task(task: dict) -> list:
    """Work function: analyse and assess one capture, return its rows.

    Parameters
    ----------
    task : dict
        ``capture`` (path as it goes in the table), ``path`` (path to open), ``sha256`` (from
        the hashing pass), ``key`` (:func:`settings_key`), ``spec``
        (:meth:`pqcheck.record.RunSpec.to_dict` of the batch's template), ``cache_dir`` and
        ``use_cache``.

    Returns
    -------
    list of dict
        One row per check (:data:`SCHEMA` columns); one row with the notes when nothing was
        assessed; one ``error`` row when the capture could not be read or analysed. It never
        raises for a bad capture.
    """
    capture, sha, key = task["capture"], task.get("sha256"), task.get("key", "")
    try:
        return _check_rows(task)
    except Exception as exc:  # noqa: BLE001 - a batch records every failure as data
        return [error_row(capture, sha, key, _relabel(_message(exc), task["path"], capture),
                          _task_spec(task))]


def _task_spec(task: dict) -> str | None:
    """The ``run_spec`` column of a task's rows (None if the task carries no spec)."""
    spec = task.get("spec")
    return None if not isinstance(spec, dict) else row_spec(spec, task["path"])


def _check_rows(task: dict) -> list:
    from ..record import RunSpec
    from .cache import Cache
    from .check import check_capture

    spec = RunSpec.from_dict(task["spec"]).with_capture(task["path"])
    capture, sha, key = task["capture"], task.get("sha256"), task.get("key", "")
    cache = Cache(task.get("cache_dir")) if task.get("use_cache", True) else None
    run = check_capture(spec, cache=cache)
    result, a = run.result, run.assessment
    if sha and result.sha256 and result.sha256 != sha:
        raise PqcheckError(f"{capture}: the file changed while the batch ran (SHA-256 "
                           f"{sha[:12]}... then {result.sha256[:12]}...); run the batch again")
    table_sha = {t.table_id: t.sha256 for t in a.tables}
    from ..results import spec_json

    base = _blank_row(capture, sha or result.sha256, key, spec_json(spec.to_dict()))
    base.update(capture_verdict=a.verdict, capture_notes="; ".join(a.notes))
    if not a.checks:
        return [{**base, "verdict": a.verdict}]
    rows = []
    for c in a.checks:
        rows.append({
            **base, "table_id": c.table_id, "table_sha256": table_sha.get(c.table_id),
            "quantity": c.quantity, "order": None if c.order is None else int(c.order),
            "applies_to": c.applies_to, "phase": c.phase, "channel": c.channel,
            "statistic": c.statistic, "measured": _num(c.measured), "limit": _num(c.limit),
            "unit": c.unit, "margin_percent": _num(c.margin_percent), "verdict": c.verdict,
            "clause": c.clause, "verify": bool(c.verify), "note": c.note})
    return rows


# --- executors ----------------------------------------------------------------------------


class InlineExecutor:
    """Runs the work in this process, one capture after another (one job)."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def imap_unordered(self, fn, items, on_crash=None):
        """Yield ``(index, fn(item))`` for every item (``on_crash`` is not needed here)."""
        for i, x in enumerate(items):
            yield i, fn(x)


class ProcessExecutor:
    """A pool of worker processes (:class:`concurrent.futures.ProcessPoolExecutor`).

    Parameters
    ----------
    jobs : int or None
        Worker processes; None: the number of CPUs.

    Notes
    -----
    Workers are started by the ``forkserver`` method where it exists (a fresh process, not a
    copy of this one with its threads) and its socket path fits (see
    :func:`_socket_path_fits`), else by ``spawn``, else by the platform default. When a worker dies, the
    pool breaks and every unfinished item fails; those items are then run one at a time in a
    fresh one-worker pool, so only the item that kills its worker gets ``on_crash``.
    """

    def __init__(self, jobs: int | None = None):
        self.jobs = jobs or os.cpu_count() or 1
        self.pool = None

    def _new_pool(self, n: int):
        import multiprocessing

        ctx = None
        methods = multiprocessing.get_all_start_methods()
        if "forkserver" in methods and _socket_path_fits():
            ctx = multiprocessing.get_context("forkserver")
        elif "spawn" in methods:
            ctx = multiprocessing.get_context("spawn")
        return ProcessPoolExecutor(max_workers=n, mp_context=ctx, initializer=_worker_init)

    def __enter__(self):
        self.pool = self._new_pool(self.jobs)
        return self

    def __exit__(self, exc_type, *exc):
        if self.pool is not None:
            # no public way to stop running workers before Python 3.14 (terminate_workers)
            running = getattr(self.pool, "_processes", None)
            procs = list(running.values()) if isinstance(running, dict) else []
            results = getattr(self.pool, "_result_queue", None)  # shutdown() drops it
            self.pool.shutdown(wait=exc_type is None, cancel_futures=True)
            if exc_type is not None:  # interrupted: do not wait for captures in progress
                _stop_workers(procs, results)
            self.pool = None
        return False

    def imap_unordered(self, fn, items, on_crash=None):
        """Yield ``(index, fn(item))`` as items finish; ``on_crash(item, message)`` stands in
        for the result of an item whose worker died (default: raise).

        At most four items per worker are queued at a time, so a fleet's worth of tasks is not
        held in memory and an interrupted run stops promptly.
        """
        items = list(items)
        queue = collections.deque(range(len(items)))
        while queue:
            broken, suspects = yield from self._run(fn, items, queue)
            if broken:  # a worker died: run each unfinished item alone to find the culprit
                self.pool.shutdown(wait=False, cancel_futures=True)
                self.pool = None
                yield from self._one_by_one(fn, items, sorted(suspects), on_crash)
                self.pool = self._new_pool(self.jobs)

    def _run(self, fn, items, queue) -> tuple:
        """Run queued items until the queue is empty or the pool breaks; return
        ``(broken, indices of the items whose worker died)``."""
        pending = {}
        broken, suspects = False, []
        while queue or pending:
            while queue and len(pending) < 4 * self.jobs and not broken:
                i = queue.popleft()
                try:
                    pending[self.pool.submit(fn, items[i])] = i
                except BrokenProcessPool:
                    queue.appendleft(i)
                    broken = True
            if not pending:
                break
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for f in done:
                i = pending.pop(f)
                try:
                    result = f.result()
                except BrokenProcessPool:
                    broken = True
                    suspects.append(i)
                    continue
                yield i, result
        return broken, suspects

    def _one_by_one(self, fn, items, indices, on_crash):
        """Run items one at a time in a one-worker pool, renewed after each death."""
        pool = None
        try:
            for i in indices:
                pool = pool or self._new_pool(1)
                try:
                    result = pool.submit(fn, items[i]).result()
                except BrokenProcessPool as exc:
                    pool.shutdown(wait=False, cancel_futures=True)
                    pool = None
                    if on_crash is None:
                        raise
                    result = on_crash(items[i], f"the worker process died ({exc}); the capture "
                                                "may need more memory than a worker has")
                yield i, result
        finally:
            if pool is not None:
                pool.shutdown(wait=False, cancel_futures=True)


def _stop_workers(procs, result_queue) -> None:
    """Stop the workers of an interrupted pool so the program can exit.

    A worker stopped while it sends its result leaves half a message in the pool's result
    pipe; the pool's manager thread then waits for the rest for ever, and Python waits for
    that thread at exit (a batch killed with SIGTERM would hang). After the workers are gone
    the pipe's last write end (held by this process) is closed: the manager thread reads the
    end of the pipe, takes the pool as broken and ends.
    """
    for proc in procs:
        with contextlib.suppress(Exception):
            proc.terminate()
    for proc in procs:
        with contextlib.suppress(Exception):
            proc.join(timeout=5.0)
            if proc.is_alive():
                proc.kill()
                proc.join(timeout=5.0)
    writer = getattr(result_queue, "_writer", None)
    if writer is not None:
        with contextlib.suppress(Exception):
            writer.close()


_SOCKET_PATH_MAX = 104
"""Longest path of a Unix-domain socket on the platforms pqcheck runs on (108 bytes on Linux,
104 on macOS and the BSDs, terminating NUL included)."""


def _socket_path_fits() -> bool:
    """The forkserver's socket fits in the temporary folder: multiprocessing puts it at
    ``<tmp>/pymp-XXXXXXXX/listener-XXXXXXXX`` (about 33 bytes past the folder), and binding a
    longer path fails, which ended a batch in a CI job with a long ``TMPDIR``. When it does not
    fit the workers are started by ``spawn`` (also fresh processes; slower to start)."""
    import tempfile

    return len(os.fsencode(tempfile.gettempdir())) + 40 < _SOCKET_PATH_MAX


def _worker_init():
    """Worker processes leave Ctrl-C to the parent, which saves the work done and stops them,
    and run their FFTs on one thread and a long CSV's parser on two (the pool already uses
    every core)."""
    import signal

    from .._process import keep_freed_memory
    from ..dsp import spectrum
    from ..readers import stream

    keep_freed_memory()
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    spectrum.FFT_WORKERS = 1
    stream.PARSE_THREADS = 2


class DaskExecutor:
    """A Dask cluster: an existing scheduler, or a local cluster of worker processes.

    Parameters
    ----------
    address : str or None
        Scheduler address (``tcp://host:8786``). The workers must see the captures at the same
        paths (a shared file system) and have pqcheck installed.
    workers : int or None
        Start a :class:`distributed.LocalCluster` with this many single-threaded worker
        processes (when ``address`` is None).

    Raises
    ------
    MissingExtraError
        ``dask.distributed`` is not installed.
    InputError
        The scheduler cannot be reached.
    """

    def __init__(self, address: str | None = None, workers: int | None = None):
        try:
            import distributed  # noqa: F401
        except ImportError:
            raise MissingExtraError(
                "the Dask options need dask.distributed, which is not installed; install it "
                "with: pip install 'pqcheck[cluster]'") from None
        self.address = address
        self.workers = workers
        self.client = None
        self.cluster = None

    def __enter__(self):
        import logging

        from distributed import Client, LocalCluster

        if self.address:
            try:
                self.client = Client(self.address, timeout="10s")
            except (OSError, TimeoutError) as exc:
                raise InputError(f"cannot reach the Dask scheduler ({exc})",
                                 field="scheduler") from None
        else:
            self.cluster = LocalCluster(n_workers=self.workers or os.cpu_count() or 1,
                                        threads_per_worker=1, processes=True,
                                        dashboard_address=None, silence_logs=logging.ERROR,
                                        # no dashboard; its HTTP server on a free port
                                        scheduler_kwargs={"dashboard": False,
                                                          "dashboard_address": ":0"})
            self.client = Client(self.cluster)
        return self

    def __exit__(self, *exc):
        if self.client is not None:
            self.client.close()
        if self.cluster is not None:
            self.cluster.close()
        return False

    def imap_unordered(self, fn, items, on_crash=None):
        """Yield ``(index, fn(item))`` as items finish; ``on_crash(item, message)`` stands in
        for an item the cluster could not run (a worker died repeatedly)."""
        from distributed import as_completed as dask_completed

        items = list(items)
        if not items:
            return
        futs = self.client.map(fn, items, pure=False)
        index = {f.key: i for i, f in enumerate(futs)}
        for f in dask_completed(futs):
            i = index[f.key]
            try:
                yield i, f.result()
            except Exception as exc:  # noqa: BLE001 - KilledWorker, lost connection, ...
                if on_crash is None:
                    raise
                yield i, on_crash(items[i], f"the cluster could not run it "
                                            f"({type(exc).__name__}: {exc})")
            finally:
                f.release()


# --- results files ------------------------------------------------------------------------


def _empty_table() -> pa.Table:
    return SCHEMA.empty_table()


def read_results(path, *, fmt: str | None = None) -> pa.Table:
    """Read a results file written by :func:`write_results`.

    Parameters
    ----------
    path : str or os.PathLike
    fmt : {"parquet", "csv"} or None
        File format; None: CSV when the name ends in ``.csv``, else Parquet.

    Raises
    ------
    InputError
        The file cannot be read or lacks the columns of :data:`SCHEMA`.
    """
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    p = Path(path)
    if fmt is None:
        fmt = "csv" if p.suffix.lower() == ".csv" else "parquet"
    try:
        if fmt == "csv":
            table = pacsv.read_csv(p, convert_options=pacsv.ConvertOptions(
                column_types=SCHEMA, strings_can_be_null=True,
                quoted_strings_can_be_null=False))
        else:
            table = pq.read_table(p)
    except (OSError, pa.ArrowException) as exc:
        raise InputError(f"cannot read it as a results table ({exc}); give another output "
                         "file or `force` to replace it", path=str(p)) from None
    missing = [n for n in SCHEMA.names if n not in table.column_names]
    if missing and set(missing) <= {"schema_version", "run_spec"}:
        raise InputError("batch results of an older pqcheck (no schema_version and run_spec "
                         "columns); give another output file or `force` to start it afresh",
                         path=str(p))
    if missing:
        raise InputError(f"not a pqcheck batch results table (no column {missing[0]!r}); give "
                         "another output file or `force` to replace it", path=str(p))
    try:
        table = table.select(SCHEMA.names).cast(SCHEMA)
    except (pa.ArrowException, ValueError) as exc:
        raise InputError(f"columns of unexpected types ({exc})", path=str(p)) from None
    from ..results import SCHEMA_VERSION

    versions = set(table.column("schema_version").to_pylist())
    if versions - {SCHEMA_VERSION}:
        other = sorted(v for v in versions - {SCHEMA_VERSION} if v is not None)
        raise InputError(f"rows of results schema version {other[0] if other else 'none'}; this "
                         f"pqcheck writes version {SCHEMA_VERSION}: give another output file or "
                         "`force` to start it afresh", path=str(p))
    return table


def write_results(table: pa.Table, *, parquet=None, csv=None, protect=()) -> None:
    """Write the results table to Parquet and/or CSV, both or neither (one
    :class:`~pqcheck.files.atomic.OutputSet`), replacing old results files.

    Parameters
    ----------
    table : pyarrow.Table
    parquet, csv : str or os.PathLike or None
        Results files.
    protect : iterable of paths
        Inputs (captures, limit tables) that neither file may be.

    Raises
    ------
    ReportError
        A file cannot be written (its folder is missing, the disk is full, it is an input or
        not a regular file, ...).
    """
    import pyarrow.csv as pacsv
    import pyarrow.parquet as pq

    from ..files.atomic import OutputSet

    outputs = OutputSet(force=True, protect=protect)
    if parquet is not None:
        outputs.put(outputs.add(parquet, "`out`"), lambda fh: pq.write_table(table, fh))
    if csv is not None:
        outputs.put(outputs.add(csv, "`csv`"), lambda fh: pacsv.write_csv(table, fh))
    outputs.commit()


def _is_results_table(path) -> bool:
    """Whether ``path`` holds a results table of :func:`write_results` (its columns)."""
    try:
        if str(path).lower().endswith(".csv"):
            with open(path, encoding="utf-8", errors="replace") as fh:
                head = fh.readline(1 << 16)
            cols = [c.strip().strip('"') for c in head.strip().split(",")]
        else:
            import pyarrow.parquet as pq

            cols = pq.read_schema(path).names
    except (OSError, pa.ArrowException, ValueError):
        return False
    return set(SCHEMA.names) <= set(cols)


class _Results:
    """Old rows from the results file, new rows of this run, periodic atomic rewrites."""

    def __init__(self, parquet, csv, key: str, force: bool, protect=()):
        from ..files.atomic import check_target

        self.parquet, self.csv = parquet, csv
        self.protect = tuple(protect)
        for path, opt in ((parquet, "`out`"), (csv, "`csv`")):
            if path is not None:
                check_target(path, force=True, option=opt, protect=self.protect)
        self.old = _empty_table()
        source = next(((p, f) for p, f in ((parquet, "parquet"), (csv, "csv"))
                       if p is not None and Path(p).exists()), None)
        if source is not None and not force:
            self.old = read_results(source[0], fmt=source[1])
            keys = set(self.old.column("settings_key").drop_null().to_pylist()) - {key}
            if keys:
                raise InputError(
                    "holds results made with other limit tables, selectors or options; give "
                    "another output file, or `force` to start it afresh", path=str(source[0]))
        self.new: list = []  # one Arrow table per capture (columnar: a fleet's rows fit)
        self.redone_paths: set = set()
        self.last_write = time.monotonic()

    def done(self, retry_errors: bool) -> set:
        """``(capture path, SHA-256)`` of the captures the file already holds (without error
        rows if asked): a capture is done when both its path and its content match, so equal
        bytes under another name still get their own rows."""
        caps = self.old.column("capture").to_pylist()
        shas = self.old.column("capture_sha256").to_pylist()
        verdicts = self.old.column("capture_verdict").to_pylist()
        return {(c, s) for c, s, v in zip(caps, shas, verdicts)
                if s and not (retry_errors and v == "error")}

    def add(self, capture: str, sha, rows: list):
        self.redone_paths.add(capture)
        self.new.append(pa.Table.from_pylist(rows, schema=SCHEMA))

    def table(self) -> pa.Table:
        """Old rows not redone, then the new ones, sorted by capture (stable)."""
        import pyarrow.compute as pc

        old = self.old
        if old.num_rows and self.redone_paths:
            redone = pc.is_in(old.column("capture"),
                              pa.array(sorted(self.redone_paths), pa.string()))
            old = old.filter(pc.invert(pc.fill_null(redone, False)))
        t = pa.concat_tables([old, *self.new])
        return t.take(pc.sort_indices(t, sort_keys=[("capture", "ascending")]))

    def write(self, *, final: bool = False):
        if self.parquet is None and self.csv is None:
            return
        if not final and time.monotonic() - self.last_write < CHECKPOINT_S:
            return
        write_results(self.table(), parquet=self.parquet, csv=self.csv, protect=self.protect)
        self.last_write = time.monotonic()


# --- the run ------------------------------------------------------------------------------


@dataclass(frozen=True)
class BatchRun:
    """What a batch did.

    Attributes
    ----------
    table : pyarrow.Table
        Rows of the captures of this run's inputs: those checked now and those found already
        in the results file (:data:`SCHEMA`), sorted by capture.
    captures : tuple of str
        Captures found.
    checked : int
        Captures analysed (or failed) in this run, plus those that could not be hashed.
    skipped : int
        Captures whose SHA-256 was already in the results file.
    ignored : tuple of str
        Files left out (a .dat without its .cfg).
    written : tuple of str
        Results files written.
    rows_written : int
        Rows in the results files (they may hold other captures from earlier runs).
    """

    table: pa.Table
    captures: tuple
    checked: int
    skipped: int
    ignored: tuple = ()
    written: tuple = ()
    rows_written: int = 0


def _bar(total: int, desc: str, show: bool):
    import sys

    from tqdm import tqdm

    return tqdm(total=total, desc=desc, unit="capture", file=sys.stderr, dynamic_ncols=True,
                leave=False, disable=not show)


def run_batch(inputs, spec, *, out=None, csv=None, executor=None, force=False,
              retry_errors=False, progress=False, cache_dir=None, use_cache=True) -> BatchRun:
    """Check every capture found in ``inputs`` against the spec's limit tables.

    Parameters
    ----------
    inputs : sequence of str or os.PathLike
        Folders, glob patterns or files (see :func:`find_captures`).
    spec : RunSpec
        Limits and options (its capture path is ignored: each capture found is checked with
        :meth:`~pqcheck.record.RunSpec.with_capture`).
    out, csv : str or os.PathLike or None
        Results files (Parquet, CSV). An existing one is resumed from (captures whose SHA-256
        it holds are skipped) unless ``force``.
    executor : InlineExecutor, ProcessExecutor or DaskExecutor, optional
        Where the work runs (entered and left here); default :class:`InlineExecutor`.
    force : bool
        Ignore and replace existing results files.
    retry_errors : bool
        Check again the captures that the results file records as errors.
    progress : bool
        Show progress bars on stderr.
    cache_dir : str or None
        Cache folder (None: the default folder on each worker).
    use_cache : bool
        Read and write the cache of parsed captures and results.

    Returns
    -------
    BatchRun

    Raises
    ------
    InputError
        No capture found, a limit table or selector is wrong, or an existing results file is
        not one, or was made with other settings.
    ReportError
        A results file cannot be written.
    MissingExtraError
        The executor needs an optional dependency.
    """
    spec = batch_spec(spec)
    key = settings_key(spec)  # resolves the tables: bad limits stop the batch before any work
    captures, ignored = find_captures(inputs, exclude=(out, csv))
    _refuse_captures_as_results(inputs, out, csv)
    tables = [sel.table for sel in spec.limits if os.path.isfile(sel.table)]  # absolute paths
    results = _Results(out, csv, key, force, protect=(*captures, *tables))
    done = results.done(retry_errors)
    executor = executor or InlineExecutor()
    spec_dict = spec.to_dict()
    cache_dir = None if cache_dir is None else os.path.abspath(cache_dir)
    shas: list = [None] * len(captures)
    opened = [os.path.abspath(c) for c in captures]  # workers may run in another folder
    todo, skipped_paths, unreadable = [], set(), 0
    try:
        with executor as ex:
            with _bar(len(captures), "hashing", progress) as bar:
                for i, h in ex.imap_unordered(hash_capture, opened,
                                              lambda c, m: {"sha256": None, "error": m}):
                    bar.update(1)
                    shas[i] = h["sha256"]
                    if h["error"]:
                        unreadable += 1
                        message = _relabel(h["error"], opened[i], captures[i])
                        results.add(captures[i], None,
                                    [error_row(captures[i], None, key, message,
                                               row_spec(spec_dict, opened[i]))])
                    elif (captures[i], h["sha256"]) in done:
                        skipped_paths.add(captures[i])
                    else:
                        todo.append(i)
            tasks = [{"capture": captures[i], "path": opened[i],
                      "sha256": shas[i], "key": key, "spec": spec_dict, "cache_dir": cache_dir,
                      "use_cache": use_cache} for i in sorted(todo)]

            def crashed(task, message):
                return [error_row(task["capture"], task["sha256"], key, message,
                                  _task_spec(task))]

            with _bar(len(tasks), "checking", progress) as bar:
                for i, rows in ex.imap_unordered(check_task, tasks, crashed):
                    bar.update(1)
                    results.add(tasks[i]["capture"], tasks[i]["sha256"], rows)
                    results.write()
    except BaseException:
        # interrupted or failed: keep the work done so far, so that a re-run resumes from it
        with contextlib.suppress(Exception):
            results.write(final=True)
        raise
    results.write(final=True)
    full = results.table()
    import pyarrow.compute as pc

    mine = pc.fill_null(pc.is_in(full.column("capture"), pa.array(
        sorted(results.redone_paths | skipped_paths), pa.string())), False)
    written = tuple(str(p) for p in (out, csv) if p is not None)
    return BatchRun(table=full.filter(mine), captures=captures,
                    checked=len(tasks) + unreadable,
                    skipped=len(captures) - len(tasks) - unreadable,
                    ignored=ignored, written=written,
                    rows_written=full.num_rows if written else 0)


# --- summary ------------------------------------------------------------------------------


def _label(quantity, applies_to, order) -> str:
    """``I5``, ``V7``, ``THD(I)``, ``TDD``... as `check` names a limit."""
    from ..limits import quantity_label

    return quantity_label(quantity, applies_to, order)


def summarize(table: pa.Table, *, worst: int = 10) -> dict:
    """Counts and worst margins of a results table.

    Parameters
    ----------
    table : pyarrow.Table
        Rows of :data:`SCHEMA`.
    worst : int
        How many captures to list by their lowest margin.

    Returns
    -------
    dict
        ``captures``: number of captures; ``verdicts``: captures per verdict (``fail``,
        ``inconclusive``, ``pass``, ``not applicable``, ``error``); ``checks``: checks per
        verdict; ``worst``: the lowest-margin check of each capture among its pass, fail and
        inconclusive checks, lowest first (at most ``worst`` of them; ``capture``,
        ``margin_percent`` [%], ``verdict``, ``table_id``, ``channel``, ``label``,
        ``statistic``, ``measured``, ``limit``, ``unit``); ``errors``: ``{capture, error}`` per
        capture that could not be checked; ``per_capture``: one entry per capture, in table
        order (``capture``, ``capture_sha256``, ``verdict``, ``checks`` counts,
        ``worst_margin_percent`` [%], ``error``).
    """
    cols = ["capture", "capture_sha256", "capture_verdict", "verdict", "quantity", "order",
            "applies_to", "margin_percent", "error", "table_id", "channel", "statistic",
            "measured", "limit", "unit"]
    df = table.select(cols).to_pandas().astype(object)
    df = df.where(df.notna(), None)
    df["capkey"] = list(zip(df["capture"], df["capture_sha256"]))
    firsts = df.drop_duplicates("capkey")
    per = {}
    for r in firsts.itertuples(index=False):
        per[r.capkey] = {"capture": r.capture, "capture_sha256": r.capture_sha256,
                       "verdict": r.capture_verdict, "checks": dict.fromkeys(_VERDICTS[:4], 0),
                       "worst_margin_percent": None, "error": r.error}
    checks = df[df["quantity"].notna() & df["verdict"].isin(_VERDICTS[:4])]
    for (cap, v), n in checks.groupby(["capkey", "verdict"], sort=False).size().items():
        per[cap]["checks"][v] = int(n)
    ranked = df[df["verdict"].isin(("pass", "fail", "inconclusive"))
                & df["margin_percent"].notna()].copy()
    ranked["margin_percent"] = ranked["margin_percent"].astype(float)
    lowest = ranked.loc[ranked.groupby("capkey", sort=False)["margin_percent"].idxmin()]
    for r in lowest.itertuples(index=False):
        per[r.capkey]["worst_margin_percent"] = float(r.margin_percent)
    lowest = lowest.sort_values(["margin_percent", "capture"], kind="stable").head(worst)
    worst_rows = [{"capture": r.capture, "margin_percent": float(r.margin_percent),
                   "verdict": r.verdict, "table_id": r.table_id, "channel": r.channel,
                   "label": _label(r.quantity, r.applies_to, r.order),
                   "statistic": r.statistic, "measured": _num(r.measured),
                   "limit": _num(r.limit), "unit": r.unit}
                  for r in lowest.itertuples(index=False)]
    caps = list(per.values())
    return {
        "captures": len(caps),
        "verdicts": {v: sum(1 for e in caps if e["verdict"] == v) for v in _VERDICTS},
        "checks": {v: sum(e["checks"][v] for e in caps) for v in _VERDICTS[:4]},
        "worst": worst_rows,
        "errors": [{"capture": e["capture"], "error": e["error"]} for e in caps
                   if e["verdict"] == "error"],
        "per_capture": caps,
    }


def exit_code(summary: dict) -> int:
    """1 if a capture fails, else 3 if one is inconclusive or could not be checked (error),
    else 4 if one is not applicable (outside the tables' scope; never 0), else 0."""
    v = summary["verdicts"]
    if v.get("fail"):
        return 1
    if v.get("inconclusive") or v.get("error"):
        return 3
    if v.get("not applicable"):
        return 4
    return 0
