"""Attacks on the outputs: a command's own inputs named as outputs, special files as outputs,
full disks, read-only folders and CSV folders that cannot be made.

The promises under attack (README, "Outputs"): ``--force`` replaces an earlier output but
never one of the command's inputs (compared by device and inode, so a hard link or a symlink
to an input counts) and never a file that is not a regular file; a report's outputs (PDF,
``--json``, ``--csv`` tables) are written all together or not at all.
"""

from __future__ import annotations

import os
import stat

import pytest
from _kit import (
    EXIT,
    LIMITS,
    VERDICTS,
    invoke,
    no_hang,  # noqa: F401 - a fixture, used through usefixtures
    outcome,
    read_only_folder,
    small_tmpfs,
    snapshot,
    tree,
    write_capture,
    write_plan,
)

from pqcheck.report.results import CSV_TABLES

pytestmark = [pytest.mark.skipif(os.name != "posix", reason="POSIX file semantics"),
              pytest.mark.usefixtures("no_hang")]

INPUT_CLASH = r"is an input of this command"


def _report(src, *out, extra=()):
    return ["report", str(src), *out, "-q", "--no-cache", *extra]


# ---- inputs named as outputs ----------------------------------------------------------------


@pytest.mark.parametrize("where", ["-o", "--json", "hardlink-o", "symlink-json"])
def test_report_never_replaces_its_capture(tmp_path, where):
    cap = write_capture(tmp_path / "cap.csv")
    before = snapshot(cap)
    out, js = tmp_path / "r.pdf", tmp_path / "r.json"
    if where == "-o":
        out = cap
    elif where == "--json":
        js = cap
    elif where == "hardlink-o":
        out = tmp_path / "link.pdf"
        os.link(cap, out)
    else:
        js = tmp_path / "link.json"
        js.symlink_to(cap.name)
    run = invoke(_report(cap, "-o", out, "--json", js, extra=(*LIMITS, "--force")))
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=INPUT_CLASH if where != "symlink-json" else r"symbolic link|input")
    assert "--force" not in run.stderr, "the refusal must not suggest --force"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name not in (
        "link.pdf", "link.json")) == ["cap.csv"]


def test_report_never_replaces_its_limit_table(tmp_path):
    from pqcheck.limits import load_table

    table = tmp_path / "table.toml"
    table.write_text(load_table("ieee519-2022").text)
    cap = write_capture(tmp_path / "cap.csv")
    before = snapshot(tmp_path)
    run = invoke(_report(cap, "-o", tmp_path / "r.pdf", "--json", table,
                         extra=("--limits", table, "--voltage-level", "400", "--isc", "20000",
                                "--il", "100", "--force")))
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=INPUT_CLASH)
    assert not (tmp_path / "r.pdf").exists()


@pytest.mark.parametrize("target", ["plan", "capture", "csv-capture"])
def test_report_of_a_plan_never_replaces_the_plan_or_what_it_references(tmp_path, target):
    plan = write_plan(tmp_path, captures=("harmonics.csv",))
    before = snapshot(tmp_path)
    out = tmp_path / "r.pdf"
    args = ["-o", out]
    if target == "plan":
        args = ["-o", plan]
    elif target == "capture":
        args += ["--json", tmp_path / "harmonics.csv"]
    else:  # the capture is called like one of the CSV tables and --csv names its folder
        args += ["--csv", tmp_path]
    run = invoke(_report(plan, *args, extra=("--force",)))
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=INPUT_CLASH)
    assert "--force" not in run.stderr
    assert tree(tmp_path) == sorted(before_names(before, tmp_path))


def before_names(before: dict, root) -> list:
    return [os.path.relpath(p, root) for p in before]


def test_report_csv_folder_holding_a_capture_named_like_a_table(tmp_path):
    cap = write_capture(tmp_path / "checks.csv")  # a real capture, named like a CSV table
    before = snapshot(cap)
    run = invoke(_report(cap, "-o", tmp_path / "r.pdf", "--csv", tmp_path,
                         extra=(*LIMITS, "--force")))
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=INPUT_CLASH)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["checks.csv"]


@pytest.mark.parametrize("force", [False, True])
def test_batch_results_file_that_is_one_of_the_captures(tmp_path, force):
    d = tmp_path / "fleet"
    write_capture(d / "a.csv")
    write_capture(d / "b.csv", h5=0.05)
    before = snapshot(d)
    run = invoke(["batch", d, *LIMITS, "--csv", d / "b.csv", "-q", "--no-cache", "--jobs", "1",
                  *(["--force"] if force else [])])
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[d],
            message=r"b\.csv: .*(one of the captures|input)")
    assert "--force" not in run.stderr, "replacing a capture must never be suggested"


# ---- special files as outputs ---------------------------------------------------------------


def _special(tmp_path, kind):
    p = tmp_path / f"special-{kind}"
    if kind == "fifo":
        os.mkfifo(p)
    elif kind == "char-device":
        if os.geteuid() != 0:
            pytest.skip("making a device node needs root")
        try:
            os.mknod(p, 0o600 | stat.S_IFCHR, os.makedev(1, 7))  # the numbers of /dev/full
        except OSError as exc:
            pytest.skip(f"cannot make a device node here: {exc}")
    elif kind == "dangling-symlink":
        p.symlink_to(tmp_path / "nowhere.pdf")
    elif kind == "symlink-to-file":
        (tmp_path / "elsewhere.pdf").write_bytes(b"someone else's file")
        p.symlink_to(tmp_path / "elsewhere.pdf")
    elif kind == "folder":
        p.mkdir()
    return p


@pytest.mark.parametrize("kind", ["fifo", "char-device", "dangling-symlink", "symlink-to-file",
                                  "folder"])
@pytest.mark.parametrize("option", ["-o", "--json"])
def test_force_never_replaces_a_special_file(tmp_path, kind, option):
    cap = write_capture(tmp_path / "cap.csv")
    target = _special(tmp_path, kind)
    mode = os.lstat(target).st_mode
    before = snapshot(cap, *(p for p in tmp_path.iterdir() if p.is_file() and not
                             p.is_symlink()))
    out = {"-o": tmp_path / "r.pdf", "--json": tmp_path / "r.json"}
    out[option] = target
    run = invoke(_report(cap, "-o", out["-o"], "--json", out["--json"],
                         extra=(*LIMITS, "--force")))
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=r"not a regular file|symbolic link|is a folder|is a directory")
    assert os.lstat(target).st_mode == mode, "the special file was replaced"
    assert not (tmp_path / "r.pdf").exists() and not (tmp_path / "r.json").exists()


def test_plan_new_and_site_new_refuse_a_fifo_even_with_force(tmp_path):
    fifo = tmp_path / "p.toml"
    os.mkfifo(fifo)
    for cmd in (["plan", "new", fifo, "--force"], ["site", "new", fifo, "--force"]):
        run = invoke(cmd)
        outcome(run, codes=[EXIT["usage"]], out_dirs=[tmp_path],
                message=r"not a regular file")
        assert stat.S_ISFIFO(os.lstat(fifo).st_mode)


# ---- all or nothing -------------------------------------------------------------------------


def _full_set(d):
    return [d / "r.pdf", d / "r.json", *(d / "csv" / f"{n}.csv" for n in CSV_TABLES)]


def test_json_into_a_read_only_folder_writes_no_pdf(tmp_path):
    cap = write_capture(tmp_path / "cap.csv")
    before = snapshot(cap)
    with read_only_folder(tmp_path / "ro") as ro:
        run = invoke(_report(cap, "-o", tmp_path / "r.pdf", "--json", ro / "r.json",
                             extra=LIMITS))
        outcome(run, codes=[EXIT["usage"]], inputs_before=before,
                outputs=[tmp_path / "r.pdf", ro / "r.json"], out_dirs=[tmp_path, ro],
                message=r"r\.json: .*(not writable|cannot write|read-only)")
    assert not (tmp_path / "r.pdf").exists()


@pytest.mark.parametrize("how", ["parent-is-a-file", "parent-read-only"])
def test_csv_folder_that_cannot_be_made_is_refused_before_writing(tmp_path, how):
    cap = write_capture(tmp_path / "cap.csv")
    before = snapshot(cap)
    if how == "parent-is-a-file":
        (tmp_path / "afile").write_text("x")
        csv = tmp_path / "afile" / "csv"
        ctx = None
    else:
        ctx = read_only_folder(tmp_path / "ro")
        csv = tmp_path / "ro" / "csv"
    with ctx if ctx is not None else _null():
        run = invoke(_report(cap, "-o", tmp_path / "r.pdf", "--json", tmp_path / "r.json",
                             "--csv", csv, extra=LIMITS))
        outcome(run, codes=[EXIT["usage"]], inputs_before=before,
                outputs=[tmp_path / "r.pdf", tmp_path / "r.json"], out_dirs=[tmp_path],
                message=r"--csv .*csv")
    assert not (tmp_path / "r.pdf").exists() and not (tmp_path / "r.json").exists()


class _null:
    def __enter__(self):
        return None

    def __exit__(self, *exc):
        return False


def _sizes(tmp_path, cap):
    """Sizes of the PDF, the JSON and the CSV tables of this capture (a run on a real disk)."""
    ref = tmp_path / "ref"
    ref.mkdir()
    run = invoke(_report(cap, "-o", ref / "r.pdf", "--json", ref / "r.json", "--csv",
                         ref / "csv", extra=LIMITS))
    assert run.code in VERDICTS, run.stderr
    return {p.name: p.stat().st_size for p in _full_set(ref)}


@pytest.mark.parametrize("room", ["pdf-only", "pdf-and-json", "all-but-the-last-table"])
@pytest.mark.parametrize("previous", [False, True])
def test_full_disk_leaves_no_partial_set(tmp_path, room, previous):
    cap = write_capture(tmp_path / "cap.csv")
    sizes = _sizes(tmp_path, cap)
    page = 4096
    rounded = {k: -(-v // page) * page for k, v in sizes.items()}
    need = {"pdf-only": rounded["r.pdf"],
            "pdf-and-json": rounded["r.pdf"] + rounded["r.json"],
            "all-but-the-last-table": sum(rounded.values()) - rounded["checks.csv"]}[room]
    before = snapshot(cap)
    with small_tmpfs(tmp_path / "disk", need + page) as disk:
        prev = {}
        if previous:  # earlier small outputs that --force would replace
            (disk / "csv").mkdir()
            for p in _full_set(disk):
                p.write_bytes(b"old " + p.name.encode())
                prev[p] = p.read_bytes()
        run = invoke(_report(cap, "-o", disk / "r.pdf", "--json", disk / "r.json", "--csv",
                             disk / "csv", extra=(*LIMITS, *(["--force"] if previous else []))))
        state = outcome(run, codes=[EXIT["usage"]], inputs_before=before,
                        outputs=_full_set(disk), previous=prev,
                        out_dirs=[disk, disk / "csv"],
                        message=r"(No space left|disk is full|could not be written)")
        assert state == "absent"
        if not previous:
            assert tree(disk) == [], "nothing may be left on the full disk"


def test_site_pdf_and_json_all_or_nothing(tmp_path):
    from _kit import write_site

    site = write_site(tmp_path)
    before = snapshot(site, tmp_path / "unit.csv")
    with read_only_folder(tmp_path / "ro") as ro:
        run = invoke(["site", site, "-o", tmp_path / "s.pdf", "--json", ro / "s.json"])
        outcome(run, codes=[EXIT["usage"]], inputs_before=before,
                outputs=[tmp_path / "s.pdf", ro / "s.json"], out_dirs=[tmp_path, ro],
                message=r"s\.json: .*(not writable|read-only)")
    assert not (tmp_path / "s.pdf").exists()


def test_aggregate_never_replaces_its_recording(tmp_path):
    rec = write_capture(tmp_path / "rec.csv")
    before = snapshot(rec)
    run = invoke(["aggregate", rec, "-o", rec, "--force", "--start-time",
                  "2026-01-01T00:00:00"])
    outcome(run, codes=[EXIT["usage"]], inputs_before=before, out_dirs=[tmp_path],
            message=INPUT_CLASH)
    assert "--force" not in run.stderr
