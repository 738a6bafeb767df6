"""Surveys on the command line: interval logs for `check` / `inspect` / `report`, and
`pqcheck aggregate` (IEC 61000-4-30 interval values from waveform recordings)."""

from __future__ import annotations

import dataclasses
import json
import math

import click

from .. import numfmt
from ._common import EXIT_OK, VERDICT_EXIT, fail_usage
from ._fields import cli_text

__all__ = ["survey_options", "SURVEY_OPTION_NAMES", "is_survey_input", "check_survey",
           "inspect_survey", "load_survey", "render_survey", "parse_interval"]

SURVEY_OPTION_NAMES = ("timezone", "column_map", "log_interval", "start_time",
                       "declared_voltage")


def survey_options(func):
    """Options saying how to read an interval log (shared by check, inspect and report)."""
    opts = [
        click.option("--timezone", "timezone", metavar="TZ",
                     help="Time zone of interval-log timestamps written without an offset "
                          "(IANA name, e.g. Europe/Berlin). Default: as written."),
        click.option("--column-map", "column_map", type=click.Path(dir_okay=False),
                     metavar="FILE",
                     help="Mapping file (TOML) from an interval log's column names to "
                          "canonical ones (I5_a [A], THD_V_b [%], ...)."),
        click.option("--log-interval", "log_interval", metavar="LENGTH",
                     help="Interval length of an interval log that does not state it: 3s, "
                          "10min, 2h or seconds. Default: from the log or its timestamps."),
        click.option("--start-time", "start_time", metavar="ISO8601",
                     help="Absolute start of a waveform recording's first file (e.g. "
                          "2026-03-02T10:03:17+01:00), for clock-aligned 10 min intervals; the "
                          "files then follow one another. Default: each file's own start time."),
        click.option("--declared-voltage", "declared_voltage", type=float, metavar="V",
                     help="Declared input voltage (line-to-neutral) for dip / swell / "
                          "interruption flags of a waveform recording. Default: the median "
                          "RMS of each voltage channel."),
    ]
    for opt in reversed(opts):
        func = opt(func)
    return func


def parse_interval(text) -> float | None:
    """``3s`` / ``10min`` / ``2h`` / ``600`` -> seconds (None stays None)."""
    if text is None:
        return None
    from ..survey import LEVELS

    t = str(text).strip().lower().replace(" ", "")
    if t in LEVELS:
        return LEVELS[t]
    for suffix, mult in (("min", 60.0), ("ms", 1e-3), ("s", 1.0), ("h", 3600.0)):
        if t.endswith(suffix):
            t, scale = t[: -len(suffix)], mult
            break
    else:
        scale = 1.0
    try:
        v = float(t) * scale
    except ValueError:
        fail_usage(f"interval {text!r} is not a length; give 3s, 10min, 2h or seconds")
    if not (math.isfinite(v) and v > 0):
        fail_usage(f"interval {text!r} must be positive")
    return v


def is_survey_input(paths, opts) -> bool:
    """True when the inputs are interval logs (or a column map is given)."""
    from ..readers.intervals import looks_like_interval_log

    if opts.get("column_map"):
        return True
    return any(looks_like_interval_log(p) for p in paths)


def load_survey(paths, opts):
    """Read interval logs with the parsed options (popped from ``opts``)."""
    from ..readers.intervals import looks_like_interval_log, read_interval_logs

    not_logs = [p for p in paths if not looks_like_interval_log(p)]
    if not_logs and not opts.get("column_map"):
        fail_usage(f"{not_logs[0]}: not an interval log, but other inputs are; give interval "
                   "logs only, or waveform captures only")
    return read_interval_logs(paths, timezone=opts.get("timezone"),
                              mapping=opts.get("column_map"),
                              interval_s=parse_interval(opts.get("log_interval")))


def render_survey(sa) -> str:
    """Text view of a survey assessment: the survey's span and levels, the statistics per
    rule with the worst period, then the assessment's checks."""
    from ..survey import format_time
    from .check import render_assessment

    s = sa.survey
    tz = s.timezone
    lines = [f"Survey     {s.origin}: {', '.join(s.sources)}",
             f"           {format_time(s.start_s, tz)} to {format_time(s.end_s, tz)} "
             f"({numfmt.value(s.duration_s / 86400, 'days')}; time zone "
             f"{tz or 'not given, as written'})"]
    for lv in s.levels:
        lines.append(f"           {lv.level} values: {lv.n} intervals of "
                     f"{numfmt.given(lv.interval_s, 's')}, "
                     f"{int(lv.flagged.sum())} flagged, {int((~lv.complete).sum())} incomplete")
    lines.append("Statistics (periods consecutive from the 10 min tick at or before the first "
                 "interval; one more ending at the survey's end)")
    for r in sa.rules:
        head = f"  {r['table']} {r['applies_to']} {r['statistic']}"
        if not r["assessed"]:
            lines.append(f"{head}: NOT ASSESSED ({r['reason'][len('not assessed: '):]})")
            continue
        lines.append(f"{head}: {len(r['periods'])} period(s)")
        w = sa.worst(r)
        if w:
            value, limit = numfmt.value_and_limit(w["value"], w["limit"], w["unit"])
            lines.append(f"    worst {w['label']} {w['channel']} {value} "
                         f"(limit {limit}, {w['verdict']}) in "
                         f"{w['start']} to {w['end']}")
    text = "\n".join(lines) + "\n"
    findings = [f for f in s.findings if f.severity != "info"]
    if findings:
        text += "Findings\n" + "".join(f"  [{f.severity}] {f.code}: {f.message}\n"
                                       for f in findings)
    return text + render_assessment(sa.assessment)


def check_survey(paths, fmt, spec, opts):
    """`pqcheck check` on interval logs: assess per period and exit with the verdict.

    ``spec`` is the :class:`~pqcheck.record.RunSpec` of the options (its limit selections)."""
    from ..run.check import resolve_limits
    from ..survey import assess_survey

    resolved = resolve_limits(spec)
    survey = load_survey(paths, opts)
    sa = assess_survey(survey, resolved, il_a=spec.analysis.il_a)
    if fmt == "json":
        from ..results import dumps, survey_document

        click.echo(dumps(survey_document(sa, spec)))
    else:
        click.echo(render_survey(sa), nl=False)
    raise click.exceptions.Exit(VERDICT_EXIT[sa.verdict])


def inspect_survey(paths, opts):
    """`pqcheck inspect` on interval logs: how every column was read, the levels and gaps."""
    from ..survey import format_time

    s = load_survey(paths, opts)
    tz = s.timezone
    click.echo(f"Interval log {', '.join(s.sources)}")
    for src, sha in zip(s.sources, s.sha256):
        click.echo(f"SHA-256     {sha}  {src}")
    click.echo(f"Time zone   {tz or 'not given (timestamps as written)'}; timestamps mark the "
               f"interval {s.settings.get('timestamp', 'start')}")
    click.echo(f"Span        {format_time(s.start_s, tz)} to {format_time(s.end_s, tz)} "
               f"({numfmt.value(s.duration_s / 86400, 'days')})")
    for lv in s.levels:
        click.echo(f"Level       {lv.level}: {lv.n} intervals of {numfmt.given(lv.interval_s)} s, "
                   f"{int(lv.flagged.sum())} flagged; channels "
                   f"{', '.join(f'{c.name} [{c.unit}]' for c in lv.channels)}; orders up to "
                   f"{lv.max_order}")
    click.echo("")
    width = max([len(c) for c, _ in s.mapping] + [6])
    click.echo(f"{'column':<{width}}  read as")
    for col, meaning in s.mapping:
        click.echo(f"{col:<{width}}  {meaning}")
    for f in s.findings:
        click.echo(f"[{f.severity}] {f.code}: {cli_text(f.message)}")
    raise click.exceptions.Exit(EXIT_OK)


def recording_survey(paths, opts, *, levels=("3s", "10min", "2h"), executor=None):
    """Aggregate waveform files into a survey (IEC 61000-4-30) with the parsed options."""
    from ..run.check import DEFAULT_MAX_ORDER
    from ..run.recording import aggregate_recording
    from ._fields import spec_from_options

    spec = spec_from_options(None, opts)
    reader = {"sample_rate_hz": spec.reader.sample_rate_hz,
              "current": None if spec.channels.current is None else list(spec.channels.current),
              "voltage": None if spec.channels.voltage is None else list(spec.channels.voltage),
              "time_column": spec.reader.time_column}
    analysis = spec.analysis.analyze_kwargs(spec.analysis.max_order or DEFAULT_MAX_ORDER)
    return aggregate_recording(paths, start_time=opts.get("start_time"),
                               timezone=opts.get("timezone"),
                               declared_voltage_v=opts.get("declared_voltage"),
                               il_a=spec.analysis.il_a, reader=reader,
                               analysis=analysis, executor=executor, levels=levels)


def check_recording(paths, fmt, spec, opts):
    """`pqcheck check` on a waveform recording of several files: aggregate, then assess per
    period (``spec``: the :class:`~pqcheck.record.RunSpec` of the options)."""
    from ..run.check import resolve_limits
    from ..survey import assess_survey

    resolved = resolve_limits(spec)
    survey = recording_survey(paths, opts, levels=("3s", "10min"))
    sa = assess_survey(survey, resolved, il_a=spec.analysis.il_a)
    if fmt == "json":
        from ..results import dumps, survey_document

        click.echo(dumps(survey_document(sa, spec)))
    else:
        click.echo(render_survey(sa), nl=False)
    raise click.exceptions.Exit(VERDICT_EXIT[sa.verdict])


def report_survey(source, outputs, out, json_path, csv_dir, spec, created, command, opts):
    """`pqcheck report` on an interval log: the report with its survey section (``spec``:
    the :class:`~pqcheck.record.RunSpec` of the options; ``outputs``: the report's
    :class:`~pqcheck.files.atomic.OutputSet`, written all together or not at all)."""
    from ..report.job import ReportMeta, make_report_id
    from ..report.survey_pdf import render_survey_pdf
    from ..results import dumps, survey_report_document
    from ..run.check import resolve_limits
    from ..survey import assess_survey

    if not spec.limits:
        fail_usage("a survey report needs --limits (its statistics are those of a table)")
    if csv_dir is not None:
        fail_usage("--csv is not available for a survey report; use --json (every period's "
                   "values are in it)")
    resolved = resolve_limits(spec)
    survey = load_survey([source], opts)
    sa = assess_survey(survey, resolved, il_a=spec.analysis.il_a)
    d = spec.report
    meta = ReportMeta(title=d.title or "Harmonic survey report", equipment=d.equipment or "",
                      site=d.site or "", operator=d.operator or "", created_utc=created,
                      command=command)
    rid = d.report_id or make_report_id(list(survey.sha256), created)
    meta = dataclasses.replace(meta, report_id=rid)
    doc = survey_report_document(sa, meta, spec)
    results = (dumps(doc) + "\n").encode("utf-8")
    pdf = render_survey_pdf(sa, meta, results_json=results)
    outputs.put(out, pdf)
    if json_path is not None:
        outputs.put(json_path, results)
    written = [str(p) for p in outputs.commit()]
    click.echo(f"{out}: {sa.verdict.upper()}; survey {', '.join(survey.sources)}; report {rid}")
    for p in written[1:]:
        click.echo(f"  also wrote {p}")
    raise click.exceptions.Exit(VERDICT_EXIT[sa.verdict])


def _register():
    from ._common import handle_errors, main, output_option
    from .analyze import capture_options

    @main.command("aggregate")
    @click.argument("recording", nargs=-1, required=True, type=click.Path(dir_okay=False))
    @click.option("--interval", "intervals", multiple=True, default=("10min",),
                  type=click.Choice(["3s", "10min", "2h"]), show_default=True,
                  help="Aggregation interval; repeat for several (one file, rows told apart "
                       "by their interval_s column).")
    @output_option("LOG", aliases=("--out",), required=True,
                   help="Interval log to write: .csv, or .parquet for Parquet.")
    @click.option("--force", is_flag=True, help="Replace LOG if it exists.")
    @click.option("--jobs", "-j", type=click.IntRange(1), metavar="N",
                  help="Analyse the files in N local processes.")
    @click.option("--scheduler", metavar="ADDRESS",
                  help="Analyse the files on a Dask cluster (tcp://host:8786).")
    @click.option("--workers", type=click.IntRange(1), metavar="N",
                  help="Analyse the files on a local Dask cluster of N worker processes.")
    @capture_options
    @survey_options
    @handle_errors
    def aggregate_cmd(recording, intervals, output, force, jobs, scheduler, workers, **opts):
        """Aggregate a waveform RECORDING (one or more files of a recorder's sequence) into
        IEC 61000-4-30 interval values and write them as an interval log.

        Each file is analysed by the IEC 61000-4-7 method; 10/12-cycle values are aggregated
        (RMS) into 150/180-cycle (about 3 s) values, resynchronised at every 10 min clock tick,
        clock-aligned 10 min values and 2 h values. Intervals holding a voltage dip, swell or
        interruption are flagged (flag = 1); gaps between files are reported and the intervals
        they touch marked incomplete (complete = 0). The absolute start comes from each file
        or --start-time. The log reads back with `pqcheck check` / `inspect` / `report`.

        Exit code: 0 written, 2 bad input (nothing written).
        """
        import os

        import pandas as pd

        from ..files.atomic import atomic_open, check_target
        from ..readers.intervals import interval_frame

        out = output
        if scheduler and workers:
            fail_usage("give --scheduler or --workers, not both")
        if jobs is not None and (scheduler or workers):
            fail_usage("--jobs sets local worker processes; with Dask use --workers (local "
                       "cluster) or the cluster's own workers (--scheduler)")
        suffix = os.path.splitext(out)[1].lower()
        if suffix not in (".csv", ".parquet", ".pq"):
            fail_usage(f"-o {out}: give a .csv or .parquet file")
        for k in ("column_map", "log_interval"):
            if opts.get(k):
                fail_usage(f"--{k.replace('_', '-')} concerns interval logs; aggregate reads "
                           "waveform recordings")
        check_target(out, force=force, option="-o", protect=recording)  # never an input
        executor = None
        if scheduler or workers:
            from ..run.batch import DaskExecutor

            executor = DaskExecutor(address=scheduler, workers=workers)
        elif jobs and jobs > 1:
            from ..run.batch import ProcessExecutor

            executor = ProcessExecutor(jobs)
        wanted = tuple(dict.fromkeys(intervals))
        levels = tuple(x for x in ("3s", "10min", "2h") if x in wanted or
                       (x == "10min" and "2h" in wanted))
        survey = recording_survey(recording, opts, levels=levels, executor=executor)
        tz = survey.timezone
        frames = [interval_frame(s, tz) for s in survey.levels if s.level in wanted]
        frame = pd.concat(frames, ignore_index=True)
        if suffix == ".csv":
            with atomic_open(out, "w", force=force, option="-o", protect=recording) as fh:
                fh.write("# pqcheck aggregate: IEC 61000-4-30 interval values "
                         "(RMS aggregation of IEC 61000-4-7 harmonic subgroups)\n")
                fh.write("# timestamp = start\n")
                if tz:
                    fh.write(f"# timezone = {tz}\n")
                for src, sha in zip(survey.sources, survey.sha256):
                    fh.write(f"# source = {src} sha256 {sha}\n")
                frame.to_csv(fh, index=False, lineterminator="\n")
        else:
            import io

            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(frame, preserve_index=False)
            table = table.replace_schema_metadata({
                "pqcheck": "IEC 61000-4-30 interval values", "timezone": tz or "as written",
                "sources": json.dumps(list(survey.sources))})
            buf = io.BytesIO()
            pq.write_table(table, buf)
            with atomic_open(out, "wb", force=force, option="-o", protect=recording) as fh:
                fh.write(buf.getvalue())
        for f in survey.findings:
            if f.severity != "info":
                click.echo(f"pqcheck: {f.severity}: {f.code}: {f.message}", err=True)
        counts = ", ".join(f"{s.n} x {s.level}" for s in survey.levels if s.level in wanted)
        click.echo(f"wrote {out}: {counts} from {len(survey.sources)} file(s)")
        raise click.exceptions.Exit(EXIT_OK)

    return aggregate_cmd


aggregate_cmd = _register()
