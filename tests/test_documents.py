"""User TOML documents: limit tables, test plans and site files are read by one validator and
one id-or-path rule, so the same mistake is refused the same way in each of them.

The expected behaviour is the project's rule (an error names the file, the line, the key and
what to do; an unknown key gets a "did you mean"; a bare name is a bundled table id and a
path has a folder separator or the ``.toml`` suffix), not anything pqcheck computes.
"""

from __future__ import annotations

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
