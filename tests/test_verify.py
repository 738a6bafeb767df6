"""`pqcheck verify`: a fresh report verifies; hand edits and changed inputs are caught.

The report under test is made here from a capture without a time column whose channel names
pqcheck cannot guess, so the re-run only works if verify really uses the recorded command line
(``--sample-rate``, ``--current``, ``--voltage``, ``--nominal-frequency``) and the recorded
selectors of both limit tables (a user table by relative path, and a bundled one).
"""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import write_without_observation
from test_hostile_inputs import TABLE

from pqcheck.cli import main
from pqcheck.run.verify import compare_documents

FS = 6400.0
OPTIONS = ["--sample-rate", "6400", "--current", "ch1", "--voltage", "ch2",
           "--nominal-frequency", "50", "--limits", "table.toml", "--limits", "ieee519-2022",
           "--voltage-level", "400", "--isc", "20000", "--il", "100", "-q", "--no-cache"]


@pytest.fixture(autouse=True, scope="module")
def _table_for_short_captures(tmp_path_factory):
    """IEEE 519 as bundled needs a week of data; these captures last a second or less, so the
    limit arithmetic is tested with the edited copy without an observation period."""
    path = write_without_observation(tmp_path_factory.mktemp("tables"), "ieee519-2022")
    OPTIONS[OPTIONS.index("ieee519-2022")] = str(path)
    yield


def _run(*args, cwd=None, monkeypatch=None):
    if cwd is not None:
        monkeypatch.chdir(cwd)
    return CliRunner().invoke(main, [str(a) for a in args])


def _write_capture(path: Path) -> None:
    # 50 Hz, 100 A peak with 4 % fifth and 1 % seventh; 325 V peak; 0.8 s at 6.4 kHz
    t = np.arange(int(0.8 * FS)) / FS
    w = 2 * np.pi * 50.0 * t
    i = 100 * (np.sin(w) + 0.04 * np.sin(5 * w) + 0.01 * np.sin(7 * w))
    v = 325 * np.sin(w)
    path.write_text("ch1,ch2\n" + "".join(f"{a:.9g},{b:.9g}\n" for a, b in zip(i, v)))


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """A folder with a capture, a user table and a fresh report of them (PDF and JSON)."""
    d = tmp_path_factory.mktemp("verify")
    _write_capture(d / "run.csv")
    (d / "table.toml").write_text(TABLE)
    mp = pytest.MonkeyPatch()
    try:
        res = _run("report", "run.csv", *OPTIONS, "-o", "report.pdf", "--json",
                   "results.json", cwd=d, monkeypatch=mp)
    finally:
        mp.undo()
    assert res.exit_code == 0, res.output
    return d


@pytest.fixture
def copy(made, tmp_path):
    """A copy of the made folder, moved elsewhere (safe to edit)."""
    dst = tmp_path / "moved here"
    shutil.copytree(made, dst)
    return dst


def _edit(path: Path, change) -> None:
    doc = json.loads(path.read_text())
    change(doc)
    path.write_text(json.dumps(doc, indent=2))


def test_fresh_report_verifies_from_pdf_and_json(made, monkeypatch):
    for target in ("report.pdf", "results.json"):
        res = _run("verify", target, cwd=made, monkeypatch=monkeypatch)
        assert res.exit_code == 0, res.output
        assert "IDENTICAL" in res.stdout
        assert re.search(r"capture 'run': .*run\.csv: SHA-256 matches", res.stdout)
        assert re.search(r"limit table 'hostile-test': .*table\.toml: SHA-256 matches",
                         res.stdout)
        assert re.search(r"limit table 'ieee519-2022': .*SHA-256 matches", res.stdout)
        n = int(re.search(r"Compared\s+(\d+) recorded values", res.stdout).group(1))
        assert n > 500  # harmonics of two channels, checks of two tables, findings


def test_the_run_spec_is_what_makes_the_rerun_possible(copy, monkeypatch):
    # the recorded command line is a record for the reader only: verify never parses it
    _edit(copy / "results.json", lambda d: d["report"].update(command="pqcheck report x.csv"))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 0, res.output
    _edit(copy / "results.json", lambda d: d["captures"][0].pop("run_spec"))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"results\.json: cannot re-run the recorded analysis: "
                     r"captures\[0\]\.run_spec: the results record no run specification", res.stderr)


def test_moved_report_folder_verifies_from_anywhere(copy, tmp_path, monkeypatch):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    res = _run("verify", copy / "report.pdf", cwd=elsewhere, monkeypatch=monkeypatch)
    assert res.exit_code == 0, res.output
    assert str(copy / "run.csv") in res.stdout


def test_hand_altered_numbers_are_listed(copy, monkeypatch):
    def change(doc):
        ch = doc["captures"][0]["analysis"]["channels"][0]
        ch["harmonics"][4]["rms"] *= 1.0001  # order 5
        check = doc["captures"][0]["assessments"][1]["checks"][0]
        check["measured"] += 0.5

    _edit(copy / "results.json", change)
    res = _run("verify", copy / "results.json", "--format", "json", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    out = json.loads(res.stdout)
    assert out["identical"] is False
    paths = {d["path"]: d for d in out["differences"]}
    assert set(paths) == {"captures[0].analysis.channels[0].harmonics[4].rms",
                          "captures[0].assessments[1].checks[0].measured"}
    h5 = paths["captures[0].analysis.channels[0].harmonics[4].rms"]
    assert h5["what"] == "order 5"
    # recomputed from the definition: 4 % of a 100 A peak is 4 / sqrt(2) A rms
    assert h5["recomputed"] == pytest.approx(4 / np.sqrt(2), rel=1e-3)
    assert h5["recorded"] == pytest.approx(h5["recomputed"] * 1.0001, rel=1e-9)


def test_hand_altered_verdict_is_listed(copy, monkeypatch):
    def change(doc):
        checks = doc["captures"][0]["assessments"][0]["checks"]
        checks[3]["verdict"] = "fail"
        doc["verdict"] = "fail"

    _edit(copy / "results.json", change)
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    assert re.search(r"^  verdict: recorded 'fail', recomputed 'pass'$", res.stdout, re.M)
    assert re.search(r"^  captures\[0\]\.assessments\[0\]\.checks\[3\]\.verdict \(check ch1 "
                     r"\w+\): recorded 'fail', recomputed 'pass'$", res.stdout, re.M)
    assert "DIFFERENT: 2 value(s) differ." in res.stdout


def test_changed_capture_is_caught_by_its_hash(copy, monkeypatch):
    lines = (copy / "run.csv").read_text().splitlines(keepends=True)
    lines[100] = lines[100].replace(",", "1,", 1)  # one sample ten times larger or so
    (copy / "run.csv").write_text("".join(lines))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    assert re.search(r"capture 'run': .*run\.csv: SHA-256 CHANGED", res.stdout)
    assert "captures[0].analysis.capture.sha256" in res.stdout


def test_changed_limit_table_is_caught_by_its_hash(copy, monkeypatch):
    (copy / "table.toml").write_text(TABLE.replace("values = [5.0, 8.0]", "values = [6.0, 8.0]"))
    res = _run("verify", copy / "results.json", "--show", "1000", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    assert re.search(r"limit table 'hostile-test': .*table\.toml: SHA-256 CHANGED", res.stdout)
    assert re.search(r"checks\[\d+\]\.table_limit \(check ch1 h2\): recorded 5, recomputed "
                     r"6$", res.stdout, re.M)


def test_missing_capture_is_refused_then_found_with_search(copy, tmp_path, monkeypatch):
    stash = tmp_path / "stash"
    stash.mkdir()
    shutil.move(copy / "run.csv", stash / "run.csv")
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"results\.json: cannot re-run the recorded analysis: captures\[0\] \(run\): "
                     r"capture file not found \(recorded as run\.csv\); .*--search", res.stderr)
    res = _run("verify", copy / "results.json", "--search", stash, monkeypatch=monkeypatch)
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("content, pattern", [
    (b"", r"not a PDF and not a results JSON"),
    (b'{"tool": {"name": "other"}}', r"not pqcheck results \(no tool block naming pqcheck\)"),
    (b"%PDF-1.4\n garbage", r"the PDF cannot be read"),
    (b"\xff\xfe\x00junk", r"not a PDF and not a results JSON"),
])
def test_bad_input_exits_2(tmp_path, content, pattern, monkeypatch):
    p = tmp_path / "thing.pdf"
    p.write_bytes(content)
    res = _run("verify", p, monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"thing\.pdf: " + pattern, res.stderr), res.stderr
    assert "Traceback" not in res.output


def test_pdf_without_attachment_exits_2(tmp_path, monkeypatch):
    from pypdf import PdfWriter

    w = PdfWriter()
    w.add_blank_page(width=200, height=200)
    p = tmp_path / "plain.pdf"
    with open(p, "wb") as fh:
        w.write(fh)
    res = _run("verify", p, monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"plain\.pdf: the PDF carries no results\.json attachment", res.stderr)


def test_mangled_json_exits_2_not_a_traceback(copy, monkeypatch):
    _edit(copy / "results.json", lambda d: d["captures"][0]["analysis"].pop("capture"))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"results\.json: the recorded results lack what a re-run needs "
                     r"\(KeyError: 'capture'\)", res.stderr)


def test_an_impossible_recorded_setting_exits_2_naming_it(copy, monkeypatch):
    _edit(copy / "results.json",
          lambda d: d["captures"][0]["run_spec"]["analysis"].update(max_order=500))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 2
    assert re.search(r"run_spec\.analysis\.max_order: must be a whole number from 2 to 100, "
                     r"got 500", res.stderr)


def test_plan_report_verifies_and_catches_a_changed_plan(tmp_path, monkeypatch):
    _write_capture(tmp_path / "run.csv")
    (tmp_path / "plan.toml").write_text(
        'schema = 1\ntitle = "verify plan"\n[site]\nname = "s"\nnominal_voltage_v = 400\n'
        'nominal_frequency_hz = 50\nisc_a = 20000\nil_a = 100\n'
        f'[[limits]]\ntable = "{write_without_observation(tmp_path, "ieee519-2022").name}"\n'
        '[[captures]]\nid = "c1"\nfile = "run.csv"\nsample_rate_hz = 6400\n'
        'current = ["ch1"]\nvoltage = ["ch2"]\n'
        '[equipment]\nname = "unit"\n[conditions]\ndate = "2026-01-15"\n'
        '[[conditions.instruments]]\nrole = "digitiser"\nmodel = "d"\naccuracy = "0.5 %"\n')
    res = _run("report", "plan.toml", "-o", "r.pdf", "--json", "r.json", "-q", "--no-cache",
               cwd=tmp_path,
               monkeypatch=monkeypatch)
    assert res.exit_code == 0, res.output
    res = _run("verify", "r.pdf", monkeypatch=monkeypatch)
    assert res.exit_code == 0, res.output
    assert re.search(r"plan: .*plan\.toml: SHA-256 matches", res.stdout)
    # IL 100 A -> 200 A halves every % of IL value: the plan's hash and the numbers differ
    plan = tmp_path / "plan.toml"
    plan.write_text(plan.read_text().replace("il_a = 100", "il_a = 200"))
    res = _run("verify", "r.json", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    assert re.search(r"plan: .*plan\.toml: SHA-256 CHANGED", res.stdout)
    assert re.search(r"settings\.il_a \(id c1\): recorded 100, recomputed 200$", res.stdout,
                     re.M)


# ---- the comparison itself ------------------------------------------------------------------


def test_compare_documents_rules():
    rec = {"report": {"id": "A"}, "tool": {"version": "1"},
           "captures": [{"id": "c", "analysis": {"capture": {"source": "/a/x.csv",
                                                             "sha256": "ab"},
                                                 "x": 1.0, "phase_deg": 179.9999999999,
                                                 "v": [1, 2, 3], "s": "pass"}}]}
    same = json.loads(json.dumps(rec))
    same["report"]["id"] = "B"  # who/when: not compared
    same["tool"]["version"] = "2"  # noted by verify, not a difference
    same["captures"][0]["analysis"]["capture"]["source"] = "/b/x.csv"  # files move
    same["captures"][0]["analysis"]["x"] = 1.0 + 5e-10  # within 1e-9 relative
    same["captures"][0]["analysis"]["phase_deg"] = -179.9999999999  # same angle
    diffs, n = compare_documents(rec, same)
    assert diffs == [] and n == 8
    other = json.loads(json.dumps(same))
    a = other["captures"][0]["analysis"]
    a["x"], a["v"], a["s"] = 1.0 + 2e-9, [1, 2], "fail"
    a["capture"]["sha256"] = "cd"
    diffs, _ = compare_documents(rec, other)
    assert [(d.path, d.recorded, d.recomputed) for d in diffs] == [
        ("captures[0].analysis.capture.sha256", "ab", "cd"),
        ("captures[0].analysis.x", 1.0, 1.0 + 2e-9),
        ("captures[0].analysis.v", "3 items", "2 items"),
        ("captures[0].analysis.s", "pass", "fail"),
    ]
    assert {d.what for d in diffs} == {"id c"}


def test_edited_visible_pdf_with_original_data_is_caught(made, tmp_path, monkeypatch):
    # a PDF whose pages come from another run (IL 50 A instead of 100 A: every % of IL value
    # doubles) but which carries the original results.json: the data still verify, the page
    # text does not
    from pypdf import PdfReader, PdfWriter

    opts = [o if o != "100" else "50" for o in OPTIONS]
    res = _run("report", "run.csv", *opts, "-o", tmp_path / "other.pdf", cwd=made,
               monkeypatch=monkeypatch)
    assert res.exit_code in (0, 1), res.output
    forged = PdfWriter()
    for page in PdfReader(tmp_path / "other.pdf").pages:
        forged.add_page(page)
    forged.add_attachment("results.json", (made / "results.json").read_bytes())
    with open(made / "forged.pdf", "wb") as fh:
        forged.write(fh)
    try:
        res = _run("verify", "forged.pdf", "--format", "json", monkeypatch=monkeypatch)
    finally:
        (made / "forged.pdf").unlink()
    assert res.exit_code == 1
    out = json.loads(res.stdout)
    kinds = {d["what"] for d in out["differences"]}
    assert kinds == {"visible report"}, kinds  # the attached data themselves are unchanged
    assert any(d["path"].startswith("pdf page ") for d in out["differences"])


def test_hand_altered_report_details_are_listed(copy, monkeypatch):
    # title, names and the generated report id follow from the recorded command line
    _edit(copy / "results.json", lambda d: d["report"].update(equipment="Another EUT",
                                                              id="PQ-20000101-DEADBEEF"))
    res = _run("verify", copy / "results.json", monkeypatch=monkeypatch)
    assert res.exit_code == 1
    assert re.search(r"^  report\.equipment \(report details\): recorded 'Another EUT', "
                     r"recomputed ''$", res.stdout, re.M)
    assert re.search(r"^  report\.id \(report details\): recorded 'PQ-20000101-DEADBEEF', "
                     r"recomputed 'PQ-\d{8}-[0-9A-F]{8}'$", res.stdout, re.M)
