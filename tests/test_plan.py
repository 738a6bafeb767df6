"""Test plans: the template, relative paths, selection of limit-table values, and every error
pinned with the file, line and field it names."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from pqcheck.cli import main
from pqcheck.errors import PlanError
from pqcheck.run.plan import load_plan, plan_template

MINIMAL = '''\
title = "T"
[site]
nominal_voltage_v = 400
isc_a = 3500
il_a = 100
[equipment]
name = "EUT"
rated_current_a = 75
[[limits]]
table = "ieee519-2022"
[[captures]]
file = "data/run-50.csv"
load_percent = 50
current = ["ia", "ib", "ic"]
[[captures]]
id = "full"
file = "data/run-100.csv"
load_percent = 100
'''


def line_of(text: str, needle: str) -> int:
    """1-based line of the first line containing ``needle`` (found independently of pqcheck)."""
    for k, line in enumerate(text.splitlines(), start=1):
        if needle in line:
            return k
    raise AssertionError(needle)


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / "run-50.csv").write_text("t,i\n")
    (tmp_path / "data" / "run-100.csv").write_text("t,i\n")
    return tmp_path


def write(folder: Path, text: str, name: str = "plan.toml") -> Path:
    p = folder / name
    p.write_text(text, encoding="utf-8")
    return p


def test_minimal_plan_loads_with_paths_relative_to_the_plan(folder, monkeypatch, tmp_path_factory):
    p = write(folder, MINIMAL)
    monkeypatch.chdir(tmp_path_factory.mktemp("elsewhere"))  # cwd must not matter
    plan = load_plan(p)
    assert [c.id for c in plan.captures] == ["run-50", "full"]
    assert plan.captures[0].path == folder.resolve() / "data" / "run-50.csv"
    assert plan.captures[0].load_point == "50 %"
    assert plan.captures[0].current == ("ia", "ib", "ic")
    assert plan.captures[1].current is None
    assert plan.sha256 == hashlib.sha256(p.read_bytes()).hexdigest()


def test_selection_defaults_to_site_and_equipment_and_entry_overrides(folder):
    text = MINIMAL.replace('table = "ieee519-2022"', 'table = "ieee519-2022"\nil_a = 120')
    plan = load_plan(write(folder, text))
    sel = plan.limit_selection(plan.limits[0])
    assert sel.resolve_kwargs() == {"voltage_level_v": 400.0, "isc_a": 3500.0, "il_a": 120.0}
    assert sel.il_a == 120.0 and sel.rated_current_a == 75.0


def test_template_is_a_valid_plan(tmp_path):
    p = write(tmp_path, plan_template())
    plan = load_plan(p, check_files=False)
    assert [c.id for c in plan.captures] == ["load-50", "load-100"]
    assert plan.limits[0].table == "ieee519-2022"
    assert len(plan.conditions.instruments) == 2
    # with the capture files present it loads with file checks too
    (tmp_path / "capture-50pct.csv").write_text("t\n")
    (tmp_path / "capture-100pct.csv").write_text("t\n")
    assert len(load_plan(p).captures) == 2


def test_plan_new_writes_template_and_refuses_to_overwrite(tmp_path):
    p = tmp_path / "plan.toml"
    res = CliRunner().invoke(main, ["plan", "new", str(p)])
    assert res.exit_code == 0, res.output
    assert p.read_text() == plan_template()
    p.write_text("# mine\n")
    res = CliRunner().invoke(main, ["plan", "new", str(p)])
    assert res.exit_code == 2
    assert "file exists; give --force" in res.output
    assert p.read_text() == "# mine\n"
    res = CliRunner().invoke(main, ["plan", "new", str(p), "--force"])
    assert res.exit_code == 0 and p.read_text() == plan_template()


@pytest.mark.parametrize("edit, needle, field, message", [
    (("nominal_voltage_v = 400", "nominal_voltage_v = 400\nnominal_volts = 1"),
     "nominal_volts", "site.nominal_volts",
     "unknown field 'nominal_volts'; did you mean 'nominal_voltage_v'? (allowed: address, "),
    (("isc_a = 3500", 'isc_a = "3500"'), "isc_a", "site.isc_a",
     "must be a number, got the text '3500'"),
    (("il_a = 100", "il_a = -5"), "il_a", "site.il_a", "must be greater than zero, got -5"),
    (("rated_current_a = 75", "rated_current_a = 75\ngeneration = 1"), "generation",
     "equipment.generation", "must be true or false"),
    (('file = "data/run-50.csv"', 'file = "data/missing.csv"'), "missing.csv",
     "captures[1].file", "file 'data/missing.csv' not found (resolved against the plan's folder"),
    (('id = "full"', 'id = "run-50"'), 'id = "run-50"', "captures[2].id",
     "capture id 'run-50' is used twice"),
    (("load_percent = 100", "load_percent = 100\nlimits = [\"iec61000-3-2\"]"),
     "iec61000-3-2", "captures[2].limits",
     "'iec61000-3-2' is not a [[limits]] table of this plan (listed: ieee519-2022)"),
    (("load_percent = 100", "load_percent = 250"), "load_percent = 250",
     "captures[2].load_percent", "must be at most 200 %, got 250"),
    (('current = ["ia", "ib", "ic"]', 'current = "ia"'), 'current = "ia"',
     "captures[1].current", "must be a list of non-empty text"),
    (('id = "full"', 'id = "full run"'), 'id = "full run"', "captures[2].id",
     "id 'full run' must start with a letter or digit and use only"),
])
def test_field_errors_name_file_line_and_field(folder, edit, needle, field, message):
    text = MINIMAL.replace(*edit)
    assert text != MINIMAL
    p = write(folder, text)
    line = line_of(text, needle)
    with pytest.raises(PlanError, match=re.escape(f"plan.toml:{line}: {field}: {message}")):
        load_plan(p)


def test_toml_syntax_error_names_line(folder):
    text = MINIMAL.replace("load_percent = 50", "load_percent = 50 %")
    with pytest.raises(PlanError, match=r"plan\.toml:13: not valid TOML: "):
        load_plan(write(folder, text))


def test_missing_file_field_and_table_field(folder):
    text = MINIMAL.replace('file = "data/run-100.csv"\n', "")
    with pytest.raises(PlanError, match=r"plan\.toml:15: captures\[2\]: missing field 'file'"):
        load_plan(write(folder, text))
    text = MINIMAL.replace('table = "ieee519-2022"\n', "")
    with pytest.raises(PlanError, match=r"plan\.toml:9: limits\[1\]: missing field 'table'"):
        load_plan(write(folder, text))


def test_no_captures_and_schema_and_frequency(folder):
    with pytest.raises(PlanError, match="the plan lists no capture"):
        load_plan(write(folder, '[site]\nname = "x"\n'))
    with pytest.raises(PlanError, match=r"plan\.toml:1: schema: this pqcheck reads plan "
                                        r"schema 1, got 2"):
        load_plan(write(folder, "schema = 2\n" + MINIMAL))
    with pytest.raises(PlanError, match=r"site\.nominal_frequency_hz: must be 50 or 60, got 55"):
        load_plan(write(folder, MINIMAL.replace("[site]\n", "[site]\nnominal_frequency_hz = 55\n")))
    with pytest.raises(PlanError, match=r"analysis\.wiring: must be \"3-wire\" or \"4-wire\""):
        load_plan(write(folder, MINIMAL + '[analysis]\nwiring = "delta"\n'))


def test_missing_plan_file(tmp_path):
    with pytest.raises(PlanError, match=r"nope\.toml: plan file not found"):
        load_plan(tmp_path / "nope.toml")


def test_user_limit_table_path_resolves_against_plan(folder):
    (folder / "tables").mkdir()
    (folder / "tables" / "mine.toml").write_text("schema = 1\n")
    text = MINIMAL.replace('table = "ieee519-2022"', 'table = "tables/mine.toml"')
    plan = load_plan(write(folder, text))
    assert plan.limits[0].path == folder.resolve() / "tables" / "mine.toml"
    text = MINIMAL.replace('table = "ieee519-2022"', 'table = "tables/other.toml"')
    with pytest.raises(PlanError, match=r"limits\[1\]\.table: limit table 'tables/other\.toml' not "
                                        "found"):
        load_plan(write(folder, text))


def test_missing_selector_is_reported_against_the_plan(folder):
    from pqcheck.run.build import run_plan

    text = MINIMAL.replace("isc_a = 3500\n", "")
    plan = load_plan(write(folder, text))
    line = line_of(text, "[[limits]]")
    with pytest.raises(PlanError, match=re.escape(f"plan.toml:{line}: limits[1]: ")
                       + r".*selects its row by ISC/IL.*; give isc_a \[A\] \(set it in \[site\], "
                       r"\[equipment\] or this \[\[limits\]\] entry\)"):
        run_plan(plan)


def test_report_on_bad_plan_exits_two_and_writes_nothing(folder):
    p = write(folder, MINIMAL.replace("il_a = 100", "il_a = 0"))
    out = folder / "r.pdf"
    res = CliRunner().invoke(main, ["report", str(p), "-o", str(out)])
    assert res.exit_code == 2
    assert f"plan.toml:{line_of(MINIMAL, 'il_a')}: site.il_a: must be greater than zero" \
        in res.output
    assert not out.exists()
