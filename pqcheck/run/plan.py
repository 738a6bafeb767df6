"""Test plans: one TOML file that describes a whole harmonic-emission test.

A plan names the site and its point of common coupling (PCC), the equipment under test, the test
conditions with the instrument chain, every capture with its channel map and load point, and the
limit tables to apply with the values that select their rows. ``pqcheck report PLAN`` analyses
every capture, checks it against every table and writes one report with a per-load-point
summary. ``pqcheck plan new PATH`` writes a commented template (:func:`plan_template`).

Relative file paths in a plan resolve against the folder that holds the plan, so a plan and its
captures can be moved or archived together. Every problem is a :class:`~pqcheck.errors.PlanError`
naming the file, the line and the field (``plan.toml:42: captures[2].file: ...``).

Values in the file use the units in their names (``_v`` volts, ``_a`` amperes, ``_hz`` hertz,
``_va`` volt-amperes, ``_w`` watts, ``_c`` degrees Celsius).
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path

from ..files.tomldoc import (
    BOOL,
    INT,
    NUM,
    POS,
    STR,
    STRS,
    TABLE,
    TABLES,
    DocReader,
    Field,
    read_document,
)
from ..limits import table_path

__all__ = [
    "SCHEMA_VERSION",
    "Transformer",
    "Site",
    "Equipment",
    "Instrument",
    "Conditions",
    "AnalysisOptions",
    "LimitSpec",
    "CaptureSpec",
    "Plan",
    "load_plan",
    "plan_template",
]

SCHEMA_VERSION = 1


@dataclass(frozen=True)
class Transformer:
    """The transformer that feeds the PCC (all fields optional).

    Attributes
    ----------
    rating_va : float or None
        Rated apparent power. [VA]
    primary_v, secondary_v : float or None
        Rated line-to-line voltages. [V]
    impedance_percent : float or None
        Short-circuit impedance. [%]
    description : str
        Free text (vector group, tap, owner).
    """

    rating_va: float | None = None
    primary_v: float | None = None
    secondary_v: float | None = None
    impedance_percent: float | None = None
    description: str = ""


@dataclass(frozen=True)
class Site:
    """Site and point of common coupling.

    Attributes
    ----------
    name, address, pcc, notes : str
        Free text; ``pcc`` says where the point of common coupling is.
    nominal_voltage_v : float or None
        Nominal line-to-line voltage at the PCC. [V]
    nominal_frequency_hz : float or None
        50 or 60. [Hz]
    isc_a : float or None
        Maximum short-circuit current at the PCC. [A]
    il_a : float or None
        Maximum demand load current (fundamental) at the PCC. [A]
    rsce : float or None
        Short-circuit ratio of the equipment at the PCC (IEC 61000-3-12). [unitless]
    ssc_va : float or None
        Short-circuit power at the PCC. [VA]
    transformer : Transformer
    """

    name: str = ""
    address: str = ""
    pcc: str = ""
    nominal_voltage_v: float | None = None
    nominal_frequency_hz: float | None = None
    isc_a: float | None = None
    il_a: float | None = None
    rsce: float | None = None
    ssc_va: float | None = None
    transformer: Transformer = Transformer()
    notes: str = ""


@dataclass(frozen=True)
class Equipment:
    """Equipment under test.

    Attributes
    ----------
    name, manufacturer, model, serial, firmware, description : str
        Identity (free text).
    rated_power_w : float or None
        Rated active power. [W]
    rated_apparent_power_va : float or None
        Rated apparent power (Sequ of IEC 61000-3-12). [VA]
    rated_current_a : float or None
        Rated input or output current per phase. [A]
    rated_voltage_v : float or None
        Rated line-to-line voltage. [V]
    equipment_class : str
        IEC 61000-3-2 class (``"A"``, ``"B"``, ``"C"``, ``"D"``) or empty.
    equipment_kind : str
        Kind of equipment that selects an IEC 61000-3-12 table (for example
        ``"balanced-three-phase"``) or empty.
    generation : bool
        True for power-generation equipment (it can export power).
    """

    name: str = ""
    manufacturer: str = ""
    model: str = ""
    serial: str = ""
    firmware: str = ""
    description: str = ""
    rated_power_w: float | None = None
    rated_apparent_power_va: float | None = None
    rated_current_a: float | None = None
    rated_voltage_v: float | None = None
    equipment_class: str = ""
    equipment_kind: str = ""
    generation: bool = False


@dataclass(frozen=True)
class Instrument:
    """One element of the instrument chain (digitiser, probe, transducer).

    Attributes
    ----------
    role, model, serial, ratio, range, accuracy, measurement_category, calibration_due, notes : str
        Free text as the data sheet and calibration certificate give them, e.g. ``ratio =
        "100 mV/A"``, ``accuracy = "1 % of reading + 0.1 A"``, ``measurement_category =
        "CAT III 1000 V"``.
    channels : tuple of str
        Capture columns this element feeds.
    bandwidth_hz : float or None
        -3 dB bandwidth. [Hz]
    sample_rate_hz : float or None
        Sample rate (digitisers). [Hz]
    dc_coupled, zeroed : bool or None
        The element passes dc (shunt, Hall-effect clamp) and its offset was zeroed before the
        capture (dc limits need both).
    """

    role: str = ""
    model: str = ""
    serial: str = ""
    channels: tuple = ()
    ratio: str = ""
    bandwidth_hz: float | None = None
    sample_rate_hz: float | None = None
    range: str = ""
    accuracy: str = ""
    measurement_category: str = ""
    calibration_due: str = ""
    notes: str = ""
    dc_coupled: bool | None = None
    zeroed: bool | None = None


@dataclass(frozen=True)
class Conditions:
    """Test conditions.

    Attributes
    ----------
    date : str
        Date (or dates) of the measurements, as written in the plan.
    operator : str
        Who made the measurements (printed on the cover and by the sign-off block).
    location, supply, notes : str
        Where the test ran, what fed it (e.g. ``"public LV network via T1"``), remarks.
    ambient_c : float or None
        Ambient temperature. [degC]
    instruments : tuple of Instrument
    measured_at : str
        ``"pcc"`` or ``"equipment-terminals"`` ("" not stated).
    behaviour : str
        Type of equipment behaviour for the observation period (IEC 61000-3-2/-3-12).
    cycle_s : float or None
        Operating cycle of cyclic equipment. [s]
    representative_period : bool
        The captures are declared representative periods shorter than the standard's
        observation (where the table allows it).
    decision_rule : str
        ``"guarded"`` (default) or ``"simple"`` (pqcheck.uncertainty).
    """

    date: str = ""
    operator: str = ""
    location: str = ""
    ambient_c: float | None = None
    supply: str = ""
    instruments: tuple = ()
    notes: str = ""
    measured_at: str = ""
    behaviour: str = ""
    cycle_s: float | None = None
    representative_period: bool = False
    decision_rule: str = ""


@dataclass(frozen=True)
class AnalysisOptions:
    """Analysis settings that apply to every capture of the plan.

    Attributes
    ----------
    nominal_frequency_hz : float or None
        50 or 60; default the site's, else detected. [Hz]
    max_order : int or None
        Highest harmonic order analysed; None: the highest any applied table assesses (50
        without tables). [unitless]
    wiring : str or None
        ``"3-wire"`` or ``"4-wire"``; None to infer.
    """

    nominal_frequency_hz: float | None = None
    max_order: int | None = None
    wiring: str | None = None


@dataclass(frozen=True)
class LimitSpec:
    """One limit table to apply, with the values that select its rows.

    Attributes
    ----------
    table : str
        Bundled table id (``"ieee519-2022"``) or the path as written in the plan.
    path : pathlib.Path or None
        Resolved path for a user table, None for a bundled id.
    selectors : dict
        Values given in this entry (keys as in the plan: ``voltage_level_v``, ``isc_a``,
        ``il_a``, ``rsce``, ``ssc_va``, ``rated_apparent_power_va``, ``rated_current_a``,
        ``iref_a``, ``active_power_w``, ``equipment_class``, ``equipment_kind``,
        ``generation``); values not given come from ``[site]`` and ``[equipment]`` (see
        :meth:`Plan.selection`).
    line : int or None
        Line of the entry in the plan.
    """

    table: str
    path: Path | None = None
    selectors: dict = field(default_factory=dict)
    line: int | None = None

    @property
    def source(self) -> str:
        """The table to load: the resolved path or the bundled id."""
        return str(self.path) if self.path is not None else self.table


@dataclass(frozen=True)
class CaptureSpec:
    """One capture of the plan.

    Attributes
    ----------
    id : str
        Short identifier (default: the file name without extension).
    path : pathlib.Path
        Resolved capture file.
    load_point : str
        Label of the operating point, e.g. ``"50 %"``.
    load_percent : float or None
        Operating point in percent of rated power. [%]
    current, voltage : tuple of str or None
        Channel map: columns in phase order a, b, c (a neutral current may follow).
    sample_rate_hz : float or None
        For files without a time column. [Hz]
    time_column : str or None
    limits : tuple of str or None
        Tables (as written in ``[[limits]]``) that apply to this capture; None = all.
    notes : str
    exclude : str
        Why the capture is excluded from the assessment (empty: it is assessed). An excluded
        capture stays in the record (its file and SHA-256 are listed in the report with the
        reason) but is neither analysed nor assessed, so one mistaken record does not hold
        back the verdict on the others.
    line : int or None
        Line of the entry in the plan.
    """

    id: str
    path: Path
    load_point: str = ""
    load_percent: float | None = None
    current: tuple | None = None
    voltage: tuple | None = None
    sample_rate_hz: float | None = None
    time_column: str | None = None
    limits: tuple | None = None
    notes: str = ""
    exclude: str = ""
    line: int | None = None


@dataclass(frozen=True)
class Plan:
    """A loaded test plan (see the module docstring).

    Attributes
    ----------
    path : pathlib.Path
        The plan file.
    sha256 : str
        SHA-256 of the plan file's bytes (hex).
    title, report_id, notes : str
    site : Site
    equipment : Equipment
    conditions : Conditions
    analysis : AnalysisOptions
    limits : tuple of LimitSpec
    captures : tuple of CaptureSpec
    """

    path: Path
    sha256: str
    title: str
    site: Site
    equipment: Equipment
    conditions: Conditions
    analysis: AnalysisOptions
    limits: tuple
    captures: tuple
    report_id: str = ""
    notes: str = ""

    @property
    def folder(self) -> Path:
        """Folder relative paths resolve against."""
        return self.path.parent

    @property
    def assessed(self) -> tuple:
        """The captures that are analysed and assessed (not excluded)."""
        return tuple(c for c in self.captures if not c.exclude)

    @property
    def excluded(self) -> tuple:
        """The captures excluded from the assessment, each with its reason."""
        return tuple(c for c in self.captures if c.exclude)

    def limits_for(self, capture: CaptureSpec) -> tuple:
        """The :class:`LimitSpec` entries that apply to ``capture``."""
        if capture.limits is None:
            return self.limits
        return tuple(spec for spec in self.limits if spec.table in capture.limits)

    def selection(self, spec: LimitSpec) -> dict:
        """Row-selecting values for ``spec``: the entry's own values, else the site's and the
        equipment's. Keys as in :attr:`LimitSpec.selectors`; unknown values are absent."""
        s, e = self.site, self.equipment
        base = {
            "voltage_level_v": s.nominal_voltage_v,
            "isc_a": s.isc_a,
            "il_a": s.il_a,
            "rsce": s.rsce,
            "ssc_va": s.ssc_va,
            "rated_apparent_power_va": e.rated_apparent_power_va,
            "rated_current_a": e.rated_current_a,
            "equipment_class": e.equipment_class or None,
            "equipment_kind": e.equipment_kind or None,
            "generation": e.generation or None,
        }
        base.update(spec.selectors)
        return {k: v for k, v in base.items() if v is not None}

    def placeholders(self) -> list:
        """Template text left in the plan and required fields left empty (``pqcheck plan
        new`` writes them), as ``"field: problem"`` strings; such a plan cannot pass."""
        out = []
        s, e, c = self.site, self.equipment, self.conditions
        for field_, value, template in (
                ("site.name", s.name, "Site name"),
                ("site.pcc", s.pcc, "Where the point of common coupling is"),
                ("equipment.name", e.name, "Equipment under test"),
                ("conditions.date", c.date, "YYYY-MM-DD"),
                ("conditions.supply", c.supply, "What fed the equipment during the test")):
            if value and value.strip().startswith(template):
                out.append(f"{field_}: still the template text {value!r}")
        for field_, value in (("equipment.name", e.name), ("conditions.date", c.date)):
            if not (value or "").strip():
                out.append(f"{field_}: empty")
        for k, ins in enumerate(c.instruments):
            where = f"conditions.instruments[{k + 1}]"
            if not ins.model.strip():
                out.append(f"{where}.model: empty")
            if not ins.accuracy.strip():
                out.append(f"{where}.accuracy: empty")
        if not c.instruments:
            out.append("conditions.instruments: no instrument declared")
        return out

    def declared(self):
        """The :class:`pqcheck.gates.Declared` of this plan: location, behaviour, cycle,
        representative period, rated power, the instrument chain and the decision rule."""
        from ..gates import Declared
        from ..uncertainty import Chain, parse_accuracy

        c, e = self.conditions, self.equipment
        chains = []
        for ins in c.instruments:
            acc = parse_accuracy(ins.accuracy)
            chains.append(Chain(
                channels=tuple(ins.channels), accuracy_percent=acc[0] if acc else None,
                floor=acc[1] if acc else None, bandwidth_hz=ins.bandwidth_hz,
                sample_rate_hz=ins.sample_rate_hz, dc_coupled=ins.dc_coupled,
                zeroed=ins.zeroed, name=" ".join(x for x in (ins.role, ins.model) if x)))
        return Declared(location=c.measured_at or None, behaviour=c.behaviour or None,
                        cycle_s=c.cycle_s, representative_period=c.representative_period,
                        rated_power_w=e.rated_power_w, chains=tuple(chains),
                        decision_rule=c.decision_rule or "guarded",
                        plan_problems=tuple(self.placeholders()))

    def limit_selection(self, spec: LimitSpec):
        """The :class:`~pqcheck.record.LimitSelection` of one ``[[limits]]`` entry (its own
        values, else the site's and the equipment's: :meth:`selection`)."""
        from ..record import LimitSelection

        return LimitSelection(table=spec.source, **self.selection(spec))

    def run_spec(self, capture: CaptureSpec, report=None):
        """The :class:`~pqcheck.record.RunSpec` of one capture of the plan: its file, reader
        options and channel map, the plan's analysis settings (nominal frequency from
        ``[analysis]``, else ``[site]``; IL from ``[site]``) and one selection per table that
        applies to it.

        Parameters
        ----------
        capture : CaptureSpec
        report : ReportDetails or None
            What the report says (as given on the command line).
        """
        from ..record import (
            AnalysisSettings,
            ChannelRoles,
            ReaderOptions,
            ReportDetails,
            RunSpec,
        )

        nominal = self.analysis.nominal_frequency_hz or self.site.nominal_frequency_hz
        return RunSpec(
            reader=ReaderOptions(path=str(capture.path), sample_rate_hz=capture.sample_rate_hz,
                                 time_column=capture.time_column),
            channels=ChannelRoles(current=capture.current, voltage=capture.voltage),
            analysis=AnalysisSettings(nominal_hz=None if nominal is None else int(nominal),
                                      max_order=self.analysis.max_order, il_a=self.site.il_a,
                                      wiring=self.analysis.wiring),
            limits=tuple(self.limit_selection(s) for s in self.limits_for(capture)),
            declared=self.declared(),
            report=report if report is not None else ReportDetails(),
        )


PLAN_KEYS = {"nominal_hz": "nominal_frequency_hz"}
"""Run-specification field -> plan key, where they differ (the plan boundary's one table)."""


def plan_terms(text: str) -> str:
    """A library message in the plan's terms: ```field``` names become plan keys."""
    return re.sub(r"`([A-Za-z_][A-Za-z0-9_]*)`", lambda m: PLAN_KEYS.get(m.group(1), m.group(1)),
                  text)


# ---------------------------------------------------------------------------------------------
# Loading
# ---------------------------------------------------------------------------------------------

_NUM, _POS, _STR, _BOOL, _STRS = NUM, POS, STR, BOOL, STRS
_HZ = Field(POS, choices=(50.0, 60.0))

# The plan's keys, declared (pqcheck.files.tomldoc.Field): kind, required, choices, range.
_TRANSFORMER = {"rating_va": _POS, "primary_v": _POS, "secondary_v": _POS,
                "impedance_percent": _POS, "description": _STR}
_SITE = {"name": _STR, "address": _STR, "pcc": _STR, "nominal_voltage_v": _POS,
         "nominal_frequency_hz": _HZ, "isc_a": _POS, "il_a": _POS, "rsce": _POS,
         "ssc_va": _POS, "transformer": TABLE, "notes": _STR}
_EQUIPMENT = {"name": _STR, "manufacturer": _STR, "model": _STR, "serial": _STR,
              "firmware": _STR, "description": _STR, "rated_power_w": _POS,
              "rated_apparent_power_va": _POS, "rated_current_a": _POS, "rated_voltage_v": _POS,
              "equipment_class": _STR, "equipment_kind": _STR, "generation": _BOOL}
_INSTRUMENT = {"role": _STR, "model": _STR, "serial": _STR, "channels": _STRS, "ratio": _STR,
               "bandwidth_hz": _POS, "sample_rate_hz": _POS, "range": _STR, "accuracy": _STR,
               "measurement_category": _STR, "calibration_due": _STR, "notes": _STR,
               "dc_coupled": _BOOL, "zeroed": _BOOL}
_CONDITIONS = {"date": _STR, "operator": _STR, "location": _STR, "ambient_c": _NUM,
               "supply": _STR, "instruments": TABLES, "notes": _STR,
               "measured_at": Field(STR, choices=("pcc", "equipment-terminals")),
               "behaviour": _STR, "cycle_s": _POS, "representative_period": _BOOL,
               "decision_rule": Field(STR, choices=("guarded", "simple"))}
_ANALYSIS = {"nominal_frequency_hz": _HZ, "max_order": Field(INT, low=2, high=100),
             "wiring": Field(STR, choices=("3-wire", "4-wire"))}
_SELECTOR_KEYS = {"voltage_level_v": _POS, "isc_a": _POS, "il_a": _POS, "rsce": _POS,
                  "ssc_va": _POS, "rated_apparent_power_va": _POS, "rated_current_a": _POS,
                  "iref_a": _POS, "active_power_w": _POS, "equipment_class": _STR,
                  "equipment_kind": _STR, "generation": _BOOL}
_LIMIT = {"table": Field(STR, required="a bundled table id such as \"ieee519-2022\" or the "
                                       "path of a table file"), **_SELECTOR_KEYS}
_CAPTURE = {"id": _STR, "file": Field(STR, required="the capture file, relative to the plan"),
            "load_point": _STR, "load_percent": Field(POS, high=200.0, unit="%"),
            "current": _STRS, "voltage": _STRS, "sample_rate_hz": _POS, "time_column": _STR,
            "limits": _STRS, "notes": _STR, "exclude": _STR}
_TOP = {"schema": INT, "title": _STR, "report_id": _STR, "notes": _STR,
        "site": TABLE, "equipment": TABLE, "conditions": TABLE, "analysis": TABLE,
        "limits": TABLES, "captures": TABLES}

_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")


class _Reader(DocReader):
    """Validates one parsed plan, naming file, line and field in every error."""

    def __init__(self, path: Path, text: str):
        super().__init__(path, text, "plan")


def load_plan(path, *, check_files: bool = True) -> Plan:
    """Read and validate a test plan.

    Parameters
    ----------
    path : str or os.PathLike
        The plan file (TOML).
    check_files : bool
        Require every capture and user limit table to exist (default True).

    Returns
    -------
    Plan

    Raises
    ------
    PlanError
        The file is missing or not TOML, a field is unknown, has the wrong type or value, a
        file it names does not exist, an id is repeated, or a capture names a limit table the
        plan does not list. The message names file, line and field.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "run.csv").write_text("t,i\\n")
    >>> _ = (d / "plan.toml").write_text('[[captures]]\\nfile = "run.csv"\\nload_percent = 50\\n')
    >>> plan = load_plan(d / "plan.toml")
    >>> plan.captures[0].id, plan.captures[0].load_point, plan.captures[0].path == d / "run.csv"
    ('run', '50 %', True)
    """
    path = Path(path)
    raw, text, doc = read_document(path, "plan file")
    r = _Reader(path, text)
    folder = path.resolve().parent
    top = r.table(doc, (), _TOP)
    schema = top.get("schema", SCHEMA_VERSION)
    if schema != SCHEMA_VERSION:
        raise r.error(("schema",), f"this pqcheck reads plan schema {SCHEMA_VERSION}, got "
                                   f"{schema}")

    site_doc = doc.get("site", {})
    site = r.table(site_doc, ("site",), _SITE)
    if "transformer" in site_doc:
        site["transformer"] = Transformer(**r.table(site_doc["transformer"],
                                                    ("site", "transformer"), _TRANSFORMER))
    site = Site(**site)

    equipment = Equipment(**r.table(doc.get("equipment", {}), ("equipment",), _EQUIPMENT))

    cond_doc = doc.get("conditions", {})
    cond = r.table(cond_doc, ("conditions",), _CONDITIONS)
    instruments = []
    for k, item in enumerate(r.array(cond_doc, ("conditions", "instruments"))):
        instruments.append(Instrument(**r.table(item, ("conditions", "instruments", k),
                                                _INSTRUMENT)))
    conditions = Conditions(instruments=tuple(instruments), **cond)

    ana = r.table(doc.get("analysis", {}), ("analysis",), _ANALYSIS)
    analysis = AnalysisOptions(**ana)

    limits = []
    for k, item in enumerate(r.array(doc, ("limits",))):
        kp = ("limits", k)
        vals = r.table(item, kp, _LIMIT)
        table = vals.pop("table").strip()
        if not table:
            raise r.error(kp + ("table",), "must not be empty")
        lpath = None
        if table_path(table) is not None:
            lpath = r.file(table, folder, kp + ("table",), check_files, "limit table")
        if any(spec.table == table for spec in limits):
            raise r.error(kp + ("table",), f"table {table!r} is listed twice; give one entry "
                                           "per table")
        limits.append(LimitSpec(table=table, path=lpath, selectors=vals,
                                line=r.lines.line(kp)))
    known_tables = {spec.table for spec in limits}

    captures = []
    entries = r.array(doc, ("captures",))
    if not entries:
        raise r.error(("captures",) if "captures" in doc else (),
                      "the plan lists no capture; add at least one [[captures]] entry with "
                      "file = \"...\"")
    for k, item in enumerate(entries):
        kp = ("captures", k)
        vals = r.table(item, kp, _CAPTURE)
        file_text = vals.pop("file")
        cpath = r.file(file_text, folder, kp + ("file",), check_files)
        cid = vals.pop("id", None) or Path(file_text).stem
        if not _ID.fullmatch(cid):
            raise r.error(kp + ("id",), f"id {cid!r} must start with a letter or digit and use "
                                        "only letters, digits, '.', '_' and '-'")
        if any(c.id == cid for c in captures):
            raise r.error(kp + ("id",) if "id" in item else kp + ("file",),
                          f"capture id {cid!r} is used twice; give each capture its own id")
        pct = vals.get("load_percent")
        if "load_point" not in vals and pct is not None:
            vals["load_point"] = f"{pct:g} %"
        if "exclude" in vals and not vals["exclude"].strip():
            raise r.error(kp + ("exclude",), "give the reason the capture is excluded (it is "
                                             "printed in the report), or remove the key")
        for name in vals.get("limits") or ():
            if name not in known_tables:
                listed = ", ".join(sorted(known_tables)) or "none"
                raise r.error(kp + ("limits",), f"{name!r} is not a [[limits]] table of this "
                                                f"plan (listed: {listed})")
        captures.append(CaptureSpec(id=cid, path=cpath, line=r.lines.line(kp), **vals))

    return Plan(
        path=path,
        sha256=hashlib.sha256(raw).hexdigest(),
        title=top.get("title", ""),
        report_id=top.get("report_id", ""),
        notes=top.get("notes", ""),
        site=site,
        equipment=equipment,
        conditions=conditions,
        analysis=analysis,
        limits=tuple(limits),
        captures=tuple(captures),
    )


# ---------------------------------------------------------------------------------------------
# Template
# ---------------------------------------------------------------------------------------------

_TEMPLATE = '''\
# pqcheck test plan (schema 1)
#
# One file describes a whole harmonic-emission test: the site and its point of common coupling
# (PCC), the equipment under test, the test conditions and instrument chain, every capture with
# its channel map and load point, and the limit tables to apply. Then:
#
#     pqcheck report THIS-FILE.toml -o report.pdf
#
# Relative paths resolve against the folder of this file. Units are in the field names:
# _v volts, _a amperes, _hz hertz, _va volt-amperes, _w watts, _c degrees Celsius.
# Delete the lines you do not need; every field except captures[].file is optional.

schema = 1
title = "Harmonic emission test"
# report_id = "LAB-2025-001"     # default: generated from the results

[site]
name = "Site name"
address = ""
pcc = "Where the point of common coupling is, e.g. the LV busbar of transformer T1"
nominal_voltage_v = 400          # line-to-line voltage at the PCC
nominal_frequency_hz = 50        # 50 or 60
# isc_a = 20000                  # maximum short-circuit current at the PCC (IEEE 519 ISC)
# il_a = 1000                    # maximum demand load current at the PCC (IEEE 519 IL, TDD)
# ssc_va = 14e6                  # short-circuit power at the PCC (IEC 61000-3-12)
# rsce = 120                     # short-circuit ratio, if known directly

[site.transformer]
# rating_va = 1000e3
# primary_v = 11000
# secondary_v = 400
# impedance_percent = 6.0
description = ""

[equipment]
name = "Equipment under test"
manufacturer = ""
model = ""
serial = ""
firmware = ""
# rated_power_w = 50e3
# rated_apparent_power_va = 52e3 # Sequ of IEC 61000-3-12
# rated_current_a = 75           # per phase (IEEE 1547 I_rated)
# rated_voltage_v = 400
# equipment_class = "A"          # IEC 61000-3-2 class: A, B, C or D
# equipment_kind = "balanced-three-phase"   # selects the IEC 61000-3-12 table
# generation = false             # true if the equipment can export power

[conditions]
date = "YYYY-MM-DD"
# operator = "Who made the measurements"
location = ""
# ambient_c = 21
supply = "What fed the equipment during the test"
notes = ""
# measured_at = "pcc"            # or "equipment-terminals": where the limits must apply
# behaviour = "quasi-stationary" # IEC 61000-3-2/-3-12: short-cyclic, random, long-cyclic
# cycle_s = 60                   # operating cycle of cyclic equipment
# representative_period = false  # true: the captures are declared representative periods
# decision_rule = "guarded"      # or "simple" (a pass within the uncertainty is marked)

# The instrument chain: one entry per digitiser, probe or transducer, as its data sheet and
# calibration certificate state it. The report's measurement-uncertainty statement lists them.
[[conditions.instruments]]
role = "digitiser"
model = ""
serial = ""
channels = ["va", "vb", "vc", "ia", "ib", "ic"]
# sample_rate_hz = 25000
# bandwidth_hz = 10000
range = ""
accuracy = ""                    # e.g. "0.1 % of reading + 0.05 % of range"
measurement_category = ""        # e.g. "CAT III 600 V"
calibration_due = ""

[[conditions.instruments]]
role = "current probe"
model = ""
serial = ""
channels = ["ia", "ib", "ic"]
ratio = ""                       # e.g. "10 mV/A"
# bandwidth_hz = 100000
accuracy = ""                    # e.g. "1 % of reading + 0.05 A" (feeds the uncertainty)
# dc_coupled = true              # shunt or Hall-effect clamp (dc limits need it) ...
# zeroed = true                  # ... and the offset zeroed before the capture
measurement_category = ""
calibration_due = ""

[analysis]
# nominal_frequency_hz = 50      # default: the site's, else detected
# max_order = 50                 # default: the highest order the limit tables assess
# wiring = "3-wire"              # or "4-wire"; default: inferred

# Limit tables: a bundled id (pqcheck limits list) or the path of your own table file.
# Values that select a table's row default to the [site] and [equipment] values above; set
# them here to override for one table.
[[limits]]
table = "ieee519-2022"
# voltage_level_v = 400
# isc_a = 20000
# il_a = 1000
# Other tables use: rsce, ssc_va, rated_apparent_power_va, rated_current_a, iref_a,
# active_power_w, equipment_class, equipment_kind, generation.

# Captures: one entry per record. The channel map gives the columns in phase order a, b, c
# (a neutral current may follow); without it pqcheck guesses from the column names.
[[captures]]
id = "load-50"
file = "capture-50pct.csv"
load_percent = 50                # the load point, % of rated power
# load_point = "50 % (half load)"  # label; default from load_percent
current = ["ia", "ib", "ic"]
voltage = ["va", "vb", "vc"]
# sample_rate_hz = 25000         # only for files without a time column
# limits = ["ieee519-2022"]      # tables for this capture; default: all [[limits]]
notes = ""
# exclude = "why"                # keep the record (listed with the reason), do not assess it

[[captures]]
id = "load-100"
file = "capture-100pct.csv"
load_percent = 100
current = ["ia", "ib", "ic"]
voltage = ["va", "vb", "vc"]
'''


def plan_template() -> str:
    """Return the commented plan template that ``pqcheck plan new`` writes."""
    return _TEMPLATE
