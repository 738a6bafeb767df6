"""Fuzzing of the three user-file parsers: CSV captures, limit tables and test plans.

Property: whatever the bytes, a parser returns a result or raises one of pqcheck's documented
errors (:class:`pqcheck.errors.PqcheckError` subclasses). Any other exception (IndexError,
RecursionError, a pandas or tomllib error leaking through, ...) is a bug: the command line would
print a traceback instead of ``file:line: field: problem``.

Inputs are built near the valid grammar (real headers, numbers, TOML keys of the real schema)
and then damaged, because purely random bytes are refused at the first byte and exercise little.
Bounded for CI: 60 to 80 examples per property, no deadline.
"""

from __future__ import annotations

import json
import math
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_hostile_inputs import PLAN, TABLE

from pqcheck.analysis import analyze
from pqcheck.errors import PqcheckError
from pqcheck.limits import read_table, resolve, validate_file
from pqcheck.readers import open_capture
from pqcheck.run.plan import load_plan

FUZZ = settings(max_examples=70, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


_BASE: list = []


@pytest.fixture(autouse=True, scope="module")
def _fuzz_base(tmp_path_factory):
    """Every example writes in a folder of its own inside pytest's temporary folder."""
    _BASE[:] = [tmp_path_factory.mktemp("fuzz")]
    yield
    _BASE.clear()


def _tmpdir() -> Path:
    return Path(tempfile.mkdtemp(prefix="example-", dir=_BASE[0]))


# ---- CSV captures --------------------------------------------------------------------------

_HEADERS = ["time [s],ia [A],va [V]", "t (ms);I_a/A;U_a/V", "Time\tCH1\tCH2", "ia,ib,ic",
            "x", "time [us],i [mA]", '"t","i [A]"', ""]
_META = ["Sample interval: 100 us", "# exported by a scope", "Sample rate = 10 kHz",
         "fs;abc", "dt: -1 s", "Sample interval: 0 s", "Record Length,Points,1000", "\ufeff"]
_CELLS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.floats(-1e3, 1e3).map(lambda x: f"{x:.4f}".replace(".", ",")),
    st.sampled_from(["", " ", "nan", "inf", "-inf", "abc", '"', "1e999", "-", "1,5", "0x10",
                     "\x00", "1.2.3", "—", "1e", "+", "NaN", "  7  "]),
)


@st.composite
def csv_bytes(draw):
    delim = draw(st.sampled_from([",", ";", "\t", " ", "|"]))
    n_cols = draw(st.integers(1, 4))
    lines = draw(st.lists(st.sampled_from(_META), max_size=3))
    lines.append(draw(st.sampled_from(_HEADERS)).replace(",", delim))
    n_rows = draw(st.integers(0, 60))
    regular = draw(st.booleans())
    step = draw(st.sampled_from([1e-4, 1e-3, 3.3e-3]))
    for k in range(n_rows):
        if regular:
            cells = [f"{k * step:.6g}"] + [f"{math.sin(k * 0.7 + j):.5f}"
                                           for j in range(n_cols - 1)]
            if draw(st.integers(0, 9)) == 0:  # an occasional damaged cell
                cells[draw(st.integers(0, n_cols - 1))] = draw(_CELLS)
        else:
            cells = draw(st.lists(_CELLS, min_size=1, max_size=n_cols + 1))
        lines.append(delim.join(cells))
    eol = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    text = eol.join(lines) + draw(st.sampled_from(["", eol, eol * 3]))
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "latin-1"]))
    data = text.encode(encoding, errors="replace")
    cut = draw(st.one_of(st.none(), st.integers(0, max(len(data), 1))))
    if cut is not None:
        data = data[:cut]
    return data


def _read_and_analyse(path: Path, sample_rate, stream: bool) -> None:
    try:
        cap = open_capture(path, sample_rate_hz=sample_rate,
                           stream_over_bytes=0 if stream else None)
        analyze(cap, nominal_hz=50, max_order=10, block_samples=64)
    except PqcheckError:
        pass


@FUZZ
@given(data=csv_bytes(), sample_rate=st.sampled_from([None, 1000.0, 10_000.0]),
       stream=st.booleans())
def test_csv_reader_raises_only_documented_errors(data, sample_rate, stream):
    path = _tmpdir() / "fuzz.csv"
    path.write_bytes(data)
    _read_and_analyse(path, sample_rate, stream)


@settings(max_examples=40, deadline=None, derandomize=True)
@given(data=st.binary(max_size=2000), name=st.sampled_from(["x.csv", "x.txt", "x.cfg",
                                                              "x.npy", "x.parquet"]))
def test_any_bytes_under_any_capture_name(data, name):
    path = _tmpdir() / name
    path.write_bytes(data)
    _read_and_analyse(path, 1000.0, False)


# ---- TOML mutation (limit tables and plans) --------------------------------------------------

_SCALARS = st.one_of(
    st.integers(-(10**20), 10**20).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(
        lambda x: "nan" if x != x else ("inf" if x == math.inf else
                                        "-inf" if x == -math.inf else repr(x))),
    st.text(max_size=12).map(json.dumps),
    st.sampled_from(["true", "false", "1979-05-27", "07:32:00", "1979-05-27T07:32:00Z",
                     '"0.15 * 15 / n"', '"1 / (n - 5)"', '"n ** n ** n"', '"__import__(1)"',
                     '"2-50"', '"50-2"', '"2-1000000"', '"odd"', '"3, 5, 7 even"', "{}",
                     "[]", '"%"', '"A"', '"percent_of_il"', '"current"', '"window"', '"p95"',
                     '"p101"', "1e400", "-0.0", "0"]),
)
_VALUES = st.recursive(_SCALARS, lambda inner: st.one_of(
    st.lists(inner, max_size=4).map(lambda xs: "[" + ", ".join(xs) + "]"),
    st.dictionaries(st.sampled_from(["orders", "limit", "quantity", "of", "statistic",
                                     "multiplier", "factor", "from"]), inner, max_size=3)
    .map(lambda d: "{ " + ", ".join(f"{k} = {v}" for k, v in d.items()) + " }"),
), max_leaves=6)


@st.composite
def mutated(draw, text: str, keys: list):
    lines = text.splitlines()
    for _ in range(draw(st.integers(1, 4))):
        op = draw(st.sampled_from(["value", "value", "delete", "duplicate", "insert", "swap",
                                   "garbage"]))
        k = draw(st.integers(0, len(lines) - 1)) if lines else 0
        if op == "value" and lines and "=" in lines[k]:
            key = lines[k].split("=", 1)[0]
            lines[k] = f"{key}= {draw(_VALUES)}"
        elif op == "delete" and lines:
            del lines[k]
        elif op == "duplicate" and lines:
            lines.insert(k, lines[k])
        elif op == "insert":
            lines.insert(k, f"{draw(st.sampled_from(keys))} = {draw(_VALUES)}")
        elif op == "swap" and len(lines) > 1:
            j = draw(st.integers(0, len(lines) - 1))
            lines[k], lines[j] = lines[j], lines[k]
        elif op == "garbage":
            lines.insert(k, draw(st.text(max_size=30)))
    return "\n".join(lines) + "\n"


_TABLE = TABLE  # the catalogue's clean user table
_TABLE_KEYS = ["schema", "id", "title", "standard", "edition", "measure", "max_order", "tag",
               "clause", "closed", "checks", "name", "applies_to", "basis", "unit", "columns",
               "values", "parity", "even", "items", "derive", "voltage_level", "isc_il",
               "equipment_class", "smoothing_tau_s", "short_capture", "[[limits]]",
               "[[limits.rows]]", "[selectors.isc_il]", "[evaluation]"]


@FUZZ
@given(text=mutated(_TABLE, _TABLE_KEYS), voltage=st.sampled_from([None, 400.0, 1e6]))
def test_limit_table_loader_raises_only_documented_errors(text, voltage):
    path = _tmpdir() / "table.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    for problem in validate_file(path):
        assert isinstance(problem, PqcheckError)
        assert problem.path == str(path)
    try:
        table = read_table(path)
        resolve(table, voltage_level_v=voltage)
    except PqcheckError:
        pass


@settings(max_examples=60, deadline=None, derandomize=True)
@given(data=st.binary(max_size=600))
def test_limit_table_loader_on_raw_bytes(data):
    path = _tmpdir() / "table.toml"
    path.write_bytes(data)
    try:
        read_table(path)
    except PqcheckError:
        pass


_PLAN = PLAN  # the catalogue's clean plan
_PLAN_KEYS = ["schema", "title", "report_id", "notes", "name", "nominal_voltage_v",
              "nominal_frequency_hz", "isc_a", "il_a", "rsce", "table", "id", "file",
              "load_percent", "load_point", "current", "voltage", "limits", "max_order",
              "wiring", "[site]", "[site.transformer]", "[equipment]", "[[captures]]",
              "[[limits]]", "[analysis]", "[[conditions.instruments]]", "channels"]


@FUZZ
@given(text=mutated(_PLAN, _PLAN_KEYS), check_files=st.booleans())
def test_plan_loader_raises_only_documented_errors(text, check_files):
    d = _tmpdir()
    (d / "run 1 ü.csv").write_text("time [s],ia [A]\n0,1\n0.001,2\n")
    path = d / "plan.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    try:
        plan = load_plan(path, check_files=check_files)
    except PqcheckError:
        return
    for spec in plan.limits:  # what the report does next with a loaded plan
        try:
            plan.limit_selection(spec)
        except PqcheckError:
            pass


def test_fuzz_inputs_start_from_valid_files():
    # the mutation seeds are the catalogue's clean table and plan: both load as they are, so
    # every fuzzed input is a damaged valid file rather than noise
    d = _tmpdir()
    (d / "t.toml").write_text(_TABLE)
    assert validate_file(d / "t.toml") == []
    (d / "run 1 ü.csv").write_text("time [s],ia [A]\n0,1\n0.001,2\n")
    (d / "plan.toml").write_text(_PLAN)
    assert load_plan(d / "plan.toml").captures[0].id == "c1"
    assert np.isfinite(resolve(read_table(d / "t.toml"), voltage_level_v=400.0).items[0].limit)
