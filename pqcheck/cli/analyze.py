"""`pqcheck analyze` and `pqcheck inspect`, and the capture options other commands reuse."""

from __future__ import annotations

import click
import numpy as np

from .. import numfmt
from ._common import EXIT_OK, format_option, handle_errors, main
from ._fields import cli_text, spec_from_options

__all__ = ["capture_options", "run_checked", "print_cache_notices"]


def capture_options(func):
    """Options that say how to read a capture and how to analyse it (shared by commands)."""
    opts = [
        click.option("--current", "current", metavar="COLS",
                     help="Current columns, comma-separated, in phase order a,b,c "
                          "(a neutral may follow). Default: guessed from names and units."),
        click.option("--voltage", "voltage", metavar="COLS",
                     help="Voltage columns (line-to-neutral), comma-separated, phase order a,b,c."),
        click.option("--sample-rate", "sample_rate_hz", type=float, metavar="HZ",
                     help="Sample rate, for files without a time column or declared interval."),
        click.option("--time-column", "time_column", metavar="NAME",
                     help="Name of the time column when it is not recognised."),
        click.option("--add-file", "other_files", multiple=True, metavar="FILE",
                     type=click.Path(dir_okay=False),
                     help="Another file of the same capture (one file per channel, same time "
                          "base, checked); repeat for more files."),
        click.option("--encoding", "encoding", metavar="NAME",
                     help="Text encoding of the capture (or of a COMTRADE .cfg), e.g. cp1251, "
                          "gbk, utf-16. Default: detected."),
        click.option("--nominal-frequency", "nominal_hz", type=click.Choice(["50", "60"]),
                     help="Nominal system frequency. Default: detected from the data."),
        click.option("--max-order", "max_order", type=click.IntRange(2, 100),
                     help="Highest harmonic order analysed. Default: the highest order the "
                          "limit tables assess, 50 without tables."),
        click.option("--il", "il_a", type=float, metavar="A",
                     help="Maximum demand load current IL at the PCC, for TDD."),
        click.option("--wiring", type=click.Choice(["3-wire", "4-wire"]),
                     help="Three-phase connection for IEEE 1459 effective power. "
                          "Default: inferred (phase currents not summing to zero need a neutral)."),
        click.option("--reference", metavar="COL",
                     help="Channel whose fundamental sets the windows. Default: first voltage."),
        click.option("--voltage-connection", "voltage_connection",
                     type=click.Choice(["line-to-neutral", "line-to-line"]),
                     help="How the voltages were measured. Default: line-to-line when the "
                          "three voltage names end in ab, bc, ca, else line-to-neutral."),
        click.option("--flicker", "flicker", is_flag=True, default=False,
                     help="Also evaluate flicker (IEC 61000-4-15 Pst, Plt) and voltage changes "
                          "(IEC 61000-3-3 dc, dmax, Tmax) per voltage channel, or per current "
                          "channel through an impedance. Implied by a flicker limit table."),
        click.option("--flicker-path", "flicker_path",
                     type=click.Choice(["auto", "voltage", "reference-impedance",
                                        "system-impedance"]), default="auto", show_default=True,
                     help="Voltage the flickermeter sees: the measured voltage, or the current "
                          "through the IEC 61000-3-3 reference impedance or through "
                          "--system-impedance (IEC 61000-3-11). auto: voltage when the capture "
                          "has one, else reference-impedance."),
        click.option("--system-impedance", "system_impedance_ohm", metavar="R,X[,RN,XN]",
                     help="Supply impedance for IEC 61000-3-11 in ohm (reactance at 50 Hz): "
                          "phase R,X and optionally neutral RN,XN; with only R,X it is a "
                          "single-phase loop split 3:2 between phase and neutral as Zref."),
        click.option("--lamp", type=click.Choice(["230V", "120V"]),
                     help="Flickermeter lamp. Default: 120V below 180 V nominal, else 230V."),
        click.option("--nominal-voltage", "nominal_voltage_v", type=float, metavar="V",
                     help="Nominal line-to-neutral voltage Un the voltage changes are relative "
                          "to. Default: the standard value nearest to the data (230 V on the "
                          "impedance paths at 50 Hz, 120 V at 60 Hz)."),
        click.option("--no-cache", "no_cache", is_flag=True,
                     help="Do not read or write the cache of parsed captures and results."),
        click.option("--cache-dir", "cache_dir", type=click.Path(file_okay=False), metavar="DIR",
                     help="Cache folder (default $PQCHECK_CACHE_DIR or ~/.cache/pqcheck)."),
        click.option("--quiet", "-q", is_flag=True, help="No progress bar."),
    ]
    for opt in reversed(opts):
        func = opt(func)
    return func


def run_checked(spec, opts: dict, *, progress=None):
    """Run :func:`pqcheck.run.check.check_capture` for ``spec`` with the cache options
    (``no_cache``, ``cache_dir``) and, unless ``quiet``, a progress bar on stderr for work over
    about a second when stderr is a terminal. Returns the :class:`CaptureRun`."""
    from ..run.cache import Cache
    from ..run.check import check_capture, refuse_unused_selectors

    refuse_unused_selectors(spec)
    cache = None if opts.get("no_cache") else Cache(opts.get("cache_dir"))
    bar = None
    if progress is None and not opts.get("quiet"):
        bar = _ProgressBar(spec.reader.path)
        progress = bar
    try:
        return check_capture(spec, cache=cache, progress=progress)
    finally:
        if bar is not None:
            bar.close()
        if cache is not None:
            print_cache_notices(cache)


def print_cache_notices(cache) -> None:
    """Print what the cache found wrong (an entry that failed its checksum) on stderr."""
    for note in cache.notices:
        click.echo(f"pqcheck: note: {note}", err=True)
    cache.notices.clear()


class _ProgressBar:
    """tqdm bar on stderr, started only after a second of work and only on a terminal."""

    def __init__(self, label):
        import sys
        import time

        self.enabled = sys.stderr.isatty()
        self.t0 = time.monotonic()
        self.label = str(label)
        self.bar = None

    def __call__(self, done, total):
        if not self.enabled:
            return
        import time

        if self.bar is None:
            if time.monotonic() - self.t0 < 1.0:
                return
            from tqdm import tqdm

            self.bar = tqdm(total=total, unit="sa", unit_scale=True, desc="analysing",
                            leave=False, dynamic_ncols=True)
        if total and self.bar.total != total:
            self.bar.total = total
        self.bar.n = min(done, total) if total else done
        self.bar.refresh()

    def close(self):
        if self.bar is not None:
            self.bar.close()


_fmt = numfmt.number  # the one number formatter


def render_table(result) -> str:
    """Human-readable summary of an analysis."""
    lines = []
    r = result
    s = r.settings
    lines.append(f"Capture    {r.source}")
    lines.append(f"SHA-256    {r.sha256 or '-'}")
    lines.append(
        f"Sampling   {numfmt.value(r.fs_hz, 'sample_rate')}, "
        f"{numfmt.value(r.duration_s, 'duration')}, {r.windows.n_windows} windows of "
        f"{s.cycles_per_window} cycles ({int(r.windows.valid.sum())} valid)")
    lines.append(
        f"Frequency  {numfmt.value(r.fundamental_hz, 'frequency')} mean "
        f"({numfmt.value(r.freq_min_hz, 'frequency', unit='')} to "
        f"{numfmt.value(r.freq_max_hz, 'frequency', unit='')}),"
        f" nominal {numfmt.given(s.nominal_hz, 'Hz')} ({s.nominal_source}); "
        f"reference {s.reference}")
    lines.append("")
    def role_of(c):
        what = {"current": "current", "voltage": "voltage"}.get(c.quantity, c.quantity)
        return f"{what}, phase {c.phase}" if c.phase else f"{what}, single-phase"

    from ..findings import channel_flags

    flags = channel_flags(r.findings, [c.name for c in r.channels])

    def flag(*names):  # the errors (findings) that undermine these channels' values
        codes = list(dict.fromkeys(x for n in names for x in flags.get(n, ())))
        return f"  ! {', '.join(codes)}" if codes else ""

    name_w = max([7] + [len(c.name) for c in r.channels]) + 2
    role_w = max(len(role_of(c)) for c in r.channels) + 2
    head = (f"{'channel':<{name_w}}{'role':<{role_w}}{'rms':>12}{'fundamental':>14}"
            f"{'THD %':>9}{'THDG %':>9}{'TDD %':>9}{'crest':>8}")
    lines.append(head)
    lines.append("-" * len(head))
    rms_col = numfmt.channel_columns(r.channels)
    for c, (rms, fund) in zip(r.channels, rms_col):
        # the channel table's rule (numfmt.channel_columns), as in the PDF report
        lines.append(
            f"{c.name:<{name_w}}{role_of(c):<{role_w}}{rms:>12}{fund:>14}"
            f"{numfmt.value(c.thd_percent, 'distortion', unit=''):>9}"
            f"{numfmt.value(c.thd_group_percent, 'distortion', unit=''):>9}"
            f"{numfmt.value(c.tdd_percent, 'distortion', unit=''):>9}"
            f"{numfmt.value(c.crest_factor, 'crest_factor'):>8}" + flag(c.name))
    lines.append("")
    # harmonic table: % of fundamental, orders 2..H with any value >= 0.1 %
    chans = r.channels
    lines.append("Harmonics, % of each channel's fundamental (components)")
    lines.append("orders under 0.1 % in every channel not shown; n/r: not resolved at this "
                 "sample rate")
    col_w = max([10] + [len(c.name) + 2 for c in chans])
    head = f"{'order':>5}" + "".join(f"{c.name:>{col_w}}" for c in chans)
    lines.append(head)
    lines.append("-" * len(head))
    H = len(chans[0].orders) - 1
    for h in range(2, H + 1):
        vals = []
        for c in chans:
            f1 = c.harmonic_rms[1]
            vals.append(100 * c.harmonic_rms[h] / f1 if f1 > 0 else np.nan)
        if all(not np.isfinite(v) for v in vals):
            lines.append(f"{h:>5}" + "".join(f"{'n/r':>{col_w}}" for _ in chans))
            continue
        if max(np.nan_to_num(vals)) < 0.1:
            continue
        lines.append(f"{h:>5}" + "".join(f"{numfmt.value(v, 'harmonic', unit=''):>{col_w}}"
                                         for v in vals))
    if r.power is not None:
        p = r.power
        lines.append("")
        lines.append("Power (IEEE 1459; negative P = export)")
        for ph in p.phases:
            lines.append(
                f"  phase {ph.phase or '1ph':<4} P {numfmt.power(ph.p_w, ref=ph.s_va):>11}  "
                f"S {numfmt.power(ph.s_va, 'VA', ref=ph.s_va):>11}  "
                f"Q1 {numfmt.power(ph.q1_var, 'var', ref=ph.s_va):>11}  "
                f"PF {numfmt.value(ph.pf, 'power_factor'):>7}  "
                f"DPF {numfmt.value(ph.dpf, 'power_factor'):>7}"
                + flag(ph.voltage, ph.current))
        tot = f"  total      P {numfmt.power(p.p_w, ref=p.se_va):>11}"
        if p.se_va is not None:
            tot += f"  Se {numfmt.power(p.se_va, 'VA', ref=p.se_va):>11}"
        tot += f"  PF {numfmt.value(p.pf, 'power_factor'):>7}"
        if p.wiring:
            tot += f"  ({p.wiring})"
        bad = [ph.phase or "1ph" for ph in p.phases if flag(ph.voltage, ph.current)]
        lines.append(tot + (f"  ! includes phase {', '.join(bad)}" if bad else ""))
        if "i_unbalance_percent" in p.extra:
            lines.append("  current unbalance (I2/I1) "
                         f"{numfmt.value(p.extra['i_unbalance_percent'], 'percent')}, voltage "
                         f"unbalance {numfmt.value(p.extra['v_unbalance_percent'], 'percent')}")
    if r.flicker is not None:
        lines.append("")
        lines += render_flicker(r.flicker)
    lines.append("")
    if flags:
        lines.append("! values of a channel that an error below undermines: shown, not relied on")
    if r.findings:
        lines.append("Findings")
        for f in r.findings:
            lines.append(f"  [{f.severity}] {f.code}: {cli_text(f.message)}")
    else:
        lines.append("Findings: none")
    return "\n".join(lines)


def render_flicker(fa) -> list:
    """Text lines of a flicker evaluation."""
    out = [f"Flicker (IEC 61000-4-15) and voltage changes (IEC 61000-3-3), path {fa.path}"]
    head = (f"{'channel':<12}{'lamp':<11}{'Pst max':>9}{'Plt':>8}{'Pinst max':>11}"
            f"{'dc %':>8}{'dmax %':>8}{'Tmax s':>8}  Pst interval")
    out.append(head)
    out.append("-" * len(head))
    for c in fa.channels:
        d = c.to_dict()
        out.append(
            f"{c.channel:<12}{c.meter.lamp:<11}{numfmt.value(c.pst_max, 'flicker'):>9}"
            f"{numfmt.value(c.plt, 'flicker'):>8}"
            f"{numfmt.value(c.meter.pinst_max, 'flicker'):>11}"
            f"{numfmt.value(d['dc_percent'], 'percent', unit=''):>8}"
            f"{numfmt.value(c.change.dmax_percent, 'percent', unit=''):>8}"
            f"{numfmt.value(c.change.tmax_s, 'duration', unit=''):>8}  "
            f"{len(c.meter.pst)} x {numfmt.given(c.meter.interval_s)} s")
        if c.derived_from:
            out.append(f"  derived from {c.derived_from} through {c.impedance}, source "
                       f"{c.source}, Un {numfmt.given(c.un_v)} V")
        for f in c.findings:
            out.append(f"  [{f.severity}] {f.code}: {f.message}")
    for f in fa.findings:
        out.append(f"  [{f.severity}] {f.code}: {f.message}")
    return out


@main.command("analyze")
@click.argument("capture", type=click.Path(dir_okay=False))
@capture_options
@format_option("analyze", help="Output on stdout: a readable table, the results document "
                                "(json), or one CSV row per channel and order (csv).")
@handle_errors
def analyze_cmd(capture, fmt, **opts):
    """Harmonic analysis of CAPTURE by the IEC 61000-4-7 method.

    Prints harmonics, THD/TDD, power quantities and data-quality findings. Exit code 0,
    or 2 for bad input.
    """
    from ..export import harmonics_frame
    from ..results import analysis_document, dumps
    from ._common import refuse_non_capture

    refuse_non_capture(capture)
    run = run_checked(spec_from_options(capture, opts), opts)
    result = run.result
    if fmt == "json":
        click.echo(dumps(analysis_document(run)))
    elif fmt == "csv":
        click.echo(harmonics_frame(result).to_csv(index=False), nl=False)
    else:
        click.echo(render_table(result))
    raise click.exceptions.Exit(EXIT_OK)


def _survey_options(func):
    from .survey_cmd import survey_options

    return survey_options(func)


@main.command("inspect")
@click.argument("capture", type=click.Path(dir_okay=False))
@click.option("--sample-rate", "sample_rate_hz", type=float, metavar="HZ",
              help="Sample rate, for files without a time column or declared interval.")
@click.option("--time-column", "time_column", metavar="NAME",
              help="Name of the time column when it is not recognised.")
@click.option("--encoding", "encoding", metavar="NAME",
              help="Text encoding of the file (e.g. cp1251, gbk). Default: detected.")
@_survey_options
@handle_errors
def inspect_cmd(capture, sample_rate_hz, time_column, encoding, **survey_opts):
    """Show what pqcheck reads in CAPTURE: layout, columns, time base and where it came from,
    guessed roles with their evidence, and the options that confirm or override them. When
    the time base cannot be found it still lists the columns and metadata and says which
    option to add (exit code 2).

    For an interval log: how each column is read, the aggregation levels, span and gaps."""
    from ..readers import load_capture
    from ..readers.delimited import TimeBaseNotFound
    from .survey_cmd import inspect_survey, is_survey_input

    if is_survey_input([capture], survey_opts):
        inspect_survey([capture], survey_opts)
    try:
        cap = load_capture(capture, sample_rate_hz=sample_rate_hz, time_column=time_column,
                           encoding=encoding)
    except TimeBaseNotFound as exc:
        _inspect_without_time_base(capture, exc)
        raise
    for line in inspect_lines(cap):
        click.echo(line)
    raise click.exceptions.Exit(EXIT_OK)


def _layout_lines(d) -> list:
    delim = {",": "comma", ";": "semicolon", "\t": "tab", None: "none"}[d.delimiter]
    out = [f"Layout      {d.layout}: delimiter {delim}, decimal '{d.decimal}', header line "
           f"{d.header_line or '-'}, data from line {d.data_line}, encoding {d.encoding}"
           + (f" ({d.compression})" if d.compression else "")]
    for note in d.notes:
        out.append(f"  {note}")
    return out


def _inspect_without_time_base(capture, exc) -> None:
    """The guide printed when the time base is not found: columns, metadata, what was tried
    and the options to add."""
    d = exc.dialect
    if d is None:
        return
    click.echo(f"File        {capture}")
    for line in _layout_lines(d):
        click.echo(line)
    click.echo("")
    click.echo("Columns")
    for k, (name, unit) in enumerate(zip(d.names, d.units), start=1):
        click.echo(f"  {k:>3}  {name}" + (f"  [{unit}]" if unit else ""))
    if d.metadata_lines:
        click.echo("Lines read as metadata: " + ", ".join(str(n) for n in d.metadata_lines))
    for key, value in d.metadata.items():
        click.echo(f"  {key}: {value}")
    click.echo("")
    click.echo("Time base not found. Tried:")
    click.echo("  - a column named t, time, time_s, Second, X, x-axis, ... or with a time unit "
               "([s], (ms), /us, _s)")
    click.echo("  - a sample interval or rate in the metadata lines (Sample interval, "
               "Increment, Sample rate, ...)")
    click.echo("Add one of:")
    click.echo(f"  --time-column {d.names[0]!r}    if column {d.names[0]!r} is the time in "
               "seconds")
    click.echo("  --sample-rate HZ        the rate the samples were taken at")
    click.echo("")


def inspect_lines(cap) -> list:
    """The lines ``inspect`` prints for a capture that was read."""
    from ..dsp.tracking import coarse_frequency

    s = cap.provenance.settings
    out = [f"File        {cap.provenance.source}", f"SHA-256     {cap.provenance.sha256}"]
    if "delimiter" in s:
        delim = s.get("delimiter", "-")
        out.append(f"Layout      {s.get('layout', 'header')}: delimiter {delim}, decimal "
                   f"'{s.get('decimal', '.')}', header line {s.get('header_line') or '-'}, "
                   f"data from line {s.get('data_line', '-')}, encoding {s.get('encoding', '-')}"
                   + (f" ({s['compression']})" if s.get("compression") else ""))
        for note in s.get("layout_notes", ()):
            out.append(f"  {note}")
        for name, why in (s.get("dropped_columns") or {}).items():
            out.append(f"  column {name!r} not read: {why}")
    else:
        out.append(f"Reader      {cap.provenance.reader}"
                   + (f" (.cfg encoding {s['cfg_encoding']})" if s.get("cfg_encoding") else ""))
    tb = s.get("time_base", "-")
    where = ""
    if "time_column" in s:
        where = f" (column {s['time_column']!r} in {s['time_unit']})"
    if s.get("declared_by"):
        where += f" (declared by {s['declared_by']!r})"
    out.append(f"Time base   {tb}{where}")
    out.append(f"Sampling    {numfmt.given(cap.fs_hz)} Hz, {cap.n_samples} samples, "
               f"{numfmt.value(cap.duration_s, 'duration')}"
               + (f", first sample at {numfmt.given(cap.t0_s, 's')}" if cap.t0_s else ""))
    if s.get("metadata"):
        for k, v in s["metadata"].items():
            out.append(f"  {k}: {v}")
    out.append("")
    out.append(f"{'column':<16}{'guessed role':<16}{'unit':<6}{'min':>12}{'max':>12}{'rms':>12}")
    ref_row, ref_rms = None, -1.0
    evidence = []
    for k, c in enumerate(cap.channels):
        x = cap.samples[k]
        fin = x[np.isfinite(x)]
        rms = float(np.sqrt(np.mean(fin**2))) if fin.size else float("nan")
        role = "-" if c.quantity == "other" else f"{c.quantity} {c.phase or '(1ph)'}"
        out.append(f"{c.name:<16}{role:<16}{c.unit:<6}"
                   f"{_fmt(fin.min() if fin.size else None, 5):>12}"
                   f"{_fmt(fin.max() if fin.size else None, 5):>12}{_fmt(rms, 5):>12}")
        evidence.append(f"  {c.name}: {c.evidence or 'no evidence of a role'}")
        if c.quantity == "voltage" and (ref_row is None
                                        or cap.channels[ref_row].quantity != "voltage"):
            ref_row, ref_rms = k, rms
        elif c.quantity == "current" and ref_row is None and rms > ref_rms:
            ref_row, ref_rms = k, rms
    if ref_row is None:
        ref_row = 0
    out.append("")
    out.append("Evidence for the guessed roles")
    out += evidence
    x = cap.samples[ref_row][: int(cap.fs_hz * 2) + 1]
    out.append("")
    out.append(fundamental_line(x, cap.fs_hz, cap.channels[ref_row].name, coarse_frequency))
    cur = [c.name for c in cap.by_quantity("current")]
    vol = [c.name for c in cap.by_quantity("voltage")]
    out.append("Roles as guessed; to set them explicitly use:")
    import shlex  # names with spaces or brackets, ready to paste into a shell

    out.append(f"  --current {shlex.quote(','.join(cur)) if cur else 'COLS'} "
               f"--voltage {shlex.quote(','.join(vol)) if vol else 'COLS'}")
    for fnd in cap.findings:
        out.append(f"[{fnd.severity}] {fnd.code}: {fnd.message}")
    return out


def fundamental_line(x, fs_hz, name, coarse_frequency) -> str:
    """"Fundamental about 50.01 Hz on 'va'", or "none found" when the strongest line between
    40 and 70 Hz carries under a third of the channel's ac rms (a 1 kHz signal, a record
    without a mains component), with the strongest component named instead."""
    fin = np.nan_to_num(np.asarray(x, dtype=np.float64))
    ac = fin - fin.mean() if fin.size else fin
    ac_rms = float(np.sqrt(np.mean(ac**2))) if ac.size else 0.0
    f, amp = coarse_frequency(fin, fs_hz, f_lo_hz=40.0, f_hi_hz=70.0)
    if np.isfinite(f) and ac_rms > 0 and amp >= ac_rms / 3:
        return f"Fundamental about {_fmt(f, 6, 'Hz')} on {name!r}"
    f_all, amp_all = coarse_frequency(fin, fs_hz, f_lo_hz=1.0, f_hi_hz=fs_hz / 2)
    strongest = (f"; its strongest component is at about {_fmt(f_all, 4, 'Hz')}"
                 if np.isfinite(f_all) and amp_all > 0 else "")
    return (f"Fundamental none found between 40 and 70 Hz on {name!r}{strongest}")
