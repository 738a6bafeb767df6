"""User TOML documents: limit tables, test plans and site files are read by one validator and
one id-or-path rule, so the same mistake is refused the same way in each of them.

The expected behaviour is the project's rule (an error names the file, the line, the key and
what to do; an unknown key gets a "did you mean"; a bare name is a bundled table id and a
path has a folder separator or the ``.toml`` suffix), not anything pqcheck computes.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from pqcheck.cli import main
from pqcheck.limits import dump_toml, load_table, table_path
from pqcheck.run.plan import load_plan
from pqcheck.site.sitefile import read_site

# --- one id-or-path rule ------------------------------------------------------------------------

PLAN = '''\
[[limits]]
table = "{table}"
[[captures]]
file = "run.csv"
'''

SITE = '''\
[supply]
nominal_voltage_v = 400
ssc_va = 10e6
x_over_r = 5
[limits]
table = "{table}"
[[units]]
name = "U"
results = "unit.json"
count = 1
load_point = "100 %"
'''


@pytest.fixture
def decoy(tmp_path, monkeypatch):
    """A folder (also the current one) holding a non-table file named like a bundled id and a
    real user table under ``tables/``."""
    (tmp_path / "ieee519-2022").write_text("not a limit table\n")
    (tmp_path / "tables").mkdir()
    (tmp_path / "tables" / "mine.toml").write_text(dump_toml(load_table("ieee519-2022")))
    (tmp_path / "run.csv").write_text("t,i\n")
    (tmp_path / "unit.json").write_text("{}")
    monkeypatch.chdir(tmp_path)
    return tmp_path


@pytest.mark.parametrize("text, is_path", [
    ("ieee519-2022", False), ("IEC61000-3-2", False), ("mine.toml", True),
    ("MINE.TOML", True), ("tables/mine", True), ("tables\\mine", True), ("~/t.toml", True)])
def test_the_rule(text, is_path):
    # the documented rule: a folder separator or the .toml suffix makes a path
    assert (table_path(text) is not None) is is_path


def test_relative_paths_join_the_folder(tmp_path):
    assert table_path("t/x.toml", folder=tmp_path) == tmp_path / "t" / "x.toml"
    assert table_path(tmp_path / "x") == tmp_path / "x"  # a PathLike is always a path
    assert table_path("ieee519-2022", folder=tmp_path) is None


def test_api_takes_a_bare_name_for_a_bundled_id(decoy):
    assert load_table("ieee519-2022").id == "ieee519-2022"
    assert load_table("tables/mine.toml").id == "ieee519-2022"


def test_api_says_how_to_name_a_file_without_suffix(decoy):
    (decoy / "utility").write_text(dump_toml(load_table("ieee519-2022")))
    with pytest.raises(ValueError, match=r"unknown limit table 'utility'; .*a bare name is a "
                                         r"bundled id: to use the file 'utility', write "
                                         r"'\./utility'"):
        load_table("utility")
    assert load_table("./utility").id == "ieee519-2022"


def test_cli_takes_a_bare_name_for_a_bundled_id(decoy):
    res = CliRunner().invoke(main, ["limits", "show", "ieee519-2022"])
    assert res.exit_code == 0, res.output
    assert "IEEE" in res.output


def test_plan_uses_the_rule(decoy):
    plan = load_plan(_write(decoy, "plan.toml", PLAN.format(table="ieee519-2022")))
    assert plan.limits[0].path is None
    assert plan.limit_selection(plan.limits[0]).table == "ieee519-2022"
    (decoy / "p").mkdir()
    (decoy / "p" / "run.csv").write_text("t,i\n")
    plan = load_plan(_write(decoy / "p", "plan.toml", PLAN.format(table="../tables/mine.toml")))
    assert plan.limits[0].path == decoy / "p" / ".." / "tables" / "mine.toml"


def test_site_file_uses_the_rule(decoy):
    sf = read_site(_write(decoy, "site.toml", SITE.format(table="ieee519-2022")))
    assert sf.limits == "ieee519-2022"
    (decoy / "s").mkdir()
    (decoy / "s" / "unit.json").write_text("{}")
    sf = read_site(_write(decoy / "s", "site.toml", SITE.format(table="../tables/mine.toml")))
    assert Path(sf.limits) == decoy / "s" / ".." / "tables" / "mine.toml"


@pytest.mark.parametrize("kind", ["plan", "site"])
def test_missing_table_file_is_named_the_same_way(decoy, kind):
    text = (PLAN if kind == "plan" else SITE).format(table="nowhere/x.toml")
    path = _write(decoy, f"{kind}.toml", text)
    with pytest.raises(ValueError, match=rf"{kind}\.toml:\d+: limits(\[1\])?\.table: limit "
                                         r"table 'nowhere/x\.toml' not found \(resolved "
                                         r"against the"):
        (load_plan if kind == "plan" else read_site)(path)


def _write(folder: Path, name: str, text: str) -> Path:
    p = folder / name
    p.write_text(text, encoding="utf-8")
    return p


# --- one validator: the same mistake is refused the same way in every document -----------------

TABLE = '''\
schema = 1
id = "doc-test"
title = "A made-up table for tests"
standard = "Test standard"
edition = "1"
measure = "group"
max_order = 40

[selectors.isc_il]
closed = "lower"

[evaluation]
smoothing_tau_s = 1.5
checks = [
    { of = "window", statistic = "rms", multiplier = 1.0 },
]

[[limits]]
name = "Table X"
clause = "Table X"
applies_to = "current"
basis = "percent_of_il"
unit = "%"
columns = ["2-40", "TDD"]
isc_il = [0, inf]
values = [4.0, 5.0]
'''

FULL_PLAN = '''\
title = "T"
[site]
nominal_voltage_v = 400
isc_a = 3500
il_a = 100
[equipment]
name = "EUT"
manufacturer = "M"
[[captures]]
file = "run.csv"
load_percent = 50
'''

FULL_SITE = SITE.format(table="ieee519-2022")

DOCS = {"table": ("table.toml", TABLE), "plan": ("plan.toml", FULL_PLAN),
        "site": ("site.toml", FULL_SITE)}

# The same five mistakes in each kind of document: (edit old -> new, the line's marker (None:
# the document as a whole), the key named, the problem). The problem words are the same for
# the same mistake whichever the document: that is the point of one validator.
WRONG_TYPE = r"must be a number, got the text '3'"
OUT_OF_RANGE = r"must be greater than zero, got -2"
MISTAKES = {
    ("table", "wrong type"): (("smoothing_tau_s = 1.5", 'smoothing_tau_s = "3"'),
                              "smoothing_tau_s", "evaluation.smoothing_tau_s", WRONG_TYPE),
    ("plan", "wrong type"): (("isc_a = 3500", 'isc_a = "3"'), "isc_a", "site.isc_a", WRONG_TYPE),
    ("site", "wrong type"): (("x_over_r = 5", 'x_over_r = "3"'), "x_over_r", "supply.x_over_r",
                             WRONG_TYPE),
    ("table", "unknown key"): (('edition = "1"', 'edition = "1"\nediton = "2"'), "editon",
                               "editon", r"unknown field 'editon'; did you mean 'edition'\? "
                                         r"\(allowed: clause, edition, "),
    ("plan", "unknown key"): (('manufacturer = "M"', 'manufacturer = "M"\nmanufactorer = "N"'),
                              "manufactorer", "equipment.manufactorer",
                              r"unknown field 'manufactorer'; did you mean 'manufacturer'\? "
                              r"\(allowed: description, equipment_class, "),
    ("site", "unknown key"): (("x_over_r = 5", "x_over_r = 5\nx_ovr_r = 6"), "x_ovr_r",
                              "supply.x_ovr_r", r"unknown field 'x_ovr_r'; did you mean "
                                                r"'x_over_r'\? \(allowed: isc_a, "),
    ("table", "missing key"): (('title = "A made-up table for tests"\n', ""), None, "title",
                               r"missing field 'title'"),
    ("plan", "missing key"): (('file = "run.csv"\n', ""), "[[captures]]", "captures[1]",
                              r"missing field 'file': the capture file, relative to the plan"),
    ("site", "missing key"): (("x_over_r = 5\n", ""), "[supply]", "supply",
                              r"missing field 'x_over_r': the supply impedance's X/R ratio"),
    ("table", "out of range"): (("multiplier = 1.0", "multiplier = -2"), "multiplier",
                                "evaluation.checks.multiplier", OUT_OF_RANGE),
    ("plan", "out of range"): (("il_a = 100", "il_a = -2"), "il_a", "site.il_a", OUT_OF_RANGE),
    ("site", "out of range"): (("ssc_va = 10e6", "ssc_va = -2"), "ssc_va", "supply.ssc_va",
                               OUT_OF_RANGE),
    ("table", "unit suffix"): (("smoothing_tau_s = 1.5", "smoothing_tau_ms = 1500"),
                               "smoothing_tau_ms", "evaluation.smoothing_tau_ms",
                               r"unknown field 'smoothing_tau_ms'; did you mean "
                               r"'smoothing_tau_s'\? \(the unit is part of the name: give the "
                               r"value in s\)"),
    ("plan", "unit suffix"): (("nominal_voltage_v = 400", "nominal_voltage_kv = 0.4"),
                              "nominal_voltage_kv", "site.nominal_voltage_kv",
                              r"unknown field 'nominal_voltage_kv'; did you mean "
                              r"'nominal_voltage_v'\? \(the unit is part of the name: give "
                              r"the value in V\)"),
    ("site", "unit suffix"): (("ssc_va = 10e6", "ssc_mva = 10"), "ssc_mva", "supply.ssc_mva",
                              r"unknown field 'ssc_mva'; did you mean 'ssc_va'\? \(the unit "
                              r"is part of the name: give the value in VA\)"),
}


def _load(kind: str, path: Path):
    if kind == "table":
        return load_table(path)
    return (load_plan if kind == "plan" else read_site)(path)


def _line(text: str, marker):
    if marker is None:
        return None
    return next(k for k, s in enumerate(text.splitlines(), 1) if marker in s)


@pytest.mark.parametrize("kind", ["table", "plan", "site"])
def test_the_documents_are_valid_as_written(decoy, kind):
    name, text = DOCS[kind]
    _load(kind, _write(decoy, name, text))


@pytest.mark.parametrize("kind, mistake", sorted(MISTAKES))
def test_the_same_mistake_is_refused_the_same_way(decoy, kind, mistake):
    (old, new), marker, field, problem = MISTAKES[(kind, mistake)]
    name, text = DOCS[kind]
    assert text.count(old) == 1, old
    text = text.replace(old, new)
    path = _write(decoy, name, text)
    line = _line(text, marker)
    where = f"{name}:{line}" if line else name
    # the API: file, line, key, problem
    with pytest.raises(ValueError, match=rf"{re.escape(where)}: {re.escape(field)}: {problem}"
                       ) as info:
        _load(kind, path)
    assert (info.value.line, info.value.field) == (line, field)
    # the command line: the same message, exit 2, nothing written
    args = {"table": ["limits", "validate", name], "plan": ["report", name, "-o", "r.pdf"],
            "site": ["site", name, "--json", "s.json"]}[kind]
    res = CliRunner().invoke(main, args)
    assert res.exit_code == 2, res.output
    assert re.search(rf"{re.escape(where)}: {re.escape(field)}: {problem}", res.output)
    assert not (decoy / "r.pdf").exists() and not (decoy / "s.json").exists()


@pytest.mark.parametrize("section, field, problem", [
    ('[observation.behaviour.steady]\ncycles = 10\n', "observation.behaviour.steady.minimum_s",
     r"missing field 'minimum_s'"),
    ('[observation.behaviour.steady]\nminimum_s = 600\nminimun_s = 1\n',
     "observation.behaviour.steady.minimun_s",
     r"unknown field 'minimun_s'; did you mean 'minimum_s'\? \(allowed: cycles, "),
    ('[observation]\nrepresentative_s = -2\n', "observation.representative_s", OUT_OF_RANGE),
])
def test_declared_sections_of_a_limit_table(tmp_path, section, field, problem):
    # sections of a limit table declared as data get the validator's words too
    head = '[observation]\ndefault_behaviour = "steady"\n' if "behaviour" in section else ""
    path = _write(tmp_path, "table.toml", TABLE + "\n" + head + section)
    with pytest.raises(ValueError, match=rf"table\.toml:\d+: {re.escape(field)}: {problem}"):
        load_table(path)
