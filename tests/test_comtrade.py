"""COMTRADE reader tests.

Files are written here by a small writer that follows the layout of IEEE Std C37.111-1999 and
-2013 (configuration file: station line, channel counts, analogue and digital channel lines, line
frequency, nrates and 'samp,endsamp' lines, start and trigger time, file type, timemult, 2013 time
code and time-quality lines; data file: one record per sample, sample number and timestamp then
the analogue values and the 16-bit status words, little-endian in the binary types). Expected
values are numpy evaluations of the same sinusoids; tolerances are the quantisation step a/2.
"""

from __future__ import annotations

import hashlib
import struct

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pqcheck.errors import CaptureFormatError
from pqcheck.readers.comtrade import read_comtrade

FS = 4800.0
F1 = 50.0


# --------------------------------------------------------------------------- writer


def analog_line(
    n,
    ch_id,
    ph,
    uu,
    a,
    b=0.0,
    *,
    skew=0,
    vmin=-32767,
    vmax=32767,
    primary=1.0,
    secondary=1.0,
    ps="P",
    ccbm="",
    rev="1999",
):
    """One analogue channel line (C37.111-1999 clause on the configuration file)."""
    fields = [n, ch_id, ph, ccbm, uu, repr(a), repr(b), skew, vmin, vmax]
    if rev != "1991":
        fields += [primary, secondary, ps]
    return ",".join(str(f) for f in fields)


def write_comtrade(
    folder,
    name,
    analog,
    raw,
    *,
    rev="1999",
    ft="ASCII",
    rates=None,
    digital=None,
    stamps=None,
    timemult=None,
    line_hz=F1,
    start=None,
    extras=True,
    cfg_text=None,
    dat_bytes=None,
    stem_case=("cfg", "dat"),
):
    """Write ``name.cfg`` and ``name.dat``; return the .cfg path.

    ``analog`` are analogue channel lines, ``raw`` the stored values (n_analog, n),
    ``digital`` status values (n_digital, n) of 0/1, ``rates`` the ((samp, endsamp), ...) list
    (``()`` for nrates = 0), ``stamps`` the .dat timestamps (default: microseconds from the rates).
    """
    raw = np.atleast_2d(np.asarray(raw))
    n = raw.shape[1]
    digital = np.zeros((0, n), dtype=int) if digital is None else np.atleast_2d(digital)
    n_a, n_d = len(analog), digital.shape[0]
    if rates is None:
        rates = ((FS, n),)
    if stamps is None:
        stamps = np.rint(np.arange(n) / (rates[0][0] if rates else FS) * 1e6).astype(np.int64)
    start = start or "01/02/2024,10:00:00.000000"
    if cfg_text is None:
        lines = [f"Station 1,REC-7,{rev}" if rev != "1991" else "Station 1,REC-7"]
        lines.append(f"{n_a + n_d},{n_a}A,{n_d}D")
        lines += analog
        lines += [f"{k + 1},DIG{k + 1},,,0" for k in range(n_d)]
        lines.append(f"{line_hz}")
        lines.append(f"{len(rates)}")
        lines += [f"{samp:g},{end}" for samp, end in rates]
        if not rates:
            lines.append(f"0,{n}")
        lines += [start, "01/02/2024,10:00:00.020000", ft]
        if rev != "1991":
            lines.append("1" if timemult is None else f"{timemult}")
        if rev == "2013" and extras:
            lines += ["+1h,+1h", "A,0"]
        cfg_text = "\r\n".join(lines) + "\r\n"
    if dat_bytes is None:
        dat_bytes = encode_dat(raw, digital, stamps, ft)
    cfg_path = folder / f"{name}.{stem_case[0]}"
    cfg_path.write_bytes(cfg_text.encode("latin-1"))
    (folder / f"{name}.{stem_case[1]}").write_bytes(dat_bytes)
    return cfg_path


def encode_dat(raw, digital, stamps, ft):
    """Data file per C37.111: ASCII lines or little-endian binary records."""
    n = raw.shape[1]
    if ft == "ASCII":
        rows = []
        for i in range(n):
            vals = [str(int(stamps[i]))] + [_ascii_value(v) for v in raw[:, i]]
            vals += [str(int(d)) for d in digital[:, i]]
            rows.append(f"{i + 1}," + ",".join(vals))
        return ("\r\n".join(rows) + "\r\n").encode("ascii")
    code = {"BINARY": "h", "BINARY32": "i", "FLOAT32": "f"}[ft]
    n_words = (digital.shape[0] + 15) // 16
    out = bytearray()
    for i in range(n):
        words = [0] * n_words
        for k, bit in enumerate(digital[:, i]):
            words[k // 16] |= int(bit) << (k % 16)
        values = [float(v) if code == "f" else int(v) for v in raw[:, i]]
        fmt = f"<II{raw.shape[0]}{code}{n_words}H"
        out += struct.pack(fmt, i + 1, int(stamps[i]) & 0xFFFFFFFF, *values, *words)
    return bytes(out)


def _ascii_value(v):
    if isinstance(v, str):
        return v
    return str(int(v)) if float(v).is_integer() else repr(float(v))


def waveform(t, amp, phase=0.0):
    """Fundamental with a 20 % fifth and a 10 % seventh harmonic (known reference)."""
    w = 2 * np.pi * F1
    return amp * (
        np.sin(w * t + phase)
        + 0.2 * np.sin(5 * (w * t + phase) + 0.3)
        + 0.1 * np.sin(7 * (w * t + phase) - 0.7)
    )


def three_phase_record(n=960, amp_a=100.0, amp_v=11_000.0):
    """Physical values [A], [V] for three currents and three voltages at FS."""
    t = np.arange(n) / FS
    shifts = (0.0, -2 * np.pi / 3, 2 * np.pi / 3)
    currents = [waveform(t, amp_a, s) for s in shifts]
    voltages = [waveform(t, amp_v, s) for s in shifts]
    return t, np.array(currents + voltages)


def quantise(values, a, b, ft):
    """Stored numbers x with a*x + b ~ value (inverse of the C37.111 scaling)."""
    x = (values - b) / a
    if ft == "FLOAT32":
        return x.astype(np.float32)
    return np.rint(x).astype(np.int64)


# --------------------------------------------------------------------------- round trips


@pytest.mark.parametrize("rev", ["1999", "2013"])
@pytest.mark.parametrize("ft", ["ASCII", "BINARY", "BINARY32", "FLOAT32"])
def test_round_trip_all_types(tmp_path, rev, ft):
    t, phys = three_phase_record()
    # a chosen so int16 full scale covers 1.4x the peak; BINARY32 gets a finer step.
    amps = [100.0] * 3 + [11_000.0] * 3
    a = [pk * 1.4 / (32767 if ft != "BINARY32" else 2**31 - 1) for pk in amps]
    if ft == "FLOAT32":
        a = [1.0] * 6
    b = [0.5, -0.25, 0.0, 3.0, 0.0, -7.0]
    raw = np.array([quantise(phys[i], a[i], b[i], ft) for i in range(6)])
    names = [
        ("IA", "A", "A"),
        ("IB", "B", "A"),
        ("IC", "C", "A"),
        ("VA", "A", "V"),
        ("VB", "B", "V"),
        ("VC", "C", "V"),
    ]
    analog = [
        analog_line(k + 1, nm, ph, uu, a[k], b[k], rev=rev) for k, (nm, ph, uu) in enumerate(names)
    ]
    digital = (np.arange(2 * raw.shape[1]).reshape(2, -1) // 7) % 2
    cfg = write_comtrade(tmp_path, "rec", analog, raw, rev=rev, ft=ft, digital=digital)

    cap = read_comtrade(cfg)

    assert cap.fs_hz == FS  # the .cfg samp field
    assert cap.names == ("IA", "IB", "IC", "VA", "VB", "VC")
    assert [c.quantity for c in cap.channels] == ["current"] * 3 + ["voltage"] * 3
    assert [c.phase for c in cap.channels] == ["a", "b", "c"] * 2
    assert [c.unit for c in cap.channels] == ["A"] * 3 + ["V"] * 3
    for i in range(6):
        # reference: numpy sinusoids; tolerance: half a quantisation step a/2 (float32: its
        # relative precision 2**-24 of the peak)
        tol = a[i] / 2 * (1 + 1e-9) if ft != "FLOAT32" else 1.4 * amps[i] * 2**-23
        np.testing.assert_allclose(cap.samples[i], phys[i], rtol=0, atol=tol)
    assert cap.findings == ()
    prov = cap.provenance
    assert prov.reader == "comtrade" and prov.source == str(cfg)
    # the documented hash: SHA-256 over the .cfg bytes followed by the .dat bytes
    both = cfg.read_bytes() + cfg.with_suffix(".dat").read_bytes()
    assert prov.sha256 == hashlib.sha256(both).hexdigest()
    assert prov.settings["revision"] == rev and prov.settings["file_type"] == ft
    assert prov.settings["rates"] == [[FS, raw.shape[1]]]
    assert prov.settings["n_digital"] == 2
    assert prov.settings["digital_channels"] == ["DIG1", "DIG2"]
    if rev == "2013":
        assert prov.settings["time_code"] == "+1h" and prov.settings["leapsec"] == "0"


def test_scaling_a_x_plus_b_exact(tmp_path):
    # value = a*x + b (C37.111 analogue channel conversion); exact in binary floating point
    raw = np.array([[0, 1, -1, 100, -32767]])
    cfg = write_comtrade(tmp_path, "s", [analog_line(1, "I", "", "A", 0.5, 2.0)], raw, ft="BINARY")
    cap = read_comtrade(cfg)
    np.testing.assert_array_equal(cap.samples[0], [2.0, 2.5, 1.5, 52.0, -16381.5])


@pytest.mark.parametrize(
    ("ps", "use_primary", "factor"),
    [("S", True, 200.0), ("S", False, 1.0), ("P", True, 1.0), ("P", False, 5.0 / 1000.0)],
)
def test_primary_secondary_conversion(tmp_path, ps, use_primary, factor):
    # CT ratio 1000/5: primary = secondary * 1000/5 (C37.111 primary and secondary fields)
    raw = np.array([[10, -20, 30]])
    line = analog_line(1, "IA", "A", "A", 0.25, 0.0, primary=1000, secondary=5, ps=ps)
    cfg = write_comtrade(tmp_path, "ps", [line], raw)
    cap = read_comtrade(cfg, use_primary=use_primary)
    np.testing.assert_allclose(cap.samples[0], 0.25 * raw[0] * factor, rtol=1e-15)
    assert cap.provenance.settings["values"] == ("primary" if use_primary else "secondary")


def test_units_to_si(tmp_path):
    # SI prefixes: k = 1e3, m = 1e-3 (ISO 80000-1)
    raw = np.array([[1, 2], [3, 4], [5, 6], [7, 8]])
    lines = [
        analog_line(1, "I1", "A", "kA", 1.0),
        analog_line(2, "I2", "B", "mA", 1.0),
        analog_line(3, "V1", "A", "kV", 1.0),
        analog_line(4, "F", "", "Hz", 1.0),
    ]
    cap = read_comtrade(write_comtrade(tmp_path, "u", lines, raw))
    np.testing.assert_allclose(cap.samples[0], [1e3, 2e3])
    np.testing.assert_allclose(cap.samples[1], [3e-3, 4e-3])
    np.testing.assert_allclose(cap.samples[2], [5e3, 6e3])
    np.testing.assert_allclose(cap.samples[3], [7, 8])  # unknown unit: kept as recorded
    assert [(c.quantity, c.unit) for c in cap.channels] == [
        ("current", "A"),
        ("current", "A"),
        ("voltage", "V"),
        ("other", ""),
    ]


@pytest.mark.parametrize(
    ("ph", "expected"),
    [
        (("R", "S", "T"), "abc"),
        (("L1", "L2", "L3"), "abc"),
        (("1", "2", "3"), "abc"),
        (("a", "b", "N"), "abn"),
        (("", "", ""), "abc"),
    ],
)
def test_phase_from_ph_field_or_name(tmp_path, ph, expected):
    names = ("I_L1", "I_L2", "I_L3")  # used only when ph is blank (name fallback)
    lines = [analog_line(k + 1, names[k], ph[k], "A", 1.0) for k in range(3)]
    cap = read_comtrade(write_comtrade(tmp_path, "ph", lines, np.zeros((3, 4))))
    assert "".join(c.phase for c in cap.channels) == expected


def test_blank_and_duplicate_names_made_unique(tmp_path):
    lines = [
        analog_line(1, "", "", "A", 1.0),
        analog_line(2, "I", "", "A", 1.0),
        analog_line(3, "I", "", "A", 1.0),
    ]
    cap = read_comtrade(write_comtrade(tmp_path, "n", lines, np.zeros((3, 2))))
    assert cap.names == ("A1", "I", "I [A3]")


def test_dat_path_and_case_insensitive_sibling(tmp_path):
    raw = np.array([[1, 2, 3]])
    cfg = write_comtrade(
        tmp_path, "Rec", [analog_line(1, "I", "", "A", 1.0)], raw, stem_case=("CFG", "dat")
    )
    by_cfg = read_comtrade(cfg)
    by_dat = read_comtrade(tmp_path / "Rec.dat")
    np.testing.assert_array_equal(by_cfg.samples, by_dat.samples)
    assert by_dat.provenance.source == str(cfg)


def test_1991_layout(tmp_path):
    # C37.111-1991: no rev_year, 10-field analogue lines, no PS flag, no timemult line
    raw = np.array([[4, 5]])
    cfg = write_comtrade(
        tmp_path,
        "old",
        [analog_line(1, "IA", "A", "A", 2.0, rev="1991")],
        raw,
        rev="1991",
        start="02/01/91,10:00:00.000",
    )
    cap = read_comtrade(cfg)
    np.testing.assert_array_equal(cap.samples[0], [8.0, 10.0])
    assert cap.provenance.settings["revision"] == "1991"
    assert cap.provenance.settings["start"] == "1991-02-01T10:00:00"  # 1991 dates: mm/dd/yy
    assert [f.code for f in cap.findings] == ["primary-secondary-unknown"]


# --------------------------------------------------------------------------- missing values


@pytest.mark.parametrize(
    ("ft", "code"), [("BINARY", -32768), ("BINARY32", -(2**31)), ("ASCII", 99999)]
)
def test_missing_value_code_becomes_nan(tmp_path, ft, code):
    # missing-value codes of C37.111-1999: 0x8000 (int16), 0x80000000 (int32), 99999 (ASCII)
    raw = np.array([[1, code, 3, code], [5, 6, 7, 8]])
    lines = [analog_line(1, "IA", "A", "A", 2.0, 1.0), analog_line(2, "IB", "B", "A", 1.0)]
    cap = read_comtrade(write_comtrade(tmp_path, "m", lines, raw, ft=ft))
    np.testing.assert_array_equal(cap.samples[0], [3.0, np.nan, 7.0, np.nan])
    np.testing.assert_array_equal(cap.samples[1], [5, 6, 7, 8])
    (f,) = cap.findings
    assert (f.code, f.severity, f.channels, f.value) == ("missing-values", "warning", ("IA",), 2)


def test_blank_ascii_field_is_missing(tmp_path):
    raw = np.array([[1, "", 3]], dtype=object)
    cap = read_comtrade(
        write_comtrade(tmp_path, "b", [analog_line(1, "I", "", "A", 1.0)], raw, rev="2013")
    )
    np.testing.assert_array_equal(cap.samples[0], [1.0, np.nan, 3.0])
    assert cap.findings[0].code == "missing-values"


# --------------------------------------------------------------------------- time base


def _two_rate_record(tmp_path, fast=4800.0, slow=1200.0, n_fast=480, n_slow=240, line_hz=F1):
    """Record at ``fast`` for n_fast samples then ``slow``; each sample 1/rate of its segment
    after the previous one (time base of the 'samp,endsamp' segments)."""
    t_fast = np.arange(n_fast) / fast
    t_slow = t_fast[-1] + np.arange(1, n_slow + 1) / slow
    t = np.concatenate([t_fast, t_slow])
    phys = waveform(t, 100.0)
    a = 100.0 * 1.4 / 2**31
    raw = quantise(phys, a, 0.0, "BINARY32")[np.newaxis]
    rates = ((fast, n_fast), (slow, n_fast + n_slow))
    cfg = write_comtrade(
        tmp_path,
        "multi",
        [analog_line(1, "IA", "A", "A", a)],
        raw,
        ft="BINARY32",
        rates=rates,
        line_hz=line_hz,
    )
    return cfg, a


def test_two_rate_segments_resampled_band_limited(tmp_path):
    cfg, a = _two_rate_record(tmp_path)
    cap = read_comtrade(cfg)
    assert cap.fs_hz == 4800.0  # the highest rate
    # grid: 480 fast samples, then 240 slow samples each 4 grid steps apart -> 479 + 960 + 1
    assert cap.n_samples == 1440
    t = np.arange(cap.n_samples) / 4800.0
    ref = waveform(t, 100.0)  # numpy reference
    # fast segment kept as recorded: within the quantisation step
    np.testing.assert_allclose(cap.samples[0, :480], ref[:480], rtol=0, atol=a)
    # slow segment (content up to the 7th, 350 Hz, below its 600 Hz Nyquist), including the
    # segment boundary: windowed-sinc interpolation (Kaiser beta 10, +-32 taps per input sample)
    # has passband ripple of order 1e-5, so 2e-5 of the 100 A peak away from the record's end
    np.testing.assert_allclose(cap.samples[0, 470:-160], ref[470:-160], rtol=0, atol=2e-3)
    # at the record's end the filter has no data beyond the last sample (edge effect, confined to
    # the last slow-rate intervals): within 2 % of the peak
    np.testing.assert_allclose(cap.samples[0, -160:], ref[-160:], rtol=0, atol=2.0)
    # the slow segment's recorded samples are kept unchanged
    np.testing.assert_allclose(cap.samples[0, 483::4], ref[483::4], rtol=0, atol=a)
    codes = {f.code: f for f in cap.findings}
    assert codes["resampled"].severity == "info" and codes["resampled"].value == 4800.0
    low = codes["low-rate-segment"]
    # 1200 Hz carries nothing at or above its Nyquist 600 Hz = order 12 of 50 Hz (sampling theorem)
    assert low.severity == "error" and low.orders == tuple(range(12, 51))


def test_missing_value_in_slow_segment_stays_missing(tmp_path):
    cfg, a = _two_rate_record(tmp_path)
    dat = cfg.with_suffix(".dat")
    data = bytearray(dat.read_bytes())
    rec = 4 + 4 + 4  # BINARY32 record: sample number, timestamp, one int32 value
    data[600 * rec + 8 : 600 * rec + 12] = struct.pack("<i", -(2**31))  # sample 601 (slow)
    dat.write_bytes(bytes(data))
    cap = read_comtrade(cfg)
    # sample 601 is slow sample 121, at grid index 479 + 4*121 = 963. Its filled value enters the
    # windowed-sinc interpolation, so grid points closer than 16 slow periods (64 grid steps) are
    # NaN: 900..1026 (the documented reach)
    nan = np.flatnonzero(np.isnan(cap.samples[0]))
    assert nan.tolist() == list(range(900, 1027))
    t = np.arange(cap.n_samples) / 4800.0
    ok = np.isfinite(cap.samples[0])
    ok[-160:] = False  # record-end edge effect, checked in the test above
    # beyond the reach the kernel tail of the filled value weighs about 1/(pi*16) of its fill
    # error (sinc envelope): within 0.1 % of the 100 A peak
    np.testing.assert_allclose(cap.samples[0, ok], waveform(t, 100.0)[ok], rtol=0, atol=0.1)
    assert {f.code for f in cap.findings} == {"missing-values", "resampled", "low-rate-segment"}


def test_rates_not_integer_related_use_spline(tmp_path):
    cfg, _ = _two_rate_record(tmp_path, fast=5000.0, slow=3000.0, n_fast=500, n_slow=300)
    cap = read_comtrade(cfg)
    assert cap.fs_hz == 5000.0
    t = np.arange(cap.n_samples) / 5000.0
    # cubic spline on 60 samples per fundamental period: error below 1 % of the peak for
    # content up to 350 Hz (spline error ~ (w*h)^4 / 384, textbook bound)
    np.testing.assert_allclose(cap.samples[0], waveform(t, 100.0), rtol=0, atol=1.0)
    assert "cubic spline" in cap.findings[0].message
    assert cap.findings[1].orders == tuple(range(30, 51))  # Nyquist 1500 Hz = order 30


def test_timestamps_only_uniform(tmp_path):
    # nrates = 0: the .dat timestamps (x timemult, microseconds) carry the time base
    n = 400
    stamps = np.arange(n) * 125  # 125 units x timemult 2 = 250 us -> 4000 Hz
    raw = np.arange(n)[np.newaxis]
    cfg = write_comtrade(
        tmp_path,
        "ts",
        [analog_line(1, "I", "", "A", 1.0)],
        raw,
        rates=(),
        stamps=stamps,
        timemult=2,
    )
    cap = read_comtrade(cfg)
    assert cap.fs_hz == pytest.approx(4000.0, rel=1e-12)
    assert cap.findings == ()


def test_timestamps_only_irregular_are_resampled(tmp_path):
    n = 401  # 400 steps: 200 of 200 us and 200 of 300 us, median 250 us
    t_us = np.cumsum(np.where(np.arange(n) % 2, 200, 300)) - 300  # alternating 300/200 us
    phys = waveform(t_us * 1e-6, 10.0)
    raw = quantise(phys, 1e-3, 0.0, "BINARY32")[np.newaxis]
    cfg = write_comtrade(
        tmp_path,
        "irr",
        [analog_line(1, "I", "", "A", 1e-3)],
        raw,
        rates=(),
        stamps=t_us,
        ft="BINARY32",
    )
    cap = read_comtrade(cfg)
    assert cap.fs_hz == pytest.approx(1 / 250e-6)  # 1 / median step
    assert [f.code for f in cap.findings] == ["resampled"]
    t = np.arange(cap.n_samples) / cap.fs_hz
    # spline on ~80 samples per period: within 1 % of the peak (cubic spline error bound)
    np.testing.assert_allclose(cap.samples[0], waveform(t, 10.0), rtol=0, atol=0.1)


def test_timestamp_gap_becomes_nan(tmp_path):
    # 250 us steps with one 2 ms hole (7 samples not recorded) after sample 100
    t_us = np.concatenate([np.arange(100) * 250, 99 * 250 + 2000 + np.arange(100) * 250])
    phys = waveform(t_us * 1e-6, 10.0)
    raw = quantise(phys, 1e-3, 0.0, "BINARY32")[np.newaxis]
    cfg = write_comtrade(
        tmp_path,
        "gap",
        [analog_line(1, "I", "", "A", 1e-3)],
        raw,
        rates=(),
        stamps=t_us,
        ft="BINARY32",
    )
    cap = read_comtrade(cfg)
    assert cap.fs_hz == pytest.approx(4000.0)  # 1 / median step of 250 us
    assert cap.n_samples == 207  # 0 .. 99*250 + 2000 + 99*250 us in 250 us steps
    # grid points inside the hole (100..106) are NaN; the recorded ones keep their values
    # (quantisation step 1e-3 A)
    assert np.flatnonzero(np.isnan(cap.samples[0])).tolist() == list(range(100, 107))
    t = np.arange(cap.n_samples) * 250e-6
    ok = np.isfinite(cap.samples[0])
    np.testing.assert_allclose(cap.samples[0, ok], waveform(t[ok], 10.0), rtol=0, atol=1e-3)
    assert [(f.code, f.severity) for f in cap.findings] == [
        ("resampled", "info"),
        ("time-gap", "warning"),
    ]


def test_nanosecond_time_base_2013(tmp_path):
    # 2013: nine decimals in the .cfg times -> .dat timestamps in nanoseconds
    n = 100
    stamps = np.arange(n) * 250_000  # 250 us in ns
    cfg = write_comtrade(
        tmp_path,
        "ns",
        [analog_line(1, "I", "", "A", 1.0, rev="2013")],
        np.zeros((1, n)),
        rev="2013",
        rates=(),
        stamps=stamps,
        start="01/02/2024,10:00:00.000000000",
    )
    assert read_comtrade(cfg).fs_hz == pytest.approx(4000.0)


# --------------------------------------------------------------------------- errors


def _valid_lines(n=3):
    return [
        "Station 1,REC-7,1999",
        "2,1A,1D",
        analog_line(1, "IA", "A", "A", 0.5, 0.0),
        "1,TRIP,,,0",
        "50",
        "1",
        f"4800,{n}",
        "01/02/2024,10:00:00.000000",
        "01/02/2024,10:00:00.020000",
        "ASCII",
        "1",
    ]


def _write_cfg(tmp_path, lines, dat=None, name="e"):
    raw = np.array([[1, 2, 3]])
    if dat is None:
        dat = encode_dat(raw, np.zeros((1, 3), dtype=int), np.arange(3) * 208, "ASCII")
    return write_comtrade(tmp_path, name, [], raw, cfg_text="\n".join(lines) + "\n", dat_bytes=dat)


def test_valid_error_fixture_reads(tmp_path):
    cap = read_comtrade(_write_cfg(tmp_path, _valid_lines()))
    np.testing.assert_array_equal(cap.samples[0], [0.5, 1.0, 1.5])


@pytest.mark.parametrize(
    ("line_no", "text", "match", "field"),
    [
        (1, "Station,REC,19x9", r"rev_year must be 1991, 1999 or 2013, got '19x9'", "rev_year"),
        (2, "3,1A,1D", r"bad channel count: TT = 3 but 1 analogue \+ 1 digital = 2", "TT"),
        (2, "2,1,1D", r"channel counts must read 'TT,##A,##D'", "TT,##A,##D"),
        (2, "1,0A,1D", r"no analogue channels", "##A"),
        (3, "1,IA,A,,A,x0.5,0,0,-1,1,1,1,P", r"a must be a number .*got 'x0.5'", "a"),
        (3, "1,IA,A,,A,0.5,zero,0,-1,1,1,1,P", r"b must be a number .*got 'zero'", "b"),
        (3, "1,IA,A,,A,inf,0,0,-1,1,1,1,P", r"a must be a number", "a"),
        (3, "1,IA,A,,A,0.5,0,0,-1,1,1,1,Q", r"PS must be 'P' .* or 'S' .*got 'Q'", "PS"),
        (3, "1,IA,A,,A,0.5,0,0,-1,1", r"analogue channel line has 10 fields, expected 13", "An"),
        (3, "one,IA,A,,A,0.5,0,0,-1,1,1,1,P", r"An must be a whole number, got 'one'", "An"),
        (4, "x,TRIP,,,0", r"Dn must be a whole number", "Dn"),
        (5, "fifty", r"lf must be the line frequency in Hz, got 'fifty'", "lf"),
        (6, "1.5", r"nrates must be a whole number, got '1.5'", "nrates"),
        (7, "4800", r"a sample-rate line must read 'samp,endsamp', got '4800'", "samp"),
        (7, "-4800,3", r"samp must not be negative", "samp"),
        (
            10,
            "BINARY16",
            r"unknown file type 'BINARY16'; expected ASCII, BINARY, BINARY32 or "
            r"FLOAT32",
            "ft",
        ),
        (11, "0", r"timemult must be positive, got '0'", "timemult"),
        (11, "fast", r"timemult must be the time multiplier, got 'fast'", "timemult"),
    ],
)
def test_cfg_errors_name_line_and_field(tmp_path, line_no, text, match, field):
    lines = _valid_lines()
    lines[line_no - 1] = text
    with pytest.raises(CaptureFormatError, match=match) as info:
        read_comtrade(_write_cfg(tmp_path, lines))
    assert info.value.line == line_no and info.value.field == field
    assert info.value.path.endswith("e.cfg")


def test_cfg_endsamp_must_increase(tmp_path):
    lines = _valid_lines()
    lines[5:7] = ["2", "4800,3", "1200,3"]
    with pytest.raises(CaptureFormatError, match=r"endsamp must increase .* got 3 after 3"):
        read_comtrade(_write_cfg(tmp_path, lines))


def test_cfg_mixed_zero_rates(tmp_path):
    lines = _valid_lines()
    lines[5:7] = ["2", "4800,2", "0,3"]
    with pytest.raises(CaptureFormatError, match=r"samp is 0 \(timestamps only\) on some"):
        read_comtrade(_write_cfg(tmp_path, lines))


def test_cfg_ends_early(tmp_path):
    with pytest.raises(
        CaptureFormatError, match=r"the file ends where the nrates line was expected"
    ):
        read_comtrade(_write_cfg(tmp_path, _valid_lines()[:5]))


def test_unusable_ratio(tmp_path):
    lines = _valid_lines()
    lines[2] = analog_line(1, "IA", "A", "A", 0.5, primary=1000, secondary=0, ps="S")
    with pytest.raises(
        CaptureFormatError,
        match=r"channel 'IA' holds secondary values but primary values were asked for, and its "
        r"ratio primary = 1000.0, secondary = 0.0 is unusable .*use_primary=False",
    ) as info:
        read_comtrade(_write_cfg(tmp_path, lines))
    assert (info.value.line, info.value.field) == (3, "secondary")


def test_missing_dat(tmp_path):
    cfg = _write_cfg(tmp_path, _valid_lines())
    cfg.with_suffix(".dat").unlink()
    with pytest.raises(
        CaptureFormatError,
        match=r"the data file e.dat is missing next to the "
        r"\.cfg; copy the \.dat",
    ):
        read_comtrade(cfg)


def test_missing_cfg(tmp_path):
    cfg = _write_cfg(tmp_path, _valid_lines())
    cfg.unlink()
    with pytest.raises(CaptureFormatError, match=r"the configuration file e.cfg is missing"):
        read_comtrade(tmp_path / "e.dat")


@pytest.mark.parametrize(
    ("name", "match"),
    [
        ("x.csv", r"read from its \.cfg or \.dat file, got extension '\.csv'"),
        ("x.cff", r"x\.cff: DAT: no '--- file type: DAT ---' part; a \.cff holds the CFG and DAT"),
        ("nothere.cfg", r"file not found"),
    ],
)
def test_bad_paths(tmp_path, name, match):
    (tmp_path / "x.csv").write_text("1,2\n")
    (tmp_path / "x.cff").write_text("--- file type: CFG ---\n")
    with pytest.raises(CaptureFormatError, match=match):
        read_comtrade(tmp_path / name)


def test_truncated_binary_record(tmp_path):
    raw = np.arange(20).reshape(2, 10)
    lines = [analog_line(1, "IA", "A", "A", 1.0), analog_line(2, "IB", "B", "A", 1.0)]
    cfg = write_comtrade(tmp_path, "t", lines, raw, ft="BINARY")
    dat = cfg.with_suffix(".dat")
    dat.write_bytes(dat.read_bytes()[: 6 * 12 + 5])  # records are 4 + 4 + 2*2 = 12 bytes
    with pytest.raises(
        CaptureFormatError, match=r"record 7 \(sample 7\) is truncated: 5 of 12 bytes"
    ) as info:
        read_comtrade(cfg)
    assert info.value.path == str(dat)


def test_short_binary_file(tmp_path):
    cfg = write_comtrade(
        tmp_path,
        "s",
        [analog_line(1, "IA", "A", "A", 1.0)],
        np.arange(10)[np.newaxis],
        ft="FLOAT32",
    )
    dat = cfg.with_suffix(".dat")
    dat.write_bytes(dat.read_bytes()[: 9 * 12])
    with pytest.raises(
        CaptureFormatError,
        match=r"the data file holds 9 records but the \.cfg declares 10 samples \(endsamp on "
        r"line 6\)",  # station, counts, one analogue, lf, nrates, then the samp line
    ):
        read_comtrade(cfg)


def test_ascii_short_record(tmp_path):
    dat = b"1,0,1,0\n2,208,2,0\n3,416\n"
    with pytest.raises(CaptureFormatError, match=r"the record has 2 fields, expected 4") as info:
        read_comtrade(_write_cfg(tmp_path, _valid_lines(), dat=dat))
    assert info.value.line == 3 and info.value.path.endswith("e.dat")


def test_ascii_non_numeric(tmp_path):
    dat = b"1,0,1,0\n2,208,x2,0\n3,416,3,0\n"
    with pytest.raises(
        CaptureFormatError,
        match=r"analogue channel 'IA' value 'x2' is not a "
        r"number",
    ) as info:
        read_comtrade(_write_cfg(tmp_path, _valid_lines(), dat=dat))
    assert info.value.line == 2


def test_extra_records_ignored_with_finding(tmp_path):
    dat = b"1,0,1,0\n2,208,2,0\n3,416,3,0\n4,624,4,0\n"
    cap = read_comtrade(_write_cfg(tmp_path, _valid_lines(), dat=dat))
    assert cap.n_samples == 3 and cap.findings[0].code == "extra-records"


def test_timestamps_must_increase(tmp_path):
    cfg = write_comtrade(
        tmp_path,
        "d",
        [analog_line(1, "I", "", "A", 1.0)],
        np.zeros((1, 4)),
        rates=(),
        stamps=np.array([0, 250, 250, 750]),
    )
    with pytest.raises(
        CaptureFormatError,
        match=r"timestamps must increase: sample 3 \(250\) "
        r"is not after sample 2 \(250\)",
    ):
        read_comtrade(cfg)


def test_missing_timestamp_when_required(tmp_path):
    cfg = write_comtrade(
        tmp_path,
        "d",
        [analog_line(1, "I", "", "A", 1.0)],
        np.zeros((1, 3)),
        rates=(),
        stamps=np.array([0, 0xFFFFFFFF, 500]),
        ft="BINARY",
    )
    with pytest.raises(
        CaptureFormatError,
        match=r"sample 2 has no timestamp, but the \.cfg "
        r"gives no sample rate",
    ):
        read_comtrade(cfg)


# --------------------------------------------------------------------------- fuzzing

_GARBAGE = st.text(alphabet=st.characters(codec="latin-1", exclude_characters="\x00"), max_size=40)


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(data=st.data())
def test_garbage_in_cfg_raises_only_capture_format_error(tmp_path, data):
    lines = _valid_lines()
    kind = data.draw(st.sampled_from(["line", "field", "drop", "whole"]))
    if kind == "line":
        lines[data.draw(st.integers(0, len(lines) - 1))] = data.draw(_GARBAGE)
    elif kind == "field":
        i = data.draw(st.integers(0, len(lines) - 1))
        parts = lines[i].split(",")
        parts[data.draw(st.integers(0, len(parts) - 1))] = data.draw(_GARBAGE)
        lines[i] = ",".join(parts)
    elif kind == "drop":
        del lines[data.draw(st.integers(0, len(lines) - 1))]
    else:
        lines = data.draw(st.lists(_GARBAGE, max_size=15))
    try:
        read_comtrade(_write_cfg(tmp_path, lines))
    except CaptureFormatError:
        pass


@settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(blob=st.binary(max_size=200), ft=st.sampled_from(["ASCII", "BINARY", "FLOAT32"]))
def test_garbage_dat_raises_only_capture_format_error(tmp_path, blob, ft):
    lines = _valid_lines()
    lines[-2] = ft
    try:
        cap = read_comtrade(_write_cfg(tmp_path, lines, dat=blob))
    except CaptureFormatError:
        return
    assert cap.n_samples == 3  # whatever the bytes, a returned capture has the declared length


def test_rate_ratio_guard(tmp_path):
    lines = _valid_lines()
    lines[5:7] = ["2", "4800000,2", "1,3"]
    with pytest.raises(
        CaptureFormatError,
        match=r"sample rates differ by more than a factor of "
        r"1000 \(1 and 4.8e\+06 Hz\)",
    ) as info:
        read_comtrade(_write_cfg(tmp_path, lines))
    assert (info.value.line, info.value.field) == (8, "samp")  # the last sample-rate line


def test_timestamp_span_guard(tmp_path):
    stamps = np.array([0, 250, 500, 750, 10**9])  # one 1000 s jump after 250 us steps
    cfg = write_comtrade(
        tmp_path,
        "g",
        [analog_line(1, "I", "", "A", 1.0)],
        np.zeros((1, 5)),
        rates=(),
        stamps=stamps,
    )
    with pytest.raises(
        CaptureFormatError,
        match=r"a uniform grid would need 4000001 samples "
        r"for 5 recorded",
    ):
        read_comtrade(cfg)


# --------------------------------------------------------------------------- legacy encodings

@pytest.mark.parametrize(("encoding", "names"), [
    ("cp1251", ["Ток фазы А", "Ток фазы В", "Напряжение"]),
    ("gbk", ["A相电流", "B相电流", "母线电压"]),
])
def test_cfg_in_a_legacy_8bit_encoding_is_detected(tmp_path, encoding, names):
    raw = np.array([[0, 100, -100, 50] * 10] * 3)
    lines = [analog_line(k + 1, f"NAME{k}", "", "A" if k < 2 else "V", 0.5)
             for k in range(3)]
    cfg = write_comtrade(tmp_path, "leg", lines, raw)
    # the names (and a station name in the same script, as a real file has) in that encoding
    text = cfg.read_bytes().decode("latin-1").replace(
        "Station 1", "Подстанция Северная" if encoding == "cp1251" else "变电站一号")
    for k, nm in enumerate(names):
        text = text.replace(f"NAME{k}", nm)
    cfg.write_bytes(text.encode(encoding))
    cap = read_comtrade(cfg)
    assert list(cap.names) == names
    np.testing.assert_array_equal(cap.samples[0], 0.5 * raw[0])
    # the encoding can also be given; a wrong one is refused naming the field
    assert list(read_comtrade(cfg, encoding=encoding).names) == names
    with pytest.raises(CaptureFormatError, match=r"leg\.cfg: encoding: the \.cfg is not valid "
                                                 r"utf-8 .*give its real encoding"):
        read_comtrade(cfg, encoding="utf-8")


# --------------------------------------------------------------------------- phase evidence

def test_vendor_code_in_every_phase_field_is_not_a_phase(tmp_path):
    raw = np.zeros((4, 20), dtype=int)
    names = ["Feeder 1 I", "Feeder 2 I", "Bus U L2", "Spare"]
    lines = [analog_line(k + 1, nm, "1", "A" if k < 2 else "V", 1.0)
             for k, nm in enumerate(names)]
    cap = read_comtrade(write_comtrade(tmp_path, "v", lines, raw))
    assert [c.phase for c in cap.channels] == ["", "", "b", ""]
    assert "is the same on every channel, so not used" in cap.channels[2].evidence


def test_distinct_phase_fields_are_trusted(tmp_path):
    raw = np.zeros((3, 20), dtype=int)
    lines = [analog_line(k + 1, f"I{k}", ph, "A", 1.0) for k, ph in enumerate("ABC")]
    cap = read_comtrade(write_comtrade(tmp_path, "p", lines, raw))
    assert [c.phase for c in cap.channels] == ["a", "b", "c"]
    assert cap.channels[1].evidence == "unit 'A'; phase field ph = 'B'"


# --------------------------------------------------------------------------- .cff

@pytest.mark.parametrize("ft", ["ASCII", "BINARY"])
def test_single_file_cff_equals_the_pair(tmp_path, ft):
    _, phys = three_phase_record(n=480)
    raw = np.rint(phys / 10.0).astype(int)
    lines = [analog_line(k + 1, n, "ABC"[k % 3], "A" if k < 3 else "V", 10.0)
             for k, n in enumerate(["IA", "IB", "IC", "VA", "VB", "VC"])]
    cfg = write_comtrade(tmp_path, "pair", lines, raw, rev="2013", ft=ft)
    pair = read_comtrade(cfg)
    cfg_bytes = cfg.read_bytes()
    dat = cfg.with_suffix(".dat").read_bytes()
    head = (f"--- file type: DAT {ft}: {len(dat)} ---" if ft == "BINARY"
            else "--- file type: DAT ASCII ---")
    cff = (b"--- file type: CFG ---\r\n" + cfg_bytes + b"--- file type: INF ---\r\n"
           + b"[Public Record_Information]\r\n--- file type: HDR ---\r\nbench test\r\n"
           + head.encode() + b"\r\n" + dat)
    p = tmp_path / "one.cff"
    p.write_bytes(cff)
    one = read_comtrade(p)
    assert one.names == pair.names and one.fs_hz == pair.fs_hz
    np.testing.assert_array_equal(one.samples, pair.samples)
    assert one.provenance.sha256 == hashlib.sha256(cff).hexdigest()
    assert one.provenance.settings["single_file"] is True


def test_cff_with_a_short_binary_part(tmp_path):
    raw = np.zeros((1, 10), dtype=int)
    cfg = write_comtrade(tmp_path, "s", [analog_line(1, "IA", "A", "A", 1.0)], raw,
                         rev="2013", ft="BINARY")
    dat = cfg.with_suffix(".dat").read_bytes()
    p = tmp_path / "short.cff"
    p.write_bytes(b"--- file type: CFG ---\n" + cfg.read_bytes()
                  + f"--- file type: DAT BINARY: {len(dat) + 40} ---\n".encode() + dat)
    with pytest.raises(CaptureFormatError, match=r"short\.cff: DAT: the DAT part declares \d+ "
                                                 r"bytes but the file holds \d+ after it"):
        read_comtrade(p)
