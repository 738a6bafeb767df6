"""Batch runs: rows equal single-capture `pqcheck check` results, errors become rows, resume,
Parquet/CSV agreement, and the same table from every executor.

The captures are synthesised here: three-phase Fourier series with a known fifth harmonic (CSV,
Parquet, .npy with its side-car), a COMTRADE pair written by the C37.111 writer of
test_comtrade.py, and files that are not captures. The reference for a batch row is what
``pqcheck check`` prints in JSON for the same capture and options (the brief of the batch:
one row per check, identical to the single-capture command).
"""

from __future__ import annotations

import functools
import hashlib
import json
import operator
import os
import re
import sys

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner
from conftest import write_without_observation
from test_comtrade import FS as CT_FS
from test_comtrade import analog_line, quantise, three_phase_record, write_comtrade

from pqcheck.cli import main
from pqcheck.cli._fields import cli_text
from pqcheck.readers.comtrade import read_comtrade
from pqcheck.record import AnalysisSettings, LimitSelection, RunSpec
from pqcheck.run import batch
from pqcheck.run.batch import (
    DaskExecutor,
    InlineExecutor,
    MissingExtraError,
    ProcessExecutor,
    capture_sha256,
    find_captures,
    read_results,
    run_batch,
)

FS = 10_000.0  # [Hz]
F0 = 50.0  # [Hz]
I1 = 16.0  # fundamental rms [A]
V1 = 230.0  # [V]
IL = 20.0  # [A]
LIMIT_ARGS = ["--limits", "ieee519-2022", "--voltage-level", "400", "--isc", "5000",
              "--il", str(IL)]
SELECTORS = {"voltage_level_v": 400.0, "isc_a": 5000.0, "il_a": IL}


@pytest.fixture(autouse=True, scope="module")
def _table_for_short_captures(tmp_path_factory):
    """IEEE 519 as bundled needs a week of data; these captures last a second or less, so the
    limit arithmetic is tested with the edited copy without an observation period."""
    path = write_without_observation(tmp_path_factory.mktemp("tables"), "ieee519-2022")
    LIMIT_ARGS[1] = str(path)
    yield


def three_phase(fifth: float, duration_s: float = 0.4) -> dict:
    """Columns of a balanced three-phase capture: sinusoidal voltages, currents with a fifth
    harmonic of ``fifth`` x the fundamental (negative sequence, as a six-pulse bridge makes)."""
    t = np.arange(int(round(duration_s * FS))) / FS
    cols = {"time [s]": t}
    for k, ph in enumerate("abc"):
        wt = 2 * np.pi * F0 * t - 2 * np.pi / 3 * k
        cols[f"v{ph} [V]"] = np.sqrt(2) * V1 * np.sin(wt)
        cols[f"i{ph} [A]"] = np.sqrt(2) * I1 * (np.sin(wt) + fifth * np.sin(5 * wt))
    return cols


def write_csv(path, cols):
    rows = np.column_stack(list(cols.values()))
    np.savetxt(path, rows, delimiter=",", header=",".join(cols), comments="", fmt="%.9g")


def write_comtrade_pair(folder, name="rec"):
    """Three currents and three voltages (test_comtrade.three_phase_record: 20 % fifth, 10 %
    seventh) at 4800 Hz, BINARY, 0.4 s."""
    _, phys = three_phase_record(n=int(0.4 * CT_FS), amp_a=20.0, amp_v=325.0)
    amps = [20.0] * 3 + [325.0] * 3
    a = [pk * 1.4 / 32767 for pk in amps]
    raw = np.array([quantise(phys[i], a[i], 0.0, "BINARY") for i in range(6)])
    names = [("IA", "A", "A"), ("IB", "B", "A"), ("IC", "C", "A"),
             ("VA", "A", "V"), ("VB", "B", "V"), ("VC", "C", "V")]
    analog = [analog_line(k + 1, nm, ph, uu, a[k]) for k, (nm, ph, uu) in enumerate(names)]
    return write_comtrade(folder, name, analog, raw, ft="BINARY")


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    """A folder of captures: pass (CSV), fail (Parquet), a .npy with side-car, a COMTRADE pair,
    a broken CSV, and files that are not captures."""
    d = tmp_path_factory.mktemp("fleet")
    write_csv(d / "a-pass.csv", three_phase(0.08))
    cols = three_phase(0.25)
    pq.write_table(pa.table({k: pa.array(v) for k, v in cols.items()}), d / "b-fail.parquet")
    sub = d / "site2"
    sub.mkdir()
    one = three_phase(0.04)
    names = ["va [V]", "ia [A]"]
    np.save(sub / "c.npy", np.column_stack([one[n] for n in names]))
    (sub / "c.json").write_text(json.dumps({"columns": names, "sample_rate_hz": FS}))
    write_comtrade_pair(sub)
    (d / "broken.csv").write_text("hello,world\n1,2\n")
    (d / "notes.txt").write_text("site visit notes\n")
    (d / "orphan.dat").write_bytes(b"\x00" * 16)
    (d / ".hidden.csv").write_text("x\n")
    return d


CAPTURES = ("a-pass.csv", "b-fail.parquet", "broken.csv", "site2/c.npy", "site2/rec.cfg")


def spec() -> RunSpec:
    return RunSpec(analysis=AnalysisSettings(max_order=50, il_a=IL),
                   limits=(LimitSelection(table=LIMIT_ARGS[1], **SELECTORS),))


def rows_by_capture(table: pa.Table) -> dict:
    out = {}
    for r in table.to_pylist():
        out.setdefault(os.path.basename(r["capture"]), []).append(r)
    return out


@pytest.fixture(scope="module")
def inline_table(fleet):
    return run_batch([fleet], spec(), executor=InlineExecutor(), use_cache=False).table


@pytest.fixture(scope="module")
def pool_table(fleet):
    return run_batch([fleet], spec(), executor=ProcessExecutor(2), use_cache=False).table


# --- finding captures -------------------------------------------------------------------


def test_find_captures_counts_a_comtrade_pair_once(fleet):
    found, ignored = find_captures([fleet], exclude=[fleet / "b-fail.parquet"])
    rel = sorted(os.path.relpath(p, fleet) for p in found)
    # .txt, hidden files and the excluded results file are not captures; rec.cfg + rec.dat once
    assert rel == ["a-pass.csv", "broken.csv", "site2/c.npy", "site2/rec.cfg"]
    assert [os.path.basename(p) for p in ignored] == ["orphan.dat"]
    # a pattern that names the .dat finds the record by its .cfg
    found, _ = find_captures([str(fleet / "site2" / "*.dat"), str(fleet / "site2" / "rec.cfg")])
    assert [os.path.basename(p) for p in found] == ["rec.cfg"]


def test_find_captures_errors(tmp_path):
    with pytest.raises(batch.InputError, match="no such file or folder"):
        find_captures([tmp_path / "nowhere"])
    with pytest.raises(batch.InputError, match="the pattern matches no file"):
        find_captures([str(tmp_path / "*.csv")])
    (tmp_path / "readme.txt").write_text("x")
    with pytest.raises(batch.InputError, match=r"no capture found \(looked for \.csv"):
        find_captures([tmp_path])


def test_comtrade_hash_is_over_cfg_then_dat(fleet):
    cfg = fleet / "site2" / "rec.cfg"
    both = cfg.read_bytes() + cfg.with_suffix(".dat").read_bytes()
    # reference: hashlib over the two files concatenated (the reader's documented provenance)
    assert capture_sha256(cfg) == hashlib.sha256(both).hexdigest()
    assert capture_sha256(cfg.with_suffix(".dat")) == hashlib.sha256(both).hexdigest()
    assert read_comtrade(cfg).provenance.sha256 == capture_sha256(cfg)
    csv = fleet / "a-pass.csv"
    assert capture_sha256(csv) == hashlib.sha256(csv.read_bytes()).hexdigest()


# --- rows equal `pqcheck check` -----------------------------------------------------------


def _check_json(path):
    res = CliRunner().invoke(main, ["check", str(path), *LIMIT_ARGS, "--no-cache", "-q",
                                    "--format", "json"])
    return res


def test_batch_rows_equal_check_results(fleet, tmp_path):
    out = tmp_path / "r.parquet"
    res = CliRunner().invoke(main, ["batch", str(fleet), *LIMIT_ARGS, "--no-cache", "-q",
                                    "--jobs", "1", "-o", str(out), "--format", "json"])
    assert res.exit_code == 1, res.output  # b-fail fails
    summary = json.loads(res.stdout)
    assert summary["run"]["found"] == len(CAPTURES)
    groups = rows_by_capture(read_results(out))
    assert sorted(groups) == sorted(os.path.basename(c) for c in CAPTURES)
    verdicts = {}
    for cap in CAPTURES:
        rows = groups[os.path.basename(cap)]
        ref = _check_json(fleet / cap)
        if cap == "broken.csv":
            assert ref.exit_code == 2
            [row] = rows
            assert row["verdict"] == row["capture_verdict"] == "error"
            # the batch records what `check` prints as its error (names the capture as found)
            # the table holds the library's words, the command line its options
            # (the field after the file name too: sample_rate_hz is --sample-rate)
            shown = cli_text(row["error"]).replace(": sample_rate_hz: ", ": --sample-rate: ")
            assert "pqcheck: error: " + shown in ref.stderr
            continue
        d = json.loads(ref.stdout)
        assert ref.exit_code == {"pass": 0, "fail": 1, "inconclusive": 3}[d["verdict"]]
        verdicts[cap] = d["verdict"]
        assert {r["capture_verdict"] for r in rows} == {d["verdict"]}
        assert {r["capture_sha256"] for r in rows} == {d["capture"]["sha256"]}
        assert len(rows) == len(d["checks"]) > 0
        for r, c in zip(rows, d["checks"]):  # same checks, same order, same numbers
            assert (r["table_id"], r["quantity"], r.get("order"), r["channel"], r["phase"],
                    r["statistic"], r["unit"], r["clause"], r["verdict"], r["verify"]) == \
                (c["table"], c["quantity"], c.get("order"), c["channel"], c["phase"],
                 c["statistic"], c["unit"], c["clause"], c["verdict"], c["verify"])
            assert (r["measured"], r["limit"], r["margin_percent"]) == \
                (c["measured"], c["limit"], c["margin_percent"])
            assert r["note"] == c.get("note", "")
        assert rows[0]["capture_notes"] == "; ".join(d["notes"])
    assert verdicts["a-pass.csv"] == "pass" and verdicts["b-fail.parquet"] == "fail"
    # an outside check of one row: I5 = 0.25 x 16 A = 4 A rms over IL = 20 A is 20 % of IL
    # (IEEE 519-2022 Table 2 basis, % of IL; closed form of the synthesised signal)
    i5 = [r for r in groups["b-fail.parquet"] if r["quantity"] == "harmonic"
          and r["order"] == 5 and r["channel"] == "ia"]
    assert i5 and i5[0]["measured"] == pytest.approx(20.0, rel=1e-3)
    # the summary counts captures by the verdicts `check` gives them, an error counted apart
    counts = summary["summary"]["verdicts"]
    assert counts["error"] == 1
    for v in ("pass", "fail", "inconclusive"):
        assert counts[v] == sum(1 for x in verdicts.values() if x == v)
    margins = [r["margin_percent"] for rows in groups.values() for r in rows
               if r["margin_percent"] is not None and r["verdict"] != "not applicable"]
    assert summary["summary"]["worst"][0]["margin_percent"] == min(margins)


def test_damaged_comtrade_records_become_error_rows(fleet, tmp_path, monkeypatch):
    cfg = write_comtrade_pair(tmp_path, "cut")
    dat = cfg.with_suffix(".dat")
    dat.write_bytes(dat.read_bytes()[:1000])  # truncated data file
    (tmp_path / "lone.cfg").write_bytes(cfg.read_bytes())  # no .dat beside it
    (tmp_path / "good.csv").write_bytes((fleet / "a-pass.csv").read_bytes())
    monkeypatch.chdir(tmp_path)
    run = run_batch(["."], spec(), use_cache=False)
    groups = rows_by_capture(run.table)
    assert run.checked == 3 and sorted(groups) == ["cut.cfg", "good.csv", "lone.cfg"]
    [cut], [lone] = groups["cut.cfg"], groups["lone.cfg"]
    # files named as the user sees them (relative to the folder given), never absolute
    assert cut["error"].startswith("cut.dat: the data file holds ")
    assert cut["capture_sha256"] == capture_sha256(cfg)
    assert lone["error"].startswith("lone.cfg: the data file lone.dat is missing")
    assert lone["capture_sha256"] is None
    assert {r["capture_verdict"] for r in groups["good.csv"]} == {"pass"}


def test_exit_code_counts_an_error_as_inconclusive(fleet, tmp_path):
    args = ["batch", str(fleet / "a-pass.csv"), *LIMIT_ARGS, "--no-cache", "-q", "-j", "1"]
    assert CliRunner().invoke(main, args).exit_code == 0  # one passing capture
    res = CliRunner().invoke(main, args + [str(fleet / "broken.csv")])
    assert res.exit_code == 3, res.output  # pass + error (no fail): inconclusive
    assert "Errors (each counts as inconclusive for the exit code)" in res.stdout
    assert re.search(r"broken\.csv: (--sample-rate|sample_rate_hz): no time base found", res.stdout)


# --- resume -------------------------------------------------------------------------------


def test_resume_skips_captures_already_in_the_output(fleet, tmp_path, monkeypatch):
    import pqcheck.run.check as pipeline

    calls = []
    real = pipeline.analyze_file

    def counting(path, **kw):
        calls.append(os.path.basename(path))
        return real(path, **kw)

    monkeypatch.setattr(pipeline, "analyze_file", counting)
    out = tmp_path / "r.parquet"
    first = run_batch([fleet], spec(), out=out, use_cache=False)
    assert first.checked == len(CAPTURES) and first.skipped == 0
    assert len(calls) == len(CAPTURES)
    table1 = read_results(out)

    calls.clear()
    again = run_batch([fleet], spec(), out=out, use_cache=False)
    assert calls == [] and again.checked == 0 and again.skipped == len(CAPTURES)
    assert read_results(out).equals(table1)
    assert again.table.equals(table1)

    calls.clear()
    retry = run_batch([fleet], spec(), out=out, retry_errors=True, use_cache=False)
    assert calls == ["broken.csv"] and retry.checked == 1
    assert read_results(out).equals(table1)

    # a new capture is the only work; a changed file is checked again and replaces its rows
    extra = tmp_path / "more"
    extra.mkdir()
    write_csv(extra / "d.csv", three_phase(0.10))
    calls.clear()
    run_batch([fleet, extra], spec(), out=out, use_cache=False)
    assert calls == ["d.csv"]
    n_d = len(rows_by_capture(read_results(out))["d.csv"])
    write_csv(extra / "d.csv", three_phase(0.30))
    calls.clear()
    run = run_batch([extra], spec(), out=out, use_cache=False)
    assert calls == ["d.csv"]
    groups = rows_by_capture(read_results(out))
    assert len(groups["d.csv"]) == n_d  # old rows replaced, not added to
    assert {r["capture_verdict"] for r in groups["d.csv"]} == {"fail"}
    assert set(rows_by_capture(run.table)) == {"d.csv"}  # the run reports its own inputs
    assert read_results(out).num_rows == table1.num_rows + n_d


def test_summary_names_the_inconclusive_capture_and_never_passes_a_clipped_one(tmp_path):
    # one clean capture and one whose phase-b current sits flat at +-80 % of its peak (a
    # digitiser's rails): the clipped one is inconclusive, named with its cause, and its
    # lowest-margin row (a clean phase that meets its limit) is never shown as "pass"
    write_csv(tmp_path / "clean.csv", three_phase(0.08))
    cols = three_phase(0.08)
    peak = float(np.max(cols["ib [A]"]))
    cols["ib [A]"] = np.clip(cols["ib [A]"], -0.8 * peak, 0.8 * peak)
    write_csv(tmp_path / "clipped.csv", cols)
    res = CliRunner().invoke(main, ["batch", str(tmp_path), *LIMIT_ARGS, "--no-cache", "-q",
                                    "-j", "1"])
    assert res.exit_code == 3, res.output
    out = res.stdout
    undecided = out.split("Inconclusive captures (1), by cause\n")[1].split("\n\n")[0]
    # the path may wrap onto the next line (its length depends on the temporary folder)
    assert undecided.lstrip().startswith("clipping (channel ib):")
    assert "clipped.csv" in undecided and "clean.csv" not in undecided
    assert "looks clipped" in undecided  # the finding's own message
    worst = out.split("Lowest margin of each capture")[1].split("\n\n")[0]
    row = next(line for line in worst.splitlines() if "clipped.csv" in line)
    assert "INCONCLUSIVE" in row.split() and "pass" in row.split()  # capture, then check
    clean = next(line for line in worst.splitlines() if "clean.csv" in line)
    assert clean.split()[1] == "pass"


@pytest.mark.parametrize("name", ["r.parquet", "r.csv"])
def test_output_made_with_other_settings_is_not_mixed(fleet, tmp_path, name):
    out = tmp_path / name  # -o writes CSV for a .csv name, Parquet otherwise
    args = ["batch", str(fleet / "a-pass.csv"), *LIMIT_ARGS, "--no-cache", "-q", "-j", "1",
            "-o", str(out)]
    assert CliRunner().invoke(main, args).exit_code == 0
    other = [a if a != str(IL) else "25" for a in args]
    res = CliRunner().invoke(main, other)
    assert res.exit_code == 2
    assert "holds results made with other limit tables, selectors or options" in res.stderr
    res = CliRunner().invoke(main, other + ["--force"])
    assert res.exit_code == 0 and "1 checked now, 0 already" in res.stdout
    head = out.read_bytes()[:4]
    assert (head == b"PAR1") == (name == "r.parquet")  # Parquet's magic number
    assert read_results(out).schema == batch.SCHEMA


def test_interrupted_batch_keeps_the_work_done(fleet, tmp_path, monkeypatch):
    import pqcheck.run.check as pipeline

    real = pipeline.analyze_file
    seen = []

    def interrupt_on_third(path, **kw):
        seen.append(path)
        if len(seen) == 3:
            raise KeyboardInterrupt
        return real(path, **kw)

    monkeypatch.setattr(pipeline, "analyze_file", interrupt_on_third)
    out = tmp_path / "r.parquet"
    with pytest.raises(KeyboardInterrupt):
        run_batch([fleet], spec(), out=out, use_cache=False)
    assert len(rows_by_capture(read_results(out))) == 2  # the two finished captures
    monkeypatch.setattr(pipeline, "analyze_file", real)
    rerun = run_batch([fleet], spec(), out=out, use_cache=False)
    assert rerun.skipped == 2 and rerun.checked == len(CAPTURES) - 2


# --- outputs ------------------------------------------------------------------------------


def test_parquet_and_csv_outputs_agree(fleet, tmp_path, inline_table):
    out, csv = tmp_path / "r.parquet", tmp_path / "r.csv"
    run = run_batch([fleet], spec(), out=out, csv=csv, use_cache=False)
    from_parquet, from_csv = read_results(out), read_results(csv)
    assert from_parquet.schema == from_csv.schema == batch.SCHEMA
    assert from_csv.equals(from_parquet)  # floats round-trip exactly through the CSV text
    assert from_parquet.equals(inline_table)
    assert run.rows_written == from_parquet.num_rows
    # no temporary files left next to the outputs
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.csv", "r.parquet"]


def test_results_file_that_is_not_one_is_refused(fleet, tmp_path):
    out = tmp_path / "r.parquet"
    pq.write_table(pa.table({"x": [1]}), out)
    with pytest.raises(batch.InputError, match="not a pqcheck batch results table"):
        run_batch([fleet / "a-pass.csv"], spec(), out=out, use_cache=False)


# --- executors ----------------------------------------------------------------------------


def test_process_pool_gives_the_same_table(inline_table, pool_table):
    assert pool_table.num_rows > 0
    assert pool_table.equals(inline_table)


def test_dead_worker_fails_only_its_item():
    # operator.call(partial(os._exit, 3)) ends the worker process as a crash would; twelve
    # items so that some are still queued (four per worker) when the pool breaks
    items = [functools.partial(abs, -k) for k in range(12)]
    items[5] = functools.partial(os._exit, 3)
    with ProcessExecutor(2) as ex:
        got = dict(ex.imap_unordered(operator.call, items,
                                     on_crash=lambda item, msg: f"crashed: {msg}"))
    assert sorted(got) == list(range(12))
    assert got[5].startswith("crashed: the worker process died")
    assert all(got[k] == k for k in range(12) if k != 5)


def test_local_dask_cluster_gives_the_same_table(fleet, pool_table):
    pytest.importorskip("distributed")
    table = run_batch([fleet], spec(), executor=DaskExecutor(workers=2), use_cache=False).table
    assert table.equals(pool_table)


def test_dask_missing_gives_an_install_hint(fleet, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as when not installed
    with pytest.raises(MissingExtraError, match=r"pip install 'pqcheck\[cluster\]'"):
        DaskExecutor(workers=1)
    res = CliRunner().invoke(main, ["batch", str(fleet / "a-pass.csv"), *LIMIT_ARGS,
                                    "--workers", "1"])
    assert res.exit_code == 2
    assert "pip install 'pqcheck[cluster]'" in res.stderr


@pytest.mark.parametrize("extra, match", [
    (["--jobs", "2", "--workers", "2"], "--jobs sets local worker processes"),
    (["--scheduler", "tcp://127.0.0.1:1", "--workers", "2"], "give --scheduler or --workers"),
    (["-o", "r.csv", "--csv", "s.csv"], "-o names a CSV file and --csv another"),
    (["--out", "r.parquet", "--csv", "./r.parquet"], "-o and --csv name the same file"),
])
def test_usage_errors(fleet, extra, match):
    res = CliRunner().invoke(main, ["batch", str(fleet), *LIMIT_ARGS, *extra])
    assert res.exit_code == 2
    assert match in res.stderr


def test_batch_takes_the_limit_options_of_check():
    from pqcheck.cli.batch_cmd import batch_cmd
    from pqcheck.cli.check import check_cmd

    batch_names = {p.name for p in batch_cmd.params}
    from pqcheck.cli.survey_cmd import SURVEY_OPTION_NAMES

    # the interval-log options of check concern surveys, which batch does not take; its
    # terminal presentation (all_checks) neither
    check_names = {p.name for p in check_cmd.params} - {"capture", "all_checks",
                                                         *SURVEY_OPTION_NAMES}
    assert check_names <= batch_names  # every option of check, so selectors never drift


# --- every row carries its run specification --------------------------------------------------


def test_every_row_carries_the_schema_version_and_its_run_spec(fleet, tmp_path):
    import jsonschema

    from pqcheck.results import SCHEMA_VERSION, batch_row_spec, results_schema
    from pqcheck.run.check import check_capture

    csv = tmp_path / "r.csv"
    run_batch([fleet], spec(), csv=csv, use_cache=False)
    rows = read_results(csv).to_pylist()  # through the CSV text: the JSON column survives it
    schema = results_schema()
    spec_schema = {"$defs": schema["$defs"], "$ref": "#/$defs/run_spec"}
    # one validator for every row (jsonschema.validate checks the schema itself each call)
    kind = jsonschema.validators.validator_for(spec_schema)
    kind.check_schema(spec_schema)
    validator = kind(spec_schema)
    by_capture = {}
    for r in rows:
        assert r["schema_version"] == SCHEMA_VERSION
        validator.validate(json.loads(r["run_spec"]))
        s = batch_row_spec(r)
        # the row's spec is the batch's, for this capture (opened by its absolute path)
        assert s.reader.path == os.path.abspath(r["capture"])
        assert s.with_capture("") == spec().with_capture("")
        by_capture.setdefault(r["capture"], []).append(r)
    assert {os.path.relpath(c, fleet) for c in by_capture} == set(CAPTURES)
    broken = [r for c, rs in by_capture.items() if c.endswith("broken.csv") for r in rs]
    assert broken[0]["verdict"] == "error" and batch_row_spec(broken[0]).reader.path
    # one row checked again on its own, from its run_spec alone: the same number and verdict
    [row] = [r for r in by_capture[str(fleet / "b-fail.parquet")]
             if r["quantity"] == "harmonic" and r["order"] == 5 and r["channel"] == "ia"]
    again = check_capture(batch_row_spec(row))
    [c] = [c for c in again.assessment.checks
           if c.quantity == "harmonic" and c.order == 5 and c.channel == "ia"]
    assert (c.measured, c.verdict) == (row["measured"], row["verdict"])
    assert again.result.sha256 == row["capture_sha256"]


def test_a_row_of_another_schema_version_is_refused():
    from pqcheck.errors import InputError
    from pqcheck.results import SCHEMA_VERSION as V
    from pqcheck.results import batch_row_spec

    with pytest.raises(InputError, match=rf"^row\.schema_version: a batch row of results schema "
                                         rf"version 0; this pqcheck reads version {V}"):
        batch_row_spec({"schema_version": 0, "run_spec": "{}"})
    with pytest.raises(InputError, match=r"^row\.run_spec: run_spec is not JSON"):
        batch_row_spec({"schema_version": V, "run_spec": "{"})
    with pytest.raises(InputError, match=r"^row\.run_spec: the results record no run "
                                         r"specification"):
        batch_row_spec({"schema_version": V, "run_spec": None})


def test_results_of_an_older_pqcheck_are_not_resumed(fleet, tmp_path):
    out = tmp_path / "r.parquet"
    run_batch([fleet / "a-pass.csv"], spec(), out=out, use_cache=False)
    old = pq.read_table(out).drop_columns(["schema_version", "run_spec"])
    pq.write_table(old, out)
    with pytest.raises(batch.InputError, match=r"batch results of an older pqcheck \(no "
                                               r"schema_version and run_spec columns\)"):
        run_batch([fleet / "a-pass.csv"], spec(), out=out, use_cache=False)
