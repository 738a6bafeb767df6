"""Attacks with odd files where pqcheck expects a limit table, a plan or a site file, and with
unexpected failures inside pqcheck: never a traceback, never a hang.

- Deeply nested TOML (``a = [[[[...]]]]`` or ``x = {a = {a = ...}}``) makes Python's TOML
  parser recurse past the interpreter's limit (RecursionError): a clear error, exit 2.
- A device (``/dev/zero``), a FIFO (no writer: opening it would block) or a huge sparse file
  as a limit table, plan or site file: refused by a check made before reading, exit 2.
- Any exception pqcheck did not foresee: exit 5, one short message asking to report it, no
  traceback, nothing written.
- The exit-code table of the README is the one ``pqcheck --help`` prints.
"""

from __future__ import annotations

import os
import re

import pytest
from _kit import (
    EXIT,
    LIMITS,
    invoke,
    no_hang,  # noqa: F401 - a fixture, used through usefixtures
    outcome,
    snapshot,
    tree,
    write_capture,
    write_plan,
)

pytestmark = [pytest.mark.skipif(os.name != "posix", reason="POSIX special files"),
              pytest.mark.usefixtures("no_hang")]

DEPTH = 5000  # far past CPython's default recursion limit of 1000


def _nested(kind: str) -> str:
    if kind == "arrays":
        return "a = " + "[" * DEPTH + "]" * DEPTH + "\n"
    return "a = " + "{b = " * DEPTH + "1" + "}" * DEPTH + "\n"


def _odd(tmp_path, kind: str, name: str):
    p = tmp_path / name
    if kind in ("arrays", "tables"):
        p.write_text(_nested(kind))
    elif kind == "dev-zero":
        p.symlink_to("/dev/zero")
    elif kind == "fifo":
        os.mkfifo(p)
    elif kind == "sparse-huge":
        with open(p, "wb") as fh:
            fh.truncate(2 << 30)  # 2 GiB of holes: no disk used
    return p


ODD = ["arrays", "tables", "dev-zero", "fifo", "sparse-huge"]
WHY = {"arrays": r"nested too deeply", "tables": r"nested too deeply",
       "dev-zero": r"not a regular file", "fifo": r"not a regular file",
       "sparse-huge": r"too large"}


@pytest.mark.parametrize("kind", ODD)
def test_odd_limit_table(tmp_path, kind):
    p = _odd(tmp_path, kind, "table.toml")
    for argv in (["limits", "validate", p],
                 ["check", write_capture(tmp_path / "cap.csv"), "--limits", p,
                  "--voltage-level", "400", "-q", "--no-cache"]):
        run = invoke(argv)
        outcome(run, codes=[EXIT["usage"]], message=r"table\.toml.*" + WHY[kind])


def test_limits_validate_dev_zero_directly(tmp_path):
    run = invoke(["limits", "validate", "/dev/zero"])
    outcome(run, codes=[EXIT["usage"]], message=r"/dev/zero.*not a regular file")


@pytest.mark.parametrize("kind", ODD)
def test_odd_plan(tmp_path, kind):
    p = _odd(tmp_path, kind, "plan.toml")
    out = tmp_path / "out"
    out.mkdir()
    run = invoke(["report", p, "-o", out / "r.pdf", "--json", out / "r.json", "-q",
                  "--no-cache"])
    outcome(run, codes=[EXIT["usage"]], out_dirs=[out], message=r"plan\.toml.*" + WHY[kind])
    assert tree(out) == []


@pytest.mark.parametrize("kind", ODD)
def test_odd_site_file(tmp_path, kind):
    p = _odd(tmp_path, kind, "site.toml")
    run = invoke(["site", p])
    outcome(run, codes=[EXIT["usage"]], message=r"site\.toml.*" + WHY[kind])


def test_nested_tables_deep_inside_a_plan_limit_entry(tmp_path):
    plan = write_plan(tmp_path)
    plan.write_text(plan.read_text() + "\n[equipment.notes]\n" + _nested("tables"))
    run = invoke(["report", plan, "-o", tmp_path / "r.pdf", "-q", "--no-cache"])
    outcome(run, codes=[EXIT["usage"]], message=r"plan\.toml.*nested too deeply")


# ---- an internal error ----------------------------------------------------------------------


def _boom(*args, **kwargs):
    raise RuntimeError("simulated defect")


def test_unexpected_exception_exits_5_and_writes_nothing(tmp_path, monkeypatch):
    import pqcheck.report.pdf as pdf

    cap = write_capture(tmp_path / "cap.csv")
    before = snapshot(cap)
    monkeypatch.setattr(pdf, "render_pdf", _boom)
    run = invoke(["report", cap, *LIMITS, "-o", tmp_path / "r.pdf", "--json",
                  tmp_path / "r.json", "--csv", tmp_path / "csv", "-q", "--no-cache"])
    outcome(run, codes=[EXIT["internal"]], inputs_before=before, out_dirs=[tmp_path])
    assert tree(tmp_path) == ["cap.csv"]
    assert re.search(r"internal error.*RuntimeError: simulated defect", run.stderr), run.stderr
    assert re.search(r"please report", run.stderr, flags=re.IGNORECASE), run.stderr
    assert len(run.stderr.strip().splitlines()) <= 3, "a short message, not a traceback"


def test_unexpected_exception_in_check_exits_5(tmp_path, monkeypatch):
    import importlib

    assess = importlib.import_module("pqcheck.assess")  # the module, not the function
    cap = write_capture(tmp_path / "cap.csv")
    monkeypatch.setattr(assess, "assess", _boom)
    run = invoke(["check", cap, *LIMITS, "-q", "--no-cache"])
    outcome(run, codes=[EXIT["internal"]])
    assert "internal error" in run.stderr and run.stdout == ""


# ---- the exit-code table --------------------------------------------------------------------


def _pairs(text: str) -> list:
    return [(int(m.group(1)), " ".join(m.group(2).split()))
            for m in re.finditer(r"^\s*\|?\s*(\d{1,3})\s*\|?\s+(.+?)\s*\|?\s*$", text, re.M)]


def test_exit_code_table_in_readme_is_the_one_in_help():
    from pathlib import Path

    from click.testing import CliRunner

    from pqcheck.cli import main

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text()
    m = re.search(r"<!-- exit-codes -->(.*?)<!-- /exit-codes -->", readme, re.S)
    assert m, "README.md has the exit-code table between <!-- exit-codes --> markers"
    rows = [r for r in m.group(1).splitlines() if re.match(r"\|\s*\d", r)]
    readme_pairs = _pairs("\n".join(rows))
    help_text = CliRunner().invoke(main, ["--help"]).output
    h = re.search(r"Exit codes.*?:\n(.*?)(?:\n\n|\Z)", help_text, re.S)
    assert h, help_text
    help_pairs = _pairs(h.group(1))
    assert readme_pairs == help_pairs
    # the decisions every command follows (0 pass ... 5 internal error, 130/143 signals)
    assert [c for c, _ in readme_pairs] == [0, 1, 2, 3, 4, 5, 130, 143]
    assert {c: t.split()[0] for c, t in readme_pairs}[5].lower().startswith("internal")


def test_documented_codes_are_the_codes_used():
    from pqcheck.cli import _common

    codes = {c for c, _ in _common.EXIT_CODES}
    assert {_common.EXIT_OK, _common.EXIT_FAIL, _common.EXIT_USAGE, _common.EXIT_INCONCLUSIVE,
            _common.EXIT_INTERNAL} <= codes
