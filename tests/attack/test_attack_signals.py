"""Attacks with signals: SIGINT (Ctrl-C), SIGTERM (``timeout``, schedulers, a cancelled CI
job) and SIGKILL sent to ``report``, ``site`` and ``batch`` at moments spread over the run.

Documented behaviour (README, "Exit codes"): after SIGINT the command exits with 130, after
SIGTERM with 143, having removed its temporaries and written no output (a report's set of
PDF, JSON and CSV tables is committed together or not at all); a batch first saves the rows of
the captures it finished, so a re-run resumes. SIGKILL cannot be caught: it may leave hidden
``.part`` temporaries, but never an output under its own name that is incomplete, and a
batch's results file is the last complete one.

Moments: a fixed delay after the start (during start-up or the analysis), and a delay after
the first temporary of the write phase appears. A signal during start-up, before the command
runs, ends the process as the signal does by default (SIGINT: one line, no traceback, once
Python itself has started; the shell shows 130 or 143 either way). The write phase is stretched by pausing in
``os.fsync`` in the child (see ``_kit.PRELUDE_SLOW_FSYNC``), so the "after the first
temporary" signals land while the set is being written. Children run at once to keep the
test short; a child that finished before its moment must have produced the complete set.
"""

from __future__ import annotations

import os
import signal
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import pytest
from _kit import (
    EXIT,
    LIMITS,
    VERDICTS,
    finish,
    invoke,
    outcome,
    snapshot,
    spawn,
    wait_for,
    write_capture,
    write_site,
)

from pqcheck.report.results import CSV_TABLES

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")

SIG_CODE = {signal.SIGINT: EXIT["sigint"], signal.SIGTERM: EXIT["sigterm"]}


@dataclass
class Child:
    name: str
    sig: int
    after_start_s: float | None = None
    after_part_s: float | None = None
    previous: bool = False
    proc: object = None


def _hidden(d: Path) -> bool:
    """Whether a temporary (hidden name) exists in ``d`` or in its sub-folders."""
    try:
        return any(q.name.startswith(".") for q in d.rglob(".*"))
    except OSError:
        return False


def _send_when_due(children, root: Path, timeout_s: float = 90.0) -> dict:
    """Send each child its signal at its moment; return {name: whether it was sent}."""
    started = {c.name: time.monotonic() for c in children}
    part_seen: dict = {}
    sent = {c.name: False for c in children}
    t_end = time.monotonic() + timeout_s
    while time.monotonic() < t_end:
        live = [c for c in children if not sent[c.name] and c.proc.poll() is None]
        if not live:
            break
        now = time.monotonic()
        for c in live:
            if c.after_part_s is not None and c.name not in part_seen and _hidden(root / c.name):
                part_seen[c.name] = now
            due = (c.after_start_s is not None and now - started[c.name] >= c.after_start_s) \
                or (c.name in part_seen and now - part_seen[c.name] >= c.after_part_s)
            if due:
                os.kill(c.proc.pid, c.sig)
                sent[c.name] = True
        time.sleep(0.002)
    return sent


# ---- report ---------------------------------------------------------------------------------

REPORT_CHILDREN = [
    Child("term-at-0.8s", signal.SIGTERM, after_start_s=0.8),
    Child("int-at-1.2s", signal.SIGINT, after_start_s=1.2),
    Child("term-at-1.8s", signal.SIGTERM, after_start_s=1.8),
    Child("int-at-write", signal.SIGINT, after_part_s=0.0),
    Child("term-mid-write", signal.SIGTERM, after_part_s=0.35, previous=True),
    Child("kill-mid-write", signal.SIGKILL, after_part_s=0.25),
    Child("kill-mid-write-prev", signal.SIGKILL, after_part_s=0.5, previous=True),
]


def _set(d: Path) -> list:
    return [d / "r.pdf", d / "r.json", *(d / "csv" / f"{n}.csv" for n in CSV_TABLES)]


def test_signals_to_report_leave_all_or_nothing(tmp_path):
    cap = write_capture(tmp_path / "in" / "cap.csv")
    before = snapshot(tmp_path / "in")
    prev = {}
    for c in REPORT_CHILDREN:
        d = tmp_path / c.name
        (d / "csv").mkdir(parents=True)
        if c.previous:
            for p in _set(d):
                p.write_bytes(b"previous " + p.name.encode())
                prev[p] = p.read_bytes()
        else:
            (d / "csv").rmdir()  # made by the command
        argv = ["report", cap, *LIMITS, "-o", d / "r.pdf", "--json", d / "r.json", "--csv",
                d / "csv", "-q", "--no-cache", *(["--force"] if c.previous else [])]
        c.proc = spawn(argv, cwd=d, fsync_delay_s=0.12)
    try:
        sent = _send_when_due(REPORT_CHILDREN, tmp_path)
    finally:
        runs = {c.name: finish(c.proc) for c in REPORT_CHILDREN}
    states = {}
    for c in REPORT_CHILDREN:
        run, d = runs[c.name], tmp_path / c.name
        killed = c.sig == signal.SIGKILL and sent[c.name]
        if killed:
            codes = [-signal.SIGKILL]
        elif sent[c.name]:
            # SIGTERM during start-up (before the command line runs) ends the process by the
            # default action (the shell shows 143 too); a signal just after the end: too late
            codes = [SIG_CODE[c.sig], -c.sig, *VERDICTS]
        else:
            codes = list(VERDICTS)
        states[c.name] = outcome(run, codes=codes, inputs_before=before, outputs=_set(d),
                                 previous={p: v for p, v in prev.items() if d in p.parents},
                                 out_dirs=[d, d / "csv"], killed=killed)
        if run.code in SIG_CODE.values():
            assert states[c.name] == "absent", c.name
            assert "interrupted" in run.stderr.lower() or "terminated" in run.stderr.lower()
    # the signals sent after the first temporary appeared did land inside the write phase
    for name in ("int-at-write", "term-mid-write", "kill-mid-write", "kill-mid-write-prev"):
        assert sent[name] and states[name] == "absent", (name, runs[name].code, runs[name].stderr)


# ---- site -----------------------------------------------------------------------------------

SITE_CHILDREN = [
    Child("term-at-0.6s", signal.SIGTERM, after_start_s=0.6),
    Child("term-at-write", signal.SIGTERM, after_part_s=0.0),
    Child("kill-at-write", signal.SIGKILL, after_part_s=0.05),
]


def test_signals_to_site_leave_no_partial_pdf(tmp_path):
    for c in SITE_CHILDREN:
        d = tmp_path / c.name
        d.mkdir()
        site = write_site(d)
        c.before = snapshot(site, d / "unit.csv")
        c.proc = spawn(["site", site, "-o", d / "site.pdf"], cwd=d, fsync_delay_s=0.4)
    try:
        sent = _send_when_due(SITE_CHILDREN, tmp_path)
    finally:
        runs = {c.name: finish(c.proc) for c in SITE_CHILDREN}
    for c in SITE_CHILDREN:
        run, d = runs[c.name], tmp_path / c.name
        killed = c.sig == signal.SIGKILL and sent[c.name]
        codes = ([-signal.SIGKILL] if killed else
                 [SIG_CODE[c.sig], -c.sig, *VERDICTS] if sent[c.name] else list(VERDICTS))
        state = outcome(run, codes=codes, inputs_before=c.before, outputs=[d / "site.pdf"],
                        out_dirs=[d], killed=killed)
        if run.code in SIG_CODE.values() or run.code < 0:
            assert state == "absent"


# ---- batch ----------------------------------------------------------------------------------

N_CAPTURES = 6


def _fleet(d: Path) -> Path:
    fleet = d / "fleet"
    for k in range(N_CAPTURES):
        # fifth harmonic from 1 % to 26 %: the later captures fail the 12 % limit
        write_capture(fleet / f"unit{k}.csv", h5=0.01 + 0.05 * k)
    return fleet


def _cached_results(cache: Path) -> int:
    """Analysis results the batch has cached so far (one ``.npz`` per capture)."""
    return sum(1 for q in cache.rglob("*.npz") if not q.name.startswith("."))


def _data_lines(path: Path) -> int:
    """Data lines of a results table written so far (0 when there is none yet; the file is
    replaced whole, never seen half-written)."""
    try:
        return max(0, path.read_bytes().count(b"\n") - 1)
    except OSError:
        return 0


def _rows(path: Path) -> dict:
    """Capture file name to its verdict, from a results table."""
    import pyarrow.csv as pacsv

    t = pacsv.read_csv(path).to_pydict()
    return {Path(c).name: v for c, v in zip(t["capture"], t["capture_verdict"])}


@pytest.fixture(scope="module")
def fresh_batch(tmp_path_factory):
    """The results of an uninterrupted batch over the same fleet (file name to verdict)."""
    d = tmp_path_factory.mktemp("fresh")
    fleet = _fleet(d)
    ref = invoke(["batch", fleet, *LIMITS, "--csv", d / "fresh.csv", "-q", "--jobs", "1",
                  "--no-cache"])
    assert ref.code == EXIT["fail"], ref.stderr
    return _rows(d / "fresh.csv")


@pytest.mark.parametrize("sig, jobs", [(signal.SIGTERM, 1), (signal.SIGINT, 1),
                                       (signal.SIGTERM, 2), (signal.SIGKILL, 1)])
def test_signal_mid_batch_keeps_finished_rows_and_resumes(tmp_path, sig, jobs, fresh_batch):
    fleet = _fleet(tmp_path)
    before = snapshot(fleet)
    cache = tmp_path / "cache"
    res = tmp_path / "out" / "results.csv"
    res.parent.mkdir()
    argv = ["batch", fleet, *LIMITS, "--csv", res, "-q", "--jobs", str(jobs), "--cache-dir",
            cache]
    proc = spawn(argv, cwd=tmp_path)
    # captures analysed (each leaves its cached result), then the signal: one process saves
    # the rows of the first before it starts the second. A pool of two: four finished and the
    # rows of one in the results file (the parent may be slower to take a result than the
    # workers are to finish the next ones on a two-core machine, so finished work alone does
    # not say that rows were handed back)
    if jobs == 1:
        ready = lambda: _cached_results(cache) >= 2  # noqa: E731
    else:
        ready = lambda: _cached_results(cache) >= 4 and _data_lines(res) >= 1  # noqa: E731
    reached = wait_for(ready, proc)
    if proc.poll() is None:
        os.kill(proc.pid, sig)
    run = finish(proc)
    if sig == signal.SIGKILL:
        codes = [-signal.SIGKILL, EXIT["fail"]]
    else:
        codes = [SIG_CODE[sig], EXIT["fail"]]
    outcome(run, codes=codes, inputs_before=before, out_dirs=[res.parent],
            killed=sig == signal.SIGKILL)
    if run.code == SIG_CODE.get(sig):
        assert reached
        kept = _rows(res)  # a complete results table, written when the signal came
        assert 1 <= len(kept) <= N_CAPTURES
        assert "interrupted" in run.stderr.lower() or "terminated" in run.stderr.lower()
    if sig == signal.SIGKILL and res.exists():
        _rows(res)  # whatever survived is a complete table
    if jobs > 1:  # no worker left running
        _group_gone(proc.pid)
    # the re-run resumes and ends with every capture, as a fresh batch in another file
    again = invoke(argv)
    outcome(again, codes=[EXIT["fail"]], inputs_before=before)
    assert _rows(res) == fresh_batch
    assert len(fresh_batch) == N_CAPTURES


def _group_gone(pgid: int, timeout_s: float = 10.0) -> None:
    t_end = time.monotonic() + timeout_s
    while time.monotonic() < t_end:
        try:
            os.killpg(pgid, 0)
        except ProcessLookupError:
            return
        time.sleep(0.05)
    os.killpg(pgid, signal.SIGKILL)
    pytest.fail("worker processes survived the interrupted batch")
