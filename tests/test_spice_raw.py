"""SPICE3 raw waveform files: ASCII, binary (all float64) and the binary variant with a UTF-16
header (time float64, values float32), each written by the test in the layout the Berkeley
SPICE3 raw format defines (header lines, ``Variables:``, ``Values:`` / ``Binary:``).

References: the values the test wrote (decimal text read back with ``float``; binary numbers
as numpy stores them); the resampled case against the analytic waveform.
"""

from __future__ import annotations

import numpy as np
import pytest

from pqcheck import CaptureFormatError, load_capture

VARS = [("time", "time"), ("V(out)", "voltage"), ("I(R1)", "device_current")]


def _header(n, plot="Transient Analysis", flags="real", variables=VARS):
    lines = ["Title: * bench rectifier", "Date: Mon Jan  1 00:00:00 2024", f"Plotname: {plot}",
             f"Flags: {flags}", f"No. Variables: {len(variables)}", f"No. Points: {n}",
             "Variables:"]
    lines += [f"\t{k}\t{name}\t{typ}" for k, (name, typ) in enumerate(variables)]
    return "\n".join(lines) + "\n"


def _signals(t):
    return np.vstack([t, 325 * np.sin(2 * np.pi * 50 * t), 10 * np.sin(2 * np.pi * 50 * t - 0.3)])


def write_ascii(path, t):
    v = _signals(t)
    body = ["Values:"]
    for i in range(t.size):
        body.append(f" {i}\t{float(v[0, i])!r}")
        body += [f"\t{float(v[k, i])!r}" for k in range(1, v.shape[0])]
    path.write_text(_header(t.size) + "\n".join(body) + "\n")
    return v


def write_binary(path, t, *, utf16=False):
    v = _signals(t)
    if utf16:
        head = (_header(t.size, flags="real forward") + "Binary:\n").encode("utf-16-le")
        rec = np.dtype([("t", "<f8"), ("v", "<f4", (v.shape[0] - 1,))])
        arr = np.zeros(t.size, dtype=rec)
        arr["t"] = t
        arr["t"][1::7] *= -1  # the sign bit some simulators set as a marker
        arr["v"] = v[1:].T
        path.write_bytes(head + arr.tobytes())
        out = v.copy()
        out[1:] = v[1:].astype(np.float32)
        return out
    head = (_header(t.size) + "Binary:\n").encode("ascii")
    path.write_bytes(head + np.ascontiguousarray(v.T, dtype="<f8").tobytes())
    return v


FS = 20_000.0


@pytest.mark.parametrize("kind", ["ascii", "binary", "binary-utf16"])
def test_uniform_transient_is_read_exactly(tmp_path, kind):
    t = np.arange(1200) / FS
    p = tmp_path / "run.raw"
    ref = write_ascii(p, t) if kind == "ascii" else write_binary(p, t, utf16=kind != "binary")
    cap = load_capture(p)
    assert cap.names == ("V(out)", "I(R1)")
    assert [c.quantity for c in cap.channels] == ["voltage", "current"]
    assert cap.fs_hz == pytest.approx(FS, rel=1e-9)
    np.testing.assert_array_equal(cap.samples, ref[1:])
    assert not cap.findings
    assert cap.provenance.reader == "spice-raw"


@pytest.mark.parametrize("kind", ["ascii", "binary-utf16"])
def test_variable_step_is_resampled_with_a_finding(tmp_path, kind):
    rng = np.random.default_rng(5)
    t = np.concatenate(([0.0], np.cumsum(rng.uniform(2e-6, 30e-6, 6000))))
    p = tmp_path / "var.raw"
    if kind == "ascii":
        write_ascii(p, t)
    else:
        write_binary(p, t, utf16=True)
    cap = load_capture(p)
    f = [f for f in cap.findings if f.code == "resampled"]
    assert f and "variable-step record" in f[0].message
    grid = cap.t0_s + np.arange(cap.n_samples) / cap.fs_hz
    # cubic spline of a 50 Hz sine sampled at <= 30 us: error well under 1e-6 of the peak
    # (spline error bound ~ h^4 w^4 / 384, textbook)
    np.testing.assert_allclose(cap.samples[0], 325 * np.sin(2 * np.pi * 50 * grid),
                               atol=325 * 2e-6)


def test_ac_analysis_is_refused(tmp_path):
    p = tmp_path / "ac.raw"
    p.write_text(_header(2, plot="AC Analysis", flags="complex") + "Values:\n 0\t1,0\n\t1,0\n")
    with pytest.raises(CaptureFormatError,
                       match=r"ac\.raw:3: Plotname: the analysis is 'AC Analysis', not a "
                             r"transient analysis"):
        load_capture(p)


def test_cut_short_binary_is_refused(tmp_path):
    p = tmp_path / "cut.raw"
    write_binary(p, np.arange(100) / FS)
    p.write_bytes(p.read_bytes()[:-100])
    with pytest.raises(CaptureFormatError,
                       match=r"cut\.raw: No\. Points: the binary data hold \d+ bytes, fewer "
                             r"than the 100 points of 3 variables"):
        load_capture(p)


def test_cut_short_ascii_is_refused(tmp_path):
    p = tmp_path / "cut.raw"
    write_ascii(p, np.arange(100) / FS)
    p.write_text("\n".join(p.read_text().splitlines()[:-30]) + "\n")
    with pytest.raises(CaptureFormatError,
                       match=r"cut\.raw: No\. Points: the values section holds \d+ numbers, "
                             r"fewer than the 100 points"):
        load_capture(p)


@pytest.mark.parametrize(("edit", "match"), [
    (lambda h: h.replace("No. Points: 50", "No. Points: many"),
     r"bad\.raw:6: No\. Points: the header needs 'No\. Points: <number>'"),
    (lambda h: h.replace("No. Variables: 3", "No. Variables: 4"),
     r"bad\.raw:5: Variables: 'No\. Variables' is 4 but 3 variables are listed"),
    (lambda h: h.replace("\t0\ttime\ttime", "\t0\tfreq\tfrequency"),
     r"bad\.raw:8: Variables: the first variable is 'freq', not time"),
    (lambda h: h.replace("Flags: real", "Flags: complex").replace(
        "Transient Analysis", "Transient Analysis"),
     r"bad\.raw:4: Flags: complex values \(an AC analysis\) are not a waveform"),
    (lambda h: h.replace("Values:", "Vals:"),
     r"bad\.raw: the header has no 'Values:' or 'Binary:' line"),
    (lambda h: h.replace(" 7\t", " 9\t", 1),
     r"bad\.raw: Values: point 7 is numbered 9; the values section is out of step"),
    (lambda h: h.replace(" 3\t", " 3\tx", 1),
     r"bad\.raw: Values: value 'x.*' is not a number"),
])
def test_malformed_raw_files_are_refused_with_the_field(tmp_path, edit, match):
    p = tmp_path / "bad.raw"
    write_ascii(p, np.arange(50) / FS)
    p.write_text(edit(p.read_text()))
    with pytest.raises(CaptureFormatError, match=match):
        load_capture(p)


def test_time_that_does_not_increase_is_refused(tmp_path):
    p = tmp_path / "back.raw"
    t = np.arange(50) / FS
    t[20] = t[18]
    write_binary(p, t)
    with pytest.raises(CaptureFormatError,
                       match=r"back\.raw: time: time does not increase at point 20"):
        load_capture(p)
