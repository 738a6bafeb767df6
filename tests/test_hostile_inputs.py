"""A catalogue of broken and odd inputs, each run through the command line.

Every case writes its input into a temporary folder (nothing here is read from ``samples/``),
runs one pqcheck command with click's test runner and pins what must happen:

``error``
    exit code 2, no traceback, one ``pqcheck: error:`` (or click usage) message on stderr that
    matches the case's pattern; the patterns name the file, line or field the problem is in and
    the words that tell the user what to do.
``finding``
    a result (exit 0, 1 or 3) whose findings include the case's code.
``verdict``
    ``pqcheck check`` / ``report`` ran and its overall verdict is one of the case's verdicts.

A case marked ``no_pass`` must never come out as ``pass``: the data cannot support a verdict
(clipping, a sample rate too low for order 50, no fundamental, the wrong nominal frequency...).
Control cases run the same commands on clean data and must pass, so a ``no_pass`` assertion
could fail if pqcheck ignored the defect.

The clean signal is built from its definition (a 50 Hz sinusoid with 2 % fifth and 1 % seventh
harmonic, 100 A peak; a 325 V peak voltage): against IEEE 519-2022 at 400 V with
ISC/IL = 20000/100 = 200 (Table 2 row 100 < ISC/IL < 1000, limit 12 % of IL for h < 11, TDD 15 %;
standards-facts.md, tag V) the fifth is 100 x 2 % / sqrt(2) / 100 A = 1.41 % of IL, so it passes
with a wide margin.

To write every input to a folder for trying by hand: ``python tests/test_hostile_inputs.py DIR``.
"""

from __future__ import annotations

import gzip
import json
import re
import sys
import traceback
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import filled_plan, write_without_observation

from pqcheck.cli import main

FS = 6400.0  # 128 samples per 50 Hz cycle: order 50 resolved (needs 2.5 x 50 x 50 = 6250 Hz)
F0 = 50.0
DUR = 0.6  # three 10-cycle windows
LIMITS = ["--limits", "ieee519-2022", "--voltage-level", "400", "--isc", "20000", "--il", "100"]


@pytest.fixture(autouse=True, scope="module")
def _table_for_short_captures(tmp_path_factory):
    """IEEE 519 as bundled needs a week of data; these captures last a second or less, so the
    limit arithmetic is tested with the edited copy without an observation period."""
    path = write_without_observation(tmp_path_factory.mktemp("tables"), "ieee519-2022")
    LIMITS[1] = str(path)
    yield
HEADER = "time [s],ia [A],va [V]"


# ---- signals (from their definitions) -----------------------------------------------------


def _t(dur=DUR, fs=FS):
    return np.arange(int(round(dur * fs))) / fs


def current(t, f0=F0, amp=100.0, h5=0.02, h7=0.01):
    """Peak ``amp`` fundamental with ``h5`` and ``h7`` (fractions of it) fifth and seventh."""
    w = 2 * np.pi * f0 * t
    return amp * (np.sin(w) + h5 * np.sin(5 * w) + h7 * np.sin(7 * w))


def voltage(t, f0=F0):
    return 325.0 * np.sin(2 * np.pi * f0 * t)


def rows(t, *cols, fmt="{:.9g}", delim=","):
    return "".join(delim.join(fmt.format(x) for x in r) + "\n" for r in zip(t, *cols))


def clean_text(dur=DUR, f0=F0, fs=FS, **kw):
    t = _t(dur, fs)
    return HEADER + "\n" + rows(t, current(t, f0, **kw), voltage(t, f0))


def lines_of(text):
    return text.splitlines(keepends=True)


# ---- makers: each writes the input into `d` and returns its path ---------------------------


def text_file(name, text, encoding="utf-8"):
    def make(d: Path) -> Path:
        p = d / name
        p.write_bytes(text.encode(encoding) if isinstance(text, str) else text)
        return p
    return make


def lazy_text(name, build, encoding="utf-8"):
    """Like :func:`text_file` but the content is built when the case runs."""
    def make(d: Path) -> Path:
        p = d / name
        content = build()
        p.write_bytes(content if isinstance(content, bytes) else content.encode(encoding))
        return p
    return make


def replace_line(k, new):
    """Clean capture with line ``k`` (1-based, header is line 1) replaced by ``new``, or by
    ``new(fields)`` (the line's fields, time first) joined with commas."""
    def build():
        ls = lines_of(clean_text())
        ls[k - 1] = new if isinstance(new, str) else ",".join(new(ls[k - 1].rstrip().split(",")))
        if not ls[k - 1].endswith("\n"):
            ls[k - 1] += "\n"
        return "".join(ls)
    return build


def signal_file(name, i_fn=None, v_fn=None, dur=DUR, fs=FS, header=HEADER, t_fn=None):
    def build():
        t = _t(dur, fs)
        i = current(t) if i_fn is None else i_fn(t)
        v = voltage(t) if v_fn is None else v_fn(t)
        tt = t if t_fn is None else t_fn(t)
        return header + "\n" + rows(tt, i, v)
    return lazy_text(name, build)


def folder(name):
    def make(d):
        p = d / name
        p.mkdir()
        return p
    return make


def missing(name):
    return lambda d: d / name


def big_streamed_with_bad_cell(d: Path) -> Path:
    """A capture over the 16 MB streaming threshold with a bad cell 40 rows from the end.

    No time column (the sample interval is declared above the header), so one second of
    samples can be repeated verbatim to reach the size quickly.
    """
    t = _t(1.0)
    block = "".join(f"{a:.6g},{b:.6g}\n" for a, b in zip(current(t), voltage(t)))
    reps = (17 << 20) // len(block) + 1
    body = block * reps
    n_rows = len(t) * reps
    head = "Sample interval: 156.25 us\nia [A],va [V]\n"
    cut = len(body)
    for _ in range(40):
        cut = body.rindex("\n", 0, cut - 1)
    line_start = cut + 1
    line_end = body.index("\n", line_start)
    bad = "1.5e,-2\n"
    body = body[:line_start] + bad + body[line_end + 1:]
    p = d / "long capture.csv"
    p.write_text(head + body)
    assert p.stat().st_size > 16 << 20
    # the bad row is data row n_rows - 39, after 2 header lines
    big_streamed_with_bad_cell.line = 2 + n_rows - 39
    return p


def corrupted_cache(d: Path) -> Path:
    """A clean capture whose cached analysis result (written by the same command) has been cut
    short on disk, so the next run meets a damaged entry."""
    p = d / "cached.csv"
    p.write_text(clean_text())
    first = CliRunner().invoke(main, ["check", str(p), *LIMITS, "-q", "--cache-dir",
                                      str(d / "cache")])
    assert first.exit_code == 0, first.output
    damaged = list((d / "cache").rglob("*.npz"))
    assert len(damaged) == 1
    damaged[0].write_bytes(damaged[0].read_bytes()[:100])
    return p


def parquet_with_text(d: Path) -> Path:
    import pandas as pd

    t = _t()
    col = [f"{x:.6g}" for x in current(t)]
    col[100] = "n/a"
    p = d / "text.parquet"
    pd.DataFrame({"time": t, "ia": col}).to_parquet(p)
    return p


def npy_of_objects(d: Path) -> Path:
    p = d / "objects.npy"
    np.save(p, np.array([{"a": 1}, None], dtype=object), allow_pickle=True)
    return p


_CFG = """station,recorder,1999
2,2A,0D
1,ia,a,,A,0.01,0,0,-32767,32767,1,1,P
2,va,a,,V,0.1,0,0,-32767,32767,1,1,P
50
1
6400,{n}
01/01/2024,00:00:00.000000
01/01/2024,00:00:00.000000
ASCII
1
"""


def comtrade(with_dat=True, cut_dat=False):
    def make(d: Path) -> Path:
        t = _t()
        cfg = d / "rec.cfg"
        cfg.write_text(_CFG.format(n=t.size))
        if with_dat:
            ia = np.rint(current(t) / 0.01).astype(int)
            va = np.rint(voltage(t) / 0.1).astype(int)
            recs = "".join(f"{k + 1},{int(round(k * 1e6 / FS))},{a},{b}\n"
                           for k, (a, b) in enumerate(zip(ia, va)))
            if cut_dat:
                recs = recs[: len(recs) // 2] + "17,2656\n"
            (d / "rec.dat").write_text(recs)
        return cfg
    return make


# limit tables --------------------------------------------------------------------------------

TABLE = """schema = 1
id = "hostile-test"
title = "Test table"
standard = "Test"
edition = "1"
measure = "group"
max_order = 50

[selectors.voltage_level]
closed = "upper"

[evaluation]
checks = [ { of = "window", statistic = "rms", multiplier = 1.0 } ]

[[limits]]
name = "A"
clause = "T1"
applies_to = "current"
basis = "percent_of_fundamental"
unit = "%"
columns = ["2-50", "THD"]

[[limits.rows]]
voltage_level = [0, 1000]
values = [5.0, 8.0]

[[limits.rows]]
voltage_level = [1000, inf]
values = [3.0, 5.0]
"""
# line numbers in TABLE: columns 21, first row 23-25 (values 25), second row 27-29


def table(text=None, *, old=None, new=None, name="table.toml", raw=None, also=()):
    """TABLE (or ``text``) with ``old`` replaced by ``new`` and each (old, new) of ``also``."""
    def make(d: Path) -> Path:
        p = d / name
        if raw is not None:
            p.write_bytes(raw)
            return p
        body = TABLE if text is None else text
        for o, n in ([(old, new)] if old is not None else []) + list(also):
            assert body.count(o) == 1, o
            body = body.replace(o, n)
        p.write_text(body)
        return p
    return make


# plans ---------------------------------------------------------------------------------------

PLAN = """schema = 1
title = "Hostile plan"

[site]
nominal_voltage_v = 400
nominal_frequency_hz = 50
isc_a = 20000
il_a = 100

[[limits]]
table = "ieee519-2022"

[[captures]]
id = "c1"
file = "run 1 ü.csv"
load_percent = 50
"""
# line numbers in PLAN: [[limits]] 10, [[captures]] 13, file 15


def plan(old=None, new=None, *, extra=None, capture_text=None, raw=None, files=None):
    def make(d: Path) -> Path:
        (d / "run 1 ü.csv").write_text(clean_text() if capture_text is None else capture_text)
        for name, content in (files or {}).items():
            (d / name).write_text(content)
        p = d / "plan.toml"
        short = write_without_observation(d, "ieee519-2022").as_posix()
        if raw is not None:
            bom = b"\xef\xbb\xbf" if raw.startswith(b"\xef\xbb\xbf") else b""
            data = raw
            if raw[len(bom):] == PLAN.encode():  # the control plan, with a byte-order mark
                data = bom + filled_plan(PLAN).replace(
                    'table = "ieee519-2022"', f'table = "{short}"').encode("utf-8")
            p.write_bytes(data)
            return p
        body = PLAN
        if old is not None:
            assert body.count(old) == 1, old
            body = body.replace(old, new)
        body = body.replace('table = "ieee519-2022"', f'table = "{short}"') + (extra or "")
        # the plan that must pass has the fields a complete plan needs
        p.write_text(filled_plan(body) if old is None and extra is None else body)
        return p
    return make


# ---- the catalogue ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Case:
    """One hostile input.

    ``command``: analyze, check, report, validate (limits validate), table (check with the
    input as the limit table), plan (report from the input plan). ``expect``: ``error:REGEX``,
    ``finding:CODE`` or ``verdict:V1|V2``.
    """

    id: str
    make: object
    command: str
    exits: tuple
    expect: str
    args: tuple = ()
    no_pass: bool = False
    why: str = ""
    marks: tuple = field(default=())


def E(id, make, command, pattern, args=(), why=""):
    return Case(id, make, command, (2,), "error:" + pattern, tuple(args), why=why)


def F(id, make, command, code, exits=(0, 1, 3), args=(), no_pass=False, why=""):
    return Case(id, make, command, tuple(exits), "finding:" + code, tuple(args), no_pass, why)


def V(id, make, command, verdicts, exits, args=(), no_pass=False, why=""):
    return Case(id, make, command, tuple(exits), "verdict:" + verdicts, tuple(args), no_pass,
                why)


N = int(round(DUR * FS))  # data rows; the last data row is line N + 1
CASES = [
    # -- controls: clean data passes through every command used below
    V("control-clean-capture", signal_file("clean.csv"), "check", "pass", (0,)),
    V("control-clean-table", table(), "table", "pass", (0,)),
    V("control-plan", plan(), "plan", "pass", (0,)),
    # -- empty and structural
    E("empty-file", text_file("empty.csv", ""), "analyze", r"empty\.csv: the file is empty"),
    E("whitespace-only", text_file("blank.csv", "  \n\t\n\n"), "analyze",
      r"blank\.csv: the file is empty"),
    E("header-only", text_file("header.csv", HEADER + "\n"), "analyze",
      r"header\.csv:1: the file has a header but no data rows"),
    E("one-column-without-time", lazy_text("onecol.csv", lambda: "ia [A]\n" + "".join(
        f"{x:.6g}\n" for x in current(_t())), ), "analyze",
      r"onecol\.csv: (--sample-rate|sample_rate_hz): no time base found: .*columns are 'ia'; "
      r"give the sample rate \((--sample-rate|sample_rate_hz)\)"),
    E("time-column-only", lazy_text("tonly.csv", lambda: "time [s]\n" + "".join(
        f"{x:.6f}\n" for x in _t())), "analyze", r"tonly\.csv:1: .*no signal columns"),
    E("no-numbers-at-all", text_file("words.csv", "alpha,beta\ngamma,delta\n"), "analyze",
      r"words\.csv:2: no rows of numbers found .*this one reads 'gamma,delta'"),
    E("single-sample", text_file("single.csv", HEADER + "\n0,1,2\n"), "analyze",
      r"single\.csv:2: only one sample"),
    E("two-samples", text_file("two.csv", HEADER + "\n0,1,2\n0.0001,1,2\n"), "analyze",
      r"two\.csv: duration: the capture lasts 0\.0002 s.*Capture a longer record"),
    E("two-cycles-only", signal_file("twocyc.csv", dur=0.04), "check",
      r"twocyc\.csv: duration: the capture lasts 0\.04 s.*0\.2 s"),
    E("just-under-one-window", signal_file("short.csv", dur=0.19), "check",
      r"short\.csv: duration: the capture lasts 0\.19 s"),
    # -- cells
    E("non-numeric-cell", lazy_text("cell.csv", replace_line(101, lambda f: [f[0], "abc", f[2]])),
      "check", r"cell\.csv:101: ia: cell 'abc' is not a number; fix or delete that row"),
    E("blank-cell-in-time", lazy_text("tcell.csv", replace_line(51, ",1,2\n")), "analyze",
      r"tcell\.csv:51: time: time value is missing"),
    F("nan-cells", lazy_text("naninf.csv", lambda: "".join(
        ln if k not in (200, 900) else ln.split(",")[0] + ",nan,1\n"
        for k, ln in enumerate(lines_of(clean_text()), start=1))), "check", "gaps", (0,),
      why="windows with missing samples are left out and the finding says how many"),
    # a number too large for float64 is refused with its place, never turned into a gap
    *[E(f"overflow-cell-{tag}", lazy_text(f"over{tag}.csv", lambda cell=cell: "".join(
        ln if k != 900 else ln.split(",")[0] + f",{cell},1\n"
        for k, ln in enumerate(lines_of(clean_text()), start=1))), "check",
        rf"over{tag}\.csv:900: ia: cell '{cell[:37]}.*' is not a finite number")
      for tag, cell in (("exp", "1e400"), ("digits", "9" * 400), ("word", "Infinity"),
                        ("inf", "inf"))],
    F("empty-cells", lazy_text("holes.csv", replace_line(300, lambda f: [f[0], "", ""])),
      "check", "gaps", (0,)),
    E("nan-in-every-window", lazy_text("nanall.csv", lambda: "".join(
        ln.split(",")[0] + ",nan,1\n" if k > 1 and k % 700 == 0 else ln
        for k, ln in enumerate(lines_of(clean_text()), start=1))), "check",
      r"nanall\.csv: samples: every window contains missing or non-finite samples.*re-export"),
    E("all-nan", lazy_text("allnan.csv", lambda: HEADER + "\n" + "".join(
        f"{x:.6f},nan,nan\n" for x in _t())), "analyze",
      r"allnan\.csv:2: no numeric samples in any column"),
    E("huge-values", signal_file("huge.csv", i_fn=lambda t: 1e300 * np.sin(2 * np.pi * F0 * t)),
      "check", r"huge\.csv: ia: values as large as 1e\+300 .*check the units and probe scaling"),
    F("implausible-values", signal_file("1e15.csv", i_fn=lambda t: 1e15 * current(t)), "analyze",
      "implausible-values", (0,)),
    E("nul-bytes-in-a-cell", lazy_text("nul.csv", replace_line(
        400, lambda f: [f[0], "1\x00\x002", "3"])), "analyze",
      r"nul\.csv:400: ia: cell '1\\x00\\x002' is not a number"),
    E("nul-bytes-near-the-start", lazy_text("nul2.csv", replace_line(
        40, lambda f: [f[0], "1\x00\x002", "3"])), "analyze",
      r"nul2\.csv: the file holds binary data \(NUL bytes\)"),
    E("unclosed-quote", lazy_text("quote.csv", replace_line(70, lambda f: [f[0], '"1.0', "2"])),
      "analyze", r'quote\.csv:70: a quote \(\"\) opens a text field that never closes'),
    E("extra-field", lazy_text("extra.csv", replace_line(80, lambda f: [f[0], "1", "2", "3"])),
      "analyze", r"extra\.csv:80: row has 4 fields but the header has 3"),
    E("mixed-delimiters", lazy_text("mixed.csv", lambda: "".join(
        ln.replace(",", ";") if k > 200 else ln
        for k, ln in enumerate(lines_of(clean_text()), start=1))), "analyze",
      r"mixed\.csv:201: .*separated by commas up to line 200 and by semicolons from line 201"),
    E("very-long-line", lazy_text("longline.csv", lambda: "# " + "x" * 2_000_000 + "\n"
                                  + clean_text()), "analyze",
      r"longline\.csv:1: no rows of numbers found in the first lines"),
    E("very-wide-row", lazy_text("wide.csv", replace_line(90, ",".join(["1"] * 50_000) + "\n")),
      "analyze", r"wide\.csv:90: row has 50000 fields but the header has 3"),
    E("clock-time-column", lazy_text("clock.csv", lambda: "time,ia [A],va [V]\n" + "".join(
        f"2024-01-01 12:00:{a:09.6f},{b:.6g},{c:.6g}\n"
        for a, b, c in zip(_t(), current(_t()), voltage(_t())))), "analyze",
      r"clock\.csv:\d+: no rows of numbers .*this one reads '2024-01-01 12:00:.*dates, clock "
      r"times"),
    E("spaces-between-values", lazy_text("spaced.csv", lambda: clean_text().replace(",", "  ")),
      "analyze", r"spaced\.csv:\d+: no rows of numbers .*spaces between values are not read"),
    E("thousands-separators", lazy_text("thousands.csv", lambda: HEADER.replace(",", ";") + "\n"
                                        + "".join(f"{a:.6f};{1000 * b:,.2f};{c:.6g}\n" for a, b, c
                                                  in zip(_t(), current(_t()), voltage(_t())))),
      "analyze", r"thousands\.csv:\d+: no rows of numbers .*thousands separators"),
    V("every-field-quoted", lazy_text("quoted.csv", lambda: "".join(
        ",".join(f'"{x}"' for x in ln.rstrip("\n").split(",")) + "\n"
        for ln in lines_of(clean_text()))), "check", "pass", (0,),
      why="RFC 4180 allows quotes around any field; some loggers quote every one"),
    V("units-row-under-header", lazy_text("unitsrow.csv", lambda: "time,ia,va\n(s),(A),(V)\n"
                                          + clean_text().split("\n", 1)[1]), "check", "pass",
      (0,)),
    V("negative-start-time", signal_file("pretrigger.csv", t_fn=lambda t: t - 0.1), "check",
      "pass", (0,), why="scopes put the trigger at t = 0 and record before it"),
    # -- truncation
    F("truncated-last-row", lazy_text("cut.csv", lambda: clean_text().rsplit(",", 1)[0] + ","),
      "check", "truncated-row", (0,)),
    E("cut-inside-a-number", lazy_text("cut2.csv", lambda: clean_text()[:-1].rsplit(",", 1)[0]
                                       + ",-"), "analyze",
      rf"cut2\.csv:{N + 1}: va: cell '-' is not a number"),
    # -- encodings and containers
    V("byte-order-mark", lazy_text("bom.csv", lambda: "\ufeff" + clean_text()), "check", "pass",
      (0,)),
    V("utf16-with-bom", lazy_text("u16.csv", clean_text, encoding="utf-16"), "check", "pass",
      (0,)),
    E("utf16-without-bom", lazy_text("u16le.csv", clean_text, encoding="utf-16-le"), "analyze",
      r"u16le\.csv: .*UTF-16 text without a byte-order mark.*save it as UTF-8"),
    V("latin1-metadata", lazy_text("latin1.csv", lambda: "# Gerät: Ladesäule\n" + clean_text(),
                                   encoding="latin-1"), "check", "pass", (0,)),
    V("cr-line-endings", lazy_text("cr.csv", lambda: clean_text().replace("\n", "\r")), "check",
      "pass", (0,)),
    V("gzip-with-csv-name", lazy_text("packed.csv", lambda: gzip.compress(
        clean_text().encode())), "check", "pass", (0,),
      why="a compressed file with a .csv name is read through gzip"),
    E("damaged-gzip", lazy_text("cutgz.csv", lambda: gzip.compress(clean_text().encode())[:900]),
      "analyze", r"cutgz\.csv: the file is gzip-compressed but damaged or cut short"),
    E("zip-with-csv-name", lambda d: _zip(d / "zipped.csv"), "analyze",
      r"zipped\.csv: this is a ZIP archive.*unpack it"),
    E("binary-junk", lazy_text("junk.csv", lambda: bytes(range(256)) * 64), "analyze",
      r"junk\.csv: the file holds binary data"),
    # -- time base
    E("duplicated-timestamp", lazy_text("dup.csv", lambda: "".join(
        (lines_of(clean_text())[k - 2] if k == 301 else ln)
        for k, ln in enumerate(lines_of(clean_text()), start=1))), "analyze",
      r"dup\.csv:301: time: time repeats .*remove duplicates"),
    E("decreasing-timestamp", lazy_text("back.csv", lambda: _swap(clean_text(), 300, 301)),
      "analyze", r"back\.csv:301: time: time goes backwards .*Sort the rows"),
    E("constant-timestamp", lazy_text("const.csv", lambda: HEADER + "\n" + "".join(
        f"0,{a:.6g},{b:.6g}\n" for a, b in zip(current(_t()), voltage(_t())))), "analyze",
      r"const\.csv:3: time: time repeats"),
    F("jittery-timestamps", signal_file(
        "jitter.csv", t_fn=lambda t: t + np.random.default_rng(7).uniform(-4e-6, 4e-6, t.size)),
      "check", "resampled", (0,), why="a non-uniform time base is resampled and says so"),
    F("missing-rows", lazy_text("gap.csv", lambda: "".join(
        ln for k, ln in enumerate(lines_of(clean_text()), start=1) if not 500 <= k < 520)),
      "check", "time-gap", (0,)),
    E("time-jump-of-days", signal_file("jump.csv", t_fn=lambda t: t + (t >= 0.3) * 86400.0),
      "analyze", r"jump\.csv:\d+: time: the time column jumps by 86400 s.*split the capture"),
    E("time-unit-wrong", signal_file("ms.csv", header="time [ms],ia [A],va [V]"), "analyze",
      r"ms\.csv: duration: the capture lasts 0\.0006 s",
      why="seconds labelled as ms: the record is 1000 times too short"),
    # -- signals that cannot support a verdict
    V("constant-zero-current", signal_file("zero.csv", i_fn=lambda t: 0 * t), "check",
      "inconclusive", (3,), no_pass=True, why="THD and ratios to the fundamental are undefined"),
    F("zero-current-finding", signal_file("zero2.csv", i_fn=lambda t: 0 * t), "analyze",
      "no-fundamental", (0,)),
    V("no-fundamental", signal_file("h5only.csv", i_fn=lambda t: 10 * np.sin(
        2 * np.pi * 250 * t)), "check", "inconclusive", (3,), no_pass=True),
    E("dc-only-detected", signal_file("dc.csv", i_fn=lambda t: 0 * t + 5, v_fn=lambda t:
                                      0 * t + 230), "check",
      r"dc\.csv: --nominal-frequency: no fundamental .* give --nominal-frequency 50 or 60"),
    V("dc-only-nominal-given", signal_file("dc2.csv", i_fn=lambda t: 0 * t + 5, v_fn=lambda t:
                                           0 * t + 230), "check", "inconclusive", (3,),
      args=("--nominal-frequency", "50"), no_pass=True),
    V("clipped-current", signal_file("clip.csv", i_fn=lambda t: np.clip(current(t), -90, 90)),
      "check", "inconclusive", (3,), no_pass=True,
      why="flat tops at the recorder's rail: the harmonics are wrong"),
    F("clipped-finding", signal_file("clip2.csv", i_fn=lambda t: np.clip(current(t), -90, 90)),
      "analyze", "clipping", (0,)),
    V("sample-rate-too-low", signal_file("slow.csv", fs=2000.0, dur=0.6), "check",
      "inconclusive", (3,), no_pass=True, why="orders above 16 are not resolved at 2 kHz"),
    V("60-hz-told-50", signal_file("sixty.csv", i_fn=lambda t: current(t, 60.0),
                                   v_fn=lambda t: voltage(t, 60.0)), "check", "inconclusive",
      (3,), args=("--nominal-frequency", "50"), no_pass=True),
    F("60-hz-told-50-finding", signal_file("sixty2.csv", i_fn=lambda t: current(t, 60.0),
                                           v_fn=lambda t: voltage(t, 60.0)), "analyze",
      "wrong-nominal-frequency", (0,), args=("--nominal-frequency", "50")),
    V("50-hz-told-60", signal_file("fifty.csv", dur=0.8), "check", "inconclusive", (3,),
      args=("--nominal-frequency", "60"), no_pass=True),
    F("off-nominal-45-hz", signal_file("f45.csv", i_fn=lambda t: current(t, 45.0),
                                       v_fn=lambda t: voltage(t, 45.0), dur=0.8), "analyze",
      "off-nominal-frequency", (0,)),
    F("large-dc-offset", signal_file("offset.csv", i_fn=lambda t: current(t) + 20.0), "analyze",
      "dc-offset", (0,)),
    # -- paths and options
    E("directory-not-file", folder("adir"), "analyze", r"adir.* is a directory"),
    E("missing-file", missing("nothere.csv"), "check", r"nothere\.csv: file not found"),
    V("path-with-spaces-and-unicode", signal_file("mesure n° 1 – été.csv"), "check", "pass",
      (0,)),
    E("sample-rate-zero", signal_file("sr0.csv"), "analyze",
      r"(--sample-rate|sample_rate_hz): (sample rate )?must be a positive", args=("--sample-rate", "0")),
    E("negative-il", signal_file("il.csv"), "analyze", r"--il: .*positive", args=("--il", "-5")),
    E("unknown-current-column", signal_file("col.csv"), "analyze",
      r"col\.csv: --current: no column named 'ib'; the capture has: ia, va",
      args=("--current", "ib")),
    E("column-in-another-case", signal_file("colcase.csv"), "analyze",
      r"colcase\.csv: --current: no column named 'IA' \(did you mean 'ia'\?\); the capture has",
      args=("--current", "IA")),
    E("column-listed-twice", signal_file("col2.csv"), "analyze",
      r"col2\.csv: --current: column 'ia' is listed twice", args=("--current", "ia,ia")),
    E("unknown-time-column", signal_file("tc.csv"), "analyze",
      r"tc\.csv: (--time-column|time_column): no column named 'clock'",
      args=("--time-column", "clock")),
    # -- other formats
    E("parquet-text-column", parquet_with_text, "analyze",
      r"text\.parquet: ia: column 'ia' .* not numbers"),
    E("npy-of-python-objects", npy_of_objects, "analyze",
      r"objects\.npy: not a readable \.npy array", args=("--sample-rate", "6400")),
    E("comtrade-cfg-without-dat", comtrade(with_dat=False), "analyze",
      r"rec\.cfg: the data file rec\.dat is missing"),
    E("comtrade-dat-cut-short", comtrade(cut_dat=True), "analyze", r"rec\.(cfg|dat)"),
    # -- long captures go through the streaming reader; the bad cell is found near the end
    E("streamed-bad-cell-near-end", big_streamed_with_bad_cell, "check",
      r"long capture\.csv:(?P<line>\d+): ia: cell '1\.5e' is not a number"),
    V("corrupted-cache-entry", corrupted_cache, "check", "pass", (0,),
      args=("--cache-dir", "{dir}/cache")),
    # -- limit tables (pqcheck limits validate, and check with the table)
    E("table-negative-limit", table(old="values = [5.0, 8.0]", new="values = [-5.0, 8.0]"),
      "validate", r"table\.toml:25: limits\.rows\.values: .*must be greater than zero, got -5"),
    E("table-negative-limit-check", table(old="values = [5.0, 8.0]", new="values = [-5.0, 8.0]"),
      "table", r"table\.toml:25: limits\.rows\.values: .*greater than zero, got -5"),
    E("table-zero-limit", table(old="values = [5.0, 8.0]", new="values = [0, 8.0]"), "validate",
      r"table\.toml:25: .*must be greater than zero, got 0"),
    E("table-missing-value", table(old="values = [5.0, 8.0]", new="values = [5.0]"), "validate",
      r"table\.toml:25: limits\.rows\.values: missing limit for column 'THD'"),
    E("table-missing-values", table(old="values = [5.0, 8.0]\n", new=""), "validate",
      r"table\.toml:23: limits\.rows\.values: missing limits"),
    E("table-duplicated-order", table(old='["2-50", "THD"]', new='["2-50", "5"]'), "validate",
      r"table\.toml:21: limits\.columns: order 5 is given twice"),
    E("table-duplicated-total", table(old='["2-50", "THD"]', new='["2-50", "THD", "THD"]', also=[
        ("[5.0, 8.0]", "[5.0, 8.0, 8.0]"), ("[3.0, 5.0]", "[3.0, 5.0, 5.0]")]), "validate",
      r"table\.toml:21: limits\.columns: THD is given twice"),
    E("table-overlapping-bands", table(old="[1000, inf]", new="[900, inf]"), "validate",
      r"table\.toml:28: limits\.rows\.voltage_level: overlapping voltage_level bands"),
    E("table-overlapping-bands-check", table(old="[1000, inf]", new="[900, inf]"), "table",
      r"table\.toml:28: .*overlapping"),
    E("table-gap-between-bands", table(old="[1000, inf]", new="[1100, inf]"), "validate",
      r"table\.toml:28: .*gap in voltage_level bands"),
    E("table-duplicated-row", table(old="[1000, inf]", new="[0, 1000]"), "validate",
      r"table\.toml:27: limits\.rows: duplicated row"),
    E("table-nan-limit", table(old="values = [5.0, 8.0]", new="values = [nan, 8.0]"),
      "validate", r"table\.toml:25: .*must be a finite number, got the number nan"),
    E("table-inf-limit", table(old="values = [5.0, 8.0]", new="values = [inf, 8.0]"),
      "validate", r"table\.toml:25: .*must be a finite number, got the number inf"),
    E("table-code-in-formula", table(
        old="values = [5.0, 8.0]",
        new='values = ["__import__(\'os\').system(\'touch PWNED\')", 8.0]'), "validate",
      r"table\.toml:25: .*may only use numbers, n, \+ - \* / \*\* and parentheses",
      why="formulas are parsed as arithmetic data, never run"),
    E("table-formula-negative", table(old="values = [5.0, 8.0]", new='values = ["10 - n", 8.0]'),
      "validate", r"table\.toml:25: .*gives 0 at n = 10"),
    E("table-absurd-formula", table(old="values = [5.0, 8.0]",
                                    new='values = ["' + "+".join(["1"] * 5000) + '", 8.0]'),
      "validate", r"table\.toml:25: .*characters long"),
    E("table-huge-order-range", table(old='"2-50"', new='"2-100000000"'), "validate",
      r"table\.toml:21: .*above max_order = 50"),
    E("table-max-order-too-high", table(old="max_order = 50", new="max_order = 1000"),
      "validate", r"table\.toml:7: max_order: .*at most 100"),
    E("table-syntax-error", table(old="values = [5.0, 8.0]", new="values = [5.0, 8.0"),
      "validate", r"table\.toml:\d+: .*invalid TOML"),
    E("table-unknown-field", table(old='unit = "%"', new='unit = "%"\ncolour = "red"'),
      "validate", r"table\.toml:21: limits\.colour: unknown field 'colour'"),
    E("table-missing-id", table(old='id = "hostile-test"\n', new=""), "validate",
      r"table\.toml: id: missing field 'id'"),
    E("table-basis-unit-mismatch", table(old='unit = "%"', new='unit = "A"'), "validate",
      r"table\.toml:20: limits\.unit: unit 'A' does not match basis"),
    E("table-empty", table(text=""), "validate", r"table\.toml: schema: missing field 'schema'"),
    E("table-not-utf8", table(raw=TABLE.encode().replace(b"Test table", b"Test \xff")),
      "validate", r"table\.toml:3: not UTF-8 text"),
    V("table-byte-order-mark", table(raw=b"\xef\xbb\xbf" + TABLE.encode()), "table", "pass",
      (0,), why="Windows editors save a byte-order mark"),
    E("table-is-a-directory", folder("tables.toml"), "validate", r"tables\.toml' is a directory"),
    E("table-missing", missing("none.toml"), "validate", r"none\.toml: no such file"),
    E("table-unknown-id", lambda d: Path("ieee999"), "table",
      r"--limits: unknown limit table 'ieee999'; (did you mean [^?]*\? )?bundled tables: "),
    # -- plans
    E("plan-capture-missing", plan('file = "run 1 ü.csv"', 'file = "nope.csv"'), "plan",
      r"plan\.toml:15: captures\[1\]\.file: file 'nope\.csv' not found \(resolved against"),
    E("plan-table-missing", plan('table = "ieee519-2022"', 'table = "mine/limits.toml"'), "plan",
      r"plan\.toml:11: limits\[1\]\.table: limit table 'mine/limits\.toml' not found"),
    E("plan-capture-broken", plan(capture_text="".join(
        replace_line(101, lambda f: [f[0], "abc", f[2]])())), "plan",
      r"plan\.toml:13: captures\[1\]: capture 'c1': .*run 1 ü\.csv:101: ia: cell 'abc'"),
    E("plan-table-broken", plan('table = "ieee519-2022"', 'table = "t.toml"',
                                files={"t.toml": TABLE.replace("[5.0, 8.0]", "[-5.0, 8.0]")}),
      "plan", r"plan\.toml:10: limits\[1\]\.table: .*t\.toml:25: .*greater than zero, got -5"),
    E("plan-syntax-error", plan("isc_a = 20000", "isc_a = "), "plan",
      r"plan\.toml:7: not valid TOML"),
    E("plan-unknown-field", plan('title = "Hostile plan"', 'title = "x"\ncolour = 1'), "plan",
      r"plan\.toml:3: colour: unknown field"),
    E("plan-empty", plan(raw=b""), "plan", r"plan\.toml: the plan lists no capture"),
    E("plan-duplicate-ids", plan(extra='[[captures]]\nid = "c1"\nfile = "run 1 ü.csv"\n'),
      "plan", r"plan\.toml:18: captures\[2\]\.id: capture id 'c1' is used twice"),
    E("plan-bad-frequency", plan("nominal_frequency_hz = 50", "nominal_frequency_hz = 55"),
      "plan", r"plan\.toml:6: site\.nominal_frequency_hz: must be 50 or 60"),
    E("plan-negative-isc", plan("isc_a = 20000", "isc_a = -1"), "plan",
      r"plan\.toml:7: site\.isc_a: must be greater than zero"),
    E("plan-selector-missing", plan("isc_a = 20000\n", ""), "plan",
      r"plan\.toml:\d+: limits\[1\]: .*ISC/IL.*isc"),
    E("plan-capture-is-itself", plan('file = "run 1 ü.csv"', 'file = "plan.toml"'), "plan",
      r"plan\.toml:13: captures\[1\]: capture 'c1': .*plan\.toml:16: no rows of numbers"),
    E("plan-not-utf8", plan(raw=PLAN.encode().replace(b"Hostile", b"\xff")), "plan",
      r"plan\.toml:\d+: not UTF-8 text"),
    V("plan-byte-order-mark", plan(raw=b"\xef\xbb\xbf" + PLAN.encode()), "plan", "pass", (0,)),
    V("plan-clipped-capture", plan(capture_text=HEADER + "\n" + rows(
        _t(), np.clip(current(_t()), -90, 90), voltage(_t()))), "plan", "inconclusive", (3,),
      no_pass=True),
]


def _swap(text, a, b):
    ls = lines_of(text)
    ls[a - 1], ls[b - 1] = ls[b - 1], ls[a - 1]
    return "".join(ls)


def _zip(path: Path) -> Path:
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("inner.csv", clean_text())
    return path


# ---- the runner ------------------------------------------------------------------------------


def _argv(case: Case, inp: Path, d: Path) -> list:
    extra = [a.replace("{dir}", str(d)) for a in case.args]
    if case.command == "analyze":
        return ["analyze", str(inp), "--format", "json", "-q", "--no-cache", *extra]
    if case.command == "check":
        cache = [] if "--cache-dir" in extra else ["--no-cache"]
        return ["check", str(inp), *LIMITS, "--format", "json", "-q", *cache, *extra]
    if case.command == "validate":
        return ["limits", "validate", str(inp)]
    if case.command == "table":
        clean = d / "clean-for-table.csv"
        clean.write_text(clean_text())
        return ["check", str(clean), "--limits", str(inp), "--voltage-level", "400",
                "--format", "json", "-q", "--no-cache"]
    if case.command in ("plan", "report"):
        out = ["-o", str(d / "out" / "report.pdf"), "--json", str(d / "out" / "results.json")]
        lim = LIMITS if case.command == "report" else ()
        return ["report", str(inp), *out, *lim, "-q", "--no-cache", *extra]
    raise AssertionError(case.command)


def _document(case: Case, result, d: Path) -> dict:
    if case.command in ("plan", "report"):
        return json.loads((d / "out" / "results.json").read_text())
    return json.loads(result.stdout)


def _findings(case: Case, doc: dict) -> list:
    if case.command in ("plan", "report"):
        return [f for c in doc["captures"] for f in c["analysis"]["findings"]]
    return doc.get("findings", [])


def run_case(case: Case, d: Path):
    """Make the input in ``d``, run the command; return (result, argv)."""
    (d / "out").mkdir(exist_ok=True)
    inp = case.make(d)
    argv = _argv(case, inp, d)
    return CliRunner().invoke(main, argv), argv


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_hostile_input(case, tmp_path, monkeypatch):
    import pqcheck.readers.stream as stream

    monkeypatch.chdir(tmp_path)  # relative paths in messages; a formula could only touch here
    monkeypatch.setenv("PQCHECK_CACHE_DIR", str(tmp_path / "default-cache"))
    streamed = []
    real = stream.stream_delimited
    monkeypatch.setattr(stream, "stream_delimited",
                        lambda path, **kw: streamed.append(path) or real(path, **kw))
    result, argv = run_case(case, tmp_path)
    exc = result.exception
    if exc is not None and not isinstance(exc, SystemExit):
        pytest.fail(f"{case.id}: exception escaped:\n"
                    + "".join(traceback.format_exception(exc)))
    assert "Traceback" not in result.output
    assert result.exit_code in case.exits, (
        f"{case.id}: exit {result.exit_code}, expected {case.exits}\n{result.output[-2000:]}")
    kind, _, what = case.expect.partition(":")
    if result.exit_code == 2:
        assert kind == "error"
        err = result.stderr.strip()
        assert "pqcheck: error:" in err or err.startswith("Usage:"), err
        m = re.search(what, err, flags=re.DOTALL)
        assert m, f"{case.id}: {err!r} !~ {what!r}"
        if "line" in m.groupdict():  # the long capture: read block by block, exact line named
            assert streamed, "the > 16 MB capture did not go through the streaming reader"
            assert int(m.group("line")) == big_streamed_with_bad_cell.line
        assert result.stdout == "", "nothing on stdout when the input is refused"
        if case.command in ("plan", "report"):
            assert not any((tmp_path / "out").iterdir()), "no report is written on bad input"
        return
    doc = _document(case, result, tmp_path)
    verdict = doc.get("verdict")
    if kind == "finding":
        codes = [f["code"] for f in _findings(case, doc)]
        assert what in codes, f"{case.id}: finding {what!r} not in {codes}"
    elif kind == "verdict":
        assert verdict in what.split("|"), f"{case.id}: verdict {verdict!r}, expected {what}"
    if case.no_pass:
        assert verdict in ("fail", "inconclusive"), f"{case.id}: verdict {verdict!r}"
        checks = (doc["checks"] if "checks" in doc else
                  [k for c in doc["captures"] for a in c["assessments"] for k in a["checks"]])
        assert any(k["verdict"] == "inconclusive" for k in checks)
    assert not (tmp_path / "PWNED").exists()


def test_catalogue_is_large_and_covers_every_command():
    # issue 8: at least 40 broken or odd inputs, through analyze, check, report (plan-driven)
    # and limits validate
    assert len(CASES) >= 40
    assert len({c.id for c in CASES}) == len(CASES)
    assert {"analyze", "check", "validate", "table", "plan"} <= {c.command for c in CASES}
    assert sum(c.no_pass for c in CASES) >= 8


# ---- report output guarantees on bad use ----------------------------------------------------


def _clean_capture(d: Path) -> Path:
    p = d / "clean.csv"
    p.write_text(clean_text())
    return p


def test_report_refuses_to_overwrite_and_leaves_the_file(tmp_path):
    cap = _clean_capture(tmp_path)
    out = tmp_path / "report.pdf"
    out.write_bytes(b"previous report")
    res = CliRunner().invoke(main, ["report", str(cap), *LIMITS, "-o", str(out), "-q",
                                    "--no-cache"])
    assert res.exit_code == 2
    assert re.search(r"-o .*report\.pdf: file exists; give --force", res.stderr)
    assert out.read_bytes() == b"previous report"


@pytest.mark.parametrize("target, pattern", [
    ("missing-folder/report.pdf", r"folder .*missing-folder does not exist; create it first"),
    ("same", r"--json and -o name the same file"),
])
def test_report_bad_output_paths(tmp_path, target, pattern):
    cap = _clean_capture(tmp_path)
    out = tmp_path / ("r.pdf" if target == "same" else target)
    js = out if target == "same" else tmp_path / "r.json"
    res = CliRunner().invoke(main, ["report", str(cap), *LIMITS, "-o", str(out), "--json",
                                    str(js), "-q", "--no-cache"])
    assert res.exit_code == 2, res.output
    assert re.search(pattern, res.stderr), res.stderr
    assert not out.exists() and not js.exists()


def test_report_of_a_broken_capture_writes_nothing(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text(replace_line(101, lambda f: [f[0], "abc", f[2]])())
    res = CliRunner().invoke(main, ["report", str(bad), *LIMITS, "-o", str(tmp_path / "r.pdf"),
                                    "--json", str(tmp_path / "r.json"), "--csv",
                                    str(tmp_path / "csv"), "-q", "--no-cache"])
    assert res.exit_code == 2
    assert re.search(r"bad\.csv:101: ia: cell 'abc'", res.stderr)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv"]


# ---- writing the inputs out for manual trials ------------------------------------------------


def dump(folder_: Path) -> None:
    """Write every case's input into ``folder_/<case id>/``."""
    for case in CASES:
        d = folder_ / case.id
        d.mkdir(parents=True, exist_ok=True)
        try:
            case.make(d)
        except FileExistsError:
            pass


if __name__ == "__main__":  # pragma: no cover - a helper for people, not for pytest
    dump(Path(sys.argv[1]))
