"""Capture inputs that are not plain files, odd containers, several files forming one capture,
and channel roles given for one quantity only.

Every special file is created by the test (a FIFO, an unnamed pipe) or is a standard Linux
device node; every capture is written by the test. Nothing may hang: each call is bounded by
the check that runs before any file is opened.
"""

from __future__ import annotations

import gzip
import os
import re
import stat
import sys

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import fourier_series

from pqcheck import CaptureFormatError, load_capture
from pqcheck.cli import main
from pqcheck.errors import InputError
from pqcheck.files.inputs import require_regular_file

FS = 10_000.0
N = 6000  # 0.6 s: three 10-cycle windows at 50 Hz

linux = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="Linux device nodes")


def _text(names=("ia", "va"), amps=(10.0, 325.0), n=N, f0=50.0):
    t = np.arange(n) / FS
    cols = [fourier_series(FS, f0, {1: (a / np.sqrt(2), 0.0), 5: (a * 0.02, 0.0)}, n / FS)
            for a in amps]
    return f"time,{','.join(names)}\n" + "".join(
        f"{ti:.9g}," + ",".join(f"{c[i]:.6g}" for c in cols) + "\n" for i, ti in enumerate(t))


# --------------------------------------------------------------------------- special files

@pytest.mark.parametrize("writer", [False, True])
def test_fifo_is_refused_without_blocking(tmp_path, writer):
    fifo = tmp_path / "live.csv"
    os.mkfifo(fifo)
    fd = os.open(fifo, os.O_RDWR | os.O_NONBLOCK) if writer else None  # a writer holds it open
    try:
        with pytest.raises(CaptureFormatError,
                           match=r"live\.csv: is a pipe \(FIFO or piped standard input\), not a "
                                 r"regular file; save the capture to a file first"):
            load_capture(fifo)
        res = CliRunner().invoke(main, ["analyze", str(fifo), "-q", "--no-cache"])
        assert res.exit_code == 2 and "is a pipe" in res.stderr
    finally:
        if fd is not None:
            os.close(fd)


def test_piped_standard_input_is_named_a_pipe(tmp_path):
    r, w = os.pipe()
    try:
        os.write(w, _text().encode()[:1000])
        path = f"/proc/self/fd/{r}" if os.path.exists("/proc/self/fd") else f"/dev/fd/{r}"
        with pytest.raises(InputError, match=r"is a pipe \(FIFO or piped standard input\)"):
            require_regular_file(path, what="capture")
    finally:
        os.close(r)
        os.close(w)


@linux
@pytest.mark.parametrize("dev", ["/dev/zero", "/dev/urandom", "/dev/null"])
def test_devices_are_refused(dev):
    if not os.path.exists(dev) or not stat.S_ISCHR(os.stat(dev).st_mode):
        pytest.skip(f"{dev} is not a character device here")
    with pytest.raises(CaptureFormatError,
                       match=rf"{re.escape(dev)}: is a device, not a regular file; give a saved "
                             r"capture file"):
        load_capture(dev)


def test_folder_is_named_a_folder(tmp_path):
    d = tmp_path / "run1.csv"
    d.mkdir()
    with pytest.raises(CaptureFormatError, match=r"run1\.csv: is a folder, not a capture file"):
        load_capture(d)


def test_size_bound(tmp_path):
    p = tmp_path / "big.csv"
    p.write_bytes(b"x" * 2048)
    with pytest.raises(InputError, match=r"big\.csv: the capture is 0\.0 GiB, more than the 0 "
                                         r"GiB pqcheck reads; split it"):
        require_regular_file(p, what="capture", max_bytes=1024)


def test_fifo_in_a_batch_folder_gives_an_error_row(tmp_path):
    folder = tmp_path / "runs"
    folder.mkdir()
    (folder / "good.csv").write_text(_text())
    os.mkfifo(folder / "stuck.csv")
    out = tmp_path / "res.csv"
    res = CliRunner().invoke(main, ["batch", str(folder), "--limits", "ieee519-2022",
                                    "--isc", "20000", "--il", "100", "--voltage-level", "400",
                                    "--no-cache", "-q", "-j", "1", "--csv", str(out)])
    assert res.exit_code in (0, 1, 3), res.output
    text = out.read_text()
    assert "good.csv" in text and "stuck.csv" in text and "is a pipe" in text


# --------------------------------------------------------------------------- containers

def test_gzip_inside_gzip(tmp_path):
    p = tmp_path / "twice.csv"
    p.write_bytes(gzip.compress(gzip.compress(_text().encode())))
    with pytest.raises(CaptureFormatError,
                       match=r"twice\.csv: the file is gzip-compressed twice .*decompress it "
                             r"once \(gunzip\)"):
        load_capture(p)


def test_gzip_of_utf16_text_is_read(tmp_path):
    text = _text()
    p = tmp_path / "w16.csv"
    p.write_bytes(gzip.compress(b"\xff\xfe" + text.encode("utf-16-le")))
    cap = load_capture(p)
    ref = np.array([float(line.split(",")[1]) for line in text.splitlines()[1:]])
    np.testing.assert_array_equal(cap.samples[0], ref)
    assert cap.provenance.settings["compression"] == "gzip"
    assert cap.provenance.settings["encoding"] == "utf-16"


# --------------------------------------------------------------------------- roles

def test_current_alone_keeps_the_recognised_voltage(tmp_path):
    p = tmp_path / "iv.csv"
    p.write_text(_text(names=("load", "va")))
    cap = load_capture(p, current=["load"])
    roles = {c.name: c.quantity for c in cap.channels}
    assert roles == {"load": "current", "va": "voltage"}
    # naming both sets every role
    cap = load_capture(p, current=["load"], voltage=[])
    assert {c.name: c.quantity for c in cap.channels} == {"load": "current", "va": "other"}


@pytest.mark.parametrize(("name", "phase"), [
    ("Channel 1", ""), ("Channel 2", ""), ("CH3", ""), ("ia_3", "a"), ("ib_2", "b"),
    ("Line current L2", "b"), ("Voltage R", "a"), ("Strom Phase T", "c"), ("U L3", "c"),
    ("ia", "a"), ("v_b", "b"), ("IL3", "c"), ("U1", "a"), ("vab", "a"), ("in", "n"),
    ("Temperature", ""), ("Status", ""),
])
def test_phase_guessed_only_on_strong_evidence(name, phase):
    from pqcheck.capture import guess_role_evidence

    _, ph, why = guess_role_evidence(name)
    assert ph == phase
    if phase:
        assert repr(name) in why or "phase letter" in why


# --------------------------------------------------------------------------- several files

def test_several_files_form_one_capture(tmp_path):
    a = tmp_path / "i.csv"
    b = tmp_path / "v.csv"
    a.write_text(_text(names=("ia",), amps=(10.0,)))
    b.write_text(_text(names=("va",), amps=(325.0,)))
    cap = load_capture([a, b])
    assert cap.names == ("ia", "va")
    np.testing.assert_array_equal(cap.samples[0], load_capture(a).samples[0])
    np.testing.assert_array_equal(cap.samples[1], load_capture(b).samples[0])
    assert cap.provenance.reader == "combined"
    assert [f["source"] for f in cap.provenance.settings["files"]] == [str(a), str(b)]
    res = CliRunner().invoke(main, ["analyze", str(a), "--add-file", str(b), "-q", "--no-cache"])
    assert res.exit_code == 0, res.output
    assert "ia" in res.stdout and "va" in res.stdout


def test_files_with_different_time_bases_are_refused(tmp_path):
    a = tmp_path / "i.csv"
    b = tmp_path / "v.csv"
    a.write_text(_text(names=("ia",), amps=(10.0,)))
    b.write_text(_text(names=("va",), amps=(325.0,), n=N - 10))
    with pytest.raises(CaptureFormatError,
                       match=r"v\.csv: 5990 samples against 6000 in .*i\.csv; files combined "
                             r"into one capture need the same time base"):
        load_capture([a, b])
    b.write_text(_text(names=("ia",), amps=(325.0,)))
    with pytest.raises(CaptureFormatError,
                       match=r"v\.csv: ia: channel 'ia' is also in an earlier file"):
        load_capture([a, b])


# --------------------------------------------------------------------------- analysis words

def test_record_without_a_mains_component_names_the_real_problem(tmp_path):
    # 0.21 s of noise (no mains component), longer than one 0.2 s window at 60 Hz
    t = np.arange(int(0.21 * FS)) / FS
    rng = np.random.default_rng(1)
    p = tmp_path / "nomains.csv"
    p.write_text("time,va\n" + "".join(f"{a:.9g},{rng.normal():.6g}\n" for a in t))
    res = CliRunner().invoke(main, ["analyze", str(p), "-q", "--no-cache",
                                    "--nominal-frequency", "60"])
    assert res.exit_code == 2
    assert "capture a longer record" not in res.stderr
    assert re.search(r"nomains\.csv: (reference|--reference): no 12-cycle window fits in the "
                     r"0\.21 s record: the reference channel 'va' has no clear mains "
                     r"fundamental near 60 Hz", res.stderr), res.stderr


def test_voltage_only_analysis_says_nothing_about_phase_currents(tmp_path):
    p = tmp_path / "v3.csv"
    t = np.arange(N) / FS
    cols = [325 * np.sin(2 * np.pi * 50 * t - k * 2 * np.pi / 3) for k in range(3)]
    p.write_text("time,va,vb,vc\n" + "".join(
        f"{ti:.9g},{cols[0][i]:.6g},{cols[1][i]:.6g},{cols[2][i]:.6g}\n"
        for i, ti in enumerate(t)))
    res = CliRunner().invoke(main, ["analyze", str(p), "-q", "--no-cache"])
    assert res.exit_code == 0, res.output
    assert "sum to zero" not in res.stdout


def test_no_runtime_warning_reaches_stderr(tmp_path, monkeypatch):
    import warnings

    import pqcheck.run.check as check

    real = check.analyze

    def noisy(*args, **kwargs):
        # numpy warns like this on 0/0 and on an empty mean; the command must stay quiet
        np.float64(0.0) / np.float64(0.0)
        warnings.warn("Mean of empty slice", RuntimeWarning, stacklevel=1)
        return real(*args, **kwargs)

    monkeypatch.setattr(check, "analyze", noisy)
    p = tmp_path / "silent.csv"
    t = np.arange(N) / FS
    p.write_text("time,ia,va\n" + "".join(
        f"{ti:.9g},0,{325 * np.sin(2 * np.pi * 50 * ti):.6g}\n" for ti in t))
    def show(message, category, filename, lineno, file=None, line=None):
        # Python's default: the warning and its source line on (the command's) stderr
        sys.stderr.write(warnings.formatwarning(message, category, filename, lineno, line))

    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = show
        res = CliRunner().invoke(main, ["analyze", str(p), "-q", "--no-cache"])
    assert res.exit_code == 0, res.output
    assert "RuntimeWarning" not in res.stderr and "Mean of empty slice" not in res.stderr


def test_files_with_different_rates_or_starts_are_refused(tmp_path):
    a = tmp_path / "i.csv"
    b = tmp_path / "v.csv"
    a.write_text(_text(names=("ia",), amps=(10.0,)))
    b.write_text("Sample interval: 50 us\nva\n" + "".join(
        f"{x:.6g}\n" for x in fourier_series(20_000.0, 50.0, {1: (230.0, 0.0)}, N / 20_000.0)))
    with pytest.raises(CaptureFormatError,
                       match=r"v\.csv: sample_rate_hz: sample rate 20000 Hz differs from 10000 "
                             r"Hz in .*i\.csv; files combined into one capture need the same "
                             r"time base"):
        load_capture([a, b])
    b.write_text("Sample interval: 100 us\nStart: 0.5\nva\n" + "".join(
        f"{x:.6g}\n" for x in fourier_series(FS, 50.0, {1: (230.0, 0.0)}, N / FS)))
    with pytest.raises(CaptureFormatError,
                       match=r"v\.csv: first sample at 0\.5 s against 0 s in .*i\.csv"):
        load_capture([a, b])


def test_unknown_encoding_name_for_a_cfg(tmp_path):
    from pqcheck.readers.comtrade import read_comtrade

    cfg = tmp_path / "r.cfg"
    cfg.write_text("S,D,1999\n1,1A,0D\n1,IA,A,,A,1,0,0,-32767,32767,1,1,P\n50\n1\n1000,2\n"
                   "01/01/2024,00:00:00.000\n01/01/2024,00:00:00.000\nASCII\n1\n")
    (tmp_path / "r.dat").write_text("1,0,5\n2,1000,6\n")
    with pytest.raises(CaptureFormatError,
                       match=r"r\.cfg: encoding: unknown text encoding 'klingon'; give a name "
                             r"such as utf-8, cp1251, gbk or latin-1"):
        read_comtrade(cfg, encoding="klingon")


def test_socket_is_refused(tmp_path):
    import socket

    path = tmp_path / "s.csv"
    srv = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    try:
        srv.bind(str(path))
        with pytest.raises(CaptureFormatError,
                           match=r"s\.csv: is a socket, not a regular file; give a saved "
                                 r"capture file"):
            load_capture(path)
    finally:
        srv.close()


def test_analyze_with_an_encoding_option(tmp_path):
    p = tmp_path / "cyr.csv"
    p.write_bytes(("Прибор: осциллограф\n" + _text(names=("Ток", "va"))).encode("cp1251"))
    res = CliRunner().invoke(main, ["analyze", str(p), "--encoding", "cp1251", "--current",
                                    "Ток", "-q", "--no-cache"])
    assert res.exit_code == 0, res.output
    assert "Ток" in res.stdout


def test_folder_as_a_plan_capture_says_it_is_a_folder(tmp_path):
    from pqcheck.errors import PlanError
    from pqcheck.run.plan import load_plan

    (tmp_path / "run-50.csv").mkdir()
    p = tmp_path / "plan.toml"
    p.write_text('title = "T"\n[site]\nnominal_voltage_v = 400\nisc_a = 3500\nil_a = 100\n'
                 '[[limits]]\ntable = "ieee519-2022"\n[[captures]]\nfile = "run-50.csv"\n')
    with pytest.raises(PlanError, match=r"plan\.toml:9: captures\[1\]\.file: 'run-50\.csv' is a "
                                         r"folder, not a file .*give the file inside it"):
        load_plan(p)


def test_fifo_as_the_side_car_of_an_npy_capture(tmp_path):
    p = tmp_path / "a.npy"
    np.save(p, np.zeros((100, 2)))
    os.mkfifo(tmp_path / "a.json")
    with pytest.raises(CaptureFormatError,
                       match=r"a\.json: is a pipe \(FIFO or piped standard input\), not a "
                             r"regular file; save the side-car JSON to a file first"):
        load_capture(p, sample_rate_hz=1000.0)


def test_gzip_of_nothing(tmp_path):
    p = tmp_path / "nothing.csv"
    p.write_bytes(gzip.compress(b""))
    with pytest.raises(CaptureFormatError,
                       match=r"nothing\.csv: the compressed file is empty; export the capture "
                             r"again"):
        load_capture(p)
