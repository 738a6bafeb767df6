"""Shared pieces of the attack suite (tests/attack/): inputs written by the tests, the checks
every attack ends with, and the hostile environments (full disk, read-only folder).

Every attack ends with the same four checks (:func:`outcome`):

- no traceback on stderr, and no exception escaping the command;
- the exit code is one the command documents for that situation;
- the output set is complete or absent as a whole (a file of the set that existed before is
  either unchanged or replaced together with the others), and no temporary is left behind
  unless the process was killed with SIGKILL (which no handler can catch);
- no input was modified: SHA-256 of every input file before and after.

The captures are synthesised here from their definition (a 50 Hz sine with a chosen fifth
harmonic), in the layout a scope's CSV export has (time column, one column per channel, units
in brackets); nothing is copied from a real file.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import signal
import stat
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest

LIMITS = ("--limits", "ieee519-2022", "--voltage-level", "400", "--isc", "20000", "--il", "100")
"""IEEE 519-2022 with ISC/IL = 200: Table 2 allows 12 % (from memory: the 100 < ISC/IL < 1000
row, orders 3-10) for the fifth of a current whose IL is 100 A, so 2 % passes and 25 % fails."""

EXIT = {"pass": 0, "fail": 1, "usage": 2, "inconclusive": 3, "internal": 5,
        "sigint": 130, "sigterm": 143}
"""Documented exit codes (README, ``pqcheck --help``)."""

VERDICTS = (0, 1, 3, 4)
"""Exit codes of a run that ended with a verdict (pass, fail, inconclusive, not applicable):
a capture of 0.6 s is inconclusive under IEEE 519, whose statistics need a week's survey."""

FS_HZ = 6400.0
F0_HZ = 50.0


def capture_text(*, h5: float = 0.02, dur_s: float = 0.6, fs_hz: float = FS_HZ,
                 width: int | None = None) -> str:
    """A single-phase capture as a scope writes it: ``time [s],ia [A],va [V]``.

    ``h5`` is the fifth-harmonic amplitude relative to the fundamental (100 A peak); the
    voltage is a clean 325 V peak sine. ``width`` pads every number to a fixed width, so two
    captures with other values have the same size in bytes.
    """
    t = np.arange(int(round(dur_s * fs_hz))) / fs_hz
    w = 2 * np.pi * F0_HZ * t
    i = 100.0 * (np.sin(w) + h5 * np.sin(5 * w))
    v = 325.0 * np.sin(w)
    fmt = "{:.9g}" if width is None else "{:" + str(width) + ".6f}"
    lines = ["time [s],ia [A],va [V]\n"]
    lines += [",".join(fmt.format(x) for x in row) + "\n" for row in zip(t, i, v)]
    return "".join(lines)


def write_capture(path: Path, **kw) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(capture_text(**kw))
    return path


def write_plan(d: Path, *, captures=("cap.csv",), table: str = "ieee519-2022") -> Path:
    """A test plan naming ``captures`` (written when missing) and a limit table."""
    for c in captures:
        if not (d / c).exists():
            write_capture(d / c)
    caps = "".join(f'\n[[captures]]\nid = "c{k}"\nfile = "{c}"\nload_point = "100 %"\n'
                   for k, c in enumerate(captures))
    text = f"""schema = 1
title = "Attack plan"

[site]
name = "Lab"

[equipment]
name = "Unit under test"

[[limits]]
table = "{table}"
voltage_level_v = 400
isc_a = 20000
il_a = 100
{caps}"""
    p = d / "plan.toml"
    p.write_text(text)
    return p


def write_site(d: Path, *, capture: str = "unit.csv") -> Path:
    """A site file with one kind of unit measured by ``capture`` (written when missing)."""
    if not (d / capture).exists():
        write_capture(d / capture)
    p = d / "site.toml"
    p.write_text(f"""schema = 1
name = "Attack site"

[supply]
nominal_voltage_v = 400
ssc_va = 20e6
x_over_r = 5

[limits]
table = "ieee519-2022"

[[units]]
name = "unit A"
capture = "{capture}"
count = 2
load_point = "100 %"
connection = "three-phase"
""")
    return p


# ---- inputs before and after ----------------------------------------------------------------


def sha256(path: Path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def snapshot(*paths) -> dict:
    """SHA-256 of every regular file under the given files and folders."""
    out = {}
    for p in map(Path, paths):
        files = [p] if p.is_file() else [q for q in p.rglob("*") if q.is_file()]
        for f in files:
            out[str(f)] = sha256(f)
    return out


def tree(d: Path) -> list:
    """Every entry under ``d``, relative, sorted (hidden temporaries included)."""
    return sorted(str(q.relative_to(d)) for q in Path(d).rglob("*"))


# ---- running the command line ---------------------------------------------------------------


@dataclass
class Run:
    code: int
    stdout: str
    stderr: str
    argv: list = field(default_factory=list)


def invoke(argv, *, cwd=None, monkeypatch=None) -> Run:
    """Run the CLI in this process (click's runner): fast, and an escaping exception shows."""
    from click.testing import CliRunner

    from pqcheck.cli import main

    argv = [str(a) for a in argv]
    if cwd is not None and monkeypatch is not None:
        monkeypatch.chdir(cwd)
    res = CliRunner().invoke(main, argv)
    exc = res.exception
    if exc is not None and not isinstance(exc, SystemExit):
        import traceback

        pytest.fail("exception escaped the command line:\n"
                    + "".join(traceback.format_exception(exc)))
    return Run(res.exit_code, res.stdout, res.stderr, argv)


PRELUDE_SLOW_FSYNC = r"""
import os, sys, time
_fsync = os.fsync
def _slow_fsync(fd):
    time.sleep(float(os.environ["ATTACK_FSYNC_DELAY_S"]))
    return _fsync(fd)
os.fsync = _slow_fsync
"""
"""Slows the write phase of a child down without knowing the writer's code: every file is
flushed to disk (``os.fsync``) before it takes its name, so a pause in fsync stretches the
window between the first temporary appearing and the set being committed."""


def spawn(argv, *, cwd, env=None, fsync_delay_s: float | None = None) -> subprocess.Popen:
    """Start ``python -m pqcheck.cli argv`` (optionally with slowed fsync) in a new session."""
    code = "import runpy, sys\n"
    if fsync_delay_s is not None:
        code += PRELUDE_SLOW_FSYNC
    code += "sys.argv = ['pqcheck', *sys.argv[1:]]\nrunpy.run_module('pqcheck.cli', " \
            "run_name='__main__')\n"
    e = dict(os.environ)
    e.update(env or {})
    if fsync_delay_s is not None:
        e["ATTACK_FSYNC_DELAY_S"] = str(fsync_delay_s)
    return subprocess.Popen([sys.executable, "-c", code, *map(str, argv)], cwd=cwd, env=e,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True, preexec_fn=_interactive_signals)


def _interactive_signals() -> None:
    """In the child before it runs Python: SIGINT as an interactive shell leaves it (the
    default action, so Python installs its Ctrl-C handler). A test suite started in the
    background by a non-interactive shell (a CI step, ``cmd &``) inherits SIGINT ignored,
    and a child that ignores it would never see the Ctrl-C these tests send."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def finish(proc: subprocess.Popen, timeout_s: float = 120.0) -> Run:
    try:
        out, err = proc.communicate(timeout=timeout_s)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        out, err = proc.communicate()
        pytest.fail(f"the command hung (killed after {timeout_s} s): {proc.args}\n{err}")
    return Run(proc.returncode, out, err, list(proc.args))


def wait_for(predicate, proc: subprocess.Popen, timeout_s: float = 90.0) -> bool:
    """Poll ``predicate()`` every 2 ms until true; False if the process ended first."""
    t_end = time.monotonic() + timeout_s
    while time.monotonic() < t_end:
        if predicate():
            return True
        if proc.poll() is not None:
            return bool(predicate())
        time.sleep(0.002)
    return False


def code_of(sig) -> int:
    """Exit status the shell reports for a process ended by ``sig``'s handler."""
    return 128 + int(sig)


# ---- the checks every attack ends with ------------------------------------------------------


def no_traceback(run: Run) -> None:
    for stream in (run.stdout, run.stderr):
        assert "Traceback" not in stream, f"traceback from {run.argv}:\n{stream[-3000:]}"
        assert "RecursionError" not in stream and "MemoryError" not in stream, stream[-2000:]


def outcome(run: Run, *, codes, inputs_before: dict | None = None,
            outputs=(), previous: dict | None = None, out_dirs=(), killed: bool = False,
            message: str | None = None) -> str:
    """The checks every attack ends with; returns ``"complete"`` or ``"absent"``.

    Parameters
    ----------
    run : Run
    codes : iterable of int
        Exit codes documented for this case.
    inputs_before : dict
        :func:`snapshot` of the inputs before the run; compared with a fresh one.
    outputs : sequence of Path
        The output set (files; a CSV folder counts by its files).
    previous : dict of Path to bytes
        Members of the set that existed before the run, with their content.
    out_dirs : sequence of Path
        Folders in which nothing may be left but the set (no temporaries).
    killed : bool
        SIGKILL: hidden temporaries may remain; they are never under a target's name.
    message : str or None
        Regular expression that stderr must match (checked when the exit code is 2).
    """
    import re

    no_traceback(run)
    assert run.code in tuple(codes), (f"exit {run.code}, expected one of {codes}: "
                                      f"{run.argv}\n{run.stderr[-2000:]}")
    if inputs_before is not None:
        after = {p: (sha256(Path(p)) if Path(p).is_file() else None) for p in inputs_before}
        changed = [p for p in inputs_before if after[p] != inputs_before[p]]
        assert not changed, f"inputs modified: {changed}"
    previous = {Path(k): v for k, v in (previous or {}).items()}
    states = []
    for p in map(Path, outputs):
        if not p.exists():
            assert p not in previous, f"{p}: the previous version disappeared"
            states.append("absent")
        elif p in previous and p.read_bytes() == previous[p]:
            states.append("previous")
        else:
            states.append("new")
    kinds = set(states)
    assert not ({"new"} <= kinds and kinds & {"absent", "previous"}), (
        f"partial output set: {dict(zip(map(str, outputs), states))}")
    for d in map(Path, out_dirs):
        if not d.exists():
            continue
        left = [q.name for q in d.iterdir() if q.name.startswith(".")]
        if killed:
            assert all(q.endswith(".part") or ".part" in q for q in left), left
        else:
            assert left == [], f"temporaries left in {d}: {left}"
    if run.code == EXIT["usage"] and message is not None:
        assert re.search(message, run.stderr), (message, run.stderr)
    if "new" in kinds:
        assert run.code in VERDICTS, "a complete output set comes with a verdict exit code"
        return "complete"
    return "absent"


# ---- hostile environments -------------------------------------------------------------------


def _can_mount() -> str | None:
    if not sys.platform.startswith("linux"):
        return "tmpfs mounts need Linux"
    if os.geteuid() != 0:
        return "mounting a small tmpfs needs root; run the suite as root to cover a full disk"
    return None


@contextlib.contextmanager
def small_tmpfs(where: Path, size_bytes: int):
    """A tmpfs of ``size_bytes`` mounted at ``where`` (root only), unmounted afterwards."""
    reason = _can_mount()
    if reason:
        pytest.skip(reason)
    where.mkdir(parents=True, exist_ok=True)
    size_k = max(4, size_bytes // 1024)
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size_k}k,mode=0755", "tmpfs",
                        str(where)], capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {r.stderr.strip()}")
    try:
        yield where
    finally:
        subprocess.run(["umount", "-l", str(where)], capture_output=True)


@contextlib.contextmanager
def read_only_folder(where: Path):
    """A folder nothing can be written in: a read-only tmpfs as root (root ignores permission
    bits), mode 0555 otherwise."""
    where.mkdir(parents=True, exist_ok=True)
    if os.geteuid() == 0:
        reason = _can_mount()
        if reason:
            pytest.skip(reason)
        r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k,ro", "tmpfs", str(where)],
                           capture_output=True, text=True)
        if r.returncode != 0:
            pytest.skip(f"cannot mount a read-only tmpfs here: {r.stderr.strip()}")
        try:
            yield where
        finally:
            subprocess.run(["umount", "-l", str(where)], capture_output=True)
    else:
        where.chmod(0o555)
        try:
            yield where
        finally:
            where.chmod(0o755)


def is_special(p: Path) -> bool:
    m = os.lstat(p).st_mode
    return stat.S_ISCHR(m) or stat.S_ISBLK(m) or stat.S_ISFIFO(m) or stat.S_ISSOCK(m)


@pytest.fixture
def no_hang():
    """Fail a test that blocks (a FIFO opened without a writer, an endless device read) after
    60 s instead of hanging the suite: SIGALRM interrupts the blocking call."""
    if not hasattr(signal, "SIGALRM"):
        yield
        return

    def _alarm(signum, frame):
        raise TimeoutError("the command hung for 60 s (blocked on a special file?)")

    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(60)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
