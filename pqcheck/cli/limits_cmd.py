"""`pqcheck limits list | show | validate`: the limit tables, rendered from their files."""

from __future__ import annotations

import click

from .. import numfmt
from .._limit_model import BASES, TOTALS, VERIFY_TAGS
from ..limits import (
    LimitTable,
    bundled_ids,
    designation,
    load_table,
    read_table,
    validate_file,
)
from ._common import EXIT_OK, EXIT_USAGE, fail_usage, format_option, handle_errors, main

__all__ = ["render_table"]

_BASIS_TEXT = {
    "percent_of_fundamental": "% of the fundamental",
    "percent_of_il": "% of IL (maximum demand load current)",
    "percent_of_rated_current": "% of rated current",
    "percent_of_iref": "% of the reference current Iref",
    "amperes": "A (rms)",
    "milliamperes_per_watt": "mA per W of active input power",
    "unitless": "unitless (flicker severity)",
    "percent_of_nominal_voltage": "% of the nominal voltage Un",
    "seconds": "s",
}
_MEASURE_TEXT = {"group": "harmonic group", "subgroup": "harmonic subgroup",
                 "component": "harmonic component (single 5 Hz bin)"}
_SERIES_TEXT = {"window": "10/12-cycle values", "smoothed": "1.5 s smoothed values",
                "3s": "3 s values", "10min": "10 min values", "pst": "10-minute Pst values",
                "plt": "2-hour Plt values", "changes": "voltage changes of the capture"}
_LEGEND = ("* verify against your copy of the standard (tag P: partly verified, M: from "
           "memory). Tags: V verified in a public reproduction, C computed from a published "
           "formula.")


def _mark(tag: str) -> str:
    return "*" if tag in VERIFY_TAGS else ""


def _num(v) -> str:
    return numfmt.given(v)


def _cond(table: LimitTable, name: str, cond) -> str:
    spec = table.selector(name)
    unit = f" {spec.unit}" if spec.unit else ""
    if spec.kind == "band":
        lo, hi = cond
        le, ge = ("<", "<=") if spec.closed == "upper" else ("<=", "<")
        if hi == float("inf"):
            return f"{'>' if le == '<' else '>='} {_num(lo)}{unit}"
        if lo == 0:
            return f"{ge} {_num(hi)}{unit}"
        return f"{_num(lo)} {le} x {ge} {_num(hi)}{unit}"
    if spec.kind == "points":
        return f"{_num(cond)}{unit}"
    return ", ".join(cond)


def _grid(header: list, rows: list) -> list:
    widths = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    out = ["  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths)).rstrip()]
    for r in rows:
        out.append("  " + "  ".join(str(c).ljust(w) for c, w in zip(r, widths)).rstrip())
    return out


def _rule_text(c) -> str:
    stat = c.statistic if not c.statistic.startswith("p") else f"{c.statistic[1:]}th percentile"
    period = ""
    if c.period_s:
        days = c.period_s / 86400
        period = (" over 1 week" if days == 7 else " over 1 day" if days == 1
                  else f" over {numfmt.given(c.period_s)} s")
    who = f"{c.applies_to}: " if c.applies_to else ""
    return (f"{who}{stat} of {_SERIES_TEXT[c.of]}{period} <= {numfmt.given(c.multiplier)} x limit"
            f"{' ' + _mark(c.tag) if _mark(c.tag) else ''}")


def render_table(table: LimitTable) -> str:
    """Render a limit table for reading in a terminal (every number from the file).

    Parameters
    ----------
    table : LimitTable
        A loaded table.

    Returns
    -------
    str
        Text with the header, selectors, evaluation rule, notes and one grid per block;
        values to verify against the standard carry ``*``.
    """
    t = table
    lines = [f"{t.id}: {t.title}",
             f"Standard    {designation(t.standard, t.edition)}"
             + (f", {t.clause}" if t.clause else "")]
    if t.source:
        lines.append(f"File        {t.source}")
        lines.append(f"SHA-256     {t.sha256}")
    if t.measure == "flicker":
        lines.append("Measure     IEC 61000-4-15 flickermeter (Pst, Plt) and IEC 61000-3-3 "
                     "relative voltage changes (dc, dmax, Tmax)"
                     f"{' ' + _mark(t.measure_tag) if _mark(t.measure_tag) else ''}")
    else:
        lines.append(f"Measure     IEC 61000-4-7 {_MEASURE_TEXT[t.measure]}"
                     f"{' ' + _mark(t.measure_tag) if _mark(t.measure_tag) else ''}, "
                     f"orders up to {t.max_order}")
    if t.selectors:
        lines.append("Selectors")
        for s in t.selectors:
            extra = ""
            if s.kind == "band":
                extra = ("; bands read low < x <= high" if s.closed == "upper"
                         else "; bands read low <= x < high")
            elif s.kind == "points":
                extra = ("; rows are minimum values, linear interpolation between rows"
                         if s.interpolate == "linear" else "; rows are minimum values")
            elif s.kind == "choice":
                extra = f"; one of {', '.join(s.choices)}"
            if s.default is not None:
                dv = ("yes" if s.default else "no") if isinstance(s.default, bool) else s.default
                extra += f"; default {dv}"
            lines.append(f"  {s.option}: {s.help or s.name}{extra}")
            if s.ssc_divisor:
                lines.append("    Rsce = Ssc / (k x rated apparent power), k: " + ", ".join(
                    f"{c} {numfmt.given(k)}" for c, k in s.ssc_divisor))
    ev = t.evaluation
    lines.append("Evaluation" + (f" {_mark(ev.tag)}" if _mark(ev.tag) else ""))
    if ev.smoothing_tau_s:
        lines.append(f"  window values smoothed by a first-order filter, time constant "
                     f"{numfmt.given(ev.smoothing_tau_s)} s")
    for c in ev.checks:
        lines.append("  " + _rule_text(c))
    for c in ev.short_capture:
        lines.append("  shorter capture: " + _rule_text(c))
    if ev.exception:
        x = ev.exception
        lines.append(f"  exception{_cond_suffix(t, x.conditions)}: smoothed values up to "
                     f"{numfmt.given(x.multiplier)} x limit if above the max rule for less than "
                     f"{numfmt.given(100 * x.max_fraction, '%')} of the observation and "
                     f"{numfmt.given(x.max_duration_s, 's')}, with "
                     f"the mean below {numfmt.given(x.mean_below)} x limit {_mark(x.tag)}".rstrip())
    if ev.pohc:
        lines.append(f"  POHC allowance{_cond_suffix(t, ev.pohc.conditions)}: orders "
                     f"{ev.pohc.orders} may average up to {numfmt.given(ev.pohc.multiplier)} x "
                     "limit when "
                     f"the measured POHC <= the POHC of the limits {_mark(ev.pohc.tag)}".rstrip())
    if ev.negligible:
        lines.append(f"  harmonics below {numfmt.given(ev.negligible.percent_of_input, '%')} of "
                     f"the input current or {numfmt.given(ev.negligible.min_a * 1000, 'mA')} "
                     "(whichever is greater) are "
                     f"disregarded {_mark(ev.negligible.tag)}".rstrip())
    if ev.power:
        lines.append(f"  power for per-watt limits: {ev.power.statistic} of "
                     f"{_SERIES_TEXT[ev.power.of]} of active power {_mark(ev.power.tag)}"
                     .rstrip())
    for note in (ev.note, ev.short_capture_note):
        if note:
            lines.append(f"  {note}")
    if t.notes:
        lines.append("Notes")
        lines += [f"  - {n}" for n in t.notes]
    for blk in t.blocks:
        lines += [""] + _render_block(t, blk)
    lines += ["", _LEGEND]
    return "\n".join(lines) + "\n"


def _cond_suffix(t, conditions) -> str:
    if not conditions:
        return ""
    return " (" + "; ".join(f"{k} {_cond(t, k, c)}" for k, c in conditions) + ")"


def _render_block(t: LimitTable, blk) -> list:
    head = f"{blk.name} ({blk.clause})" if blk.clause != blk.name else blk.name
    head += f"{_cond_suffix(t, blk.conditions)}: {blk.applies_to}, {_BASIS_TEXT[blk.basis]}"
    lines = [head + (f" {_mark(blk.tag)}" if _mark(blk.tag) else "")]
    if blk.note:
        lines.append(f"  {blk.note}")
    tag0 = blk.tag or t.tag
    if blk.derive is not None:
        d = blk.derive
        only = f", orders {d.orders}" if d.orders else ""
        lines.append(f"  = {numfmt.given(d.factor)} x the limits of {d.source}{only}")
        return lines
    if blk.columns:
        if blk.parity != "all":
            lines.append(f"  columns give {blk.parity} orders only")
        cols = [c if c in TOTALS else f"h {c}" for c in blk.columns]
        if blk.rows:
            names = []
            for r in blk.rows:
                for k, _ in r.conditions:
                    if k not in names:
                        names.append(k)
            has_clause = any(r.clause for r in blk.rows)
            header = (["clause"] if has_clause else []) + [
                f"min {n}" if t.selector(n).kind == "points" else n for n in names] + cols
            rows = []
            for r in blk.rows:
                conds = dict(r.conditions)
                mark = _mark(r.tag or tag0)
                cells = ([r.clause] if has_clause else [])
                cells += [_cond(t, n, conds[n]) if n in conds else "" for n in names]
                cells += [_num(v) + mark for v in r.values]
                rows.append(cells)
            lines += _grid(header, rows)
            for r in blk.rows:
                if r.note:
                    lines.append(f"  note ({'; '.join(_cond(t, k, c) for k, c in r.conditions)})"
                                 f": {r.note}")
        else:
            lines += _grid(cols, [[_num(v) + _mark(tag0) for v in blk.values]])
    for rule in blk.even:
        tag = rule.tag or tag0
        what = (f"{numfmt.given(rule.factor)} x the odd limit of the column that contains h"
                if rule.factor is not None else f"{_num(rule.limit)} {blk.unit}")
        lines.append(f"  even h {rule.orders}: {what}{' ' + _mark(tag) if _mark(tag) else ''}"
                     + (f" ({rule.note})" if rule.note else ""))
    if not blk.columns:  # rows holding items only (e.g. dmax by switching condition)
        for r in blk.rows:
            cond = "; ".join(f"{k} {_cond(t, k, c)}" for k, c in r.conditions)
            for it in r.items:
                tag = it.tag or r.tag or tag0
                lines.append(f"  {cond}: {it.quantity}: {_num(it.limit)} "
                             f"{BASES[blk.basis][0]}{' ' + _mark(tag) if _mark(tag) else ''}"
                             + (f" ({it.note})" if it.note else ""))
    for it in blk.items:
        tag = it.tag or tag0
        what = f"h {it.orders}" if it.orders else it.quantity
        times = " x power factor" if it.times == "power_factor" else ""
        unit = BASES[blk.basis][0]
        lines.append(f"  {what}: {_num(it.limit)} {unit}{times}"
                     f"{' ' + _mark(tag) if _mark(tag) else ''}"
                     + (f" ({it.note})" if it.note else ""))
    return lines


@main.group("limits")
def limits_group():
    """Limit tables: list the bundled ones, show one, validate your own."""


@limits_group.command("list")
@format_option("limits list")
@handle_errors
def list_cmd(fmt):
    """List the bundled limit tables."""
    rows = []
    tables = [load_table(tid) for tid in bundled_ids()]
    if fmt == "json":
        import json

        click.echo(json.dumps([{"id": t.id, "standard": t.standard, "edition": t.edition,
                                "title": t.title} for t in tables], indent=2))
        raise click.exceptions.Exit(EXIT_OK)
    for t in tables:
        rows.append([t.id, designation(t.standard, t.edition), t.title])
    click.echo("\n".join(_grid(["ID", "STANDARD", "TITLE"], rows)))
    click.echo("\nShow one with `pqcheck limits show ID`; copy it with "
               "`pqcheck limits show ID --format toml > my-table.toml`.")
    raise click.exceptions.Exit(EXIT_OK)


@limits_group.command("show")
@click.argument("table")
@format_option("limits show",
               help="table: readable summary; json: the table's data; toml: the table file "
                    "itself, a starting point for your own table.")
@handle_errors
def show_cmd(table, fmt):
    """Show limit table TABLE (a bundled id, case-insensitive, or the path of a .toml file)."""
    from ..errors import InputError

    try:
        t = load_table(table)
    except InputError as exc:
        if exc.field != "table" or exc.path:
            raise
        fail_usage(f"TABLE: {exc.problem}")  # the argument, not the --limits of other commands
    if fmt == "toml":
        click.echo(t.text, nl=not t.text.endswith("\n"))
    elif fmt == "json":
        import json

        import tomllib

        click.echo(json.dumps({"id": t.id, "sha256": t.sha256, "source": str(t.source),
                               "table": tomllib.loads(t.text)}, indent=2, default=str))
    else:
        click.echo(render_table(t), nl=False)


def _other_document(path) -> tuple:
    """What a TOML file is when it is one of pqcheck's other documents (a test plan, a site
    file), and the command that takes it; () otherwise (also when it cannot be read: the
    validation says why)."""
    from ..errors import InputError
    from ..files.read import read_bounded
    from ..files.toml import loads

    try:  # a special file, a huge or deeply nested one: the validation says what is wrong
        doc = loads(read_bounded(path, what="limit table").decode("utf-8"))
    except (InputError, OSError, ValueError):
        return ()
    if "captures" in doc and ("site" in doc or "equipment" in doc or "limits" in doc):
        return "a test plan", f"it is read by `pqcheck report {path} -o report.pdf`"
    if "units" in doc and ("supply" in doc or "pcc" in doc):
        return "a site file", f"it is read by `pqcheck site {path}`"
    return ()


@limits_group.command("validate")
@click.argument("path", type=click.Path(dir_okay=False))
def validate_cmd(path):
    """Check the limit table file PATH; problems are printed as file:line: field: problem."""
    kind = _other_document(path)
    if kind:
        fail_usage(f"{path}: this is {kind[0]}, not a limit table; {kind[1]}")
    errors = validate_file(path)
    if errors:
        for e in errors:
            click.echo(e.location_message(), err=True)
        click.echo(f"pqcheck: error: {len(errors)} problem{'s' if len(errors) > 1 else ''} in "
                   f"{path}", err=True)
        raise click.exceptions.Exit(EXIT_USAGE)
    t = read_table(path)
    n = sum(len(b.rows) or 1 for b in t.blocks)
    click.echo(f"{path}: valid limit table {t.id!r} ({designation(t.standard, t.edition)}; "
               f"{len(t.blocks)} "
               f"block{'s' if len(t.blocks) > 1 else ''}, {n} row{'s' if n > 1 else ''})")
