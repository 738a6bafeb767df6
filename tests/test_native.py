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
@pytest.mark.parametrize("points", [None, 4_001, 67, 3])
def test_avx2_and_portable_resampling_give_the_same_bits(band, points):
    # points: a window of points not a multiple of the AVX2 loop's tile (64) or of its
    # four-point step, so that every remainder path is compared too
    x, starts, lengths, warp, kernel, m = _windows(np.random.default_rng(5), taps_band=band)
    m = m if points is None else points
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
@pytest.mark.parametrize("fraction", [0.0, 0.5 / spectrum.PHASES, 1 / spectrum.PHASES,
                                      0.3141592653589793, 0.5, 1 - 1e-12])
def test_native_resampling_interpolates_between_table_rows(fraction):
    # a point at fraction f of the way between samples takes the weights linear between the
    # two tabulated rows either side of it, w = r_p + a (r_{p+1} - r_p) with p + a = f PHASES
    # (written out here with NumPy); at a tabulated phase that is the row itself
    x, _, _, _, kernel, _ = _windows(np.random.default_rng(3), c_n=2, n_win=1)
    start = np.array([400.0 + fraction])
    out = np.empty((2, 1, 1))
    _native.resample_into(x, start, np.array([1.0]), np.zeros(1), kernel.table, kernel.half,
                          spectrum.PHASES, out)
    v = fraction * spectrum.PHASES
    p = int(np.floor(v))
    w = kernel.table[p] + (v - p) * (kernel.table[p + 1] - kernel.table[p])
    seg = x[:, 400 - (kernel.half - 1):400 + kernel.half + 1]
    np.testing.assert_allclose(out[:, 0, 0], seg @ w, rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("band", [0.125, 0.3, 0.48])
def test_interpolated_kernel_is_within_its_error_bound_of_the_closed_form(band):
    # the kernel at any fractional position against the Kaiser-windowed sinc it tabulates,
    # evaluated directly with numpy.sinc and scipy.special.i0 (Kaiser 1974; Oppenheim &
    # Schafer, Discrete-Time Signal Processing, sec. 7.5 -- from memory), each point's
    # weights normalised to sum 1 as the table's rows are: the sum of the weights' errors
    # stays under the 1.7e-7 spectrum.sync_kernel documents (linear interpolation between
    # 2^12 rows; the errors of each step are listed in DEVELOPERS.md)
    from scipy.special import i0

    kernel = spectrum.kernel_for(band)
    kept = min(np.ceil(band * 512) / 512, 0.48)  # as kernel_for rounds the band
    cutoff = 0.5 * (kept + 0.5 + 0.5 * (0.5 - kept))  # midway to the stopband's edge
    beta = 0.1102 * (spectrum.STOPBAND_DB - 8.7)
    half = kernel.half
    j = np.arange(-(half - 1), half + 1, dtype=np.float64)
    f = np.random.default_rng(5).uniform(0, 1, 400)
    u = j[None, :] - f[:, None]
    exact = 2 * cutoff * np.sinc(2 * cutoff * u) * i0(
        beta * np.sqrt(np.clip(1 - (u / half) ** 2, 0, 1))) / i0(beta)
    exact /= exact.sum(axis=1, keepdims=True)
    v = f * spectrum.PHASES
    p = np.floor(v).astype(int)
    interp = kernel.table[p] + (v - p)[:, None] * (kernel.table[p + 1] - kernel.table[p])
    assert np.abs(interp - exact).sum(axis=1).max() < 1.7e-7


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
    if rb < 0 and ra >= 0:
        # the C converts what the Python form leaves to pandas (mantissas of 2^53 or more,
        # powers beyond 10^22): then every cell must be what Python's float() makes of it
        want = _float_rows(text.decode(), colmap, width)
        assert want is not None, text
        assert ra == len(want)
        np.testing.assert_array_equal(a[:ra], want)
        return
    assert ra == rb
    if ra >= 0:
        np.testing.assert_array_equal(a[:ra], b[:ra])  # NaN == NaN here, bit for bit else


def _float_rows(text, colmap, width):
    """Reference table of plain numeric text: each cell through Python's float() (correctly
    rounded), NaN for the NA spellings and for the fields a short row lacks; None where a
    cell is neither."""
    out = []
    lines = text.replace("\r\n", "\n").split("\n")
    if len(lines) > 1 and lines[-1] == "":  # the line end of the last row ends no new row
        lines.pop()
    for line in lines:
        row = np.full(width, np.nan)
        for f, cell in enumerate(line.split(",")):
            if colmap[f] < 0:
                continue
            if cell in ("", "nan", "-nan", "NaN", "-NaN", "NAN"):  # empty: NaN too
                continue
            try:
                row[colmap[f]] = float(cell.strip(" \t"))
            except ValueError:
                return None
        out.append(row)
    return np.array(out)


_exact = st.floats(allow_nan=False, allow_infinity=False, width=64)


@needs_native
@settings(max_examples=400, deadline=None)
@given(vals=st.lists(_exact, min_size=1, max_size=8),
       style=st.sampled_from(["r", ".17g", ".17e", ".16e", ".20f"]))
def test_native_parser_full_precision_equals_float(vals, style):
    # reference: Python's float() of each printed number, bit for bit (correctly rounded);
    # the C may refuse (a subnormal, a tie it cannot decide, more than 18 digits), never
    # differ
    cells = [repr(v) if style == "r" else format(v, style) for v in vals]
    text = ",".join(cells).encode()
    buf = np.frombuffer(text, dtype=np.uint8)
    out = np.full((1, len(cells)), -7.0)
    r = _native.parse(buf, len(text), 44, 46, np.arange(len(cells)), out, _numcsv._POW10)
    if r >= 0:
        assert r == 1
        got = out[0].view(np.uint64)
        want = np.array([float(c) for c in cells]).view(np.uint64)
        np.testing.assert_array_equal(got, want)


@needs_native
def test_native_parser_converts_full_precision_exports():
    # a full-precision export (pandas' to_csv, repr: up to 17 significant digits) is read
    # by the C parser itself, not handed to pandas: reference, Python's float()
    rng = np.random.default_rng(2)
    vals = np.concatenate([rng.normal(0, 300, 3000), rng.normal(0, 1e-3, 3000),
                           rng.uniform(-1e300, 1e300, 1000), rng.uniform(-1e-300, 1e-300, 1000)])
    cells = [repr(float(v)) for v in vals]
    cells += ["1.7976931348623157e308", "2.2250738585072014e-308", "18014398509481985",
              "123456789012345678", "1e-300", "4.9406564584124654e-300"]
    text = "\n".join(cells).encode()
    buf = np.frombuffer(text, dtype=np.uint8)
    out = np.full((len(cells), 1), -7.0)
    r = _native.parse(buf, len(text), 44, 46, np.arange(1), out, _numcsv._POW10)
    assert r == len(cells)
    np.testing.assert_array_equal(out[:, 0].view(np.uint64),
                                  np.array([float(c) for c in cells]).view(np.uint64))
    # 19 digits and an exact tie (2^53 + 1, whole): converted exactly (reference: float())
    for cell in ("1234567890123456789", "9007199254740993", "-9007199254740993e0"):
        b = np.frombuffer(cell.encode(), dtype=np.uint8)
        got = np.empty((1, 1))
        assert _native.parse(b, b.size, 44, 46, np.arange(1), got, _numcsv._POW10) == 1
        assert got[0, 0].tobytes() == np.float64(float(cell)).tobytes(), cell
    # a subnormal, overflows, a tie beyond 2^64 (10^23): left to pandas
    for refused in ("5e-324", "1e309", "1.8e308", "1e23", "4.9406564584124654e-324"):
        b = np.frombuffer(refused.encode(), dtype=np.uint8)
        assert _native.parse(b, b.size, 44, 46, np.arange(1), np.empty((1, 1)),
                             _numcsv._POW10) == -1, refused


@needs_native
@pytest.mark.parametrize("n", [4079, 4080, 4081, 4096 * 3 + 5, 100_003])
@pytest.mark.parametrize("fill", ["all", "random"])
def test_native_line_count_of_long_buffers_equals_numpy(n, fill):
    # byte counters summed every 255 rounds of 16 bytes: a buffer of nothing but line ends
    # (every counter at its limit) and random text across those rounds and a ragged tail;
    # reference numpy.count_nonzero
    rng = np.random.default_rng(n)
    buf = (np.full(n, 10, dtype=np.uint8) if fill == "all"
           else rng.choice(np.array([10, 44, 48, 49, 46], dtype=np.uint8), n))
    for length in (n, n - 1, n - 15):
        assert _native.count(buf, length) == int(np.count_nonzero(buf[:length] == 10))


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


@needs_native
@settings(max_examples=40, deadline=None)
@given(lengths=st.lists(st.integers(0, 40), min_size=1, max_size=12),
       seed=st.integers(0, 2**31 - 1))
def test_native_window_stats_equal_numpy(lengths, seed):
    # reference: NumPy's sum, sum of squares, max(abs) and dot of each window's samples
    rng = np.random.default_rng(seed)
    lo = np.cumsum([3] + lengths[:-1])
    hi = lo + np.array(lengths)
    x = rng.normal(0, 100, size=(4, int(hi.max()) + 5))
    pa, pb = [0, 1, 3, 0], [3, 2, 3, 1]
    sm, sq, pk, pr = _native.window_stats(x, lo, hi, pa, pb)
    for w, (a, b) in enumerate(zip(lo, hi)):
        seg = x[:, a:b]
        if b <= a:  # an empty window is left NaN
            assert np.isnan(sm[w]).all() and np.isnan(pr[w]).all()
            continue
        np.testing.assert_allclose(sm[w], seg.sum(axis=1), rtol=1e-12, atol=1e-10)
        np.testing.assert_allclose(sq[w], (seg**2).sum(axis=1), rtol=1e-12)
        np.testing.assert_array_equal(pk[w], np.abs(seg).max(axis=1))
        np.testing.assert_allclose(pr[w], [seg[i] @ seg[j] for i, j in zip(pa, pb)],
                                   rtol=1e-12, atol=1e-9)


@needs_native
def test_native_window_stats_refuse_what_they_cannot_read():
    x = np.zeros((2, 100))
    with pytest.raises(IndexError, match="past the samples"):
        _native.window_stats(x, [90], [101], [], [])
    with pytest.raises(IndexError, match="outside x"):
        _native.window_stats(x, [0], [10], [0], [2])
    with pytest.raises(ValueError, match="C-contiguous"):
        _native.window_stats(x[:, ::2], [0], [10], [], [])


@needs_native
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_native_all_finite_equals_numpy(bad):
    # reference: numpy.isfinite(...).all()
    x = np.ones(5000)
    assert _native.all_finite(x) is True
    for pos in (0, 1023, 1024, 4999):
        y = x.copy()
        y[pos] = bad
        assert _native.all_finite(y) is bool(np.isfinite(y).all()) is False


@needs_native
def test_native_all_finite_at_the_edges_of_float64():
    # reference: numpy.isfinite(...).all(), over IEEE 754 binary64's edge values and random
    # bit patterns (NaNs with any payload and sign, signalling ones included): the extremes,
    # subnormals and signed zeros are finite; every NaN and infinity is not
    edges = np.array([0.0, -0.0, 5e-324, -5e-324, 2.2250738585072014e-308,
                      1.7976931348623157e308, -1.7976931348623157e308, 1e300, -1e-300])
    assert _native.all_finite(np.tile(edges, 300)) is True
    rng = np.random.default_rng(11)
    for n in (1, 2, 3, 1023, 1024, 1025, 2049):
        bits = rng.integers(0, 2**63, n, dtype=np.uint64) | (
            rng.integers(0, 2, n, dtype=np.uint64) << np.uint64(63))
        y = bits.view(np.float64)
        assert _native.all_finite(y) is bool(np.isfinite(y).all())
        z = np.tile(edges, n // edges.size + 1)[:n].copy()
        for special in (0x7FF0000000000001, 0x7FF8000000000000, 0xFFF0000000000000,
                        0xFFFFFFFFFFFFFFFF):
            w = z.copy()
            w.view(np.uint64)[n // 2] = special
            assert _native.all_finite(w) is bool(np.isfinite(w).all()) is False


@needs_native
def test_fused_window_statistics_equal_numpy_in_the_analysis(monkeypatch):
    # reference: the NumPy form (_time_stats and _peaks), selected when the C statistics are
    # not offered; power pairs, line-to-line voltages and the neutral current all compared
    from pqcheck import Capture, analyze

    fs, f0 = 9_137.0, 50.3
    t = np.arange(int(3.0 * fs)) / fs
    rng = np.random.default_rng(5)
    cur, volt = {}, {}
    for k, ph in enumerate("abc"):
        th = 2 * np.pi * f0 * t - 2 * np.pi * k / 3
        volt[f"v{ph}"] = 325.0 * np.sin(th) + rng.normal(0, 0.2, t.size)
        cur[f"i{ph}"] = 20 * np.sin(th - 0.3) + 4 * np.sin(5 * th) + rng.normal(0, 0.05, t.size)
    cap = Capture.from_arrays(fs, currents=cur, voltages=volt)
    offered = []
    real = _compiled.window_stats
    monkeypatch.setattr(_compiled, "window_stats", lambda: offered.append(1) or real())
    fast = analyze(cap, nominal_hz=50)
    assert offered  # the C statistics were used for `fast`
    monkeypatch.setattr(_compiled, "window_stats", lambda: None)
    slow = analyze(cap, nominal_hz=50)
    assert fast.windows.n_windows == slow.windows.n_windows > 10
    for name in ("rms", "dc", "peak", "p_w", "v_ll_rms", "i_n_rms", "component"):
        a, b = np.asarray(getattr(fast.windows, name)), np.asarray(getattr(slow.windows, name))
        assert np.nanmax(np.abs(a - b)) <= 1e-9 * np.nanmax(np.abs(b)), name


@needs_native
@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 20_000), start=st.floats(-3.0, 50.0), length=st.floats(0.5, 700.0),
       f=st.floats(-0.2, 0.2), seed=st.integers(0, 2**31 - 1))
def test_native_cycle_sums_equal_numpy(n, start, length, f, seed):
    # reference: the NumPy definition (_cycle_sums_numpy of x times the phasor, a cumulative
    # sum read at fractional positions), edges also before the first and past the last sample
    from pqcheck.dsp import tracking

    rng = np.random.default_rng(seed)
    x = rng.normal(0, 100, size=n)
    edges = start + length * np.arange(max(2, int((n + 5 - start) / length) + 2))
    omega = 2 * np.pi * f
    fast = tracking._demodulated_sums(x, omega, edges, compiled=True)
    slow = tracking._demodulated_sums(x, omega, edges, compiled=False)
    assert fast.shape == slow.shape == (edges.size - 1,)
    scale = np.abs(x).sum() + 1.0
    np.testing.assert_allclose(fast, slow, rtol=0, atol=1e-13 * scale)


@needs_native
def test_native_cycle_sums_refuse_what_they_cannot_read():
    x = np.ones(100)
    fine, coarse = np.ones(64, complex), np.ones(1, complex)
    with pytest.raises(ValueError, match="do not cover"):
        _native.cycle_sums(x, fine, coarse, [0.0, 10.0])
    with pytest.raises(ValueError, match="decrease"):
        _native.cycle_sums(x, np.ones(128, complex), coarse, [10.0, 5.0])


@needs_native
def test_compiled_tracking_equals_numpy_tracking():
    # reference: the NumPy forms of both tracking passes (compiled=False); a drifting
    # fundamental with harmonics, noise and a few missing samples
    from pqcheck.dsp import tracking

    fs = 12_345.0
    t = np.arange(int(4.0 * fs)) / fs
    phase = 2 * np.pi * (49.6 * t + 0.05 * t**2)
    rng = np.random.default_rng(3)
    x = 325 * np.sin(phase) + 9 * np.sin(5 * phase) + rng.normal(0, 0.5, t.size)
    x[20_000:20_007] = np.nan
    fast = tracking.window_boundaries(x, fs, 50.0, 17.25, 10, offset=3, final=True,
                                      compiled=True)
    slow = tracking.window_boundaries(x, fs, 50.0, 17.25, 10, offset=3, final=True,
                                      compiled=False)
    assert fast.boundaries.size == slow.boundaries.size > 10
    np.testing.assert_allclose(fast.boundaries, slow.boundaries, rtol=0, atol=1e-9)
    np.testing.assert_allclose(fast.halves, slow.halves, rtol=0, atol=1e-9)
    assert fast.amplitude == pytest.approx(slow.amplitude, rel=1e-12)


@needs_native
@pytest.mark.parametrize("taps,cutoff", [(16, 0.31), (24, 0.45), (216, 0.495)])
def test_native_kaiser_sinc_equals_numpy(taps, cutoff):
    # reference: numpy.sinc and numpy.i0 (the NumPy form of the kernel's taps), offsets
    # including 0 (sinc 1) and the window's ends (square-root argument 0)
    half = taps // 2
    beta = 0.1102 * (spectrum.STOPBAND_DB - 8.7)
    u = np.concatenate([np.linspace(-half, half, 20_001), [0.0, -half, half, 1e-300]])
    fast = _native.kaiser_sinc(u, cutoff, beta, half)
    slow = spectrum._kaiser_sinc_numpy(u, cutoff, beta, half)
    np.testing.assert_allclose(fast, slow, rtol=1e-13, atol=2e-15)  # near the zeros of sinc
    assert fast[-4] == pytest.approx(2 * cutoff, rel=1e-15) == slow[-4]
