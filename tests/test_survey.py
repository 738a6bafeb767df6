"""Surveys: interval logs, IEC 61000-4-30 level derivation and IEEE 519 statistics per period.

References
----------
IEEE Std 519-2014 / -2022, clause 5 (standards-facts section 1, tagged [V] for the voltage
rule, [P] / [M] for the current multipliers): voltage, daily 99th percentile of 3 s values
<= 1.5 x Table 1 and weekly 95th percentile of 10 min values <= 1.0 x; current, daily 99th of
3 s <= 2.0 x Tables 2-4, weekly 99th of 10 min <= 1.5 x, weekly 95th of 10 min <= 1.0 x.
IEEE 519-2022 Table 2 (row 50 <= ISC/IL < 100): odd h 3-10 at 10 % of IL, TDD 12 %; Table 1
(<= 1 kV): individual voltage harmonic 5 %, THD 8 %.
IEC 61000-4-30:2015, 10 min values clock-aligned, aggregated as the RMS of the shorter
values (from memory).
"""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
from click.testing import CliRunner

from pqcheck.aggregate import percentile, statistic
from pqcheck.cli import main
from pqcheck.errors import CaptureFormatError
from pqcheck.limits import resolve
from pqcheck.readers.intervals import interval_frame, parse_column, read_interval_logs
from pqcheck.survey import (
    IntervalSeries,
    Survey,
    SurveyChannel,
    assess_survey,
    cut_periods,
    derive_level,
)

DAY = 86400.0
T0 = dt.datetime(2026, 3, 2, 0, 0, tzinfo=dt.timezone.utc).timestamp()
IL = 100.0
SEL = dict(voltage_level_v=480, isc_a=7000, il_a=IL)  # ISC/IL = 70: Table 2 row 50-100


def _series(start_s, n, interval_s, i_h, *, flagged=None, orders=50, level=None):
    """One current channel (phase a): I1 = IL, orders 2..orders at ``i_h[h]`` [A] (array
    (n,) or scalar), others 0.01 A."""
    harm = np.full((n, 1, orders + 1), 0.01)
    harm[:, 0, 0] = np.nan
    harm[:, 0, 1] = IL
    for h, v in i_h.items():
        harm[:, 0, h] = v
    return IntervalSeries(
        level=level or ("3s" if interval_s == 3 else "10min"), interval_s=interval_s,
        start_s=start_s + interval_s * np.arange(n), channels=(SurveyChannel("I_a", "current",
                                                                             "a", "A"),),
        harmonics=harm, thd_percent=np.full((n, 1), np.nan),
        tdd_percent=np.full((n, 1), np.nan), power_w=np.full((n, 1), np.nan),
        flagged=np.zeros(n, bool) if flagged is None else flagged,
        complete=np.ones(n, bool))


def _survey(*levels):
    return Survey(levels=tuple(levels), sources=("mem",), sha256=("0",), timezone="UTC")


def _checks(sa, label, statistic_text):
    return [c for c in sa.assessment.checks if c.label == label and
            c.statistic == statistic_text]


# --- percentiles --------------------------------------------------------------------------


@pytest.mark.parametrize("n", [1, 2, 7, 144, 1008])
@pytest.mark.parametrize("q", [0, 1, 50, 95, 99, 99.9, 100])
def test_percentile_matches_numpy_linear(n, q):
    # reference: numpy.percentile, method "linear" (Hyndman-Fan definition 7)
    rng = np.random.default_rng(n)
    x = rng.lognormal(size=(n, 3))
    np.testing.assert_allclose(percentile(x, q), np.percentile(x, q, axis=0, method="linear"),
                               rtol=1e-12)


def test_percentile_ignores_missing_values_as_nanpercentile():
    # reference: numpy.nanpercentile
    rng = np.random.default_rng(3)
    x = rng.normal(size=(500, 4))
    x[rng.random(x.shape) < 0.2] = np.nan
    np.testing.assert_allclose(statistic(x, "p95"), np.nanpercentile(x, 95, axis=0),
                               rtol=1e-12)
    assert np.isnan(percentile(np.full(5, np.nan), 99))


def test_percentile_by_hand():
    # r = 1 + (n - 1) q / 100 = 1 + 3 x 0.95 = 3.85: x(3) + 0.85 (x(4) - x(3)) = 3.85
    assert percentile([4.0, 1.0, 3.0, 2.0], 95) == pytest.approx(3.85)


# --- periods and levels -------------------------------------------------------------------


def test_periods_start_at_the_ten_minute_tick_before_the_first_interval():
    # a survey from 10:03:17 to 12:00 two days later: 24 h periods from 10:00 (the tick at
    # or before the start), and one more ending at the end (by hand)
    start = T0 + 10 * 3600 + 3 * 60 + 17
    bounds = cut_periods(start, T0 + 2 * DAY + 12 * 3600, DAY)
    assert [(a - T0) / 3600 for a, _ in bounds] == [10.0, 34.0, 36.0]
    assert all(b - a == DAY for a, b in bounds)
    assert cut_periods(start, start + DAY - 3600, DAY) == []  # shorter than a day


def test_ten_minute_values_are_rms_of_clock_aligned_three_second_values():
    # 3 s values from 10:03:18: the first 10 min interval (10:00-10:10) holds 402 s / 3 s =
    # 134 of its 200 values, so it is incomplete; the next holds exactly 200 values and its value is their
    # RMS, by hand sqrt(mean(x^2)).
    start = T0 + 10 * 3600 + 3 * 60 + 18
    n = 134 + 200 + 50
    x = 1.0 + 0.01 * np.arange(n)
    s3 = _series(start, n, 3.0, {5: x}, orders=5)
    s10 = derive_level(s3, "10min")
    assert [(t - T0) / 60 for t in s10.start_s] == [600.0, 610.0, 620.0]
    assert s10.complete.tolist() == [False, True, False]
    expect = np.sqrt(np.mean(x[134:334] ** 2))
    assert s10.harmonics[1, 0, 5] == pytest.approx(expect, rel=1e-12)


def test_flag_is_carried_into_the_ten_minute_value():
    flags = np.zeros(400, bool)
    flags[250] = True
    s10 = derive_level(_series(T0, 400, 3.0, {}, flagged=flags, orders=3), "10min")
    assert s10.flagged.tolist() == [False, True]


# --- IEEE 519 per period ------------------------------------------------------------------


def _limits():
    return resolve("ieee519-2022", **SEL)


def test_one_bad_day_fails_the_daily_percentile_and_is_named():
    # 3 s values over 3 days; on the second day 2 % of the values have I5 = 25 % of IL, above
    # 2.0 x 10 % (daily 99th percentile rule), the rest 5 %. Whole-survey 99th percentile is
    # below 20 %: only a per-day evaluation finds it.
    n_day = int(DAY / 3)
    i5 = np.full(3 * n_day, 5.0)
    bad = n_day + np.arange(0, n_day, 50)  # every 50th value of day 2: 2 %
    i5[bad] = 25.0
    assert np.percentile(i5, 99) < 20.0  # the single whole-capture percentile would pass
    sa = assess_survey(_survey(_series(T0, 3 * n_day, 3.0, {5: i5})), _limits(), il_a=IL)
    (c,) = _checks(sa, "I5", "daily 99th percentile of 3 s values")
    assert c.verdict == "fail"
    assert c.measured == pytest.approx(25.0)
    assert (c.period_start, c.period_end) == ("2026-03-02T00:00:00+00:00"[:19].replace(
        "03-02", "03-03") + "+00:00", "2026-03-04T00:00:00+00:00")
    assert sa.verdict == "fail"
    # the weekly statistics cannot be evaluated from 3 days: not assessed, named in the notes
    weekly = _checks(sa, "I5", "weekly 95th percentile of 10 min values")
    assert weekly[0].verdict == "inconclusive" and "not assessed" in weekly[0].note
    assert any("NOT ASSESSED" in n and "weekly" in n for n in sa.assessment.notes)


def test_week_where_the_95th_but_not_the_99th_percentile_exceeds():
    # 10 min values over 7 days: 8 % of them at I5 = 12 % of IL (above 1.0 x 10 %, below
    # 1.5 x 10 %), the rest at 5 %. 95th percentile = 12 % > 10 % fails; 99th = 12 % <= 15 %
    # passes.
    n = 1008
    i5 = np.full(n, 5.0)
    i5[::12] = 12.0  # 84 of 1008 = 8.3 %
    sa = assess_survey(_survey(_series(T0, n, 600.0, {5: i5})), _limits(), il_a=IL)
    (p95,) = _checks(sa, "I5", "weekly 95th percentile of 10 min values")
    (p99,) = _checks(sa, "I5", "weekly 99th percentile of 10 min values")
    assert p95.verdict == "fail" and p95.measured == pytest.approx(12.0)
    assert p99.verdict == "pass" and p99.limit == pytest.approx(15.0)
    assert (p95.period_start, p95.period_end) == ("2026-03-02T00:00:00+00:00",
                                                  "2026-03-09T00:00:00+00:00")
    # the daily 3 s statistic needs 3 s values, which a 10 min log does not hold
    daily = _checks(sa, "I5", "daily 99th percentile of 3 s values")
    assert daily[0].verdict == "inconclusive" and "3s values" in daily[0].note


def test_flagged_interval_is_left_out_of_the_statistic():
    # one 10 min value at 40 % of IL, flagged (a dip): left out, so the week passes; unflagged
    # it fails the 99th percentile (> 15 %) only if it is among the top 1 %: make 11 of them.
    n = 1008
    i5 = np.full(n, 5.0)
    i5[100:111] = 40.0
    flags = np.zeros(n, bool)
    flags[100:111] = True
    sa = assess_survey(_survey(_series(T0, n, 600.0, {5: i5}, flagged=flags)), _limits(),
                       il_a=IL)
    (p99,) = _checks(sa, "I5", "weekly 99th percentile of 10 min values")
    assert p99.verdict == "pass" and p99.measured == pytest.approx(5.0)
    (rule,) = [r for r in sa.rules if r["statistic"] == "weekly 99th percentile of 10 min "
               "values"]
    assert rule["periods"][0].flagged == 11 and rule["periods"][0].usable == n - 11
    sa2 = assess_survey(_survey(_series(T0, n, 600.0, {5: i5})), _limits(), il_a=IL)
    assert _checks(sa2, "I5", "weekly 99th percentile of 10 min values")[0].verdict == "fail"


def test_gap_makes_a_passing_period_inconclusive_not_a_pass():
    # 10 min values over 7 days with 20 % of them missing (a gap): coverage 80 % < 90 %
    n = 1008
    s = _series(T0, n, 600.0, {})
    keep = np.r_[0:400, 600:n]
    s = IntervalSeries(**{**s.__dict__, "start_s": s.start_s[keep],
                          "harmonics": s.harmonics[keep], "thd_percent": s.thd_percent[keep],
                          "tdd_percent": s.tdd_percent[keep], "power_w": s.power_w[keep],
                          "flagged": s.flagged[keep], "complete": s.complete[keep]})
    sa = assess_survey(_survey(s), _limits(), il_a=IL)
    (c,) = _checks(sa, "I5", "weekly 95th percentile of 10 min values")
    assert c.verdict == "inconclusive" and "less than 90%" in c.note


# --- interval logs ------------------------------------------------------------------------


def _rows(n, start=dt.datetime(2026, 3, 2, 0, 0)):
    rng = np.random.default_rng(7)
    i1 = 80 + 10 * rng.random(n)
    i5 = 4 + 3 * rng.random(n)
    v1 = 277 + rng.random(n)
    v5 = 3 + rng.random(n)
    thd_v = 2 + rng.random(n)
    stamps = [start + dt.timedelta(minutes=10 * i) for i in range(n)]
    return (stamps, *(a.tolist() for a in (i1, i5, v1, v5, thd_v)))


def _write_layouts(tmp_path, n):
    stamps, i1, i5, v1, v5, thd_v = _rows(n)
    paths = {}
    # canonical, ISO 8601 with offset, interval line
    p = tmp_path / "canonical.csv"
    with open(p, "w") as f:
        f.write("# interval_s = 600\n")
        f.write("timestamp,I1_a [A],I5_a [A],V1_a [V],V5_a [V],THD_V_a [%]\n")
        for k in range(n):
            f.write(f"{stamps[k].isoformat()}+00:00,{i1[k]!r},{i5[k]!r},{v1[k]!r},{v5[k]!r},"
                    f"{thd_v[k]!r}\n")
    paths["canonical"] = p
    # semicolon, decimal comma, date and time columns, 'Ia H5' names, kA / kV units
    p = tmp_path / "recorder_a.csv"
    with open(p, "w", encoding="utf-8") as f:
        f.write("Date;Time;Ia H1 [kA];Ia H5 [A];Ua H1 [kV];Ua H5 [V];THDu a [%]\n")
        for k in range(n):
            vals = [i1[k] / 1000, i5[k], v1[k] / 1000, v5[k], thd_v[k]]
            f.write(stamps[k].strftime("%d.%m.%Y;%H:%M:%S;") + ";".join(
                repr(v).replace(".", ",") for v in vals) + "\n")
    paths["recorder_a"] = p
    # 'I L1 h05' names, harmonics in % of the fundamental beside it, stamps at interval end
    p = tmp_path / "recorder_b.csv"
    with open(p, "w") as f:
        f.write("interval end,I L1 h01 [A],I L1 h05 [%],U L1 h01 [V],U L1 h05 [%],"
                "THD U L1 [%],I L1 h05 max [A]\n")
        for k in range(n):
            end = stamps[k] + dt.timedelta(minutes=10)
            f.write(f"{end.isoformat()}Z,{i1[k]!r},{100 * i5[k] / i1[k]!r},{v1[k]!r},"
                    f"{100 * v5[k] / v1[k]!r},{thd_v[k]!r},999\n")
    paths["recorder_b"] = p
    # anything else, through a mapping file
    p = tmp_path / "other.csv"
    with open(p, "w") as f:
        f.write("Zeit,Strom1,Strom5,Spannung1,Spannung5,Klirr\n")
        for k in range(n):
            f.write(f"{stamps[k].isoformat()},{i1[k]!r},{i5[k]!r},{v1[k]!r},{v5[k]!r},"
                    f"{thd_v[k]!r}\n")
    m = tmp_path / "map.toml"
    m.write_text('[columns]\nZeit = "timestamp"\nStrom1 = "I1_a [A]"\nStrom5 = "I5_a [A]"\n'
                 'Spannung1 = "V1_a [V]"\nSpannung5 = "V5_a [V]"\nKlirr = "THD_V_a [%]"\n'
                 '[log]\ninterval_s = 600\n')
    paths["other"] = (p, m)
    return paths


def test_layouts_give_the_same_numbers(tmp_path):
    # the same values written in four layouts real recorders use must assess identically
    paths = _write_layouts(tmp_path, 1008)
    lim = _limits()
    results = {}
    for name, p in paths.items():
        if isinstance(p, tuple):
            s = read_interval_logs([p[0]], mapping=p[1])
        else:
            s = read_interval_logs([p])
        sa = assess_survey(s, lim, il_a=IL)
        results[name] = {(c.label, c.channel, c.statistic): (c.measured, c.verdict,
                                                             c.period_start)
                         for c in sa.assessment.checks if c.measured is not None}
    ref = results["canonical"]
    assert len(ref) >= 4
    for name, got in results.items():
        assert got.keys() == ref.keys(), name
        for k, (v, verdict, start) in got.items():
            assert v == pytest.approx(ref[k][0], rel=1e-9), (name, k)
            # naive stamps (no offset, no --timezone) are shown as written
            assert (verdict, start[:19]) == (ref[k][1], ref[k][2][:19]), (name, k)


def test_column_names_of_recorders():
    # the variations the module documents, each read as the canonical meaning
    for name, kind, q, ph, h in [("I5_a [A]", "harmonic", "current", "a", 5),
                                 ("Ia H5", "harmonic", "current", "a", 5),
                                 ("I L1 h05 [A]", "harmonic", "current", "a", 5),
                                 ("U_L1_H3", "harmonic", "voltage", "a", 3),
                                 ("V7_c [V]", "harmonic", "voltage", "c", 7),
                                 ("THD_I_b [%]", "thd", "current", "b", None),
                                 ("THD U L3", "thd", "voltage", "c", None),
                                 ("TDD_a [%]", "tdd", "current", "a", None)]:
        m = parse_column(name)
        assert (m.kind, m.quantity, m.phase, m.order) == (kind, q, ph, h), name
    assert parse_column("Ia H5 max").kind == "unused"


def test_gap_between_log_files_is_a_finding(tmp_path):
    stamps, i1, i5, *_ = _rows(300)
    for name, rows in (("part1.csv", range(0, 100)), ("part2.csv", range(130, 300))):
        with open(tmp_path / name, "w") as f:
            f.write("timestamp,I1_a [A],I5_a [A]\n")
            for k in rows:
                f.write(f"{stamps[k].isoformat()},{i1[k]},{i5[k]}\n")
    s = read_interval_logs([tmp_path / "part2.csv", tmp_path / "part1.csv"])
    gaps = [f for f in s.findings if f.code == "gap"]
    assert len(gaps) == 1 and gaps[0].detail["missing"] == 30  # rows 100 to 129
    assert "2026-03-02T16:40:00" in gaps[0].message
    assert s.levels[0].n == 270


def test_overlapping_log_files_are_refused(tmp_path):
    stamps, i1, i5, *_ = _rows(20)
    for name, rows in (("a.csv", range(0, 12)), ("b.csv", range(10, 20))):
        with open(tmp_path / name, "w") as f:
            f.write("timestamp,I5_a [A]\n")
            for k in rows:
                f.write(f"{stamps[k].isoformat()},{i5[k]}\n")
    with pytest.raises(CaptureFormatError, match="overlap"):
        read_interval_logs([tmp_path / "a.csv", tmp_path / "b.csv"])


def test_bad_timestamp_names_the_line(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text("timestamp,I5_a [A]\n2026-03-02T00:00:00,1\n2026-03-02 junk,2\n")
    with pytest.raises(CaptureFormatError, match=r"bad.csv:3: timestamp: .*not ISO 8601"):
        read_interval_logs([p])


def test_two_columns_for_one_quantity_are_refused(tmp_path):
    p = tmp_path / "dup.csv"
    p.write_text("timestamp,I5_a [A],Ia H5\n2026-03-02T00:00:00,1,1\n")
    with pytest.raises(CaptureFormatError, match="both read as current harmonic 5 phase a"):
        read_interval_logs([p])


def test_timezone_places_naive_stamps(tmp_path):
    # 2026-03-02 10:00 in Berlin (CET, UTC+1) is 09:00 UTC
    p = tmp_path / "tz.csv"
    p.write_text("# interval_s = 600\ntimestamp,I5_a [A]\n2026-03-02T10:00:00,1\n"
                 "2026-03-02T10:10:00,1\n")
    s = read_interval_logs([p], timezone="Europe/Berlin")
    assert s.levels[0].start_s[0] == dt.datetime(2026, 3, 2, 9, 0,
                                                 tzinfo=dt.timezone.utc).timestamp()


def test_canonical_frame_reads_back(tmp_path):
    n = 300
    s10 = _series(T0, n, 600.0, {5: np.linspace(1, 9, n), 7: 2.0}, orders=7)
    frame = interval_frame(s10, "UTC")
    p = tmp_path / "log.csv"
    frame.to_csv(p, index=False)
    back = read_interval_logs([p]).levels[0]
    np.testing.assert_allclose(back.harmonics[:, 0, 1:], s10.harmonics[:, 0, 1:], rtol=1e-12)
    np.testing.assert_array_equal(back.start_s, s10.start_s)
    assert back.level == "10min"


# --- command line -------------------------------------------------------------------------


def test_check_json_names_the_worst_period(tmp_path):
    # a 10 min log of 8 days whose 7th day carries I5 at 12 % of IL and 8th day 13 %: the
    # weekly 95th percentile (> 10 %) is 12 % in the first 7 days and 13 % in the period that
    # ends at the survey's end, which is the worst
    n = 8 * 144
    stamps, i1, i5, *_ = _rows(n)
    i5 = np.full(n, 5.0)
    i5[6 * 144:] = 12.0
    i5[7 * 144:] = 13.0
    p = tmp_path / "week.csv"
    with open(p, "w") as f:
        f.write("timestamp,I1_a [A],I5_a [A],THD_I_a [%]\n")
        for k in range(n):
            f.write(f"{stamps[k].isoformat()}+00:00,100,{i5[k]},{i5[k]}\n")
    r = CliRunner().invoke(main, ["check", str(p), "--limits", "ieee519-2022",
                                  "--voltage-level", "480", "--isc", "7000", "--il", "100",
                                  "--format", "json"])
    assert r.exit_code == 1, r.output
    d = json.loads(r.output)
    assert d["verdict"] == "fail"
    w = d["worst_period"]
    assert (w["start"], w["end"]) == ("2026-03-03T00:00:00+00:00", "2026-03-10T00:00:00+00:00")
    assert w["statistic"] == "weekly 95th percentile of 10 min values"
    c = next(c for c in d["checks"] if c.get("order") == 5 and c["statistic"] ==
             "weekly 95th percentile of 10 min values")
    assert c["period"] == {"start": w["start"], "end": w["end"]}
    assert c["verdict"] == "fail" and c["measured"] == pytest.approx(13.0)
    # the document is a "survey" of the one results schema, with the options' run spec
    spec = _valid(d, "survey")
    assert (spec.limits[0].table, spec.limits[0].isc_a, spec.analysis.il_a) == \
        ("ieee519-2022", 7000.0, 100.0)


def _valid(doc: dict, kind: str):
    """Validate ``doc`` with jsonschema (the reference implementation of JSON Schema 2020-12)
    against the shipped schema, as its kind and as any pqcheck document; return its run
    spec read back through pqcheck.results."""
    import jsonschema

    from pqcheck.results import (
        SCHEMA_VERSION,
        read_document,
        run_spec_of,
        schema_for,
        shipped_schema,
    )

    assert doc["schema_version"] == SCHEMA_VERSION and doc["tool"]["kind"] == kind
    for schema in (schema_for(kind), shipped_schema()):
        errors = [f"{e.json_path}: {e.message}"
                  for e in jsonschema.Draft202012Validator(schema).iter_errors(doc)]
        assert not errors, errors[:5]
    assert not jsonschema.Draft202012Validator(schema_for(kind)).is_valid(
        {**doc, "verdict": "ok"})  # not a formality: a wrong verdict word is refused
    return run_spec_of(read_document(doc, kinds=(kind,)), "doc")


def test_inspect_shows_each_column_mapping(tmp_path):
    paths = _write_layouts(tmp_path, 20)
    r = CliRunner().invoke(main, ["inspect", str(paths["recorder_b"])])
    assert r.exit_code == 0, r.output
    assert "I L1 h05 [%]" in r.output and "current harmonic 5 phase a [% of the fundamental]" \
        in r.output
    assert "not used (a max value" in r.output
    assert "timestamps mark the interval end" in r.output


def test_report_of_a_log_has_the_survey_section_and_the_json(tmp_path):
    # the 8-day log of the worst-period test: the PDF carries the results JSON, which names
    # the worst period as `check --format json` does
    n = 8 * 144
    stamps, *_ = _rows(n)
    i5 = np.full(n, 5.0)
    i5[6 * 144:] = 12.0
    i5[7 * 144:] = 13.0
    p = tmp_path / "week.csv"
    with open(p, "w") as f:
        f.write("timestamp,I1_a [A],I5_a [A],THD_I_a [%],flag\n")
        for k in range(n):
            f.write(f"{stamps[k].isoformat()}+00:00,100,{i5[k]},{i5[k]},{int(k == 5)}\n")
    pdf, js = tmp_path / "r.pdf", tmp_path / "r.json"
    r = CliRunner().invoke(main, ["report", str(p), "-o", str(pdf), "--json", str(js),
                                  "--limits", "ieee519-2022", "--voltage-level", "480",
                                  "--isc", "7000", "--il", "100"])
    assert r.exit_code == 1, r.output
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and b"results.json" in data
    d = json.loads(js.read_text())
    assert d["verdict"] == "fail" and d["captures"][0]["kind"] == "interval log"
    assert (d["worst_period"]["start"], d["worst_period"]["end"]) == (
        "2026-03-03T00:00:00+00:00", "2026-03-10T00:00:00+00:00")
    assert d["survey"]["flagged_intervals"] == [{"level": "10min",
                                                 "start": "2026-03-02T00:50:00+00:00"}]
    assert len(d["survey"]["availability"]) == 8
    # the same visual language as the test report: the verdict as glyph and word on page 1,
    # verdict cells with their glyphs, the three sign-off roles, an archival (PDF/A-3b) file
    pypdf = pytest.importorskip("pypdf")
    pikepdf = pytest.importorskip("pikepdf")
    pages = [pg.extract_text() or "" for pg in pypdf.PdfReader(str(pdf)).pages]
    assert "OVERALL VERDICT" in pages[0] and "\u2717 FAIL" in pages[0]
    text = "\n".join(pages)
    assert "\u2713 PASS" in text or "\u25d0 INCONCLUSIVE" in text
    assert all(role in text for role in ("Prepared by", "Reviewed by", "Approved by"))
    assert "harmonic survey report" in text and "harmonic emission report" not in text
    with pikepdf.open(pdf) as doc:
        meta = doc.open_metadata()
        assert meta.get("pdfaid:part") == "3" and meta.get("pdfaid:conformance") == "B"
    spec = _valid(d, "survey report")
    assert spec.limits[0].voltage_level_v == 480.0
    assert d["captures"][0]["run_spec"] == d["run_spec"]
    r = CliRunner().invoke(main, ["report", str(p), "-o", str(pdf), "--limits",
                                  "ieee519-2022", "--voltage-level", "480", "--isc", "7000",
                                  "--il", "100"])
    assert r.exit_code == 2 and "file exists" in r.stderr  # nothing replaced without --force
