"""The C loops of pqcheck/_cext.c (through pqcheck/_native.py) against the Python
definitions they port, and the fallback when the extension is absent or disabled.

References: the plain-Python forms beside each caller (``_resample_py``, ``_phase_sums_py``,
``_parse_py``, which the tests of test_compiled.py and test_fast_csv.py check against NumPy,
pandas and Python's ``float()``), and NumPy's own ``count_nonzero`` for the line count.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pqcheck import _native
from pqcheck.dsp import _compiled, spectrum
from pqcheck.readers import _numcsv

needs_native = pytest.mark.skipif(_native.kernels() is None,
                                  reason="native extension not built (no C compiler)")


def _windows(rng, c_n=4, n=40_000, n_win=6, taps_band=0.2):
    x = rng.normal(size=(c_n, n))
    kernel = spectrum.kernel_for(taps_band)
    length = 3_999.61
    starts = 300.3 + length * np.arange(n_win)
    lengths = length + rng.uniform(-2, 2, n_win)
    warp = rng.uniform(-1e-3, 1e-3, n_win)
    warp[0] = 0.0
    m = spectrum.fast_length(int(np.ceil(lengths.max())))
    return x, starts, lengths, warp, kernel, m


@needs_native
@pytest.mark.parametrize("band", [0.05, 0.2, 0.45])
def test_avx2_and_portable_resampling_give_the_same_bits(band):
    x, starts, lengths, warp, kernel, m = _windows(np.random.default_rng(5), taps_band=band)
    a = np.empty((x.shape[0], starts.size, m))
    b = np.empty_like(a)
    _native.resample_into(x, starts, lengths, warp, kernel.table, kernel.half,
                          spectrum.PHASES, a)
    _native.resample_into(x, starts, lengths, warp, kernel.table, kernel.half,
                          spectrum.PHASES, b, portable=True)
    assert np.array_equal(a, b)  # the same operations in the same order (no FMA)


@needs_native
def test_native_resampling_equals_python_definition():
    # reference: the plain-Python loop _resample_py (only the order of the tap sums differs)
    x, starts, lengths, warp, kernel, m = _windows(np.random.default_rng(9), c_n=2, n_win=2)
    m = 512  # the Python loop is slow: few points, same positions formula
    fast = np.empty((2, 2, m))
    slow = np.empty_like(fast)
    _native.resample_into(x, starts, lengths, warp, kernel.table, kernel.half,
                          spectrum.PHASES, fast)
    _compiled._resample_py(x, starts, lengths, warp, kernel.table, kernel.half,
                           spectrum.PHASES, slow)
    assert np.max(np.abs(fast - slow)) <= 1e-13 * np.max(np.abs(slow))


@needs_native
def test_native_resampling_with_taps_not_a_multiple_of_eight():
    rng = np.random.default_rng(2)
    x = rng.normal(size=(2, 5_000))
    table = rng.normal(size=(65, 10))  # 10 taps: the general loop
    starts, lengths, warp = np.array([20.5, 1020.25]), np.array([900.0, 901.5]), np.zeros(2)
    fast = np.empty((2, 2, 300))
    slow = np.empty_like(fast)
    _native.resample_into(x, starts, lengths, warp, table, 5, 64, fast)
    _compiled._resample_py(x, starts, lengths, warp, table, 5, 64, slow)
    assert np.max(np.abs(fast - slow)) <= 1e-13 * np.max(np.abs(slow))


@needs_native
def test_native_resampling_refuses_mismatched_shapes():
    x, starts, lengths, warp, kernel, m = _windows(np.random.default_rng(1))
    with pytest.raises(ValueError, match="shapes"):
        _native.resample_into(x, starts, lengths, warp, kernel.table, kernel.half,
                              spectrum.PHASES, np.empty((x.shape[0] + 1, starts.size, m)))
    with pytest.raises(ValueError, match="C-contiguous"):
        _native.resample_into(x, starts, lengths, warp, kernel.table, kernel.half,
                              spectrum.PHASES, np.empty((m, starts.size, x.shape[0])).T)


@needs_native
def test_native_phase_sums_equal_python_definition():
    rng = np.random.default_rng(4)
    fs, f0 = 10_000.0, 50.7
    t = np.arange(int(1.0 * fs)) / fs
    x = np.cos(2 * np.pi * f0 * t + 0.3) + rng.normal(0, 0.01, t.size)
    period = fs / f0
    mid = period / 2 + period * np.arange(int(t.size / period) - 1)
    mid += rng.normal(0, 1e-3, mid.size)
    count = np.arange(mid.size) + 0.5 + 1e-4 * rng.normal(size=mid.size)
    nz = mid.size - 3
    fast = np.zeros((3, nz))
    slow = np.zeros((3, nz))
    _native.phase_sums_into(x, mid, count, 0.21, 1, nz, fast)
    _compiled._phase_sums_py(x, mid, count, 0.21, 1, nz, slow)
    # the same operations in the same order, compiled without fused multiply-adds
    assert np.max(np.abs(fast - slow)) <= 1e-12 * np.max(np.abs(slow))


_cells = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False, width=64).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", "nan", "-nan", "NaN", "NAN", " 1.5", "2.5 ", "1e5", "1E-3", "+7",
                     "abc", "1.2.3", "\"4\"", "1e", "-", "0.000", "12345678901234567890"]),
)


@needs_native
@settings(max_examples=300, deadline=None)
@given(rows=st.lists(st.lists(_cells, min_size=1, max_size=4), min_size=1, max_size=6),
       crlf=st.booleans(), skip=st.booleans())
def test_native_parser_equals_python_definition(rows, crlf, skip):
    # reference: the plain-Python state machine _parse_py, on well- and ill-formed text
    # (short rows, long rows, blank cells, quotes, non-numbers: the same rows or the same -1)
    nf = max(len(r) for r in rows)
    end = "\r\n" if crlf else "\n"
    text = end.join(",".join(r) for r in rows).encode()
    buf = np.frombuffer(text, dtype=np.uint8)
    colmap = np.arange(nf, dtype=np.int64)
    if skip and nf > 1:
        colmap[0] = -1
        colmap[1:] -= 1
    width = max(int(colmap.max()) + 1, 1)
    lines = text.count(b"\n") + 1
    a = np.full((lines, width), -7.0)
    b = np.full((width, lines), -7.0).T  # column by column, as the streaming reader asks
    ra = _native.parse(buf, len(text), ord(","), ord("."), colmap, a, _numcsv._POW10)
    rb = _numcsv._parse_py(buf, len(text), ord(","), ord("."), colmap, b, _numcsv._POW10)
    assert ra == rb
    if ra >= 0:
        np.testing.assert_array_equal(a[:ra], b[:ra])  # NaN == NaN here, bit for bit else


@needs_native
@given(st.binary(max_size=300))
def test_native_line_count_equals_numpy(data):
    buf = np.frombuffer(data, dtype=np.uint8)
    assert _native.count(buf, len(data)) == int(np.count_nonzero(buf == 10))


@needs_native
def test_native_reader_refuses_a_length_past_the_buffer():
    buf = np.frombuffer(b"1,2\n", dtype=np.uint8)
    with pytest.raises(ValueError, match="beyond the buffer"):
        _native.count(buf, 10)
    with pytest.raises(ValueError, match="beyond the buffer"):
        _native.parse(buf, 10, 44, 46, np.arange(2), np.empty((2, 2)), _numcsv._POW10)


def _backend_in_child(env_extra):
    env = {k: v for k, v in os.environ.items() if not k.startswith("PQCHECK_")}
    env.update(env_extra)
    code = ("from pqcheck.dsp import _compiled; from pqcheck.readers import _numcsv; "
            "_numcsv.available(); print(_compiled.backend(), _numcsv._KERNELS.get('backend'))")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                         text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    return out.stdout.split()


def test_disabling_the_extension_falls_back_to_numba():
    assert _backend_in_child({"PQCHECK_NO_NATIVE": "1"}) == ["numba", "numba"]
    assert _backend_in_child({"PQCHECK_NO_NATIVE": "1", "PQCHECK_NO_JIT": "1"})[0] == "numpy"


@needs_native
def test_extension_is_the_default_backend():
    assert _backend_in_child({}) == ["native", "native"]


def test_required_extension_that_is_missing_is_an_error(tmp_path, monkeypatch):
    monkeypatch.setenv("PQCHECK_REQUIRE_NATIVE", "1")
    monkeypatch.delenv("PQCHECK_NO_NATIVE", raising=False)
    monkeypatch.setattr(_native, "_path", lambda: None)
    with pytest.raises(RuntimeError, match="no native extension"):
        _native._load()
