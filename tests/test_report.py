"""`pqcheck report`: the PDF read back with pypdf, the attachment, the exports, overwrite and
atomic-write guarantees, user text shown literally, and chart data taken from result objects.

The captures are built here from their definition (sums of sines with stated rms values), so
which limits they exceed is known without pqcheck: an ideal six-pulse line current has
I_h = I_1 / h for h = 6k +- 1 (Mohan, Undeland, Robbins, *Power Electronics*, ch. 5 -- from
memory), so with IL = I_1 its 5th is 20 % of IL against the 7 % limit of IEEE 519-2022 Table 2
for 20 <= ISC/IL < 50 (standards-facts.md, tag V).

Only one report is rendered with real figures (module fixture); the other renders replace the
PNG rasterisation by a 1-pixel image to keep the suite fast.
"""

from __future__ import annotations

import hashlib
import io
import json
import math
import os
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import write_without_observation

import pqcheck
from pqcheck.cli import main
from pqcheck.errors import ReportError
from pqcheck.export import harmonics_frame, windows_frame
from pqcheck.files.atomic import atomic_open, check_target, write_atomic
from pqcheck.report import figures

pypdf = pytest.importorskip("pypdf")

FS = 10_000.0  # sample rate of the synthetic captures [Hz]
F0 = 50.0  # fundamental [Hz]
I1 = 100.0  # fundamental rms current [A]
USER_EQUIPMENT = "Charger <X> & Co"
USER_OPERATOR = "A&B <ops>"
USER_SITE = "Depot <1> & 2"
LIMIT_ARGS = ["--limits", "ieee519-2022", "--voltage-level", "400", "--isc", "3500",
              "--il", "100"]  # ISC/IL = 35: IEEE 519-2022 Table 2 row 20 <= ISC/IL < 50


@pytest.fixture(autouse=True, scope="module")
def _table_for_short_captures(tmp_path_factory):
    """IEEE 519 as bundled needs a week of data; these captures last a second or less, so the
    limit arithmetic is tested with the edited copy without an observation period."""
    path = write_without_observation(tmp_path_factory.mktemp("tables"), "ieee519-2022")
    LIMIT_ARGS[1] = str(path)
    yield


def _series(t, harmonics, shift=0.0):
    """sum of sqrt(2) rms cos(h (w t - shift)) over {h: rms} (a balanced set for phase shifts)."""
    x = np.zeros_like(t)
    for h, rms in harmonics.items():
        x += math.sqrt(2.0) * rms * np.cos(h * (2 * np.pi * F0 * t - shift))
    return x


def write_capture(path: Path, current_harmonics: dict, *, clip_a: float | None = None,
                  duration_s: float = 1.0) -> Path:
    """Three-phase CSV capture: sine voltages (230 V with a 1 % fifth) and the given currents."""
    t = np.arange(int(FS * duration_s)) / FS
    cols = {"time": t}
    for k, ph in enumerate("abc"):
        shift = 2 * np.pi * k / 3
        cols[f"v{ph}"] = _series(t, {1: 230.0, 5: 2.3}, shift)
    for k, ph in enumerate("abc"):
        i = _series(t, current_harmonics, 2 * np.pi * k / 3)
        if clip_a is not None and ph == "b":
            i = np.clip(i, -clip_a, clip_a)
        cols[f"i{ph}"] = i
    data = np.column_stack(list(cols.values()))
    np.savetxt(path, data, delimiter=",", header=",".join(cols), comments="", fmt="%.6f")
    return path


def six_pulse(max_order=49):
    """Ideal six-pulse line current: I_h = I_1 / h for h = 6k +- 1 (textbook closed form)."""
    return {h: I1 / h for h in range(1, max_order + 1) if h % 2 and h % 3}


def clean_current():
    """A current well inside every IEEE 519-2022 limit at ISC/IL 35 (5th: 2 % of IL < 7 %)."""
    return {1: I1, 5: 2.0, 7: 1.0}


def pdf_text(path) -> tuple:
    reader = pypdf.PdfReader(str(path))
    pages = [p.extract_text() or "" for p in reader.pages]
    return reader, pages


@pytest.fixture
def fast_figures(monkeypatch):
    """Skip rasterising figures (the PDF still gets an image per figure)."""
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig = plt.figure(figsize=(0.1, 0.1))
    fig.savefig(buf, format="png", dpi=10)
    plt.close(fig)
    tiny = buf.getvalue()
    monkeypatch.setattr(figures, "to_png", lambda fig, dpi=200: tiny)
    return tiny


@pytest.fixture(scope="module")
def failing(tmp_path_factory):
    """One real report of a failing capture, with JSON and CSV exports."""
    d = tmp_path_factory.mktemp("failing")
    cap = write_capture(d / "six-pulse.csv", six_pulse())
    out, js, csv = d / "report.pdf", d / "results.json", d / "csv"
    res = CliRunner().invoke(main, ["report", str(cap), *LIMIT_ARGS, "-o", str(out),
                                    "--json", str(js), "--csv", str(csv),
                                    "--equipment", USER_EQUIPMENT, "--operator", USER_OPERATOR,
                                    "--site", USER_SITE, "--no-cache", "--quiet"])
    reader, pages = pdf_text(out)
    return {"dir": d, "capture": cap, "pdf": out, "json": js, "csv": csv, "result": res,
            "reader": reader, "pages": pages, "text": "\n".join(pages)}


# --- the failing report ------------------------------------------------------------------------


def test_failing_report_exit_code_and_verdict(failing):
    assert failing["result"].exit_code == 1, failing["result"].output
    assert len(failing["pages"]) >= 2
    assert "FAIL" in failing["pages"][0]  # the verdict is on the cover
    assert json.loads(failing["json"].read_text())["verdict"] == "fail"


def test_capture_hash_and_limit_table_in_text(failing):
    sha = hashlib.sha256(failing["capture"].read_bytes()).hexdigest()  # hashlib, not pqcheck
    flat = failing["text"].replace("\n", "")
    assert sha in flat
    assert "ieee519-2022" in failing["text"]
    assert "IEEE Std 519-2022" in failing["text"]  # the designation as IEEE cites it
    table_sha = json.loads(failing["json"].read_text())["limit_tables"][0]["sha256"]
    assert table_sha in flat


def test_cautions_standing_and_signoff(failing):
    text = failing["text"]
    for phrase in ("Hazardous voltages", "measurement category", "Qualified personnel",
                   "utility", "licensed", "not a certification", "Prepared by", "Reviewed by",
                   "Approved by", "Signature"):
        assert phrase in text, phrase


def test_user_text_shown_literally(failing):
    text = failing["text"]
    for s in (USER_EQUIPMENT, USER_OPERATOR, USER_SITE):
        assert s in text, s
    assert "&amp;" not in text and "&lt;" not in text


def test_attachment_equals_json_output(failing):
    attachments = failing["reader"].attachments
    assert list(attachments) == ["results.json"]
    assert attachments["results.json"][0] == failing["json"].read_bytes()


def test_figures_and_footer_on_every_page(failing):
    n_images = sum(len(p.images) for p in failing["reader"].pages)
    # current spectrum and waveforms; the voltage spectrum (every order far inside its limit)
    # and the THD-over-time chart (too few windows in a 1 s capture) are replaced by a line
    assert n_images >= 2
    assert "too few for a chart" in failing["text"]
    report_id = json.loads(failing["json"].read_text())["report"]["id"]
    n = len(failing["pages"])
    for k, page in enumerate(failing["pages"], start=1):
        assert report_id in page
        assert f"Page {k} of {n}" in page


def test_failing_orders_and_tdd_listed(failing):
    doc = json.loads(failing["json"].read_text())
    checks = doc["captures"][0]["assessments"][0]["checks"]
    failed = {(c["quantity"], c.get("order")) for c in checks if c["verdict"] == "fail"}
    # 5th at 20 % and 7th at 14.3 % of IL exceed 7 %; TDD (~30 % of IL) exceeds 8 %
    # (IEEE 519-2022 Table 2, 20 <= ISC/IL < 50; six-pulse I_h = I_1 / h).
    assert ("harmonic", 5) in failed and ("harmonic", 7) in failed and ("TDD", None) in failed
    assert "Limits exceeded" in failing["text"]


def test_csv_tables_are_tidy_and_match_json(failing):
    import pandas as pd

    doc = json.loads(failing["json"].read_text())
    checks = pd.read_csv(failing["csv"] / "checks.csv")
    n_json = sum(len(a["checks"]) for c in doc["captures"] for a in c["assessments"])
    assert len(checks) == n_json
    assert set(checks["verdict"]) <= {"pass", "fail", "inconclusive", "not applicable"}
    harm = pd.read_csv(failing["csv"] / "harmonics.csv")
    ia5 = harm[(harm["channel"] == "ia") & (harm["order"] == 5)]["rms"].item()
    js5 = next(c for c in doc["captures"][0]["analysis"]["channels"] if c["name"] == "ia")
    assert ia5 == pytest.approx(js5["harmonics"][4]["rms"], rel=1e-9)
    wins = pd.read_csv(failing["csv"] / "windows.csv")
    assert {"capture", "window", "channel", "rms", "thd_percent"} <= set(wins.columns)


def test_second_run_without_force_is_refused_and_file_unchanged(failing):
    before = failing["pdf"].read_bytes()
    json_before = failing["json"].read_bytes()
    res = CliRunner().invoke(main, ["report", str(failing["capture"]), *LIMIT_ARGS,
                                    "-o", str(failing["pdf"]), "--json", str(failing["json"]),
                                    "--no-cache", "--quiet"])
    assert res.exit_code == 2
    assert "file exists" in res.output and "--force" in res.output
    assert failing["pdf"].read_bytes() == before
    assert failing["json"].read_bytes() == json_before


# --- other verdicts, bad input, plans ----------------------------------------------------------


def test_force_replaces_and_pass_exits_zero(tmp_path, fast_figures):
    cap = write_capture(tmp_path / "clean.csv", clean_current())
    out = tmp_path / "r.pdf"
    out.write_bytes(b"old")
    res = CliRunner().invoke(main, ["report", str(cap), *LIMIT_ARGS, "-o", str(out), "--force",
                                    "--no-cache", "--quiet"])
    assert res.exit_code == 0, res.output
    reader, pages = pdf_text(out)
    assert "PASS" in pages[0]
    assert not list(tmp_path.glob(".*.part"))


def test_clipped_channel_is_inconclusive_exit_three(tmp_path, fast_figures):
    # A clean current clipped at 80 % of its peak on phase b: pqcheck must not pass it.
    cap = write_capture(tmp_path / "clipped.csv", clean_current(),
                        clip_a=0.8 * math.sqrt(2) * I1)
    out = tmp_path / "r.pdf"
    res = CliRunner().invoke(main, ["report", str(cap), *LIMIT_ARGS, "-o", str(out),
                                    "--no-cache", "--quiet"])
    assert res.exit_code == 3, res.output
    _, pages = pdf_text(out)
    assert "INCONCLUSIVE" in pages[0]
    text = "\n".join(pages)
    assert "clipping" in text
    # the power of the clipped phase and the total that includes it are flagged, the others
    # not: the flag (a glyph and the finding's code) stands under the row's label
    lines = text.splitlines()
    b_row = next(i for i, x in enumerate(lines) if x.startswith("b (vb \u00d7 ib)"))
    assert lines[b_row + 1].startswith("\u26a0 clipping")
    a_row = next(i for i, x in enumerate(lines) if x.startswith("a (va \u00d7 ia)"))
    assert "\u26a0" not in lines[a_row] + lines[a_row + 1]
    total = next(i for i, x in enumerate(lines) if x.split(" ")[0] == "total")
    assert "\u26a0 includes b" in lines[total] + lines[total + 1]
    # the terminal flags the same rows
    res = CliRunner().invoke(main, ["analyze", str(cap), "--no-cache", "--quiet"])
    rows = res.output.splitlines()
    assert next(x for x in rows if x.startswith("ib ")).endswith("! clipping")
    assert not next(x for x in rows if x.startswith("ia ")).endswith("clipping")
    assert next(x for x in rows if x.startswith("  phase b ")).endswith("! clipping")
    assert next(x for x in rows if x.startswith("  total ")).endswith("! includes phase b")


def test_analysis_only_report_has_no_verdict(tmp_path, fast_figures):
    cap = write_capture(tmp_path / "any.csv", six_pulse())
    out = tmp_path / "r.pdf"
    res = CliRunner().invoke(main, ["report", str(cap), "-o", str(out), "--no-cache",
                                    "--quiet"])
    assert res.exit_code == 0, res.output
    _, pages = pdf_text(out)
    assert "NO VERDICT" in pages[0]
    assert "no compliance verdict" in "\n".join(pages)


@pytest.mark.parametrize("args, message", [
    (["--limits", "no-such-table"], "unknown limit table 'no-such-table'"),
    (["--limits", "ieee519-2022", "--voltage-level", "400"], "--isc and --il"),
    (["--isc", "3500"], "give --limits too"),
])
def test_bad_input_exits_two_and_writes_nothing(tmp_path, args, message):
    cap = write_capture(tmp_path / "c.csv", clean_current(), duration_s=0.4)
    out, js = tmp_path / "r.pdf", tmp_path / "r.json"
    res = CliRunner().invoke(main, ["report", str(cap), *args, "-o", str(out), "--json",
                                    str(js), "--no-cache", "--quiet"])
    assert res.exit_code == 2
    assert message in res.output
    assert not out.exists() and not js.exists()


def test_missing_capture_exits_two(tmp_path):
    out = tmp_path / "r.pdf"
    res = CliRunner().invoke(main, ["report", str(tmp_path / "nope.csv"), "-o", str(out),
                                    "--no-cache", "--quiet"])
    assert res.exit_code == 2
    assert not out.exists()


def test_same_path_for_pdf_and_json_is_refused(tmp_path):
    cap = write_capture(tmp_path / "c.csv", clean_current(), duration_s=0.4)
    out = tmp_path / "r.pdf"
    res = CliRunner().invoke(main, ["report", str(cap), "-o", str(out), "--json", str(out),
                                    "--no-cache", "--quiet"])
    assert res.exit_code == 2
    assert "same file" in res.output


def test_plan_report_with_load_points(tmp_path, fast_figures):
    write_capture(tmp_path / "half.csv", {h: v / 2 for h, v in six_pulse().items()})
    write_capture(tmp_path / "full.csv", six_pulse())
    plan = tmp_path / "plan.toml"
    plan.write_text(
        'title = "Plan <T> & test"\n'
        '[site]\nname = "Site & <S>"\nnominal_voltage_v = 400\nisc_a = 3500\nil_a = 100\n'
        '[equipment]\nname = "EUT <E>"\n'
        '[[conditions.instruments]]\nrole = "current probe"\nmodel = "P & Q"\n'
        'measurement_category = "CAT III 600 V"\n'
        '[[limits]]\ntable = "ieee519-2022"\n'
        '[[captures]]\nfile = "half.csv"\nload_percent = 50\n'
        '[[captures]]\nfile = "full.csv"\nload_percent = 100\n', encoding="utf-8")
    out = tmp_path / "plan.pdf"
    res = CliRunner().invoke(main, ["report", str(plan), "-o", str(out), "--no-cache",
                                    "--quiet"])
    assert res.exit_code == 1, res.output
    _, pages = pdf_text(out)
    text = "\n".join(pages)
    assert "Load points" in text
    assert "50 %" in text and "100 %" in text
    assert "Plan <T> & test" in text and "Site & <S>" in text and "EUT <E>" in text
    assert "P & Q" in text  # instrument chain in the uncertainty section
    assert hashlib.sha256(plan.read_bytes()).hexdigest() in text.replace("\n", "")


def test_plan_refuses_capture_options(tmp_path):
    plan = tmp_path / "plan.toml"
    plan.write_text('[[captures]]\nfile = "x.csv"\n')
    res = CliRunner().invoke(main, ["report", str(plan), "--limits", "ieee519-2022", "-o",
                                    str(tmp_path / "r.pdf")])
    assert res.exit_code == 2
    assert "cannot be combined with a test plan" in res.output


# --- chart data comes from the result objects --------------------------------------------------


@pytest.fixture(scope="module")
def assessed(tmp_path_factory):
    from pqcheck.assess import assess
    from pqcheck.limits import resolve

    d = tmp_path_factory.mktemp("assessed")
    cap = pqcheck.load_capture(write_capture(d / "c.csv", six_pulse()))
    result = pqcheck.analyze(cap, il_a=100.0)
    a = assess(result, resolve("ieee519-2022", voltage_level_v=400, isc_a=3500, il_a=100))
    return cap, result, a


def test_spectrum_data_equals_checks(assessed):
    _, result, a = assessed
    current = [c for c in a.checks if c.applies_to == "current"]
    data = figures.spectrum_from_checks(result, current, title="t")
    for panel in data.panels:
        name = panel.label.split("(")[1].rstrip(")")
        mine = sorted((c for c in current if c.channel == name and c.quantity == "harmonic"),
                      key=lambda c: c.order)
        np.testing.assert_array_equal(panel.orders, [c.order for c in mine])
        np.testing.assert_array_equal(panel.measured, [c.measured for c in mine])
        np.testing.assert_array_equal(panel.limit, [c.limit for c in mine])
        assert panel.verdicts == tuple(c.verdict for c in mine)


def test_analysis_spectrum_equals_export_frame(assessed):
    _, result, _ = assessed
    frame = harmonics_frame(result)
    data = figures.spectrum_from_result(result, "current")
    for panel in data.panels:
        name = panel.label.split("(")[1].rstrip(")")
        rows = frame[(frame["channel"] == name) & (frame["order"] >= 2)]
        np.testing.assert_array_equal(panel.measured, rows["percent_of_fundamental"])


def test_waveform_data_is_raw_samples(assessed):
    cap, result, _ = assessed
    data = figures.waveform_data(cap, result, cycles=3)
    start = int(round((result.windows.t_start_s[np.flatnonzero(result.windows.valid)[0]]
                       - cap.t0_s) * cap.fs_hz))
    n = data.t_ms.size
    assert n == int(round(3 * cap.fs_hz / result.fundamental_hz)) + 1
    for label, x in data.currents:
        name = label.split("(")[1].rstrip(")")
        np.testing.assert_array_equal(x, cap.samples[cap.index(name), start:start + n])


def test_trend_data_equals_window_frame(assessed):
    _, result, _ = assessed
    frame = windows_frame(result)
    data = figures.trend_data(result)
    np.testing.assert_array_equal(data.t_s, result.windows.t_start_s)
    for label, y in data.currents + data.voltages:
        name = label.split("(")[1].rstrip(")")
        np.testing.assert_array_equal(y, frame[f"{name}_thd_percent"])


def test_pdf_plots_what_the_extractors_return(assessed, monkeypatch, fast_figures):
    """Spy on the plotters during a render: every spectrum drawn equals the checks."""
    from pqcheck.report.job import CaptureRun, ReportJob, ReportMeta
    from pqcheck.report.pdf import render_pdf

    cap, result, a = assessed
    seen = []
    real = figures.plot_spectrum
    monkeypatch.setattr(figures, "plot_spectrum", lambda data: seen.append(data) or real(data))
    job = ReportJob(ReportMeta(report_id="T-1"), (CaptureRun("c", cap, result, (a,)),))
    pdf = render_pdf(job, results_json=b"{}")
    assert pdf.startswith(b"%PDF")
    # current harmonics; voltage harmonics only when one of them decides (here all pass far
    # inside their limits, which the body states in one line)
    voltage_decides = any(c.applies_to == "voltage" and c.quantity == "harmonic"
                          and (c.verdict == "fail" or c.margin_percent is None
                               or c.margin_percent < 50) for c in a.checks)
    assert len(seen) == 1 + voltage_decides
    by_key = {(c.channel, c.order): c for c in a.checks if c.quantity == "harmonic"}
    for data in seen:
        for panel in data.panels:
            name = panel.label.split("(")[1].rstrip(")")
            for h, m, lim in zip(panel.orders, panel.measured, panel.limit):
                assert m == by_key[(name, int(h))].measured
                assert lim == by_key[(name, int(h))].limit


# --- atomic writing ----------------------------------------------------------------------------


def test_write_atomic_refuses_existing_file(tmp_path):
    p = tmp_path / "a.txt"
    p.write_text("old")
    with pytest.raises(ReportError, match=r"a\.txt: file exists; give `force`"):
        write_atomic(p, "new")
    assert p.read_text() == "old"
    write_atomic(p, "new", force=True)
    assert p.read_text() == "new"


def test_failure_mid_write_leaves_previous_file(tmp_path):
    p = tmp_path / "report.pdf"
    p.write_bytes(b"previous")
    with pytest.raises(RuntimeError, match="disk on fire"):
        with atomic_open(p, force=True) as fh:
            fh.write(b"half a rep")
            raise RuntimeError("disk on fire")
    assert p.read_bytes() == b"previous"
    assert sorted(x.name for x in tmp_path.iterdir()) == ["report.pdf"]  # no temp left


def test_failed_rename_leaves_previous_file(tmp_path, monkeypatch):
    p = tmp_path / "report.pdf"
    p.write_bytes(b"previous")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(ReportError, match="could not be written: No space left on device"):
        write_atomic(p, b"new content", force=True)
    assert p.read_bytes() == b"previous"
    assert sorted(x.name for x in tmp_path.iterdir()) == ["report.pdf"]


def test_new_file_appears_only_when_complete(tmp_path):
    p = tmp_path / "new.json"
    with atomic_open(p, "w") as fh:
        fh.write("{")
        assert not p.exists()  # nothing under the final name while writing
        fh.write("}")
    assert p.read_text() == "{}"


def test_check_target_messages(tmp_path):
    with pytest.raises(ReportError, match="is a folder; give a file name"):
        check_target(tmp_path)
    with pytest.raises(ReportError, match="does not exist; create it first"):
        check_target(tmp_path / "missing" / "r.pdf", option="-o")
