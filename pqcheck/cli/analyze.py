"""`pqcheck analyze` and `pqcheck inspect`, and the capture options other commands reuse."""

from __future__ import annotations

import click
import numpy as np

from ._common import EXIT_OK, handle_errors, main, split_columns

__all__ = ["capture_options", "load_and_analyze", "analysis_kwargs", "print_cache_notices"]


def capture_options(func):
    """Options that say how to read a capture and how to analyse it (shared by commands)."""
    opts = [
        click.option("--current", "current", metavar="COLS",
                     help="Current columns, comma-separated, in phase order a,b,c "
                          "(a neutral may follow). Default: guessed from names and units."),
        click.option("--voltage", "voltage", metavar="COLS",
                     help="Voltage columns (line-to-neutral), comma-separated, phase order a,b,c."),
        click.option("--sample-rate", "sample_rate", type=float, metavar="HZ",
                     help="Sample rate, for files without a time column or declared interval."),
        click.option("--time-column", "time_column", metavar="NAME",
                     help="Name of the time column when it is not recognised."),
        click.option("--nominal-frequency", "nominal", type=click.Choice(["50", "60"]),
                     help="Nominal system frequency. Default: detected from the data."),
        click.option("--max-order", "max_order", type=click.IntRange(2, 100), default=50,
                     show_default=True, help="Highest harmonic order analysed."),
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
        click.option("--no-cache", "no_cache", is_flag=True,
                     help="Do not read or write the cache of parsed captures and results."),
        click.option("--cache-dir", "cache_dir", type=click.Path(file_okay=False),
                     help="Cache folder (default $PQCHECK_CACHE_DIR or ~/.cache/pqcheck)."),
        click.option("--quiet", "-q", is_flag=True, help="No progress bar."),
    ]
    for opt in reversed(opts):
        func = opt(func)
    return func


def analysis_kwargs(opts: dict) -> dict:
    """Keyword arguments of :func:`pqcheck.analyze` from parsed capture options."""
    return {
        "nominal_hz": None if opts.get("nominal") is None else int(opts["nominal"]),
        "max_order": opts.get("max_order", 50),
        "il_a": opts.get("il_a"),
        "wiring": opts.get("wiring"),
        "reference": opts.get("reference"),
        "voltage_connection": opts.get("voltage_connection"),
    }


def load_and_analyze(capture_path: str, opts: dict, *, progress=None):
    """Read and analyse one capture with parsed capture options; returns (capture, result).

    Long captures are read block by block and, unless ``--no-cache``, cached; a progress bar
    is shown on stderr for work over about a second when stderr is a terminal.
    """
    from ..run.cache import Cache
    from ..run.check import analyze_file

    cache = None if opts.get("no_cache") else Cache(opts.get("cache_dir"))
    bar = None
    if progress is None and not opts.get("quiet"):
        bar = _ProgressBar(capture_path)
        progress = bar
    try:
        return analyze_file(
            capture_path,
            sample_rate_hz=opts.get("sample_rate"),
            current=split_columns(opts.get("current")),
            voltage=split_columns(opts.get("voltage")),
            time_column=opts.get("time_column"),
            cache=cache,
            progress=progress,
            **analysis_kwargs(opts),
        )
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


def _fmt(x, digits=4, unit=""):
    if x is None or not np.isfinite(x):
        return "-"
    s = f"{x:.{digits}g}"
    return f"{s} {unit}".rstrip()


def _eng(x, unit, digits=4):
    """Engineering notation with an SI prefix: 150690 W -> '150.7 kW'."""
    if x is None or not np.isfinite(x):
        return "-"
    a = abs(x)
    for scale, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if a >= scale:
            return f"{x / scale:.{digits}g} {prefix}{unit}"
    return f"{x:.{digits}g} {unit}"


def render_table(result) -> str:
    """Human-readable summary of an analysis."""
    lines = []
    r = result
    s = r.settings
    lines.append(f"Capture    {r.source}")
    lines.append(f"SHA-256    {r.sha256 or '-'}")
    lines.append(
        f"Sampling   {r.fs_hz:g} Hz, {r.duration_s:.3f} s, {r.windows.n_windows} windows of "
        f"{s.cycles_per_window} cycles ({int(r.windows.valid.sum())} valid)")
    lines.append(
        f"Frequency  {r.fundamental_hz:.4f} Hz mean ({r.freq_min_hz:.4f} to {r.freq_max_hz:.4f}),"
        f" nominal {s.nominal_hz:g} Hz ({s.nominal_source}); reference {s.reference}")
    lines.append("")
    head = f"{'channel':<12}{'role':<11}{'rms':>11}{'fund.':>11}{'THD %':>8}{'THDG %':>8}"
    head += f"{'TDD %':>8}{'CF':>6}"
    lines.append(head)
    lines.append("-" * len(head))
    for c in r.channels:
        role = f"{c.quantity[0].upper()} {c.phase or '1ph'}"
        lines.append(
            f"{c.name:<12}{role:<11}{_fmt(c.rms, 5, c.unit):>11}"
            f"{_fmt(c.fundamental_rms, 5, c.unit):>11}{_fmt(c.thd_percent, 3):>8}"
            f"{_fmt(c.thd_group_percent, 3):>8}{_fmt(c.tdd_percent, 3):>8}"
            f"{_fmt(c.crest_factor, 3):>6}")
    lines.append("")
    # harmonic table: % of fundamental, orders 2..H with any value >= 0.05 %
    chans = r.channels
    lines.append("Harmonics, % of fundamental (component; orders under 0.1 % in every "
                 "channel not shown)")
    head = f"{'order':>5}" + "".join(f"{c.name[:10]:>11}" for c in chans)
    lines.append(head)
    lines.append("-" * len(head))
    H = len(chans[0].orders) - 1
    for h in range(2, H + 1):
        vals = []
        for c in chans:
            f1 = c.harmonic_rms[1]
            vals.append(100 * c.harmonic_rms[h] / f1 if f1 > 0 else np.nan)
        if all(not np.isfinite(v) for v in vals):
            lines.append(f"{h:>5}" + "".join(f"{'n/r':>11}" for _ in chans))
            continue
        if max(np.nan_to_num(vals)) < 0.1:
            continue
        lines.append(f"{h:>5}" + "".join(f"{_fmt(v, 3):>11}" for v in vals))
    if r.power is not None:
        p = r.power
        lines.append("")
        lines.append("Power (IEEE 1459; negative P = export)")
        for ph in p.phases:
            lines.append(
                f"  phase {ph.phase or '1ph':<4} P {_eng(ph.p_w, 'W'):>11}  "
                f"S {_eng(ph.s_va, 'VA'):>11}  Q1 {_eng(ph.q1_var, 'var'):>11}  "
                f"PF {_fmt(ph.pf, 4):>7}  DPF {_fmt(ph.dpf, 4):>7}")
        tot = f"  total      P {_eng(p.p_w, 'W'):>11}"
        if p.se_va is not None:
            tot += f"  Se {_eng(p.se_va, 'VA'):>11}"
        tot += f"  PF {_fmt(p.pf, 4):>7}"
        if p.wiring:
            tot += f"  ({p.wiring})"
        lines.append(tot)
        if "i_unbalance_percent" in p.extra:
            lines.append(f"  current unbalance (I2/I1) {_fmt(p.extra['i_unbalance_percent'], 3)} %"
                         f", voltage unbalance {_fmt(p.extra['v_unbalance_percent'], 3)} %")
    lines.append("")
    if r.findings:
        lines.append("Findings")
        for f in r.findings:
            lines.append(f"  [{f.severity}] {f.code}: {f.message}")
    else:
        lines.append("Findings: none")
    return "\n".join(lines)


@main.command("analyze")
@click.argument("capture", type=click.Path(dir_okay=False))
@capture_options
@click.option("--format", "fmt", type=click.Choice(["table", "json", "csv"]), default="table",
              show_default=True, help="Output on stdout.")
@handle_errors
def analyze_cmd(capture, fmt, **opts):
    """Harmonic analysis of CAPTURE by the IEC 61000-4-7 method.

    Prints harmonics, THD/TDD, power quantities and data-quality findings. Exit code 0,
    or 2 for bad input.
    """
    from ..export import analysis_to_dict, dumps, harmonics_frame

    _, result = load_and_analyze(capture, opts)
    if fmt == "json":
        click.echo(dumps(analysis_to_dict(result)))
    elif fmt == "csv":
        click.echo(harmonics_frame(result).to_csv(index=False), nl=False)
    else:
        click.echo(render_table(result))
    raise click.exceptions.Exit(EXIT_OK)


@main.command("inspect")
@click.argument("capture", type=click.Path(dir_okay=False))
@click.option("--sample-rate", "sample_rate", type=float, metavar="HZ",
              help="Sample rate, for files without a time column or declared interval.")
@click.option("--time-column", "time_column", metavar="NAME",
              help="Name of the time column when it is not recognised.")
@handle_errors
def inspect_cmd(capture, sample_rate, time_column):
    """Show what pqcheck reads in CAPTURE: columns, guessed roles, sample rate, duration and
    the detected fundamental. Use it to confirm the channel map before analysing."""
    from ..dsp.tracking import coarse_frequency
    from ..readers import load_capture

    cap = load_capture(capture, sample_rate_hz=sample_rate, time_column=time_column)
    s = cap.provenance.settings
    click.echo(f"File        {cap.provenance.source}")
    click.echo(f"SHA-256     {cap.provenance.sha256}")
    click.echo(f"Layout      delimiter {s.get('delimiter', '-')}, decimal '{s.get('decimal', '.')}'"
               f", header line {s.get('header_line', '-')}, data from line {s.get('data_line', '-')}"
               if "delimiter" in s else f"Reader      {cap.provenance.reader}")
    click.echo(f"Time base   {s.get('time_base', '-')}"
               + (f" (column {s['time_column']!r} in {s['time_unit']})" if "time_column" in s
                  else ""))
    click.echo(f"Sampling    {cap.fs_hz:g} Hz, {cap.n_samples} samples, {cap.duration_s:.4f} s")
    if s.get("metadata"):
        for k, v in s["metadata"].items():
            click.echo(f"  {k}: {v}")
    click.echo("")
    click.echo(f"{'column':<16}{'guessed role':<16}{'unit':<6}{'min':>12}{'max':>12}{'rms':>12}")
    ref_row, ref_rms = None, -1.0
    for k, c in enumerate(cap.channels):
        x = cap.samples[k]
        fin = x[np.isfinite(x)]
        rms = float(np.sqrt(np.mean(fin**2))) if fin.size else float("nan")
        role = "-" if c.quantity == "other" else f"{c.quantity} {c.phase or '(1ph)'}"
        click.echo(f"{c.name:<16}{role:<16}{c.unit:<6}{_fmt(fin.min() if fin.size else None, 5):>12}"
                   f"{_fmt(fin.max() if fin.size else None, 5):>12}{_fmt(rms, 5):>12}")
        if c.quantity == "voltage" and (ref_row is None or cap.channels[ref_row].quantity != "voltage"):
            ref_row, ref_rms = k, rms
        elif c.quantity == "current" and ref_row is None and rms > ref_rms:
            ref_row, ref_rms = k, rms
    if ref_row is None:
        ref_row = 0
    f, _ = coarse_frequency(cap.samples[ref_row][: int(cap.fs_hz * 2) + 1], cap.fs_hz,
                            f_lo_hz=40.0, f_hi_hz=70.0)
    click.echo("")
    click.echo(f"Fundamental about {_fmt(f, 6, 'Hz')} on {cap.channels[ref_row].name!r}")
    cur = [c.name for c in cap.by_quantity("current")]
    vol = [c.name for c in cap.by_quantity("voltage")]
    click.echo("Roles as guessed; to set them explicitly use:")
    click.echo(f"  --current {','.join(cur) or 'COLS'} --voltage {','.join(vol) or 'COLS'}")
    for fnd in cap.findings:
        click.echo(f"[{fnd.severity}] {fnd.code}: {fnd.message}")
    raise click.exceptions.Exit(EXIT_OK)


