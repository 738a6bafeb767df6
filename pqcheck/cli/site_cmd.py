"""`pqcheck site SITE.toml` (site interconnection study) and `pqcheck site new PATH`."""

from __future__ import annotations

import math
import os
from pathlib import Path

import click

from .. import numfmt
from ._common import (
    EXIT_OK,
    VERDICT_EXIT,
    fail_usage,
    format_option,
    handle_errors,
    main,
    output_option,
    template_target,
)

__all__ = ["render_site_table"]

_SUMMATION_TEXT = {
    "general": "IEC TR 61000-3-6 general summation law (alpha 1 below order 5, 1.4 for 5-10, "
               "2 above 10)",
    "arithmetic": "arithmetic sum of magnitudes (worst case)",
    "phasor": "phasor sum with measured phases",
}


_f = numfmt.number  # the one number formatter


_BASIS_TEXT = {"current": "of IL", "voltage": "of nominal"}
_RELATION = {"pass": "<=", "fail": ">", "inconclusive": "vs", "not applicable": "vs"}


def check_line(c, decimals=None) -> str:
    """One check as a line: ``FAIL  I5  9.288 % of IL  > limit 7.000 %  (Table 2)``, numbers
    by :func:`pqcheck.numfmt.check_cells` (``decimals``: its
    :func:`~pqcheck.numfmt.check_decimals` over the study's checks, as the site report).

    The relation printed is the one that holds: ``<=`` for a pass, ``>`` for a fail, ``vs``
    when the check is undecided.
    """
    basis = _BASIS_TEXT.get(c.applies_to, "")
    measured, limit, _ = numfmt.check_cells(c, decimals)
    value = f"{measured} % {basis}" if c.measured is not None else "not measured"
    rel = _RELATION.get(c.verdict, "vs")
    text = (f"  {c.verdict.upper():<13}{c.label:<8}{value:<22}{rel} limit "
            f"{limit} %  ({c.clause}{', verify' if c.verify else ''})")
    if c.verdict == "inconclusive" and c.note:
        text += f"\n{'':15}{c.note}"
    return text


def render_site_table(study) -> str:
    """Human-readable summary of a :class:`pqcheck.site.SiteStudy` (no number recomputed)."""
    from ..site import CAUTIONS, shown_path

    s = study.site
    t = s.transformer
    out = [f"Site        {s.name}"]
    if s.path is not None:
        out.append(f"File        {s.path}  (SHA-256 {s.sha256[:16]}...)")
    sup = s.supply
    # as the site report: site-file values as given, computed ones by numfmt's kinds
    out.append(f"Supply      {numfmt.given(sup.nominal_voltage_v / 1e3)} kV, Ssc "
               f"{numfmt.given(sup.ssc_va / 1e6)} MVA (Isc {_f(sup.isc_a / 1e3, 4)} kA), X/R "
               f"{numfmt.given(sup.x_over_r)}")
    if t is not None:
        out.append(f"Transformer {numfmt.given(t.rating_va / 1e3)} kVA, "
                   f"{numfmt.given(t.primary_v / 1e3)} / {numfmt.given(t.secondary_v / 1e3)} kV, "
                   f"{numfmt.given(t.impedance_percent)} %, X/R {numfmt.given(t.x_over_r)}, "
                   f"{t.vector_group}; loading "
                   f"{numfmt.value(study.transformer_loading_percent, 'percent')} of rating")
    where = "transformer primary (supply side)" if s.pcc_location == "supply" and t else \
        "transformer secondary (units' bus)" if t else "supply terminals"
    out.append(f"PCC         {_f(study.pcc_voltage_v / 1e3, 4)} kV at the {where}; "
               f"Z = {_f(study.z_pcc_ohm.real, 4)} + j{_f(study.z_pcc_ohm.imag, 4)} Ohm")
    out.append(f"            ISC {_f(study.isc_a, 5, 'A')}, IL {_f(study.il_a, 5, 'A')} "
               f"({study.il_source}), ISC/IL {_f(study.isc_il, 4)}")
    out.append(f"Summation   {_SUMMATION_TEXT[study.summation]}")
    if study.limits is not None:
        out.append(f"Limits      {study.limits.table_id}: {'; '.join(study.limits.rows)}")
    out.append("")
    # names and load points in full (a cut name can hide which unit it is)
    nw = max([24] + [len(u.name) + 1 for u in s.units])
    lw = max([14] + [len(u.load_point) + 1 for u in s.units])
    head = f"{'unit':<{nw}}{'count':>6}  {'load point':<{lw}}{'shift':>7}{'I1 each':>11}  data"
    out.append(head)
    out.append("-" * len(head))
    for u in s.units:
        i1 = max(abs(x) for x in u.spectrum.current[:, 1])
        out.append(f"{u.name:<{nw}}{u.count:>6}  {u.load_point:<{lw}}"
                   f"{_f(u.phase_shift_deg, 3):>7}{_f(i1, 4, 'A'):>11}  "
                   f"{shown_path(u.spectrum.source, s.path)}")
    other = s.other_load
    if other.demand_w or other.demand_current_a:
        out.append(f"{'other load (linear)':<{nw}}{'':>6}  "
                   f"{_f(other.demand_w / 1e3, 4, 'kW') + ', PF ' + _f(other.power_factor, 3)}")
    out.append("")
    out.append(f"Estimated at the PCC (worst phase; {study.summation} summation)")
    head = (f"{'order':>5}{'I [A]':>11}{'% of IL':>9}{'limit':>7}{'V [%]':>9}{'limit':>7}")
    out.append(head)
    out.append("-" * len(head))
    dec = numfmt.check_decimals(study.checks)
    i_dec = max((dec[numfmt.check_key(c)] for c in study.checks if c.applies_to == "current"),
                default=3)
    v_dec = max((dec[numfmt.check_key(c)] for c in study.checks if c.applies_to == "voltage"),
                default=3)
    amps = numfmt.decimals_for([max(study.current_a[:, h]) for h in study.orders[2:]],
                               numfmt.RMS_DIGITS)
    for h in study.orders[2:]:
        ic = study.check(f"I{h}")
        vc = study.check(f"V{h}")
        i_pct = study.current_percent_il[h]
        v_pct = study.voltage_percent[h]
        if not (ic and ic.verdict == "fail") and not (vc and vc.verdict == "fail") and \
                (not math.isfinite(i_pct) or i_pct < 0.05) and \
                (not math.isfinite(v_pct) or v_pct < 0.05):
            continue
        i_a = max(study.current_a[:, h])
        mark = "  FAIL" if (ic and ic.verdict == "fail") or (vc and vc.verdict == "fail") else ""
        # columns of one count of decimals: the checks' (numfmt.check_decimals)
        out.append(f"{h:>5}{numfmt.fixed(i_a, amps):>11}{numfmt.fixed(i_pct, i_dec):>9}"
                   f"{numfmt.fixed(ic.limit if ic else None, i_dec):>7}"
                   f"{numfmt.fixed(v_pct, v_dec):>9}"
                   f"{numfmt.fixed(vc.limit if vc else None, v_dec):>7}{mark}")
    out.append("(orders under 0.05 % in both columns not shown)")
    out.append("")
    out.append("Checks")
    for c in study.checks:
        if c.quantity == "harmonic" and c.verdict == "pass":
            continue
        out.append(check_line(c, dec))
    n_pass = sum(1 for c in study.checks if c.quantity == "harmonic" and c.verdict == "pass")
    out.append(f"  PASS         {n_pass} individual-order checks")
    out.append(f"Verdict     {study.verdict.upper()}")
    out.append("")
    out.append("Verdict by summation method (failing checks under each)")
    for o in study.by_summation:
        used = " (used)" if o.summation == study.summation else ""
        name = f"{o.summation}{used}"
        if not o.verdict:
            out.append(f"  {name:<18}not computed: {o.note}")
        else:
            out.append(f"  {name:<18}{o.verdict.upper():<13}"
                       f"{', '.join(o.failing) or 'no limit exceeded'}")
    out.append("")
    if study.headroom:
        out.append("Headroom (more units of one kind, others unchanged)")
        for hr in study.headroom:
            if hr.already_exceeded:
                txt = f"none: the site already exceeds {hr.binding}; "
                txt += ("it exceeds a limit even without this kind" if hr.passing_count is None
                        else f"it meets every limit with {hr.passing_count} of this kind")
            elif hr.extra_units is None:
                txt = f"more than {hr.searched_up_to} (no limit reached)"
            else:
                value, limit = numfmt.value_and_limit(hr.binding_value, hr.binding_limit, "%")
                txt = f"{hr.extra_units} more; then {hr.binding} binds ({value} > {limit})"
            if hr.extra_units_rating is not None:
                txt += f"; transformer rating reached after {hr.extra_units_rating} more"
            out.append(f"  {hr.unit:<{max(31, nw)}}{txt}")
        out.append("")
    if study.findings:
        out.append("Findings")
        for f in study.findings:
            out.append(f"  [{f.severity}] {f.code}: {f.message}")
        out.append("")
    out.append("Cautions")
    for c in CAUTIONS:
        out.append(f"  - {c}")
    return "\n".join(out)


class _SiteGroup(click.Group):
    """``pqcheck site SITE.toml ...`` runs the study; ``pqcheck site new PATH`` writes a
    template. A first argument that is not a subcommand name is taken as a site file."""

    def parse_args(self, ctx, args):
        if args and args[0] not in self.commands and args[0] not in ("-h", "--help"):
            args = ["run"] + list(args)
        return super().parse_args(ctx, args)


@main.group("site", cls=_SiteGroup)
def site_group():
    """Site interconnection study: several units at one point of common coupling.

    \b
      pqcheck site SITE.toml [-o site-report.pdf] [--json site.json] [--format table|json]
      pqcheck site new PATH          write a commented site template

    The study combines the measured harmonic currents of every unit at the PCC, estimates the
    voltage distortion they cause through the supply impedance, checks both against the
    IEEE 519 limits, and says how many more units of each kind fit. Exit code 0 pass, 1 a
    limit exceeded, 3 inconclusive, 2 bad input. The result is an estimate for planning; the
    utility's own study governs.
    """


@site_group.command("run")
@click.argument("site_file", metavar="SITE.toml", type=click.Path(dir_okay=False))
@output_option("PDF", help="Write the site study report as a PDF (the results JSON is "
                           "attached).")
@click.option("--json", "json_path", type=click.Path(dir_okay=False), metavar="PATH",
              help="Also write the results as JSON (the same file is attached to the PDF).")
@click.option("--force", is_flag=True,
              help="Replace existing output files (never an input of the study).")
@format_option("site run")
@click.option("--summation", type=click.Choice(["general", "arithmetic", "phasor"]),
              help="Override the site file's summation of the units' harmonic currents.")
@click.option("--title", metavar="TEXT", help="Report title.")
@click.option("--operator", metavar="TEXT", help="Who prepared the study.")
@click.option("--report-id", "report_id", metavar="TEXT",
              help="Report id for the footer of every page. Default: generated from the date "
                   "and the data.")
@handle_errors
def site_run(site_file, output, json_path, force, fmt, summation, title, operator, report_id):
    """Run the site study of SITE.toml (the default subcommand)."""
    from datetime import datetime, timezone

    from ..files.atomic import OutputSet, check_target
    from ..report.job import make_report_id
    from ..results import dumps, site_document
    from ..run.site import load_site
    from ..site import StudySpec, study_site

    # 1. Every output must be writable, and none may be an input, before any work is done.
    outputs = [(opt, Path(p)) for opt, p in (("-o", output), ("--json", json_path))
               if p is not None]
    if len(outputs) == 2 and _same_file(outputs[0][1], outputs[1][1]):
        fail_usage("--json and -o name the same file; give two different paths")
    for opt, p in outputs:
        _refuse_input(opt, p, [("the site file", Path(site_file))])
        check_target(p, force=force, option=opt)
    # 2. The study (any bad input stops here with exit 2 and nothing written).
    spec = StudySpec(site_file=str(site_file), summation=summation)
    site = load_site(spec.site_file)
    study = study_site(site, **spec.study_kwargs())
    inputs = [(f"the {what} of {name!r}" if what.startswith("unit") else f"the {what}",
               Path(path)) for what, name, path, _ in study.inputs if path]
    for opt, p in outputs:
        _refuse_input(opt, p, inputs)
    # 3. Render everything in memory, then write.
    created = datetime.now(timezone.utc).replace(microsecond=0)
    rid = report_id or make_report_id([sha for *_, sha in study.inputs], created)
    meta = {"title": title or "Site interconnection study", "operator": operator or "",
            "id": rid, "time_of_analysis_utc": created.isoformat()}
    doc = site_document(study, spec=spec, report=meta)
    results = dumps(doc).encode("utf-8")
    pdf = None
    if output is not None:
        from ..report.site_pdf import render_site_pdf

        pdf = render_site_pdf(study, report=meta, results_json=results)
    # both files or neither (never an input of the study)
    files = OutputSet(force=force, protect=[site_file, *(path for *_, path, _ in study.inputs
                                                         if path)])
    if output is not None:
        files.put(files.add(output, "-o"), pdf)
    if json_path is not None:
        files.put(files.add(json_path, "--json"), results)
    written = [str(p) for p in files.commit()] if files.paths else []
    if fmt == "json":
        click.echo(results.decode("utf-8"))
    else:
        click.echo(render_site_table(study))
        for p in written:
            click.echo(f"\nWrote {p}" if p == written[0] else f"Wrote {p}")
    raise click.exceptions.Exit(VERDICT_EXIT[study.verdict])


def _same_file(a: Path, b: Path) -> bool:
    """The two paths name one file (the same inode, or the same resolved path)."""
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    except OSError:
        pass
    return a.resolve() == b.resolve()


def _refuse_input(option: str, out: Path, inputs) -> None:
    """Exit 2 when an output names one of the inputs (never overwritten, even with --force)."""
    for what, p in inputs:
        if _same_file(out, p):
            fail_usage(f"{option} {out} is {what}, an input of the study; it is never "
                       "overwritten, even with --force: give another output path")


@site_group.command("new")
@click.argument("path", required=False, type=click.Path(dir_okay=False))
@output_option("PATH", help="The template to write (or give PATH as the argument).")
@click.option("--force", is_flag=True, help="Replace an existing file.")
@handle_errors
def site_new(path, output, force):
    """Write a commented site template to PATH (edit it, then run pqcheck site PATH)."""
    from ..files.atomic import write_atomic

    path = template_target(path, output)
    from ..site import site_template

    write_atomic(path, site_template(), force=force)
    click.echo(f"Wrote {path}; edit it, then run: pqcheck site {path}")
    raise click.exceptions.Exit(EXIT_OK)
