"""Validation of user limit tables: every problem is refused with file, line and field named,
and the `pqcheck limits` commands (exit codes via click's CliRunner).

The table below is a small made-up table (not a standard's numbers); each test breaks it in
one place and pins the message.
"""

from __future__ import annotations

import re

import pytest
from click.testing import CliRunner

from pqcheck.cli import main
from pqcheck.errors import LimitTableError
from pqcheck.limits import load_table, read_table, resolve, validate_file

GOOD = """\
schema = 1
id = "test-table"
title = "A made-up table for tests"
standard = "Test standard"
edition = "1"
measure = "group"
max_order = 40

[selectors.isc_il]
closed = "lower"

[evaluation]
checks = [
    { of = "window", statistic = "rms", multiplier = 1.0 },
]

[[limits]]
name = "Table X"
clause = "Table X"
applies_to = "current"
basis = "percent_of_il"
unit = "%"
columns = ["2-10", "11-40", "TDD"]
parity = "odd"
even = [
    { orders = "2-40", factor = 0.25 },
]

[[limits.rows]]
isc_il = [0, 20]
values = [4.0, 2.0, 5.0]

[[limits.rows]]
isc_il = [20, inf]
values = [7.0, 3.5, 8.0]
"""


def write(tmp_path, text, name="table.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def broken(tmp_path, old, new, count=1):
    assert GOOD.count(old) >= 1, old
    return write(tmp_path, GOOD.replace(old, new, count))


def line_of(path, marker, nth=1):
    """1-based line of the nth line containing ``marker``."""
    hits = [i for i, s in enumerate(path.read_text().splitlines(), 1) if marker in s]
    return hits[nth - 1]


def refused(path, line, field, message):
    """Assert the file is refused with exactly this location and a message matching."""
    with pytest.raises(LimitTableError, match=message) as info:
        read_table(path)
    err = info.value
    assert (err.path, err.line, err.field) == (str(path), line, field), err
    assert str(err).startswith(f"{path}:{line}: {field}: ")
    return err


def test_the_good_table_is_valid(tmp_path):
    p = write(tmp_path, GOOD)
    assert validate_file(p) == []
    r = resolve(read_table(p), isc_il=20)
    assert [i.limit for i in r.find("harmonic", 2)] == [0.25 * 7.0]  # even rule x odd range


def test_toml_syntax_error_names_the_line(tmp_path):
    p = broken(tmp_path, 'unit = "%"\n', 'unit = "%\n')
    refused(p, line_of(p, 'unit = "%'), "unit", r"invalid TOML: .*line \d+")


def test_syntax_error_at_end_of_document(tmp_path):
    p = write(tmp_path, GOOD + "values = [1.0,\n")
    with pytest.raises(LimitTableError, match=r"invalid TOML") as info:
        read_table(p)
    assert info.value.line is not None


@pytest.mark.parametrize("old, new, marker, field, message", [
    ('edition = "1"', 'edition = "1"\nrevison = "A"', "revison", "revison",
     r"unknown field 'revison' \(allowed: clause, edition, "),
    ('parity = "odd"', 'parity = "odd"\ncolums = ["2"]', "colums", "limits.colums",
     r"unknown field 'colums'; did you mean 'columns'\?"),
    ('values = [4.0, 2.0, 5.0]', 'values = [4.0, 2.0, 5.0]\nnotes = "x"', "notes =",
     "limits.rows.notes", r"unknown field 'notes'; did you mean 'note'\?"),
    ('factor = 0.25 }', 'factor = 0.25, tags = "M" }', "tags", "limits.even.tags",
     r"unknown field 'tags'; did you mean 'tag'\? \(allowed: factor, limit, note, orders, tag\)"),
    ('closed = "lower"', 'closed = "lower"\ninterpolate = "linear"', "interpolate",
     "selectors.isc_il.interpolate",
     r"unknown field 'interpolate' \(allowed: closed, default, help\)"),
])
def test_unknown_fields(tmp_path, old, new, marker, field, message):
    p = broken(tmp_path, old, new)
    refused(p, line_of(p, marker), field, message)


def test_negative_limit(tmp_path):
    p = broken(tmp_path, "values = [7.0, 3.5, 8.0]", "values = [7.0, -3.5, 8.0]")
    refused(p, line_of(p, "-3.5"), "limits.rows.values",
            r"limit for column '11-40' must be greater than zero, got -3.5")


def test_zero_limit(tmp_path):
    p = broken(tmp_path, "values = [4.0, 2.0, 5.0]", "values = [4.0, 2.0, 0]")
    refused(p, line_of(p, "values = [4.0, 2.0, 0]"), "limits.rows.values",
            r"limit for column 'TDD' must be greater than zero, got 0")


def test_missing_limit_in_a_row(tmp_path):
    p = broken(tmp_path, "values = [7.0, 3.5, 8.0]", "values = [7.0, 3.5]")
    refused(p, line_of(p, "values = [7.0, 3.5]"), "limits.rows.values",
            r"missing limit for column 'TDD' \(2 values for 3 columns\)")


def test_row_without_values(tmp_path):
    p = broken(tmp_path, "isc_il = [20, inf]\nvalues = [7.0, 3.5, 8.0]\n",
               "isc_il = [20, inf]\n")
    refused(p, line_of(p, "[[limits.rows]]", 2), "limits.rows.values",
            r"missing limits: the row has no values for the block's columns")


def test_item_without_limit(tmp_path):
    p = broken(tmp_path, 'parity = "odd"', 'parity = "odd"\nitems = [ { quantity = "TDD" } ]')
    # TDD is both a column and an item here; the missing limit is reported first
    refused(p, line_of(p, "items = ["), "limits.items.limit", r"^.*: missing limit$")


def test_block_without_limits(tmp_path):
    text = GOOD[:GOOD.index("columns =")] + "\n"
    p = write(tmp_path, text)
    refused(p, line_of(p, "[[limits]]"), "limits.items",
            r"missing limits: give columns and values, items, rows or derive")


def test_overlapping_bands(tmp_path):
    p = broken(tmp_path, "isc_il = [20, inf]", "isc_il = [15, inf]")
    refused(p, line_of(p, "isc_il = [15, inf]"), "limits.rows.isc_il",
            r"overlapping isc_il bands in rows of 'Table X': \[0, 20\] and \[15, inf\] both "
            r"cover 15 to 20")


def test_gapped_bands(tmp_path):
    p = broken(tmp_path, "isc_il = [20, inf]", "isc_il = [25, inf]")
    refused(p, line_of(p, "isc_il = [25, inf]"), "limits.rows.isc_il",
            r"gap in isc_il bands of rows of 'Table X': nothing covers 20 to 25 \(the band "
            r"before ends at 20, this one starts at 25\)")


def test_duplicated_row(tmp_path):
    p = broken(tmp_path, "isc_il = [20, inf]", "isc_il = [0, 20]")
    first = line_of(p, "[[limits.rows]]", 1)
    refused(p, line_of(p, "[[limits.rows]]", 2), "limits.rows",
            rf"duplicated row: it repeats the conditions of the row at line {first}")


def test_reversed_band(tmp_path):
    p = broken(tmp_path, "isc_il = [20, inf]", "isc_il = [50, 20]")
    refused(p, line_of(p, "isc_il = [50, 20]"), "limits.rows.isc_il",
            r"band \[50, 20\] must have 0 <= low < high")


def test_basis_does_not_fit_voltage(tmp_path):
    p = broken(tmp_path, 'applies_to = "current"', 'applies_to = "voltage"')
    refused(p, line_of(p, "basis ="), "limits.basis",
            r"basis 'percent_of_il' does not fit applies_to = 'voltage': it describes current "
            r"only \(voltage limits use percent_of_fundamental\)")


def test_basis_does_not_fit_a_total(tmp_path):
    p = broken(tmp_path, '"TDD"]', '"THD"]')
    refused(p, line_of(p, "columns ="), "limits.columns",
            r"basis 'percent_of_il' does not fit THD \(total harmonic distortion, % of the "
            r"fundamental\); THD takes basis 'percent_of_fundamental'")


def test_unit_does_not_match_basis(tmp_path):
    p = broken(tmp_path, 'unit = "%"', 'unit = "A"')
    refused(p, line_of(p, 'unit = "A"'), "limits.unit",
            r"unit 'A' does not match basis 'percent_of_il', whose unit is '%'")


def test_missing_unit(tmp_path):
    p = broken(tmp_path, 'unit = "%"\n', "")
    refused(p, line_of(p, "[[limits]]"), "limits.unit",
            r"missing field 'unit' \(for basis 'percent_of_il' it is '%'\)")


def test_order_given_twice(tmp_path):
    p = broken(tmp_path, '["2-10", "11-40", "TDD"]', '["2-11", "11-40", "TDD"]')
    refused(p, line_of(p, "columns ="), "limits.columns",
            r"order 11 is given twice: by column '2-11' and by column '11-40'; keep one")


def test_order_given_twice_by_items(tmp_path):
    p = broken(tmp_path, 'parity = "odd"',
               'parity = "odd"\nitems = [\n    { orders = "13", limit = 1.0 },\n]')
    refused(p, line_of(p, '{ orders = "13"'), "limits.items",
            r"order 13 is given twice: by column '11-40' and by item 1; keep one")


@pytest.mark.parametrize("spec, message", [
    ("3-x", r"cannot read order specification '3-x'"),
    ("10-2", r"range 10-2 in '10-2' runs backwards; write 2-10"),
    ("1-10", r"order 1 in '1-10': harmonic limits start at order 2"),
    ("2-60", r"order 60 in '2-60' is above max_order = 40"),
])
def test_bad_order_specifications(tmp_path, spec, message):
    p = broken(tmp_path, '["2-10", "11-40", "TDD"]', f'["{spec}", "11-40", "TDD"]')
    refused(p, line_of(p, "columns ="), "limits.columns", message)


def test_formula_with_unknown_name(tmp_path):
    p = broken(tmp_path, "values = [4.0, 2.0, 5.0]", 'values = [4.0, "0.15 * 15 / h", 5.0]')
    refused(p, line_of(p, "0.15 * 15 / h"), "limits.rows.values",
            r"formula '0.15 \* 15 / h' uses 'h'; the only variable is n")


def test_formula_that_goes_negative(tmp_path):
    p = broken(tmp_path, "values = [4.0, 2.0, 5.0]", 'values = [4.0, "2 - n / 10", 5.0]')
    refused(p, line_of(p, "2 - n / 10"), "limits.rows.values",
            r"formula '2 - n / 10' gives -0.1 at n = 21; limits must be finite positive numbers")


def test_even_rule_outside_the_column_ranges(tmp_path):
    p = broken(tmp_path, '["2-10", "11-40", "TDD"]', '["3-10", "11-40", "TDD"]')
    refused(p, line_of(p, 'orders = "2-40"'), "limits.even.orders",
            r"order 2 lies in no column range, so factor has no odd limit to multiply")


def test_undeclared_and_unknown_selectors(tmp_path):
    p = broken(tmp_path, "isc_il = [0, 20]", "isc_il = [0, 20]\nrsce = 33")
    refused(p, line_of(p, "rsce = 33"), "limits.rows.rsce",
            r"selector 'rsce' is used but not declared; add a \[selectors.rsce\] section")
    p = broken(tmp_path, "[selectors.isc_il]", "[selectors.isc]")
    refused(p, line_of(p, "[selectors.isc]"), "selectors.isc",
            r"unknown selector 'isc'; did you mean 'rsce'\?|unknown selector 'isc'")


def test_choice_that_selects_nothing(tmp_path):
    text = GOOD.replace('[selectors.isc_il]', '[selectors.equipment_class]\nchoices = ["A", "B"]'
                        '\n\n[selectors.isc_il]').replace('name = "Table X"',
                                                          'name = "Table X"\nequipment_class = "A"')
    p = write(tmp_path, text)
    refused(p, line_of(p, "choices ="), "selectors.equipment_class.choices",
            r"choice 'B' of selector equipment_class selects no \[\[limits\]\] block")


def test_derive_from_a_missing_block(tmp_path):
    p = write(tmp_path, GOOD + '\n[[limits]]\nname = "Y"\nclause = "Y"\napplies_to = "current"\n'
              'basis = "percent_of_il"\nunit = "%"\nderive = { from = "Table Z", factor = 1.5 }\n')
    refused(p, line_of(p, "derive ="), "limits.derive.from",
            r"derive from 'Table Z': no other \[\[limits\]\] block has that name")


@pytest.mark.parametrize("old, new, marker, field, message", [
    ('statistic = "rms"', 'statistic = "median"', "median", "evaluation.checks.statistic",
     r"statistic 'median' is not one of mean, max, rms or pNN"),
    ('of = "window"', 'of = "smoothed"', "smoothed", "evaluation.checks.of",
     r"of = 'smoothed' needs smoothing_tau_s > 0 in \[evaluation\]"),
    ('multiplier = 1.0', 'multiplier = -2', "multiplier = -2", "evaluation.checks.multiplier",
     r"multiplier: must be greater than zero, got -2$"),
    ("schema = 1", "schema = 2", "schema = 2", "schema",
     r"schema 2 is not supported; this pqcheck reads schema = 1"),
    ('measure = "group"', 'measure = "groups"', "groups", "measure",
     r"must be \"group\", \"subgroup\", \"component\" or \"flicker\", got 'groups'"),
])
def test_header_and_evaluation_errors(tmp_path, old, new, marker, field, message):
    p = broken(tmp_path, old, new)
    refused(p, line_of(p, marker), field, message)


def test_missing_evaluation(tmp_path):
    text = re.sub(r"\[evaluation\]\nchecks = \[\n.*?\n\]\n", "", GOOD, flags=re.S)
    p = write(tmp_path, text)
    with pytest.raises(LimitTableError, match=r"missing \[evaluation\] section") as info:
        read_table(p)
    assert info.value.field == "evaluation"


def test_all_problems_are_listed_in_line_order(tmp_path):
    p = broken(tmp_path, "values = [7.0, 3.5, 8.0]", "values = [7.0, -3.5, 8.0]")
    p.write_text(p.read_text().replace('unit = "%"', 'unit = "A"'), encoding="utf-8")
    errors = validate_file(p)
    assert [e.field for e in errors] == ["limits.unit"]  # a broken block stops there
    p = broken(tmp_path, "values = [7.0, 3.5, 8.0]", "values = [7.0, -3.5, -8.0]")
    errors = validate_file(p)
    assert len(errors) == 2 and errors[0].line == errors[1].line


def test_file_problems(tmp_path):
    with pytest.raises(LimitTableError, match=r"nothing.toml: no such file$"):
        read_table(tmp_path / "nothing.toml")
    p = tmp_path / "latin1.toml"
    p.write_bytes(GOOD.encode() + "# caf\xe9\n".encode("latin-1"))
    with pytest.raises(LimitTableError, match=r"latin1.toml:\d+: not UTF-8 text$"):
        read_table(p)


# --- command line --------------------------------------------------------------------------


def run(*args):
    return CliRunner().invoke(main, list(args))


def test_cli_limits_list():
    res = run("limits", "list")
    assert res.exit_code == 0, res.output
    for tid in ("ieee519-2022", "ieee519-2014", "iec61000-3-2", "iec61000-3-12",
                "ieee1547-2018"):
        assert tid in res.output


def test_cli_limits_show_table():
    res = run("limits", "show", "IEEE519-2014")
    assert res.exit_code == 0, res.output
    # IEEE 519-2014 Table 2 row 20 < 50: 7.0, 3.5, 2.5, 1.0, 0.5, TDD 8.0 rendered from the file
    assert re.search(r"Table 2\s+<= 69000 V\s+20 <= x < 50\s+7\s+3.5\s+2.5\s+1\s+0.5\s+8\n",
                     res.output)
    assert "verify against your copy" in res.output


def test_cli_limits_show_toml_is_a_valid_starting_point(tmp_path):
    res = run("limits", "show", "iec61000-3-2", "--format", "toml")
    assert res.exit_code == 0
    p = write(tmp_path, res.output, "mine.toml")
    assert read_table(p) == load_table("iec61000-3-2")


def test_cli_limits_show_unknown():
    res = run("limits", "show", "ieee-519")
    assert res.exit_code == 2
    # the argument is named, not the --limits option of other commands
    assert "error: TABLE: unknown limit table 'ieee-519'; did you mean" in res.output


def test_cli_limits_cite_the_standard_with_its_edition():
    # IEEE cites a standard as "IEEE Std 519-2022" (designation-year), never "519 2022"
    res = run("limits", "list")
    assert res.exit_code == 0
    assert "IEEE Std 519-2022" in res.output and "519 2022" not in res.output
    res = run("limits", "validate", str(load_table("ieee519-2022").source))
    assert res.exit_code == 0 and "(IEEE Std 519-2022;" in res.output


def test_cli_limits_show_json_is_the_table_file():
    import json

    import tomllib

    t = load_table("ieee519-2022")
    res = run("limits", "show", "ieee519-2022", "--format", "json")
    assert res.exit_code == 0
    doc = json.loads(res.output)
    assert doc["id"] == t.id and doc["sha256"] == t.sha256
    assert doc["table"] == json.loads(json.dumps(tomllib.loads(t.text), default=str))


def test_cli_limits_validate(tmp_path):
    good = write(tmp_path, GOOD, "good.toml")
    res = run("limits", "validate", str(good))
    assert res.exit_code == 0, res.output
    assert "valid limit table 'test-table'" in res.output
    bad = broken(tmp_path, "isc_il = [20, inf]", "isc_il = [25, inf]")
    res = run("limits", "validate", str(bad))
    assert res.exit_code == 2
    line = line_of(bad, "isc_il = [25, inf]")
    assert res.output.startswith(f"{bad}:{line}: limits.rows.isc_il: gap in isc_il bands")
    res = run("limits", "validate", str(tmp_path / "missing.toml"))
    assert res.exit_code == 2 and "no such file" in res.output


def test_cli_limits_validate_names_a_plan_or_a_site_file(tmp_path):
    # pqcheck's other TOML documents get the command that reads them, not 17 field errors
    plan = write(tmp_path, '[site]\nname = "x"\n[[limits]]\ntable = "ieee519-2022"\n'
                           '[[captures]]\nid = "a"\nfile = "a.csv"\n', "plan.toml")
    res = run("limits", "validate", str(plan))
    assert res.exit_code == 2
    assert f"{plan}: this is a test plan, not a limit table; it is read by `pqcheck " \
           f"report {plan} -o report.pdf`" in res.output
    site = write(tmp_path, '[supply]\nnominal_voltage_v = 11000\n[[units]]\nname = "u"\n',
                 "site.toml")
    res = run("limits", "validate", str(site))
    assert res.exit_code == 2
    assert f"this is a site file, not a limit table; it is read by `pqcheck site {site}`" \
        in res.output
