"""Layouts real instruments, loggers and simulators write: one test per layout, each writing
its own fixture file in that layout, and hypothesis round trips over the layouts.

References: every sample value is checked against an independent parse of the text the test
wrote (Python's ``csv`` module and ``float``), never against pqcheck's own parser; sample
rates against the interval the test declared (exact decimal arithmetic in the test).
"""

from __future__ import annotations

import csv
import re

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import fourier_series
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pqcheck import CaptureFormatError, load_capture
from pqcheck.cli import main

FS = 25_000.0  # 40 us steps
N = 2000  # 80 ms


def _wave(scale=325.0, h5=0.03, n=N, fs=FS):
    return fourier_series(fs, 50.0, {1: (scale / np.sqrt(2), 0.0), 5: (scale * h5, 30.0)},
                          n / fs)


def _cells(path, delim=",", encoding="utf-8"):
    """Independent parse: the rows of the file as lists of strings (csv module)."""
    with open(path, newline="", encoding=encoding) as fh:
        return list(csv.reader(fh, delimiter=delim))


def _col(rows, j, start=0):
    return np.array([float(r[j]) for r in rows[start:] if len(r) > j and r[j].strip()])


# --------------------------------------------------------------------------- layout 1

def write_beside(path, t, x, interval="4.000000e-05"):
    """key,value,, in the first columns and time,value in the later columns, from line 1."""
    meta = [("Record Length", str(t.size)), ("Sample Interval", interval),
            ("Trigger Point", "250"), ("Source", "CH1"), ("Vertical Units", "V"),
            ("Vertical Scale", "100"), ("Horizontal Units", "S")]
    lines = []
    for i in range(t.size):
        k, v = meta[i] if i < len(meta) else ("", "")
        lines.append(f"{k},{v},,{t[i]:.9e},{x[i]:.6g},")
    path.write_text("\n".join(lines) + "\n")


def test_metadata_beside_the_data(tmp_path):
    t = -0.01 + np.arange(N) / FS
    x = _wave()
    p = tmp_path / "beside.csv"
    write_beside(p, t, x)
    cap = load_capture(p)
    rows = _cells(p)
    assert cap.names == ("CH1",)
    assert cap.channels[0].quantity == "voltage"
    assert cap.n_samples == N  # the first samples, on the metadata lines, are kept
    np.testing.assert_array_equal(cap.samples[0], _col(rows, 4))
    assert cap.fs_hz == pytest.approx(FS, rel=1e-9)
    assert cap.t0_s == pytest.approx(float(rows[0][3]), abs=1e-15)
    s = cap.provenance.settings
    assert s["layout"] == "metadata-beside-data"
    assert s["metadata"]["Sample Interval"] == "4.000000e-05"


# --------------------------------------------------------------------------- layout 2

def write_names_values(path, xs, start="-1.000000e-02", inc="4.000000e-05"):
    names = list(xs)
    lines = [",".join(["X", *names, "Start", "Increment", ""]),
             ",".join(["Sequence", *["Volt"] * len(names), start, inc])]
    cols = list(xs.values())
    for i in range(cols[0].size):
        lines.append(",".join([str(i), *[f"{c[i]:.6g}" for c in cols], ""]))
    path.write_text("\n".join(lines) + "\n")


def test_names_line_and_values_line_with_start_and_increment(tmp_path):
    p = tmp_path / "nv.csv"
    write_names_values(p, {"CH1": _wave(), "CH2": -_wave(100.0)})
    cap = load_capture(p)
    rows = _cells(p)
    assert cap.names == ("CH1", "CH2")  # the sample index is not a channel
    assert cap.fs_hz == pytest.approx(1 / 4e-5, rel=1e-12)
    assert cap.t0_s == pytest.approx(-0.01, abs=1e-15)
    np.testing.assert_array_equal(cap.samples[0], _col(rows, 1, 2))
    np.testing.assert_array_equal(cap.samples[1], _col(rows, 2, 2))
    assert all(c.unit == "V" for c in cap.channels)
    assert cap.provenance.settings["layout"] == "names-values"


# --------------------------------------------------------------------------- layout 3

def test_trailing_delimiter_adds_no_phantom_channel(tmp_path):
    t = np.arange(N) / FS
    p = tmp_path / "trail.csv"
    p.write_text("time,ia,va,\n" + "".join(f"{a:.9e},{b:.6g},{c:.6g},\n" for a, b, c in
                                          zip(t, _wave(10.0), _wave())))
    cap = load_capture(p)
    assert cap.names == ("ia", "va")
    np.testing.assert_array_equal(cap.samples[1], _col(_cells(p), 2, 1))


def test_value_in_a_phantom_column_is_refused(tmp_path):
    t = np.arange(N) / FS
    lines = [f"{a:.9e},{b:.6g},{c:.6g}," for a, b, c in zip(t, _wave(10.0), _wave())]
    lines[1500] += "7.5"  # past the lines the layout is detected from
    p = tmp_path / "phantom.csv"
    p.write_text("time,ia,va,\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureFormatError,
                       match=r"phantom\.csv:1502: a value \('7\.5'\) in a column that is empty "
                             r"in the first rows .* give that column a name"):
        load_capture(p)


# --------------------------------------------------------------------------- layout 4

@pytest.mark.parametrize("name", ["time_s", "Time_s", "Second", "second", "X", "x-axis",
                                  "t", "Time [s]", "t (ms)"])
def test_time_column_names(tmp_path, name):
    scale = 1e3 if "ms" in name else 1.0
    t = np.arange(N) / FS * scale
    p = tmp_path / "tn.csv"
    p.write_text(f"{name},ia\n" + "".join(f"{a:.9g},{b:.6g}\n" for a, b in zip(t, _wave(5.0))))
    cap = load_capture(p)
    assert cap.names == ("ia",)  # never a signal
    assert cap.fs_hz == pytest.approx(FS, rel=1e-6)


def test_uniform_unnamed_first_column_is_never_a_signal(tmp_path):
    t = np.arange(N) / FS
    p = tmp_path / "clock.csv"
    p.write_text("clock,ia\n" + "".join(f"{a:.9g},{b:.6g}\n" for a, b in zip(t, _wave(5.0))))
    with pytest.raises(CaptureFormatError,
                       match=r"clock\.csv: time_column: column 'clock' increases in uniform "
                             r"steps like a time column.*name it as the time column "
                             r"\(time_column\), or give the sample rate \(sample_rate_hz\)"):
        load_capture(p)
    cap = load_capture(p, time_column="clock")
    assert cap.names == ("ia",) and cap.fs_hz == pytest.approx(FS, rel=1e-6)


def test_sample_index_column_is_dropped(tmp_path):
    p = tmp_path / "idx.csv"
    p.write_text("Sample interval: 40 us\nn,ia\n" + "".join(
        f"{i},{b:.6g}\n" for i, b in enumerate(_wave(5.0))))
    cap = load_capture(p)
    assert cap.names == ("ia",)
    assert cap.fs_hz == pytest.approx(FS, rel=1e-12)


# --------------------------------------------------------------------------- layout 5

def test_units_row_under_the_header(tmp_path):
    t = np.arange(N) / FS
    p = tmp_path / "units.csv"
    p.write_text("x-axis,1,2\nsecond,Volt,Volt\n" + "".join(
        f"{a:.9e},{b:.6g},{c:.6g}\n" for a, b, c in zip(t, _wave(), -_wave())))
    cap = load_capture(p)
    assert cap.names == ("1", "2")
    assert [c.unit for c in cap.channels] == ["V", "V"]
    assert [c.phase for c in cap.channels] == ["", ""]  # a bare number is not a phase
    assert cap.fs_hz == pytest.approx(FS, rel=1e-6)
    np.testing.assert_array_equal(cap.samples[0], _col(_cells(p), 1, 2))
    assert cap.provenance.settings["header_line"] == 1


# --------------------------------------------------------------------------- layout 6

def test_channel_prefixed_metadata_values(tmp_path):
    p = tmp_path / "prefix.csv"
    x = _wave(5.0)
    p.write_text(f"Sample Interval,CH1:4.0E-05\nRecord Length,Analog:{N}\nia,ib\n" + "".join(
        f"{b:.6g},{-b:.6g}\n" for b in x))
    cap = load_capture(p)
    assert cap.fs_hz == pytest.approx(FS, rel=1e-12)
    assert cap.names == ("ia", "ib") and cap.n_samples == N


# --------------------------------------------------------------------------- layout 7

DT_COARSE = 32.506e-6  # printed to 0.01 ms: steps read 30 or 40 us


def _coarse(path, declared=True):
    n = 3000
    t = np.arange(n) * DT_COARSE
    x = fourier_series(1 / DT_COARSE, 50.0, {1: (100.0, 0.0), 7: (5.0, 0.0)}, n * DT_COARSE)
    head = "Microseconds_Per_Sample,32.506\n" if declared else ""
    path.write_text(head + "Time (ms),ia\n" + "".join(
        f"{a * 1e3:.2f},{b:.6g}\n" for a, b in zip(t, x)))
    return n


def test_coarsely_printed_uniform_time_uses_the_declared_interval(tmp_path):
    p = tmp_path / "coarse.csv"
    n = _coarse(p)
    cap = load_capture(p)
    assert cap.fs_hz == pytest.approx(1 / DT_COARSE, rel=1e-12)  # the declared interval
    assert cap.n_samples == n  # not resampled: the samples are the file's
    np.testing.assert_array_equal(cap.samples[0], _col(_cells(p), 1, 2))
    codes = [f.code for f in cap.findings]
    assert "time-rounded" in codes and "resampled" not in codes
    msg = next(f.message for f in cap.findings if f.code == "time-rounded")
    assert "Microseconds_Per_Sample" in msg and "not resampled" in msg


def test_coarsely_printed_uniform_time_without_declared_interval(tmp_path):
    p = tmp_path / "coarse2.csv"
    n = _coarse(p, declared=False)
    cap = load_capture(p)
    # end-to-end rate: both end times are rounded by at most 5 us over (n-1) steps
    assert cap.fs_hz == pytest.approx(1 / DT_COARSE, rel=1e-5 / ((n - 1) * DT_COARSE))
    assert cap.n_samples == n
    assert [f.code for f in cap.findings] == ["time-rounded"]
    # with the rate given there is no misleading mismatch warning
    cap = load_capture(p, sample_rate_hz=1 / DT_COARSE)
    assert not [f for f in cap.findings if f.code == "sample-rate-mismatch"]


def test_truly_variable_step_is_resampled_and_says_so(tmp_path):
    rng = np.random.default_rng(3)
    dt = rng.uniform(5e-6, 40e-6, 4000)
    t = np.concatenate(([0.0], np.cumsum(dt)))
    p = tmp_path / "var.csv"
    p.write_text("time,ia\n" + "".join(f"{a:.12g},{np.sin(2 * np.pi * 50 * a):.9g}\n"
                                       for a in t))
    cap = load_capture(p)
    f = [f for f in cap.findings if f.code == "resampled"]
    assert f and "variable-step record" in f[0].message
    assert "time-rounded" not in [f.code for f in cap.findings]


# --------------------------------------------------------------------------- encodings

@pytest.mark.parametrize("encoding", ["utf-16-le-bom", "utf-16-be-bom", "utf-8-sig", "latin-1",
                                      "cr-only"])
def test_text_encodings_and_line_ends(tmp_path, encoding):
    t = np.arange(N) / FS * 1e6
    x = _wave(5.0)
    text = "Device: Prüfplatz 3 Ω\nTime [µs],ia [A],T [°C]\n" + "".join(
        f"{a:.6f},{b:.6g},21.5\n" for a, b in zip(t, x))
    if encoding == "utf-16-le-bom":
        data = b"\xff\xfe" + text.encode("utf-16-le")
    elif encoding == "utf-16-be-bom":
        data = b"\xfe\xff" + text.encode("utf-16-be")
    elif encoding == "cr-only":
        data = text.replace("\n", "\r").encode("utf-8")
    elif encoding == "latin-1":
        data = text.replace("Ω", "Ohm").encode("latin-1")
    else:
        data = text.encode("utf-8-sig")
    p = tmp_path / "enc.csv"
    p.write_bytes(data)
    cap = load_capture(p)
    assert cap.names == ("ia", "T [°C]")
    assert cap.fs_hz == pytest.approx(FS, rel=1e-9)
    ref = np.array([float(line.split(",")[1]) for line in text.splitlines()[2:]])
    np.testing.assert_array_equal(cap.samples[0], ref)


def test_explicit_encoding(tmp_path):
    p = tmp_path / "cyr.csv"
    x = _wave(5.0)
    text = "Прибор: осциллограф\nt,ia\n" + "".join(
        f"{i / FS:.9g},{b:.6g}\n" for i, b in enumerate(x))
    p.write_bytes(text.encode("cp1251"))
    cap = load_capture(p, encoding="cp1251")
    assert cap.provenance.settings["metadata"] == {"Прибор": "осциллограф"}
    with pytest.raises(CaptureFormatError, match=r"cyr\.csv: encoding: unknown text encoding "
                                                 r"'no-such'"):
        load_capture(p, encoding="no-such")


# --------------------------------------------------------------------------- duplicates

def test_duplicate_column_names_are_refused(tmp_path):
    p = tmp_path / "dup.csv"
    p.write_text("time,ia,ia\n" + "".join(f"{i / FS:.9g},{b:.6g},{b:.6g}\n"
                                          for i, b in enumerate(_wave(5.0))))
    with pytest.raises(CaptureFormatError,
                       match=r"dup\.csv:1: ia: column name 'ia' appears twice \(columns 2 and "
                             r"3\); pqcheck does not guess which is which"):
        load_capture(p)


# --------------------------------------------------------------------------- overflow

@pytest.mark.parametrize("cell", ["1e400", "9" * 400, "Infinity", "-inf"])
def test_number_too_large_for_float64_is_refused_with_its_place(tmp_path, cell):
    lines = [f"{i / FS:.9g},{b:.6g}" for i, b in enumerate(_wave(5.0))]
    lines[1200] = f"{1200 / FS:.9g},{cell}"
    p = tmp_path / "big.csv"
    p.write_text("time,ia\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureFormatError,
                       match=rf"big\.csv:1202: ia: cell '{cell[:37]}.*' is not a finite number"):
        load_capture(p)


# --------------------------------------------------------------------------- round trips

LAYOUT_WRITERS = ("header", "beside", "names-values", "units-row", "trailing", "savetxt")


@st.composite
def layout_cases(draw):
    return {
        "layout": draw(st.sampled_from(LAYOUT_WRITERS)),
        "n": draw(st.integers(50, 400)),
        "amp": draw(st.floats(1e-3, 1e4)),
        "crlf": draw(st.booleans()),
        "bom": draw(st.sampled_from(["", "utf-8-sig", "utf-16"])),
        "seed": draw(st.integers(0, 2**16)),
    }


def _write_layout(path, case):
    """Write random samples in one layout; return (names, columns as printed text)."""
    rng = np.random.default_rng(case["seed"])
    n = case["n"]
    a = rng.normal(0, case["amp"], n)
    b = rng.normal(0, case["amp"], n)
    t = np.arange(n) * 4e-5
    va = [f"{v:.7g}" for v in a]
    vb = [f"{v:.7g}" for v in b]
    lay = case["layout"]
    if lay == "header":
        lines = ["Sample interval: 40 us", "va,vb"] + [f"{x},{y}" for x, y in zip(va, vb)]
        names = ("va", "vb")
    elif lay == "beside":
        meta = [("Record Length", str(n)), ("Sample Interval", "4.0e-05"), ("Source", "CH1"),
                ("Vertical Units", "V")]
        lines = [f"{meta[i][0] if i < 4 else ''},{meta[i][1] if i < 4 else ''},,"
                 f"{t[i]:.9e},{va[i]}," for i in range(n)]
        names, vb = ("CH1",), None
    elif lay == "names-values":
        lines = ["X,CH1,CH2,Start,Increment,", "Sequence,Volt,Volt,0,4.0e-05"]
        lines += [f"{i},{x},{y}," for i, (x, y) in enumerate(zip(va, vb))]
        names = ("CH1", "CH2")
    elif lay == "units-row":
        lines = ["x-axis,U1,U2", "second,Volt,Volt"]
        lines += [f"{ti:.9e},{x},{y}" for ti, x, y in zip(t, va, vb)]
        names = ("U1", "U2")
    elif lay == "savetxt":
        # numpy.savetxt(fh, np.column_stack([t, a, b]), delimiter=",", header=...): its
        # default comments="# " marks every header line, and it writes "%.18e"
        import io

        buf = io.StringIO()
        np.savetxt(buf, np.column_stack([t, a, b]), delimiter=",",
                   header="exported by a bench script\ntime_s,va,vb")
        lines = buf.getvalue().splitlines()
        va = [ln.split(",")[1] for ln in lines[2:]]
        vb = [ln.split(",")[2] for ln in lines[2:]]
        names = ("va", "vb")
    else:
        lines = ["time_s,va,vb,"] + [f"{ti:.9e},{x},{y}," for ti, x, y in zip(t, va, vb)]
        names = ("va", "vb")
    text = ("\r\n" if case["crlf"] else "\n").join(lines) + "\n"
    path.write_bytes(text.encode(case["bom"]) if case["bom"] else text.encode("ascii"))
    cols = [va] if vb is None else [va, vb]
    return names, cols


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=layout_cases())
def test_round_trip_over_layouts(tmp_path, case):
    p = tmp_path / "rt.csv"
    names, cols = _write_layout(p, case)
    cap = load_capture(p)
    assert cap.names == names
    assert cap.fs_hz == pytest.approx(25_000.0, rel=1e-6)
    for k, col in enumerate(cols):
        np.testing.assert_array_equal(cap.samples[k], np.array([float(v) for v in col]))


# --------------------------------------------------------------------------- inspect

def test_inspect_guides_when_the_time_base_is_not_found(tmp_path):
    p = tmp_path / "notime.csv"
    p.write_text("Operator: A. N. Other\nchannel 1,channel 2\n" + "".join(
        f"{b:.6g},{-b:.6g}\n" for b in _wave(5.0)))
    res = CliRunner().invoke(main, ["inspect", str(p)])
    assert res.exit_code == 2
    out = res.stdout
    assert "channel 1" in out and "channel 2" in out
    assert "Lines read as metadata: 1" in out and "Operator: A. N. Other" in out
    assert "Time base not found. Tried:" in out
    assert "--sample-rate HZ" in out and "--time-column 'channel 1'" in out
    assert "no time base found" in res.stderr


def test_inspect_shows_layout_time_base_and_evidence(tmp_path):
    p = tmp_path / "nv.csv"
    write_names_values(p, {"Voltage L1": _wave(), "Current L2": _wave(10.0)})
    res = CliRunner().invoke(main, ["inspect", str(p)])
    assert res.exit_code == 0, res.output
    out = res.stdout
    assert "Layout      names-values" in out
    assert "column 1 (X) not read: sample index" in out
    assert "Time base   declared in metadata (declared by 'Increment')" in out
    assert "Voltage L1: unit V; name 'Voltage L1' ends in phase 'l1'" in out
    assert re.search(r"Fundamental about (49\.9|50\.0)\d* Hz on 'Voltage L1'", out)


def test_inspect_says_none_found_without_a_mains_fundamental(tmp_path):
    t = np.arange(N) / FS
    p = tmp_path / "khz.csv"
    p.write_text("t,va\n" + "".join(f"{a:.9g},{np.sin(2 * np.pi * 1000 * a):.6g}\n"
                                    for a in t))
    res = CliRunner().invoke(main, ["inspect", str(p)])
    assert res.exit_code == 0, res.output
    assert "Fundamental none found between 40 and 70 Hz on 'va'; its strongest component is " \
           "at about 1000 Hz" in res.stdout


# --------------------------------------------------------------------------- long-file path

@pytest.mark.parametrize("layout", LAYOUT_WRITERS)
def test_streaming_reader_reads_every_layout_as_the_whole_file_reader(tmp_path, layout):
    from pqcheck.capture import CaptureStream
    from pqcheck.readers import open_capture

    p = tmp_path / "s.csv"
    names, cols = _write_layout(p, {"layout": layout, "n": 3000, "amp": 100.0, "crlf": False,
                                    "bom": "", "seed": 11})
    stream = open_capture(p, stream_over_bytes=0)  # block by block, as a long file
    assert isinstance(stream, CaptureStream)
    cap = stream.load()
    assert cap.names == names
    assert cap.fs_hz == pytest.approx(25_000.0, rel=1e-6)
    for k, col in enumerate(cols):
        np.testing.assert_array_equal(cap.samples[k], np.array([float(v) for v in col]))
    whole = load_capture(p)
    assert whole.t0_s == pytest.approx(cap.t0_s, abs=1e-15)


def test_streaming_reader_refuses_an_overflowing_cell_with_its_line(tmp_path):
    from pqcheck.readers import open_capture

    lines = [f"{i / FS:.9g},{b:.6g}" for i, b in enumerate(_wave(5.0))]
    lines[1700] = f"{1700 / FS:.9g},1e999"
    p = tmp_path / "sbig.csv"
    p.write_text("time,ia\n" + "\n".join(lines) + "\n")
    with pytest.raises(CaptureFormatError,
                       match=r"sbig\.csv:1702: ia: cell '1e999' is not a finite number"):
        open_capture(p, stream_over_bytes=0).load()


def test_streaming_reader_refuses_an_overflowing_cell_after_the_first_chunk(tmp_path):
    from pqcheck.readers.stream import stream_delimited

    lines = [f"{i / FS:.9g},{b:.6g}" for i, b in enumerate(_wave(5.0))]
    lines[1700] = f"{1700 / FS:.9g},-Infinity"
    p = tmp_path / "late.csv"
    p.write_text("time,ia\n" + "\n".join(lines) + "\n")
    stream = stream_delimited(p, block_rows=1024)  # the first chunk ends before the cell
    with pytest.raises(CaptureFormatError,
                       match=r"late\.csv:1702: ia: cell '-Infinity' is not a finite number"):
        stream.load()


def test_text_in_the_first_column_of_every_row_is_not_metadata(tmp_path):
    # clock times in column 1 of every row: not the metadata-beside-data layout
    p = tmp_path / "clock.csv"
    p.write_text("".join(f"10:00:{i:02d},{i * 0.5:.3f},{np.sin(i):.6f}\n" for i in range(60)))
    with pytest.raises(CaptureFormatError, match=r"clock\.csv:60: no rows of numbers found in "
                                                 r"the first lines \(this one reads '10:00:59"):
        load_capture(p)


def test_header_of_unit_symbols_stays_a_header(tmp_path):
    p = tmp_path / "sym.csv"
    p.write_text("Sample interval: 40 us\nV,A\n" + "".join(
        f"{b:.6g},{b / 30:.6g}\n" for b in _wave()))
    cap = load_capture(p)
    assert cap.names == ("V", "A")


def test_unnamed_time_column_matching_the_declared_rate_is_not_a_signal(tmp_path):
    p = tmp_path / "zeit.csv"
    p.write_text("Sample interval: 40 us\nZeitstempel,ia\n" + "".join(
        f"{i / FS:.9g},{b:.6g}\n" for i, b in enumerate(_wave(5.0))))
    cap = load_capture(p)
    assert cap.names == ("ia",)
    assert "Zeitstempel" in cap.provenance.settings["dropped_columns"]


@pytest.mark.parametrize(("line", "rate"), [
    ("Sampling,40us", FS), ("Sampling: 25 kS/s", FS), ("Sample Rate,25000", FS),
    ("Sample Interval,CH1:4.0E-05", FS), ("Microseconds_Per_Sample,40", FS),
    ("Increment,4e-05", FS), ("Sampling Frequency: 25 kHz", FS),
])
def test_declared_sample_interval_or_rate(tmp_path, line, rate):
    p = tmp_path / "decl.csv"
    p.write_text(f"{line}\nia,va\n" + "".join(f"{b / 30:.6g},{b:.6g}\n" for b in _wave()))
    assert load_capture(p).fs_hz == pytest.approx(rate, rel=1e-12)


def test_units_row_in_parentheses_and_a_blank_line_before_the_data(tmp_path):
    t = np.arange(N) / FS
    p = tmp_path / "paren.csv"
    p.write_text("Time,Channel A,Channel B\n(ms),(V),(V)\n\n" + "".join(
        f"{a * 1e3:.8f},{b:.5f},{c:.5f}\n" for a, b, c in zip(t, _wave(), _wave(1.0))))
    cap = load_capture(p)
    assert cap.names == ("Channel A", "Channel B")
    assert [c.phase for c in cap.channels] == ["", ""]  # scope channel letters, not phases
    assert [c.unit for c in cap.channels] == ["V", "V"]
    assert cap.fs_hz == pytest.approx(FS, rel=1e-6)
    np.testing.assert_array_equal(cap.samples[0], _col(_cells(p), 1, 3))


def test_two_field_metadata_line_above_a_gap_stays_metadata(tmp_path):
    p = tmp_path / "gap.csv"
    p.write_text("Sample interval,40 us\n\n" + "".join(f"{b:.6g},{b / 30:.6g}\n"
                                                       for b in _wave()))
    cap = load_capture(p)
    assert cap.names == ("col1", "col2") and cap.fs_hz == pytest.approx(FS, rel=1e-12)


def test_declared_interval_that_does_not_fit_the_rounded_times(tmp_path):
    p = tmp_path / "misfit.csv"
    _coarse(p)
    text = p.read_text().replace("Microseconds_Per_Sample,32.506", "Microseconds_Per_Sample,31")
    p.write_text(text)
    cap = load_capture(p)
    f = {f.code: f.message for f in cap.findings}
    assert "declared-interval-mismatch" in f and "time-rounded" in f
    assert "the declared interval 'Microseconds_Per_Sample' (3.1e-05 s) does not fit the time " \
           "column" in f["declared-interval-mismatch"]
    # the column decides (its end-to-end step), not the declared 31 us
    assert cap.fs_hz == pytest.approx(1 / DT_COARSE, rel=1e-4)


def test_utf16_without_a_byte_order_mark_needs_its_encoding(tmp_path):
    text = "t,ia\n" + "".join(f"{i / FS:.9g},{b:.6g}\n" for i, b in enumerate(_wave(5.0)))
    p = tmp_path / "nobom.csv"
    p.write_bytes(text.encode("utf-16-le"))
    with pytest.raises(CaptureFormatError,
                       match=r"nobom\.csv: the file looks like UTF-16 text without a byte-order "
                             r"mark.*or give its encoding \(`encoding`, e\.g\. utf-16-le\)"):
        load_capture(p)
    cap = load_capture(p, encoding="utf-16-le")
    ref = np.array([float(line.split(",")[1]) for line in text.splitlines()[1:]])
    np.testing.assert_array_equal(cap.samples[0], ref)


# --------------------------------------------------------------------------- comment marks

def test_numpy_savetxt_header_is_read_as_names(tmp_path):
    # numpy.savetxt's documented default: comments="# " is put before the header (numpy
    # docs, numpy.savetxt). The names are time_s, ia, va; the '#' is not part of a name
    t = np.arange(2000) / FS
    data = np.column_stack([t, _wave(10.0), _wave(325.0)])
    p = tmp_path / "np.csv"
    np.savetxt(p, data, delimiter=",", header="time_s,ia,va")
    assert p.read_text().startswith("# time_s,ia,va\n")
    from pqcheck.readers import open_capture

    # the whole file, and block by block as a long file
    for cap in (load_capture(p), open_capture(p, stream_over_bytes=0).load()):
        assert cap.names == ("ia", "va")
        assert cap.fs_hz == pytest.approx(FS, rel=1e-9)
        rows = _cells(p)
        np.testing.assert_array_equal(cap.samples[0], _col(rows, 1, start=1))
        assert any("comment mark" in n for n in cap.provenance.settings["layout_notes"])


def test_hash_alone_names_a_sample_number_column(tmp_path):
    # '#' with no name after it is a column of its own (a sample number), not a comment mark
    p = tmp_path / "n.csv"
    p.write_text("#,time_s,ia\n" + "".join(f"{i},{i / FS:.9g},{v:.6g}\n"
                                           for i, v in enumerate(_wave(10.0))))
    cap = load_capture(p)
    assert "ia" in cap.names and "time_s" not in cap.names
    assert cap.fs_hz == pytest.approx(FS, rel=1e-6)


def test_numpy_savetxt_default_space_delimiter_is_refused_with_the_fix(tmp_path):
    # numpy.savetxt's documented defaults: delimiter=" " and comments="# " (numpy docs).
    # Spaces between values are not read (a thousands separator would split a number in
    # two), so nothing is analysed; the message says how to write the file instead
    t = np.arange(2000) / FS
    p = tmp_path / "spaced.txt"
    np.savetxt(p, np.column_stack([t, _wave(10.0)]), header="time_s ia")
    with pytest.raises(CaptureFormatError,
                       match=r"spaced\.txt:.*numbers separated by spaces \(numpy\.savetxt's "
                             r"default delimiter\): write the file with delimiter=','"):
        load_capture(p)
    q = tmp_path / "words.txt"
    q.write_text("a log\nstarted at noon\nnothing else\n")
    with pytest.raises(CaptureFormatError) as info:
        load_capture(q)
    assert "numpy.savetxt" not in str(info.value)
