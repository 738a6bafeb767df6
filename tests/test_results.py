"""The one results schema: every JSON document validates against the published JSON Schema,
and `pqcheck verify` re-runs a report of every capture format (and of a plan) from its recorded
run specification: untouched it is IDENTICAL (exit 0), an edited number exits 1 naming it, and
a PDF that gained an attachment is refused (exit 2).

The schema is checked with jsonschema, the reference implementation of JSON Schema 2020-12.
"""

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from conftest import write_without_observation
from test_batch import write_comtrade_pair

from pqcheck.cli import main
from pqcheck.results import SCHEMA_VERSION, results_schema, shipped_schema

jsonschema = pytest.importorskip("jsonschema")

FS = 6400.0  # [Hz]


def _signals(n: int):
    # 50 Hz, 100 A peak with 4 % fifth and 1 % seventh; 325 V peak
    t = np.arange(n) / FS
    w = 2 * np.pi * 50.0 * t
    return t, 100 * (np.sin(w) + 0.04 * np.sin(5 * w) + 0.01 * np.sin(7 * w)), 325 * np.sin(w)


def _validator():
    schema = results_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def _run(folder, monkeypatch, *args):
    monkeypatch.chdir(folder)
    return CliRunner().invoke(main, [str(a) for a in args])


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("results")
    t, i, v = _signals(int(0.8 * FS))
    (d / "run.csv").write_text("time,ia,va\n" + "".join(
        f"{a:.9g},{b:.9g},{c:.9g}\n" for a, b, c in zip(t, i, v)))
    np.save(d / "run.npy", np.column_stack([i, v]))
    (d / "run.json").write_text(json.dumps({"columns": ["ia", "va"], "sample_rate_hz": FS}))
    pd.DataFrame({"time": t, "ia": i, "va": v}).to_parquet(d / "run.parquet")
    write_comtrade_pair(d, "rec")
    # IEEE 519 as bundled needs a week of data: the copy without an observation period
    write_without_observation(d, "ieee519-2022")
    (d / "plan.toml").write_text(
        'title = "results plan"\n[site]\nnominal_voltage_v = 400\nnominal_frequency_hz = 50\n'
        'isc_a = 20000\nil_a = 100\n[[limits]]\ntable = "ieee519-2022-no-observation.toml"\n'
        '[[captures]]\nid = "half"\nfile = "run.csv"\nload_percent = 50\n'
        '[[captures]]\nid = "rec"\nfile = "rec.cfg"\nload_percent = 100\n')
    return d


LIMITS = ("--limits", "ieee519-2022-no-observation.toml", "--voltage-level", "400", "--isc",
          "20000", "--il", "100")


def test_the_shipped_schema_is_the_generated_one():
    # after adding a RunSpec field: python -m pqcheck.results writes the file again
    assert shipped_schema() == results_schema()


def test_every_json_document_validates(folder, monkeypatch):
    v = _validator()
    res = _run(folder, monkeypatch, "analyze", "run.csv", "--format", "json", "-q", "--no-cache")
    assert res.exit_code == 0, res.output
    analysis = json.loads(res.stdout)
    res = _run(folder, monkeypatch, "check", "run.csv", *LIMITS, "--format", "json", "-q",
               "--no-cache")
    assert res.exit_code in (0, 1), res.output
    check = json.loads(res.stdout)
    res = _run(folder, monkeypatch, "batch", "run.csv", "rec.cfg", *LIMITS, "--format", "json",
               "-q", "--no-cache", "--jobs", "1")
    assert res.exit_code in (0, 1), res.output
    batch = json.loads(res.stdout)
    res = _run(folder, monkeypatch, "report", "run.csv", *LIMITS, "-o", "v.pdf", "--json",
               "v.json", "-q", "--no-cache", "--force")
    assert res.exit_code in (0, 1), res.output
    report = json.loads((folder / "v.json").read_text())
    attached = _attachment(folder / "v.pdf")
    for kind, doc in (("analysis", analysis), ("check", check), ("batch", batch),
                      ("report", report), ("report", attached)):
        v.validate(doc)
        assert doc["schema_version"] == SCHEMA_VERSION and doc["tool"]["kind"] == kind
    # the run specification is in every one of them, and the schema requires it
    assert check["run_spec"]["limits"][0]["il_a"] == 100.0
    assert batch["run_spec"]["reader"]["path"] == ""
    broken = dict(check)
    broken.pop("run_spec")
    assert not v.is_valid(broken)
    broken = json.loads(json.dumps(report))
    broken["captures"][0]["run_spec"]["analysis"]["max_order"] = "fifty"
    assert not v.is_valid(broken)


def _attachment(pdf: Path) -> dict:
    from pypdf import PdfReader

    return json.loads(PdfReader(io.BytesIO(pdf.read_bytes())).attachments["results.json"][0])


@pytest.mark.parametrize("source, extra", [
    ("run.csv", ()),
    ("rec.cfg", ()),
    ("run.npy", ("--current", "ia", "--voltage", "va")),
    ("run.parquet", ()),
    ("plan.toml", None),
])
def test_report_then_verify_each_capture_format(folder, tmp_path, monkeypatch, source, extra):
    work = tmp_path / "w"
    shutil.copytree(folder, work)
    args = () if extra is None else LIMITS + tuple(extra)
    res = _run(work, monkeypatch, "report", source, *args, "-o", "r.pdf", "--json", "r.json",
               "-q", "--no-cache")
    assert res.exit_code in (0, 1), res.output
    _validator().validate(_attachment(work / "r.pdf"))
    for target in ("r.pdf", "r.json"):
        res = _run(work, monkeypatch, "verify", target)
        assert res.exit_code == 0, res.output
        assert "IDENTICAL" in res.stdout
    # COMTRADE: the recorded hash is over .cfg + .dat, as the reader computes it
    if source == "rec.cfg":
        with open(work / "rec.dat", "r+b") as fh:
            fh.seek(-1, 2)
            last = fh.read(1)
            fh.seek(-1, 2)
            fh.write(bytes([last[0] ^ 1]))
        res = _run(work, monkeypatch, "verify", "r.json")
        assert res.exit_code == 1 and "SHA-256" in res.stdout, res.output
        return
    doc = json.loads((work / "r.json").read_text())
    ch = doc["captures"][0]["analysis"]["channels"][0]
    ch["harmonics"][4]["rms"] *= 1.001  # order 5
    (work / "r.json").write_text(json.dumps(doc))
    res = _run(work, monkeypatch, "verify", "r.json")
    assert res.exit_code == 1
    assert "captures[0].analysis.channels[0].harmonics[4].rms" in res.stdout


def test_a_pdf_with_an_added_attachment_is_refused(folder, tmp_path, monkeypatch):
    from pypdf import PdfReader, PdfWriter

    work = tmp_path / "w"
    shutil.copytree(folder, work)
    res = _run(work, monkeypatch, "report", "run.csv", *LIMITS, "-o", "r.pdf", "-q",
               "--no-cache")
    assert res.exit_code in (0, 1), res.output
    writer = PdfWriter(clone_from=PdfReader(work / "r.pdf"))
    writer.add_attachment("invoice.txt", b"pay here")
    with open(work / "x.pdf", "wb") as fh:
        writer.write(fh)
    res = _run(work, monkeypatch, "verify", "x.pdf")
    assert res.exit_code == 2
    assert "x.pdf: the PDF carries an attachment pqcheck does not write ('invoice.txt')" \
        in res.stderr


def test_results_of_an_older_schema_are_refused_clearly(folder, tmp_path, monkeypatch):
    work = tmp_path / "w"
    shutil.copytree(folder, work)
    res = _run(work, monkeypatch, "report", "run.csv", *LIMITS, "-o", "r.pdf", "--json",
               "r.json", "-q", "--no-cache")
    assert res.exit_code in (0, 1), res.output
    doc = json.loads((work / "r.json").read_text())
    doc.pop("schema_version")
    doc["tool"]["schema"] = 1
    (work / "r.json").write_text(json.dumps(doc))
    res = _run(work, monkeypatch, "verify", "r.json")
    assert res.exit_code == 2
    assert "r.json: schema_version: results of schema version 1; this pqcheck reads version " \
           f"{SCHEMA_VERSION}" in res.stderr
