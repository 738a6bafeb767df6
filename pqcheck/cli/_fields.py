"""The one translation between the command line and the run specification.

:data:`SPEC_OPTIONS` is the table from :class:`~pqcheck.record.RunSpec` field paths to the
options that set them. Everything else follows from it:

- :func:`spec_from_options` turns parsed options into a :class:`~pqcheck.record.RunSpec`
  (nothing else on the command line assembles reader, analysis or limit arguments);
- :func:`cli_text` and :func:`cli_message` restate library errors in the user's terms: the
  library names fields (``field="sample_rate_hz"``, and ```sample_rate_hz``` in backquotes
  inside a message) and this module puts the option in their place (``--sample-rate``);
- :func:`command_line` writes the command that gives a spec, for the report's traceability
  block (a record for the reader; ``pqcheck verify`` reads the spec itself, never this text).

Every option of :data:`SPEC_OPTIONS` uses the field's name as its click parameter name.
"""

from __future__ import annotations

import re
import shlex

from ..gates import Declared
from ..record import (
    AnalysisSettings,
    ChannelRoles,
    LimitSelection,
    ReaderOptions,
    ReportDetails,
    RunSpec,
)

__all__ = ["SPEC_OPTIONS", "OTHER_OPTIONS", "option_for", "spec_from_options", "cli_text",
           "cli_message", "command_line", "given_spec_options"]

SPEC_OPTIONS = (
    ("reader.path", "CAPTURE"),
    ("reader.sample_rate_hz", "--sample-rate"),
    ("reader.time_column", "--time-column"),
    ("reader.encoding", "--encoding"),
    ("reader.other_files", "--add-file"),
    ("channels.current", "--current"),
    ("channels.voltage", "--voltage"),
    ("analysis.nominal_hz", "--nominal-frequency"),
    ("analysis.max_order", "--max-order"),
    ("analysis.il_a", "--il"),
    ("analysis.wiring", "--wiring"),
    ("analysis.reference", "--reference"),
    ("analysis.voltage_connection", "--voltage-connection"),
    ("analysis.flicker", "--flicker"),
    ("analysis.flicker_path", "--flicker-path"),
    ("analysis.system_impedance_ohm", "--system-impedance"),
    ("analysis.lamp", "--lamp"),
    ("analysis.nominal_voltage_v", "--nominal-voltage"),
    ("limits.table", "--limits"),
    ("limits.voltage_level_v", "--voltage-level"),
    ("limits.isc_a", "--isc"),
    ("limits.il_a", "--il"),
    ("limits.generation", "--generation"),
    ("limits.equipment_class", "--class"),
    ("limits.equipment_kind", "--equipment-kind"),
    ("limits.rsce", "--rsce"),
    ("limits.ssc_va", "--ssc"),
    ("limits.rated_apparent_power_va", "--rated-power"),
    ("limits.switching", "--switching"),
    ("limits.rated_current_a", "--rated-current"),
    ("limits.iref_a", "--iref"),
    ("limits.active_power_w", "--active-power"),
    ("declared.location", "--location"),
    ("declared.behaviour", "--behaviour"),
    ("declared.cycle_s", "--cycle"),
    ("declared.representative_period", "--representative-period"),
    ("declared.phases", "--phases"),
    ("declared.current_accuracy", "--current-accuracy"),
    ("declared.voltage_accuracy", "--voltage-accuracy"),
    ("declared.bandwidth_hz", "--bandwidth"),
    ("declared.dc_coupled", "--dc-coupled"),
    ("declared.decision_rule", "--decision-rule"),
    ("report.title", "--title"),
    ("report.equipment", "--equipment"),
    ("report.site", "--site"),
    ("report.operator", "--operator"),
    ("report.report_id", "--report-id"),
    ("report.test_date", "--test-date"),
    ("report.detail", "--detail"),
)
"""RunSpec field path -> command-line option (``CAPTURE`` is the positional argument)."""

OTHER_OPTIONS = {
    "isc_il": "--isc and --il",
    "force": "--force",
    "output": "-o",
    "json": "--json",
    "csv": "--csv",
    "out": "-o",
    "search": "--search",
    "scheduler": "--scheduler",
    "workers": "--workers",
    "jobs": "--jobs",
    "cache_dir": "--cache-dir",
    "summation": "--summation",
}
"""Keywords of library functions that are not RunSpec fields -> their options."""

_BY_NAME = {**{path.rsplit(".", 1)[1]: opt for path, opt in SPEC_OPTIONS}, **OTHER_OPTIONS}
_BY_NAME["path"] = "CAPTURE"
# a field named in a message: in backquotes (`il_a`) or alone in brackets ((sample_rate_hz))
_TICKED = re.compile(r"`([A-Za-z_][A-Za-z0-9_]*)`|(?<=\()([a-z][a-z0-9]*_[a-z0-9_]+|wiring)(?=\))")


def option_for(name: str | None) -> str | None:
    """The option for a field name or path (``"limits[0].il_a"`` -> ``"--il"``); the name
    itself when no option sets it."""
    if not name:
        return name
    leaf = re.split(r"[.\]]", str(name))[-1] or str(name)
    return _BY_NAME.get(leaf, str(name))


def cli_text(text: str) -> str:
    """Put options in place of the ```field``` names of a library message."""
    def sub(m):
        name = m.group(1) or m.group(2)
        return _BY_NAME.get(name, m.group(0) if m.group(2) else name)

    return _TICKED.sub(sub, text)


def cli_message(exc) -> str:
    """``file:line: option: problem`` of an :class:`~pqcheck.errors.InputError`, in the
    command line's terms (any other exception: its text, translated)."""
    from ..errors import InputError, LimitTableError, PlanError

    if not isinstance(exc, InputError):
        return cli_text(str(exc))
    if isinstance(exc, PlanError) or (isinstance(exc, LimitTableError) and exc.path):
        # fields are keys of that document
        field = exc.field and cli_text(exc.field)
    else:
        field = option_for(exc.field)
    return InputError(cli_text(exc.problem), path=exc.path, line=exc.line,
                      field=field).location_message()


def split_columns(value: str | None) -> list | None:
    """Split a comma-separated column list option (None stays None).

    Raises
    ------
    InputError
        An empty name in the list.
    """
    from ..errors import InputError

    if value is None:
        return None
    cols = [c.strip() for c in value.split(",")]
    if any(not c for c in cols):
        raise InputError(f"empty column name in {value!r}; give names separated by commas, "
                         "e.g. ia,ib,ic")
    return cols


def _parts(opts: dict) -> dict:
    out: dict = {}
    for path, _ in SPEC_OPTIONS:
        part, leaf = path.split(".")
        if leaf in opts:
            out.setdefault(part, {})[leaf] = opts[leaf]
    return out


def spec_from_options(capture: str | None, opts: dict) -> RunSpec:
    """The :class:`~pqcheck.record.RunSpec` of parsed options.

    Parameters
    ----------
    capture : str or None
        The capture argument (None: a template for a batch).
    opts : dict
        Click parameters, named as the fields (``sample_rate_hz``, ``il_a``, ``table``...);
        ``current``/``voltage`` as comma-separated text, ``nominal_hz`` as text.

    Raises
    ------
    InputError
        A value out of range (naming the field; :func:`cli_message` names the option).
    """
    p = _parts(opts)
    ch = p.get("channels", {})
    ana = dict(p.get("analysis", {}))
    if ana.get("nominal_hz") is not None:
        ana["nominal_hz"] = int(ana["nominal_hz"])
    z = ana.get("system_impedance_ohm")
    if isinstance(z, str):  # "R,X[,RN,XN]"
        try:
            ana["system_impedance_ohm"] = tuple(float(x) for x in z.replace(";", ",").split(","))
        except ValueError:
            pass  # the spec names the bad value
    for name in ("flicker", "flicker_path"):
        if ana.get(name) is None:
            ana.pop(name, None)
    lim = dict(p.get("limits", {}))
    tables = lim.pop("table", None) or ()
    return RunSpec(
        reader=ReaderOptions(path=capture or "", **{k: v for k, v in p.get("reader", {}).items()
                                                    if k != "path"}),
        channels=ChannelRoles(current=split_columns(ch.get("current")),
                              voltage=split_columns(ch.get("voltage"))),
        analysis=AnalysisSettings(**ana),
        limits=tuple(LimitSelection(table=t, **lim) for t in tables),
        declared=Declared(**{k: v for k, v in p.get("declared", {}).items()
                             if not (k == "representative_period" and v is None)}),
        report=ReportDetails(**p.get("report", {})),
    )


def given_spec_options(ctx) -> list:
    """Options of :data:`SPEC_OPTIONS` given on the command line (not defaults), as
    ``(field name, option)`` in table order."""
    out = []
    for path, opt in SPEC_OPTIONS:
        leaf = path.rsplit(".", 1)[1]
        src = ctx.get_parameter_source(leaf)
        if src is not None and src.name not in ("DEFAULT", "DEFAULT_MAP") and \
                (leaf, opt) not in out:
            out.append((leaf, opt))
    return out


def command_line(command: str, spec: RunSpec, *, source: str | None = None) -> str:
    """The command that gives ``spec`` (options in table order, defaults left out)."""
    words = ["pqcheck", command, shlex.quote(source or spec.reader.path)]
    seen = set()
    values = {
        "reader": spec.reader, "channels": spec.channels, "analysis": spec.analysis,
        "report": spec.report, "declared": spec.declared,
        "limits": spec.limits[0] if spec.limits else None,
    }
    for path, opt in SPEC_OPTIONS:
        part, leaf = path.split(".")
        if opt == "CAPTURE" or opt in seen or values[part] is None:
            continue
        if path == "limits.table":
            for sel in spec.limits:
                words += [opt, shlex.quote(sel.table)]
            seen.add(opt)
            continue
        if part == "limits":  # one value for every table: the first one given
            v = next((getattr(x, leaf) for x in spec.limits if getattr(x, leaf) is not None),
                     None)
        else:
            v = getattr(values[part], leaf)
        if v is None:
            continue
        seen.add(opt)
        if isinstance(v, bool):
            if v:
                words.append(opt)
        elif path == "reader.other_files":
            for f in v:
                words += [opt, shlex.quote(f)]
        elif isinstance(v, tuple):
            if v:
                words += [opt, shlex.quote(",".join(f"{x:g}" if isinstance(x, float) else x
                                                    for x in v))]
        elif path == "analysis.flicker_path" and v == "auto":
            continue
        else:
            words += [opt, shlex.quote(f"{v:g}" if isinstance(v, float) else str(v))]
    return " ".join(words)
