"""The run specification: one record from the command line, a plan and a batch, read back as
data, and errors named in each user's own terms (the CLI option, the plan key, the keyword)."""

from __future__ import annotations

import dataclasses
import json
import os
import shlex
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import write_without_observation

from pqcheck.cli import main
from pqcheck.cli._fields import SPEC_OPTIONS, command_line, spec_from_options
from pqcheck.errors import InputError
from pqcheck.record import (
    PARTS,
    AnalysisSettings,
    ChannelRoles,
    LimitSelection,
    ReaderOptions,
    ReportDetails,
    RunSpec,
)
from pqcheck.run.batch import batch_spec
from pqcheck.run.check import check_capture

FS = 6400.0  # [Hz]


def _write_capture(path: Path) -> None:
    # 50 Hz, 100 A peak with a 4 % fifth; 325 V peak; 0.8 s at 6.4 kHz, no time column
    t = np.arange(int(0.8 * FS)) / FS
    w = 2 * np.pi * 50.0 * t
    i = 100 * (np.sin(w) + 0.04 * np.sin(5 * w))
    v = 325 * np.sin(w)
    path.write_text("ch1,ch2\n" + "".join(f"{a:.9g},{b:.9g}\n" for a, b in zip(i, v)))


FULL = RunSpec(
    reader=ReaderOptions(path="run.csv", sample_rate_hz=FS, time_column=None),
    channels=ChannelRoles(current=("ch1",), voltage=("ch2",)),
    analysis=AnalysisSettings(nominal_hz=50, max_order=40, il_a=100.0, wiring=None),
    limits=(LimitSelection(table="ieee519-2022", voltage_level_v=400, isc_a=20000, il_a=100),
            LimitSelection(table="ieee1547-2018", rated_current_a=75.0)),
    report=ReportDetails(title="A test", operator="Lab"),
)


def test_round_trip_through_json_gives_the_same_spec():
    d = json.loads(json.dumps(FULL.to_dict()))
    assert RunSpec.from_dict(d) == FULL
    assert d["version"] == 1 and d["limits"][1]["rated_current_a"] == 75.0


def test_every_field_is_in_the_dict_form():
    # a field added to a part is serialised without a second edit
    d = FULL.to_dict()
    for part, cls in (("reader", ReaderOptions), ("channels", ChannelRoles),
                      ("analysis", AnalysisSettings), ("report", ReportDetails)):
        assert set(d[part]) == {f.name for f in dataclasses.fields(cls)}
    assert set(d["limits"][0]) == {f.name for f in dataclasses.fields(LimitSelection)}
    assert len(PARTS) == 6


@pytest.mark.parametrize("make, message", [
    (lambda: ReaderOptions(path="x.csv", sample_rate_hz=0), r"^sample_rate_hz: must be a "
                                                            r"positive number, got 0$"),
    (lambda: AnalysisSettings(nominal_hz=55), r"^nominal_hz: must be 50 or 60, got 55$"),
    (lambda: AnalysisSettings(max_order=1), r"^max_order: must be a whole number from 2 to 100"),
    (lambda: AnalysisSettings(wiring="2-wire"), r"^wiring: must be one of '3-wire', '4-wire'"),
    (lambda: LimitSelection(table=""), r"^table: must name a bundled table id"),
    (lambda: LimitSelection(table="t", il_a=-5), r"^il_a: must be a positive number, got -5$"),
    (lambda: ChannelRoles(current=("ia", "")), r"^current: must be a list of non-empty column"),
])
def test_validation_names_the_field(make, message):
    with pytest.raises(InputError, match=message):
        make()


def test_from_dict_names_the_path_of_a_bad_or_unknown_field():
    d = FULL.to_dict()
    d["limits"][1]["iref_a"] = "lots"
    with pytest.raises(InputError, match=r"^run_spec\.limits\[1\]\.iref_a: must be a positive"):
        RunSpec.from_dict(d)
    d = FULL.to_dict()
    d["analysis"]["windowing"] = "hann"
    with pytest.raises(InputError, match=r"^run_spec\.analysis\.windowing: unknown field"):
        RunSpec.from_dict(d)


def test_the_command_line_written_for_a_spec_parses_back_to_it():
    # the report's traceability line is generated from the one option table; the command
    # line gives every table the same values
    spec = dataclasses.replace(FULL, report=ReportDetails())
    words = shlex.split(command_line("check", spec))[2:]
    ctx = main.get_command(None, "check").make_context("check", words)
    merged = {**spec.limits[0].resolve_kwargs(), "rated_current_a": 75.0}
    expected = dataclasses.replace(spec, limits=tuple(
        dataclasses.replace(s, **merged) for s in spec.limits))
    assert spec_from_options(ctx.params["capture"][0], ctx.params) == expected


def test_every_spec_field_with_an_option_is_a_click_parameter():
    names = {p.name for c in ("check", "report") for p in main.get_command(None, c).params}
    for path, opt in SPEC_OPTIONS:
        leaf = path.rsplit(".", 1)[1]
        if opt != "CAPTURE" and not path.startswith("report."):
            assert leaf in names, path
    report = {p.name for p in main.get_command(None, "report").params}
    assert {"title", "equipment", "site", "operator", "report_id"} <= report


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("record")
    _write_capture(d / "run.csv")
    return d


def _report(folder, monkeypatch, *args) -> tuple:
    monkeypatch.chdir(folder)
    res = CliRunner().invoke(main, ["report", *map(str, args), "-q", "--no-cache"])
    return res


def test_cli_plan_and_batch_give_equal_specs(folder, monkeypatch):
    # IEEE 519 as bundled needs a week of data: the copy without an observation period
    table = write_without_observation(folder, "ieee519-2022").name
    res = _report(folder, monkeypatch, "run.csv", "--sample-rate", "6400", "--current", "ch1",
                  "--voltage", "ch2", "--nominal-frequency", "50", "--il", "100", "--limits",
                  table, "--voltage-level", "400", "--isc", "20000", "-o", "c.pdf",
                  "--json", "c.json")
    assert res.exit_code == 0, res.output
    from_cli = RunSpec.from_dict(json.loads((folder / "c.json").read_text())
                                 ["captures"][0]["run_spec"])
    (folder / "plan.toml").write_text(
        '[site]\nnominal_voltage_v = 400\nnominal_frequency_hz = 50\nisc_a = 20000\n'
        f'il_a = 100\n[[limits]]\ntable = "{table}"\n'
        '[[captures]]\nfile = "run.csv"\nsample_rate_hz = 6400\ncurrent = ["ch1"]\n'
        'voltage = ["ch2"]\n'
        # a plan passes only when complete: equipment, date and the instrument chain
        '[equipment]\nname = "unit"\n[conditions]\ndate = "2026-01-15"\n'
        '[[conditions.instruments]]\nrole = "digitiser"\nmodel = "d"\naccuracy = "5 %"\n')
    res = _report(folder, monkeypatch, "plan.toml", "-o", "p.pdf", "--json", "p.json")
    assert res.exit_code == 0, res.output
    from_plan = RunSpec.from_dict(json.loads((folder / "p.json").read_text())
                                  ["captures"][0]["run_spec"])
    # the plan names the capture by its resolved path
    assert Path(from_plan.reader.path) == (folder / "run.csv").resolve()
    # ... and the table by its path resolved against the plan's folder
    assert Path(from_plan.limits[0].table) == (folder / table).resolve()
    # the plan declares its instrument chain, the command line none
    assert from_plan.declared.chains[0].accuracy_percent == 5.0
    from_plan = dataclasses.replace(from_plan, declared=from_cli.declared, limits=tuple(
        dataclasses.replace(s, table=table) for s in from_plan.limits))
    assert from_plan.with_capture("run.csv") == from_cli
    # a batch checks every capture with the same template (user tables by absolute path)
    assert batch_spec(from_cli) == dataclasses.replace(from_cli.with_capture(""), limits=tuple(
        dataclasses.replace(s, table=os.path.abspath(s.table)) for s in from_cli.limits))


def test_one_error_named_in_three_vocabularies(folder, monkeypatch):
    # IEEE 519 selects its row by ISC/IL: without IL the same library error reads ...
    spec = RunSpec(reader=ReaderOptions(path=str(folder / "run.csv"), sample_rate_hz=FS),
                   limits=(LimitSelection(table="ieee519-2022", voltage_level_v=400,
                                          isc_a=20000),))
    with pytest.raises(InputError, match=r"give `il_a` \[A\]$"):  # ... as the keyword (API)
        check_capture(spec)
    res = _report(folder, monkeypatch, "run.csv", "--sample-rate", "6400", "--limits",
                  "ieee519-2022", "--voltage-level", "400", "--isc", "20000", "-o", "e.pdf")
    assert res.exit_code == 2  # ... as the option on the command line
    assert res.stderr.rstrip().endswith("--il: table ieee519-2022 (Tables 2 to 4) selects its "
                                        "row by ISC/IL (maximum short-circuit current over "
                                        "maximum demand load current at the PCC); give --il [A]")
    (folder / "bad.toml").write_text(
        '[site]\nnominal_voltage_v = 400\nisc_a = 20000\n[[limits]]\ntable = "ieee519-2022"\n'
        '[[captures]]\nfile = "run.csv"\nsample_rate_hz = 6400\n')
    res = _report(folder, monkeypatch, "bad.toml", "-o", "b.pdf")
    assert res.exit_code == 2  # ... as the plan key, at the line of the [[limits]] entry
    assert "bad.toml:4: limits[1]: table ieee519-2022" in res.stderr
    assert "give il_a [A] (set it in [site], [equipment] or this [[limits]] entry)" in res.stderr
    assert not (folder / "e.pdf").exists() and not (folder / "b.pdf").exists()


def test_check_capture_analyses_up_to_the_tables_highest_order(folder):
    spec = RunSpec(reader=ReaderOptions(path=str(folder / "run.csv"), sample_rate_hz=FS),
                   channels=ChannelRoles(current=("ch1",), voltage=("ch2",)),
                   limits=(LimitSelection(table="ieee1547-2018", rated_current_a=70.7),))
    run = check_capture(spec)
    assert run.result.settings.max_order == max(a.tables[0].max_order
                                                for a in run.assessments)
    assert run.spec is spec and run.id == "run"
    plain = check_capture(dataclasses.replace(spec, limits=()))
    assert plain.result.settings.max_order == 50 and plain.assessments == ()
    fixed = check_capture(dataclasses.replace(spec, analysis=AnalysisSettings(max_order=13)))
    assert fixed.result.settings.max_order == 13
    assert os.path.basename(fixed.result.source) == "run.csv"
