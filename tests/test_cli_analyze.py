"""`pqcheck analyze` and `pqcheck inspect` through click's test runner.

The JSON keys are the ones issue 2 documents (item 6); the numbers are checked against the
closed forms the files were written from.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import fourier_series

from pqcheck.cli import main

FS, F0 = 10_000.0, 50.0


def _write(path, columns: dict, *, delim=",", decimal=".", time_unit="s", fs=FS):
    n = len(next(iter(columns.values())))
    t = np.arange(n) / fs
    scale = {"s": 1.0, "ms": 1e3, "us": 1e6}[time_unit]
    names = [f"t [{time_unit}]"] + list(columns)
    rows = [delim.join(names)]
    cols = [t * scale] + [np.asarray(c) for c in columns.values()]
    for vals in zip(*cols):
        line = delim.join(f"{v:.9g}" for v in vals)
        rows.append(line.replace(".", ",") if decimal == "," else line)
    path.write_text("\n".join(rows) + "\n")
    return path


def _invoke(*args):
    result = CliRunner().invoke(main, [str(a) for a in args])
    return result


@pytest.fixture
def single_phase_csv(tmp_path):
    # v: 230 V sinusoid; i: 10 A at -30 deg with a 20 % fifth
    v = fourier_series(FS, F0, {1: (230.0, 0.0)}, 1.0)
    i = fourier_series(FS, F0, {1: (10.0, -30.0), 5: (2.0, 45.0)}, 1.0)
    return _write(tmp_path / "single.csv", {"v_a [V]": v, "i_a [A]": i}, delim=";",
                  decimal=",", time_unit="ms")


def test_analyze_json_has_the_documented_keys(single_phase_csv):
    result = _invoke("analyze", single_phase_csv, "--format", "json")
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    # issue 2, item 6: fundamental_hz, channels, power, findings
    assert doc["fundamental_hz"] == pytest.approx(50.0, abs=0.01)
    chans = {c["name"]: c for c in doc["channels"]}
    assert set(chans) == {"v_a", "i_a"}
    for c in doc["channels"]:
        assert {"name", "quantity", "phase", "rms", "thd_percent", "harmonics"} <= set(c)
        assert c["quantity"] in ("current", "voltage")
        assert [h["order"] for h in c["harmonics"]] == list(range(1, 51))
        assert all({"order", "rms", "phase_deg"} <= set(h) for h in c["harmonics"])
    i = chans["i_a"]
    assert i["quantity"] == "current" and chans["v_a"]["quantity"] == "voltage"
    # THD of a fundamental with a 20 % fifth is 20 % (IEEE 519 definition); rms sqrt(10^2+2^2);
    # printed to 9 significant digits in the file
    assert i["thd_percent"] == pytest.approx(20.0, rel=1e-6)
    assert i["rms"] == pytest.approx(np.hypot(10.0, 2.0), rel=1e-6)
    h5 = i["harmonics"][4]
    assert h5["order"] == 5 and h5["rms"] == pytest.approx(2.0, rel=1e-6)
    # phase of the fifth relative to the voltage fundamental (cosine basis): 45 deg generated
    # on a waveform whose fundamental is at -30 deg relative to v, the reference channel
    assert h5["phase_deg"] == pytest.approx(45.0, abs=1e-3)
    assert i["harmonics"][0]["phase_deg"] == pytest.approx(-30.0, abs=1e-3)

    power = doc["power"]
    ph = power["phases"][0]
    assert {"p_w", "s_va", "pf", "dpf"} <= set(ph)
    assert {"p_w", "se_va", "pf"} <= set(power["total"])
    # sinusoidal voltage: P = V I1 cos(phi), S = V I, DPF = cos(phi),
    # PF = DPF / sqrt(1 + THD^2) (IEEE 1459-2010 clause 3.1, from memory)
    p = 230.0 * 10.0 * np.cos(np.radians(30.0))
    assert ph["p_w"] == pytest.approx(p, rel=1e-6)
    assert ph["s_va"] == pytest.approx(230.0 * np.hypot(10.0, 2.0), rel=1e-6)
    assert ph["dpf"] == pytest.approx(np.cos(np.radians(30.0)), rel=1e-6)
    assert ph["pf"] == pytest.approx(np.cos(np.radians(30.0)) / np.sqrt(1 + 0.2**2), rel=1e-6)
    assert power["total"]["p_w"] == pytest.approx(p, rel=1e-6)
    assert power["total"]["pf"] == pytest.approx(ph["pf"], rel=1e-9)

    assert isinstance(doc["findings"], list)
    for f in doc["findings"]:
        assert {"severity", "message"} <= set(f)
        assert f["severity"] in ("info", "warning", "error")


def test_analyze_json_unresolved_orders_are_null(tmp_path):
    # 4 kHz resolves orders up to 32 (h f0 <= fs / 2.5); above, JSON carries null, not a number,
    # and a low-sample-rate finding of severity error explains why
    fs = 4_000.0
    i = fourier_series(fs, F0, {1: (10.0, 0.0), 7: (1.0, 0.0)}, 1.0)
    path = _write(tmp_path / "slow.csv", {"i [A]": i}, fs=fs)
    result = _invoke("analyze", path, "--format", "json")
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    harmonics = doc["channels"][0]["harmonics"]
    assert all(h["rms"] is None for h in harmonics if h["order"] > 32)
    assert all(h["rms"] is not None for h in harmonics if h["order"] <= 32)
    assert harmonics[6]["rms"] == pytest.approx(1.0, rel=1e-6)
    codes = {f["code"]: f for f in doc["findings"]}
    assert codes["low-sample-rate"]["severity"] == "error"
    assert doc["power"] is None  # no voltage given


def test_analyze_three_phase_json_total(tmp_path):
    # Balanced set with a zero-sequence third harmonic current: the neutral carries 3 I3, so the
    # 4-wire effective apparent power Se = 3 Ve Ie with Ie = sqrt((3 I^2 + In^2) / 3)
    # (IEEE 1459-2010 clause 3.2, from memory) exceeds the arithmetic sum 3 V I.
    cols = {}
    for p, shift in zip("abc", (0.0, -120.0, 120.0)):
        cols[f"v{p} [V]"] = fourier_series(FS, F0, {1: (230.0, shift)}, 1.0)
        cols[f"i{p} [A]"] = fourier_series(FS, F0, {1: (10.0, shift - 20.0),
                                                    3: (3.0, 3 * shift)}, 1.0)
    path = _write(tmp_path / "three.csv", cols)
    result = _invoke("analyze", path, "--format", "json", "--nominal-frequency", "50")
    assert result.exit_code == 0, result.output
    total = json.loads(result.stdout)["power"]["total"]
    i_rms = np.hypot(10.0, 3.0)
    ie = np.sqrt((3 * i_rms**2 + 9.0**2) / 3)
    se = 3 * 230.0 * ie
    p = 3 * 230.0 * 10.0 * np.cos(np.radians(20.0))
    assert total["se_va"] == pytest.approx(se, rel=1e-6)
    assert total["p_w"] == pytest.approx(p, rel=1e-6)
    assert total["pf"] == pytest.approx(p / se, rel=1e-6)
    assert total["se_va"] > 1.05 * 3 * 230.0 * i_rms


def test_analyze_table_is_the_default(single_phase_csv):
    result = _invoke("analyze", single_phase_csv)
    assert result.exit_code == 0, result.output
    assert "i_a" in result.stdout and "v_a" in result.stdout
    assert "THD" in result.stdout


def test_bad_cell_exits_2_with_file_and_line(tmp_path):
    rows = ["t,i"] + [f"{k / FS:.6g},{np.sin(k / 10):.6g}" for k in range(3000)]
    rows[41] = "0.004,x1"  # line 42 of the file
    path = tmp_path / "broken.csv"
    path.write_text("\n".join(rows) + "\n")
    result = _invoke("analyze", path, "--format", "json")
    assert result.exit_code == 2
    assert result.stdout == ""
    # errors go to stderr as file:line: field: problem (issue 2, items 2 and 6)
    assert "broken.csv:42: i: cell 'x1' is not a number" in result.stderr


def test_missing_file_exits_2(tmp_path):
    result = _invoke("analyze", tmp_path / "absent.csv")
    assert result.exit_code == 2
    assert "absent.csv: file not found" in result.stderr


def test_inspect_lists_columns_and_guessed_roles(single_phase_csv):
    result = _invoke("inspect", single_phase_csv)
    assert result.exit_code == 0, result.output
    out = result.stdout
    lines = {ln.split()[0]: ln for ln in out.splitlines() if ln.strip()}
    assert "voltage" in lines["v_a"]
    assert "current" in lines["i_a"]
    assert "10000 Hz" in out  # sample rate from the ms time column
    assert "--current i_a --voltage v_a" in out  # how to confirm the guessed roles
    assert "semicolon" in out and "','" in out  # detected dialect shown to the user


def test_a_plan_or_a_report_given_to_analyze_names_the_right_command(tmp_path):
    plan = tmp_path / "plan.toml"
    plan.write_text('schema = 1\n[[captures]]\nfile = "x.csv"\n', encoding="utf-8")
    res = CliRunner().invoke(main, ["analyze", str(plan)])
    assert res.exit_code == 2
    assert "a TOML file is not a capture: for a test plan use `pqcheck report" in res.output
    pdf = tmp_path / "r.pdf"
    pdf.write_bytes(b"%PDF-1.4\n")
    res = CliRunner().invoke(main, ["analyze", str(pdf)])
    assert res.exit_code == 2 and "pqcheck verify" in res.output
