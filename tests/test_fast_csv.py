"""The compiled numeric-CSV parser (pqcheck/readers/_numcsv.py) and its use by the streaming
reader.

References: Python's ``float()`` (correctly rounded per IEEE 754, as the Clinger fast path
must be: bit-identical), ``pandas.read_csv`` with pqcheck's own options (the parser the
compiled one stands in for; within one ulp, because pandas' default converter is not always
correctly rounded), and pqcheck's pandas streaming path (the same analysis, the same errors).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pqcheck.analysis import analyze
from pqcheck.capture import CaptureStream
from pqcheck.errors import CaptureFormatError
from pqcheck.export import analysis_to_dict
from pqcheck.readers import _numcsv, open_capture, stream
from pqcheck.readers import delimited as _d

pytestmark = pytest.mark.skipif(not _numcsv.available(), reason="compiled parser unavailable")


def _parse(text: bytes, sep=",", dec=".", ncols=None, compiled=True):
    buf = np.frombuffer(text, dtype=np.uint8)
    if ncols is None:
        first = text.split(b"\n", 1)[0]
        ncols = first.count(sep.encode()) + 1
    return _numcsv.parse_chunk(buf, len(text), sep, dec, np.arange(ncols), compiled=compiled)


# -- numbers against Python's float() ------------------------------------------------------

_digits = st.text("0123456789", min_size=0, max_size=10)


@st.composite
def _decimal(draw):
    sign = draw(st.sampled_from(["", "-", "+"]))
    zeros = "0" * draw(st.integers(0, 3))  # leading zeros do not count as significant
    whole = draw(_digits)
    frac = draw(st.one_of(st.none(), _digits))
    if not (whole or frac):
        whole = "0"
    s = sign + zeros + whole + ("" if frac is None else "." + frac)
    if draw(st.booleans()):
        s += draw(st.sampled_from("eE")) + draw(st.sampled_from(["", "+", "-"])) + str(
            draw(st.integers(0, 25)))
    return s


def _significant(s: str) -> tuple:
    """(significant digits, power of ten of the last one, integer mantissa) of a decimal."""
    body = s.lstrip("+-")
    mant, _, exp = body.replace("E", "e").partition("e")
    whole, _, frac = mant.partition(".")
    digits = (whole + frac).lstrip("0")
    e10 = (int(exp) if exp else 0) - len(frac)
    return len(digits), e10, int(digits or "0")


@settings(max_examples=400, deadline=None)
@given(st.lists(_decimal(), min_size=1, max_size=6))
def test_numbers_are_correctly_rounded(cells):
    # reference: Python float(), correctly rounded per IEEE 754; the Clinger fast path
    # (mantissa < 2^53, |power of ten| <= 22) must give exactly the same bits
    text = (",".join(cells) + "\n").encode()
    got = _parse(text)
    inside = all(_significant(c)[0] <= 18 and _significant(c)[2] <= 2**53
                 and -22 <= _significant(c)[1] <= 22
                 for c in cells)
    if got is None:
        assert not inside  # refused only outside the fast path
        return
    want = np.array([float(c) for c in cells])
    assert got.shape == (1, len(cells))
    assert got[0].tobytes() == want.tobytes()  # bit for bit, signs of zero included


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(_decimal(), min_size=3, max_size=3), min_size=1, max_size=5))
def test_plain_python_definition_matches_the_compiled_loop(rows):
    # reference: the plain-Python definition of the same loop
    text = "".join(",".join(r) + "\n" for r in rows).encode()
    a, b = _parse(text, compiled=True), _parse(text, compiled=False)
    if b is None and a is not None and _numcsv._KERNELS.get("backend") == "native":
        # the C form also converts numbers outside the fast path (Eisel-Lemire): reference,
        # Python's float() of each cell, bit for bit
        want = np.array([[float(c) for c in r] for r in rows])
        assert a.tobytes() == want.tobytes()
        return
    assert (a is None) == (b is None)
    if a is not None:
        assert a.tobytes() == b.tobytes()


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(_decimal(), min_size=3, max_size=3), min_size=2, max_size=12),
       st.sampled_from(["\n", "\r\n"]))
def test_long_texts_match_the_plain_python_definition(rows, eol):
    # the C loop reads most cells 16 bytes at a time (a cell 24 bytes or more from the end of
    # the text): reference, the plain-Python definition of the loop, and Python's float()
    # where only the C form converts (Eisel-Lemire)
    text = ("".join(",".join(r) + eol for r in rows) + ("1.5,-2,0" + eol) * 4).encode()
    a, b = _parse(text, compiled=True), _parse(text, compiled=False)
    if b is None and a is not None and _numcsv._KERNELS.get("backend") == "native":
        want = np.array([[float(c) for c in r] for r in rows] + [[1.5, -2.0, 0.0]] * 4)
        assert a.tobytes() == want.tobytes()
        return
    assert (a is None) == (b is None)
    if a is not None:
        assert a.tobytes() == b.tobytes()


@pytest.mark.parametrize("cell", ["1.2345678901234567890", "-0.1234567890123456789",
                                  "12345678.12345678901", "-110.143128284059",
                                  "0.017279209603239302", "99999999.99999999999",
                                  "0.0000000000000000001234", "-1.000000000000000000",
                                  "23456789.123456789012", "-98765432.1098765432109",
                                  "6.928203230275502733e+01", "-5.849536599979372653e-101",
                                  "3.125000000000000000e-02", "9.999999999999999e+22",
                                  "1.7976931348623157e+308", "1.23456789012345678e+100"])
def test_long_cells_read_32_bytes_at_a_time(cell):
    # reference: Python float(), bit for bit: cells of 17 to 22 digits (full-precision
    # exports), which the C loop reads from two 16-byte loads where at most 19 digits and 8
    # integer digits; 20 digits and more go the general way
    if _numcsv._KERNELS.get("backend") != "native" and _numcsv.available():
        pytest.skip("the numba and Python forms leave long mantissas to pandas")
    for eol in ("\n", "\r\n"):
        text = (f"{cell},1,{cell}{eol}2,{cell},3{eol}" + ("0,0,0" + eol) * 6).encode()
        got = _parse(text)
        assert got is not None, cell
        want = np.array([[float(cell), 1.0, float(cell)], [2.0, float(cell), 3.0]]
                        + [[0.0] * 3] * 6)
        assert got.tobytes() == want.tobytes(), (cell, eol)


@settings(max_examples=300, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False, min_value=-1e300, max_value=1e300),
       st.sampled_from(["%.18e", "%.16e", "%.24e", "%.17g", "%r"]))
def test_full_precision_exports_read_back_exactly(x, fmt):
    # reference: Python float() of the text, bit for bit. numpy.savetxt writes %.18e
    # (19 significant digits) by default, pandas and repr the shortest text (up to 17); a
    # mantissa of at most 19 digits is exact, so those are always decided; past 19 digits
    # the C form may leave a cell to pandas, never misread it
    if x != 0 and abs(x) < 1e-300:
        x = 0.0  # subnormals are left to pandas by design
    cell = (repr(x) if fmt == "%r" else fmt % x)
    text = (f"{cell},1\n" + "0,0\n" * 12).encode()
    got = _parse(text)
    if _numcsv._KERNELS.get("backend") != "native":
        return  # the numba and Python forms leave long mantissas to pandas
    if fmt == "%.24e" and got is None:
        return
    assert got is not None, cell
    assert got[0, 0].tobytes() == np.float64(float(cell)).tobytes(), cell


@pytest.mark.parametrize("sep,dec", [(",", "."), (";", ","), ("\t", ".")])
def test_mixed_cells_in_a_long_text_match_the_plain_python_definition(sep, dec):
    # reference: the plain-Python definition of the loop. A real export mixes cells the C
    # loop's 16-byte path reads (plain decimals, exponents) with cells it must hand on to
    # the general path (blanks around a number, a '+' sign, NaN spellings, a short last row),
    # in the middle of a long text, and with a decimal comma
    cells = ["1.5", " 2.25", "3.5 ", "+4", "nan", "-NaN", "1e5", "-2.5E-3", "0.000", "-0",
             "12345678.5", "7", "123456789.25"]
    rows = []
    for k in range(len(cells)):
        rows.append(sep.join(cells[(k + j) % len(cells)] for j in range(3)))
    rows.append(sep.join(["1.5", "2.5"]))  # a short row: NaN in the third column
    text = "\n".join(rows * 4) + "\n" + "\n".join(["0" + sep + "0" + sep + "0"] * 6) + "\n"
    text = text.replace(".", dec) if dec != "." else text
    buf = np.frombuffer(text.encode(), dtype=np.uint8).copy()
    colmap = np.arange(3)
    a = _numcsv.parse_chunk(buf, buf.size, sep, dec, colmap, compiled=True)
    b = _numcsv.parse_chunk(buf, buf.size, sep, dec, colmap, compiled=False)
    assert a is not None and b is not None
    assert a.tobytes() == b.tobytes()
    assert a[0, 0] == 1.5 and a[1, 2] == 4.0 and np.isnan(a[len(cells), 2])


@pytest.mark.parametrize("cell", ["12.", "-0.000", "-0", "00000001.5", "12345678.12345678",
                                  "-12345678.1234567", "123456789.1", "1.123456789", ".5",
                                  "-.5", "1e5", "-2.5E-3", "7", "-99999999.9999999",
                                  "1.5E+02", "-2.814583E+02", "5.000000E-05", "1e-22", "1e22",
                                  "1.5e+0010", "-0.000000E+00", "2.5e-0003", "1.5e0",
                                  "123.456e-7", "7.0E+5"])
def test_cells_at_the_limits_of_the_16_byte_path(cell):
    # reference: Python float(), bit for bit (signs of zero included); each cell far enough
    # from the end of the text for the C loop's 16-byte path, at the start of a row, inside
    # it and at its end, with either line end
    for eol in ("\n", "\r\n"):
        row = f"{cell},1,{cell}{eol}"
        text = (row + f"2,{cell},3{eol}" + ("0,0,0" + eol) * 4).encode()
        got = _parse(text)
        assert got is not None, cell
        want = np.array([[float(cell), 1.0, float(cell)], [2.0, float(cell), 3.0]]
                        + [[0.0] * 3] * 4)
        assert got.tobytes() == want.tobytes(), (cell, eol)


def test_many_digits_and_large_powers_are_left_to_pandas():
    # outside the fast path the plain-Python form must not guess (the caller asks pandas);
    # the C form converts what the Eisel-Lemire method decides (reference: Python float())
    # and, where that method is undecided, what is exact (a tie such as 2^53 + 1, whole below
    # 2^64; 2^-24 written out), and refuses the rest: 10^23 (a tie, = 5^23 2^23 with 5^23 of
    # 54 bits, beyond 2^64), an overflow. 19 digits (numpy.savetxt's default) and more (the
    # digits past the 19th decide only where both ends of their interval round alike) are
    # the C form's too
    for cell in ["1234567890123456789", "9007199254740993", "1e23", "1.5e-23",
                 "0.00000000000000000000001", "1e400", "3.125000000000000000e-02",
                 "6.928203230275502733e+01", "-5.849536599979372653e+01",
                 "3.14159265358979323846264338327950288", "1.000000000000000000e+00",
                 "5.960464477539062500e-08", "-1.110223024625156540e-16"]:
        assert _parse(f"{cell},1\n".encode(), compiled=False) is None, cell
        got = _parse(f"{cell},1\n".encode())
        if cell in ("1e23", "1e400") or \
                _numcsv._KERNELS.get("backend") != "native":
            assert got is None, cell
        else:
            assert got[0].tobytes() == np.array([float(cell), 1.0]).tobytes(), cell
    # inside it: 2^53 itself is exact, and so is 10^22 (reference: Python float())
    got = _parse(b"9007199254740992,1e22,-0.0,1.234E-03\n")
    assert got[0].tobytes() == np.array([2.0**53, 1e22, -0.0, 1.234e-3]).tobytes()


@pytest.mark.parametrize("text", [
    b'1,"2"\n',  # a quote
    b"1,2\r3,4\n",  # a bare carriage return (pandas ends a line there)
    b"1,2\n\n3,4\n",  # a blank line (pandas skips it)
    b"1,2,3\n",  # more fields than the header
    b"1,abc\n", b"1,inf\n", b"1,1e\n", b"1,.\n", b"1,-\n", b"1,1.2.3\n", b"1,0x10\n",
    b"1, \n",  # a blank cell: pandas refuses it
    b"1,NA\n", b"1,+nan\n", b"1,nan \n",  # NA spellings other than pqcheck's own
    "1,\u00b5\n".encode(),  # a byte outside ASCII
    b"1,1e+\n", b"1,1e5x\n", b"1,1.5e-\n", b"1,1e+-5\n", b"1,2.5E\r\n", b"1,1..5\n",
    b"1,-1.5-\n", b"1,12345678901234567890123e5x\n",
])
@pytest.mark.parametrize("padded", [False, True])
def test_anything_else_is_refused(text, padded):
    # reference: the cases pandas parses differently or refuses (its errors name the line).
    # Padded: plain rows after the text, so that its cells are 48 bytes or more from the end
    # and the C loop's 16-byte path sees them first (it must hand them on, not read them)
    if padded:
        text = text + b"0,0\n" * 16
    assert _parse(text, ncols=2) is None


# -- tables against pandas, in each layout --------------------------------------------------

_LAYOUTS = {
    "comma": "time [s],ia [A],va [V]\n0,1.5,-2\n0.0001,1.25,3\n0.0002,,4\n0.0003,nan,NaN\n",
    "semicolon-decimal-comma":
        "time [s];ia [A];va [V]\n0;1,5;-2,25\n0,0001;-1,25e-3;3\n0,0002;NAN;-nan\n"
        "0,0003;2,5;-NaN\n",
    "tab": "time [s]\tia [A]\tva [V]\n0\t 1.5 \t-2\n0.0001\t1.25\t3\n0.0002\t\t4\n"
           "0.0003\t7\t8\n",
    "crlf": "time [s],ia [A],va [V]\r\n0,1.5,-2\r\n0.0001,1.25,3\r\n0.0002,2,4\r\n"
            "0.0003,5,6\r\n",
    "scope-exponent": "Model,DSO\nSample Interval,1.000000E-04\nTIME,CH1,CH2\n"
                      "-1.000000E-03,1.234E-03,-2.5E+02\n-9.000000E-04,1.240E-03,-2.49E+02\n"
                      "-8.000000E-04,1.300e-03,-2.48e02\n-7.000000E-04,1.310E-03,-2.47E+02\n",
    "trailing-delimiter": "time [s],ia [A],va [V],\n0,1.5,-2,\n0.0001,1.25,3,\n"
                          "0.0002,2,4,\n0.0003,5,6,\n",
    "short-last-row": "time [s],ia [A],va [V]\n0,1.5,-2\n0.0001,1.25,3\n0.0002,2,4\n0.0003,5",
}


def _padded(tmp_path, layout):
    """The file of ``_LAYOUTS[layout]`` with plain rows in front of the unusual cells, so
    that the layout is recognised first, and behind them (the end is sniffed too)."""
    path = tmp_path / f"{layout}.csv"
    text = _LAYOUTS[layout]
    eol = "\r\n" if "\r\n" in text else "\n"
    lines = text.split(eol)
    k = next(i for i, ln in enumerate(lines) if ln[:1] in "0123456789-")
    lines[k:k] = [lines[k]] * 8
    if layout != "short-last-row":
        lines[-1:-1] = [lines[k]] * 8
    path.write_bytes(eol.join(lines).encode())
    return path


@pytest.mark.parametrize("layout", sorted(_LAYOUTS))
def test_tables_match_pandas(layout, tmp_path):
    # reference: pandas.read_csv with pqcheck's options on the same data rows; within 1 ulp
    # (pandas' default xstrtod-based converter is not always correctly rounded)
    path = _padded(tmp_path, layout)
    d = _d.sniff(path)
    colmap = stream._compiled_layout(d)
    assert colmap is not None
    want = pd.read_csv(path, **_d.pandas_options(d),
                       skiprows=d.data_line - 1).to_numpy(dtype=np.float64)
    pieces = list(stream._byte_chunks(str(path), d, 1 << 16))
    assert len(pieces) == 1
    buf, n, _, _ = pieces[0]
    got = _numcsv.parse_chunk(buf, n, _d.pandas_options(d)["sep"], d.decimal, colmap)
    assert got is not None and got.shape == want.shape
    assert np.array_equal(np.isnan(got), np.isnan(want))
    ok = ~np.isnan(want)
    np.testing.assert_array_max_ulp(got[ok], want[ok], maxulp=1)


_FIRST_CHUNK_EXTRA = {
    # what instruments and hurried users leave in a file: the compiled parser must either
    # read the first rows as pandas does or hand them to pandas
    "blank-lines-at-end": "time [s],ia [A],va [V]\n0,1,2\n0.0001,3,4\n0.0002,5,6\n\n\n\n",
    "blank-line-inside": "time [s],ia [A],va [V]\n0,1,2\n\n0.0001,3,4\n0.0002,5,6\n",
    "quoted-cells": 'time [s],ia [A],va [V]\n"0","1","2"\n"0.0001","3","4"\n"0.0002","5","6"\n',
    "crlf-blank-end": "time [s],ia [A],va [V]\r\n0,1,2\r\n0.0001,3,4\r\n0.0002,5,6\r\n\r\n",
    "extra-field": "time [s],ia [A],va [V]\n0,1,2\n0.0001,3,4,9\n0.0002,5,6\n",
}


@pytest.mark.parametrize("layout", sorted(_LAYOUTS) + sorted(_FIRST_CHUNK_EXTRA))
@pytest.mark.parametrize("rows", [3, 1 << 16])
def test_first_chunk_matches_pandas(layout, rows, tmp_path):
    # reference: pandas.read_csv(nrows=rows) with pqcheck's options (the path the first chunk
    # took before); the same table within 1 ulp, or the same error
    if layout in _LAYOUTS:
        path = _padded(tmp_path, layout)
    else:
        path = tmp_path / f"{layout}.csv"
        path.write_bytes(_FIRST_CHUNK_EXTRA[layout].encode())
    d = _d.sniff(path)
    colmap = stream._compiled_layout(d)
    assert colmap is not None

    def first(cm):
        try:
            return stream._first_chunk(str(path), d, rows, cm)
        except Exception as exc:  # compared by type and message below
            return exc

    got, want = first(colmap), first(None)
    if isinstance(want, Exception):
        assert type(got) is type(want) and str(got) == str(want)
        return
    assert not isinstance(got, Exception), got
    assert got.shape == want.shape
    assert np.array_equal(np.isnan(got), np.isnan(want))
    ok = ~np.isnan(want)
    np.testing.assert_array_max_ulp(got[ok], want[ok], maxulp=1)


# -- the streaming reader: the same numbers and errors as the pandas path -------------------

FS = 10_000.0


def _write(path, seconds):
    n = int(FS * seconds)
    t = np.arange(n) / FS
    th = 2 * np.pi * 49.9 * t
    ia = 10 * np.sin(th) + 2.0 * np.sin(5 * th)
    va = 325 * np.sin(th + 0.1) + 3 * np.sin(7 * th)
    pd.DataFrame({"time [s]": np.round(t, 7), "ia [A]": np.round(ia, 4),
                  "va [V]": np.round(va, 3)}).to_csv(path, index=False)
    return path


def _flat(x, p=""):
    if isinstance(x, dict):
        for k, v in x.items():
            yield from _flat(v, f"{p}/{k}")
    elif isinstance(x, list):
        for i, v in enumerate(x):
            yield from _flat(v, f"{p}[{i}]")
    else:
        yield p, x


def _result(path, monkeypatch, compiled: bool):
    with monkeypatch.context() as m:
        if not compiled:
            m.setattr(stream, "_compiled_layout", lambda d: None)
        cap = open_capture(path, stream_over_bytes=1000)
        assert isinstance(cap, CaptureStream)
        res = analyze(cap, nominal_hz=50, block_samples=8192)
    out = analysis_to_dict(res)
    out["capture"].pop("reader")
    return dict(_flat(out)), res.sha256


def test_analysis_is_the_same_with_either_parser(tmp_path, monkeypatch):
    # reference: the pandas streaming path (what PQCHECK_NO_JIT=1 reads with); the analysis
    # itself is the same code both ways, so the numbers agree to 1e-12 of reading
    path = _write(tmp_path / "cap.csv", 4.0)
    fast, sha_fast = _result(path, monkeypatch, True)
    slow, sha_slow = _result(path, monkeypatch, False)
    assert sha_fast == sha_slow != ""
    assert fast.keys() == slow.keys()
    for k, v in fast.items():
        if isinstance(v, float) and isinstance(slow[k], float):
            assert v == pytest.approx(slow[k], rel=1e-12, abs=1e-300, nan_ok=True), k
        else:
            assert v == slow[k], k


def _error(path, monkeypatch, compiled: bool):
    with monkeypatch.context() as m:
        if not compiled:
            m.setattr(stream, "_compiled_layout", lambda d: None)
        cap = open_capture(path, stream_over_bytes=1000)
        with pytest.raises(CaptureFormatError) as info:
            for _ in cap.blocks(1 << 16):
                pass
    return str(info.value)


def _bad_cell_file(path, seconds: float, line: int):
    """A capture of ``seconds`` with ``abc`` before the first number of (1-based) ``line``."""
    _write(path, seconds)
    lines = path.read_bytes().split(b"\n")
    lines[line - 1] = lines[line - 1].replace(b",", b",abc", 1)
    path.write_bytes(b"\n".join(lines))
    return path


def test_bad_cell_in_the_middle_names_its_line(tmp_path, monkeypatch):
    # reference: the pandas streaming path's error, naming the line of the bad cell
    path = _bad_cell_file(tmp_path / "bad.csv", 31.0, 300_000)
    fast = _error(path, monkeypatch, True)
    assert fast == _error(path, monkeypatch, False)
    assert "bad.csv:300000: ia: cell 'abc" in fast


def test_overflowing_cell_in_a_later_chunk_is_an_error_naming_its_line(tmp_path, monkeypatch):
    # reference: the pandas streaming path; 1e400 overflows float64 (IEEE 754 binary64 tops
    # out near 1.8e308) and must never become a gap: the compiled parser refuses the chunk,
    # pandas reads it, and the finite check names the cell
    path = _write(tmp_path / "big.csv", 12.0)
    lines = path.read_bytes().split(b"\n")
    lines[100_000] = lines[100_000].replace(b",", b",1e400,", 1).rsplit(b",", 1)[0]
    path.write_bytes(b"\n".join(lines))
    fast = _error(path, monkeypatch, True)
    assert fast == _error(path, monkeypatch, False)
    assert "big.csv:100001" in fast and "1e400" in fast and "not a finite number" in fast


def test_extra_field_in_a_later_chunk_names_its_line(tmp_path, monkeypatch):
    # reference: the pandas streaming path; a refused chunk starting with a row of one field
    # too many must not be read with an index column
    path = _write(tmp_path / "extra.csv", 12.0)
    lines = path.read_bytes().split(b"\n")
    lines[90_001] += b",7"
    path.write_bytes(b"\n".join(lines))
    fast = _error(path, monkeypatch, True)
    assert fast == _error(path, monkeypatch, False)
    assert "extra.csv:90002" in fast and "row has 4 fields but the header has 3" in fast


def test_refused_chunk_is_read_by_pandas(tmp_path, monkeypatch):
    # reference: the pandas streaming path; a blank line and a quoted number in the middle
    # give the same samples (the blank line sends the whole file to pandas' reader: a chunk
    # refused by the compiled parser on its own is tested with the parser threads below)
    path = _odd_file(tmp_path / "odd.csv", blank_line=True)
    assert _samples(path, monkeypatch, True).tobytes() == \
        _samples(path, monkeypatch, False).tobytes()


def _odd_file(path, blank_line: bool):
    """An 8 s capture with a quoted number on line 60001 (and a blank line 40001)."""
    _write(path, 8.0)
    lines = path.read_bytes().split(b"\n")
    if blank_line:
        lines[40_000] = b""
    head, _, tail = lines[60_000].partition(b",")
    lines[60_000] = head + b',"' + tail.split(b",")[0] + b'",' + tail.split(b",")[1]
    path.write_bytes(b"\n".join(lines))
    return path


def _samples(path, monkeypatch, compiled: bool):
    """Every sample of the streamed file, by the compiled parser or the pandas path."""
    with monkeypatch.context() as m:
        if not compiled:
            m.setattr(stream, "_compiled_layout", lambda d: None)
        return np.concatenate(list(open_capture(path, stream_over_bytes=1000)
                                   .blocks(1 << 14)), axis=1)


# -- the blocks themselves, in the layouts whose columns are taken, scaled or checked ------

def _stream_text(kind: str, n: int = 3000) -> str:
    t = np.arange(n) / FS
    ia = np.round(10 * np.sin(2 * np.pi * 50 * t), 4)
    va = np.round(325 * np.sin(2 * np.pi * 50 * t + 0.2), 3)
    rows = list(zip(t, ia, va))
    if kind == "milli-units":  # time in ms, current in mA, voltage in kV: scaled on reading
        head = "time [ms],ia [mA],va [kV]"
        body = [f"{a * 1e3:.4f},{b * 1e3:.1f},{c / 1e3:.6f}" for a, b, c in rows]
    elif kind == "time-in-the-middle":
        head = "ia [A],time [s],va [V]"
        body = [f"{b},{a:.7f},{c}" for a, b, c in rows]
    elif kind == "trailing-delimiter":  # a phantom empty column, checked and dropped
        head = "time [s],ia [A],va [V],"
        body = [f"{a:.7f},{b},{c}," for a, b, c in rows]
    elif kind == "gap":  # 20 rows missing (after the first 2^16 rows, which must be uniform
        # to be streamed): NaN samples keep the later windows in place
        head = "time [s],ia [A],va [V]"
        body = [f"{a:.7f},{b},{c}" for i, (a, b, c) in enumerate(rows)
                if not 70_000 <= i < 70_020]
    elif kind == "truncated-last-row":
        head = "time [s],ia [A],va [V]"
        body = [f"{a:.7f},{b},{c}" for a, b, c in rows] + [f"{n / FS:.7f},1.0"]
    elif kind == "full-precision":  # as pandas.to_csv or a simulator writes: repr floats
        head = "time_s,ia,va"
        ua = 10 * np.sin(2 * np.pi * 50 * t) + 1e-3 * np.cos(2 * np.pi * 1234.5 * t)
        uv = 325 * np.sin(2 * np.pi * 50 * t + 0.2) + 1e-2 * np.sin(2 * np.pi * 777.7 * t)
        body = [f"{float(a)!r},{float(b)!r},{float(c)!r}" for a, b, c in zip(t, ua, uv)]
    elif kind == "scientific-crlf":  # a scope's export: E notation, CRLF line ends
        head = "Time [s],ia [A],va [V]"
        body = [f"{a:.6E},{b:.6E},{c:.6E}" for a, b, c in rows]
        return "\r\n".join([head, *body]) + "\r\n"
    else:  # plain, no time column: the sample rate is given
        head = "ia [A],va [V]"
        body = [f"{b},{c}" for a, b, c in rows]
    return "\n".join([head, *body]) + "\n"


def _blocks(path, monkeypatch, compiled: bool, rate):
    with monkeypatch.context() as m:
        if not compiled:
            m.setattr(stream, "_compiled_layout", lambda d: None)
        cap = open_capture(path, stream_over_bytes=1000, sample_rate_hz=rate)
        assert isinstance(cap, CaptureStream)
        blocks = [b.copy() for b in cap.blocks(1024)]
    return blocks, cap


@pytest.mark.parametrize("kind", ["milli-units", "time-in-the-middle", "trailing-delimiter",
                                  "gap", "truncated-last-row", "no-time-column",
                                  "full-precision", "scientific-crlf"])
def test_blocks_are_those_of_the_pandas_path(kind, tmp_path, monkeypatch):
    # reference: the pandas streaming path (pandas.read_csv in chunks); the compiled parser
    # must hand the analysis the same blocks (same cuts, same SI values within 1 ulp of
    # pandas' converter) and the same findings
    path = tmp_path / f"{kind}.csv"
    path.write_text(_stream_text(kind, 80_000 if kind == "gap" else 3000))
    rate = FS if kind == "no-time-column" else None
    handed = []  # chunks the compiled parser refused and pandas read
    real_chunk = stream._pandas_chunk
    with monkeypatch.context() as m:
        m.setattr(stream, "_pandas_chunk", lambda *a: handed.append(1) or real_chunk(*a))
        fast, cap_fast = _blocks(path, monkeypatch, True, rate)
    from pqcheck import _native

    # read by the compiled parser itself, not by pandas (17-digit numbers: the C parser only;
    # its numba form hands them to pandas, PQCHECK_NO_NATIVE=1)
    if kind == "scientific-crlf" or (kind == "full-precision" and _native.kernels() is not None):
        assert not handed
    slow, cap_slow = _blocks(path, monkeypatch, False, rate)
    assert [b.shape for b in fast] == [b.shape for b in slow]
    for f, s in zip(fast, slow):
        assert np.array_equal(np.isnan(f), np.isnan(s))
        ok = ~np.isnan(s)
        np.testing.assert_array_max_ulp(f[ok], s[ok], maxulp=2)
    assert [x.code for x in cap_fast.findings] == [x.code for x in cap_slow.findings]
    assert cap_fast.provenance.sha256 == cap_slow.provenance.sha256 != ""
    if kind == "gap":  # 20 samples left empty in both channels
        assert sum(int(np.isnan(b).sum()) for b in fast) == 40
    if kind == "truncated-last-row":
        assert "truncated-row" in [x.code for x in cap_fast.findings]
    if kind == "milli-units":  # SI: amperes and volts
        peak = max(float(np.nanmax(np.abs(b[0]))) for b in fast)
        assert peak == pytest.approx(10.0, rel=1e-3)


@settings(max_examples=60, deadline=None)
@given(lines=st.lists(st.tuples(st.integers(0, 300), st.sampled_from([b"\n", b"\r\n"])),
                      max_size=400),
       tail=st.sampled_from([b"", b"1,2", b"\r"]), rows=st.integers(1, 500),
       piece=st.sampled_from([1, 7, 256, 1 << 20]))
def test_whole_lines_reads_as_readline(lines, tail, rows, piece):
    # reference: Python's own BufferedReader.readline, called `rows` times
    import io

    data = b"".join(b"7" * k + end for k, end in lines) + tail
    ref = io.BufferedReader(io.BytesIO(data), 64)
    want = b"".join(ref.readline() for _ in range(rows))
    got = stream._whole_lines(io.BufferedReader(io.BytesIO(data), 64), rows, piece)
    assert got == want


@pytest.mark.parametrize("tail", ["", "quoted"])
def test_streamed_hash_is_the_files_sha256(tail, tmp_path, monkeypatch):
    # reference: hashlib.sha256 of the file's bytes, comment lines before the header
    # included. The compiled path hashes the bytes it reads, also around a chunk it refuses
    import hashlib

    text = "# exported by a bench recorder\n# second comment line\n" + _stream_text(
        "milli-units", 40_000)
    if tail == "quoted":  # one cell of a late row in quotes (pandas reads it as the number)
        lines = text.split("\n")
        k = 3 * len(lines) // 4
        first, rest = lines[k].split(",", 1)
        lines[k] = f'"{first}",{rest}'
        text = "\n".join(lines)
    path = tmp_path / "cap.csv"
    path.write_text(text)
    want = hashlib.sha256(path.read_bytes()).hexdigest()
    monkeypatch.setattr(stream, "CHUNK_ROWS", 4096)
    fell_back = []
    real = stream.FedHash.result
    monkeypatch.setattr(stream.FedHash, "result",
                        lambda self: fell_back.append(not self._done) or real(self))
    cap = open_capture(path, stream_over_bytes=1000)
    assert isinstance(cap, CaptureStream)
    for _ in cap.blocks(4096):
        pass
    assert cap.provenance.sha256 == want
    # hashed from the bytes the reader read: a chunk the compiled parser refuses (the quote)
    # is parsed by pandas from the same bytes; only a chunk pandas cannot parse alone sends
    # the rest of the file to pandas, and then the file is hashed (test below)
    assert fell_back == [False]


def test_fed_hash_falls_back_and_cancels(tmp_path):
    # reference: hashlib.sha256 of the same bytes
    import hashlib

    from pqcheck.readers import FedHash

    path = tmp_path / "f.bin"
    path.write_bytes(b"abc" * 1000)
    h = FedHash(path)
    for k in range(0, 3000, 7):
        h.feed(memoryview(b"abc" * 1000)[k:k + 7])
    h.complete()
    assert h.result() == hashlib.sha256(b"abc" * 1000).hexdigest()
    part = FedHash(path)  # fed only part of the file: the file itself is hashed
    part.feed(b"abc")
    assert part.result() == hashlib.sha256(path.read_bytes()).hexdigest()
    busy = FedHash(path)  # cancelled while pieces wait: the thread ends, nothing hangs
    for _ in range(FedHash._DEPTH):
        busy.feed(b"x" * 4096)
    busy.cancel()
    busy._thread.join(timeout=10)
    assert not busy._thread.is_alive()


def test_abandoned_stream_leaves_no_reader_threads(tmp_path, monkeypatch):
    # reference: threading.enumerate (Python's own list of live threads). The compiled path
    # cuts blocks on a background thread ahead of the analysis; a consumer that stops after
    # one block (an error in the analysis, Ctrl-C) must end that thread, the parser's pool
    # and the hash thread, and the blocks it did get equal the pandas path's
    import threading

    path = tmp_path / "cap.csv"
    path.write_text(_stream_text("milli-units", 60_000))
    monkeypatch.setattr(stream, "CHUNK_ROWS", 4096)
    before = {t.ident for t in threading.enumerate()}
    cap = open_capture(path, stream_over_bytes=1000)
    assert isinstance(cap, CaptureStream)
    it = cap.blocks(4096)
    first = next(it)
    it.close()
    for t in threading.enumerate():
        if t.ident not in before:
            t.join(timeout=10)
    left = [t.name for t in threading.enumerate() if t.ident not in before and t.is_alive()]
    assert left == []
    monkeypatch.setattr(_numcsv, "available", lambda: False)  # the pandas path
    ref = open_capture(path, stream_over_bytes=1000)
    assert np.array_equal(first, next(iter(ref.blocks(4096))), equal_nan=True)


def test_prefetch_thread_ends_when_the_consumer_stops_with_the_queue_full():
    # reference: threading (the thread's own liveness). A consumer that stops while the
    # queue is full and the producer has reached its end must not leave the producer blocked
    # on the hand-over of the end (or of an error)
    import threading
    import time

    closed = []

    def produce(fail):
        try:
            yield from range(2)  # the last item fills the queue, then the end waits
            if fail:
                raise ValueError("late error")
        finally:
            closed.append(threading.current_thread().name)

    for fail in (False, True):
        before = {t.ident for t in threading.enumerate()}
        it = stream._prefetch(produce(fail), depth=1)
        assert next(it) == 0
        time.sleep(0.5)  # the producer fills the queue and waits to hand over the rest
        t0 = time.perf_counter()
        it.close()
        assert time.perf_counter() - t0 < 2.0
        new = [t for t in threading.enumerate() if t.ident not in before]
        for t in new:
            t.join(timeout=2)
        assert not any(t.is_alive() for t in new)
    assert closed == ["pqcheck-parse", "pqcheck-parse"]  # closed on the producer's thread


@pytest.mark.parametrize("threads", [1, 3, 8])
def test_any_number_of_parser_threads_gives_the_same_samples_and_errors(tmp_path, monkeypatch,
                                                                         threads):
    # reference: the pandas streaming path. However many threads parse (one per CPU on a
    # larger machine), the chunks come back in file order: a chunk in the middle that the
    # compiled parser refuses (a quoted number) gives the same samples, and a bad cell later
    # names its own line (a blank line would send the whole file to pandas)
    monkeypatch.setattr(stream, "PARSE_THREADS", threads)
    path = _odd_file(tmp_path / "odd.csv", blank_line=False)
    assert _samples(path, monkeypatch, True).tobytes() == \
        _samples(path, monkeypatch, False).tobytes()
    bad = _bad_cell_file(tmp_path / "bad.csv", 8.0, 70_002)
    fast = _error(bad, monkeypatch, True)
    assert fast == _error(bad, monkeypatch, False)
    assert "bad.csv:70002: ia: cell 'abc" in fast
