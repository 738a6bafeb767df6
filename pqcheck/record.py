"""The record of a run: everything needed to reproduce one capture check, as frozen data.

A :class:`RunSpec` says which capture to read and how (:class:`ReaderOptions`, the channel
roles of :class:`ChannelRoles`), how to analyse it (:class:`AnalysisSettings`), which limit
tables to apply with the values that select their rows and scale their limits
(:class:`LimitSelection`, one per table), and what the report says about it
(:class:`ReportDetails`). The command line, a test plan, a batch and a results document all
turn into this one record; :func:`pqcheck.run.check.check_capture` runs it, and every results
document carries it (``run_spec``), so :mod:`pqcheck.run.verify` re-runs a report from data.

One vocabulary
    Field names are the keywords of the API they feed (:func:`pqcheck.readers.open_capture`,
    :func:`pqcheck.analyze`, :func:`pqcheck.limits.resolve`, :func:`pqcheck.assess.assess`),
    with the unit in the name (``il_a``, ``voltage_level_v``, ``sample_rate_hz``). Library
    errors name these fields, with the name in backquotes inside a message (``give
    `sample_rate_hz```); the command line and the plan loader translate them into their own
    terms at their boundary (:mod:`pqcheck.cli._fields`, :mod:`pqcheck.run.plan`).

Validation
    Every part checks its own values when it is made (types, ranges, choices), so a
    :class:`RunSpec` that exists is valid, whatever made it. Errors are
    :class:`~pqcheck.errors.InputError` naming the field.

Adding a field
    Add it with a safe default to the part it belongs to (one line). :meth:`RunSpec.to_dict`,
    :meth:`RunSpec.from_dict` and the published JSON Schema follow the dataclass fields; give
    the field a check in that part's ``_check`` when it has a range, and a row in the CLI's
    table if an option sets it.
"""

from __future__ import annotations

import dataclasses
import math
import os
import types
import typing
from dataclasses import dataclass, field

from .errors import InputError
from .gates import Declared

__all__ = ["ReaderOptions", "ChannelRoles", "AnalysisSettings", "LimitSelection",
           "ReportDetails", "RunSpec", "SPEC_VERSION", "RESOLVE_FIELDS", "ASSESS_FIELDS"]

SPEC_VERSION = 1
"""Version of the :class:`RunSpec` layout (``run_spec.version`` in every results document)."""


def _positive(obj, *names) -> None:
    for name in names:
        v = getattr(obj, name)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (
                math.isfinite(v) and v > 0):
            shown = f"{v:g}" if isinstance(v, (int, float)) and not isinstance(v, bool) else repr(v)
            raise InputError(f"must be a positive number, got {shown}", field=name)
        object.__setattr__(obj, name, float(v))


def _text(obj, *names) -> None:
    for name in names:
        v = getattr(obj, name)
        if v is not None and not isinstance(v, str):
            raise InputError(f"must be text, got {v!r}", field=name)


def _columns(obj, *names) -> None:
    for name in names:
        v = getattr(obj, name)
        if v is None:
            continue
        if isinstance(v, str):
            v = [v]
        try:
            cols = tuple(v)
        except TypeError:
            raise InputError(f"must be a list of column names, got {v!r}", field=name) from None
        if not cols or any(not isinstance(c, str) or not c.strip() for c in cols):
            raise InputError(f"must be a list of non-empty column names, got {list(cols)!r}",
                             field=name)
        object.__setattr__(obj, name, tuple(c.strip() for c in cols))


def _choice(obj, name, choices) -> None:
    v = getattr(obj, name)
    if v is not None and v not in choices:
        raise InputError(f"must be one of {', '.join(map(repr, choices))}, got {v!r}", field=name)


@dataclass(frozen=True)
class ReaderOptions:
    """Which capture to read and the reader's options.

    Attributes
    ----------
    path : str
        The capture file (a COMTRADE record by its ``.cfg``); empty in a template spec (a
        batch fills it per capture with :meth:`RunSpec.with_capture`).
    sample_rate_hz : float or None
        Sample rate, for files without a time column or declared interval. [Hz]
    time_column : str or None
        Name of the time column when it is not recognised.
    encoding : str or None
        Text encoding of the capture (or of a COMTRADE .cfg); None: detected.
    other_files : tuple of str
        More files of the same capture (one file per channel, same time base).
    """

    path: str = ""
    sample_rate_hz: float | None = None
    time_column: str | None = None
    encoding: str | None = None
    other_files: tuple = ()

    def __post_init__(self):
        if self.path and not isinstance(self.path, (str, os.PathLike)):
            raise InputError(f"must be the path of a capture file, got {self.path!r}",
                             field="path")
        object.__setattr__(self, "path", os.fspath(self.path) if self.path else "")
        _positive(self, "sample_rate_hz")
        _text(self, "time_column", "encoding")
        files = (self.other_files,) if isinstance(self.other_files, str) else self.other_files
        object.__setattr__(self, "other_files", tuple(os.fspath(f) for f in files or ()))

    @property
    def paths(self):
        """What to open: the path, or the list of every file of the capture."""
        return [self.path, *self.other_files] if self.other_files else self.path


@dataclass(frozen=True)
class ChannelRoles:
    """Which columns are currents and voltages (None: guessed from the names and units).

    Attributes
    ----------
    current, voltage : tuple of str or None
        Column names in phase order a, b, c (a neutral current may follow).
    """

    current: tuple | None = None
    voltage: tuple | None = None

    def __post_init__(self):
        _columns(self, "current", "voltage")


@dataclass(frozen=True)
class AnalysisSettings:
    """Keywords of :func:`pqcheck.analyze` (None: the analysis decides).

    Attributes
    ----------
    nominal_hz : int or None
        50 or 60; None: detected from the data. [Hz]
    max_order : int or None
        Highest harmonic order analysed; None: the highest order any applied table assesses,
        50 without tables (:func:`pqcheck.run.check.check_capture`). [unitless]
    il_a : float or None
        Maximum demand load current IL at the PCC, for TDD in the analysis. [A]
    wiring : str or None
        ``"3-wire"`` or ``"4-wire"``.
    reference : str or None
        Channel whose fundamental sets the windows.
    voltage_connection : str or None
        ``"line-to-neutral"`` or ``"line-to-line"``.
    flicker : bool
        Also evaluate flicker and voltage changes (implied by a flicker limit table).
    flicker_path : str
        Voltage the flickermeter sees: ``"auto"``, ``"voltage"``, ``"reference-impedance"``
        or ``"system-impedance"`` (:class:`pqcheck.flicker.FlickerSettings`).
    system_impedance_ohm : tuple of float or None
        Supply impedance for IEC 61000-3-11: ``(R, X)`` of a single-phase loop or
        ``(R, X, RN, XN)``, reactance at 50 Hz. [ohm]
    lamp : str or None
        Flickermeter lamp, ``"230V"`` or ``"120V"``; None: by the nominal voltage.
    nominal_voltage_v : float or None
        Nominal line-to-neutral voltage the voltage changes are relative to. [V]
    """

    nominal_hz: int | None = None
    max_order: int | None = None
    il_a: float | None = None
    wiring: str | None = None
    reference: str | None = None
    voltage_connection: str | None = None
    flicker: bool = False
    flicker_path: str = "auto"
    system_impedance_ohm: tuple | None = None
    lamp: str | None = None
    nominal_voltage_v: float | None = None

    def __post_init__(self):
        if self.nominal_hz is not None:
            v = self.nominal_hz
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v not in (50, 60):
                raise InputError(f"must be 50 or 60, got {v!r}", field="nominal_hz")
            object.__setattr__(self, "nominal_hz", int(v))
        if self.max_order is not None:
            v = self.max_order
            if isinstance(v, bool) or not isinstance(v, (int, float)) or v != int(v) or not (
                    2 <= v <= 100):
                raise InputError(f"must be a whole number from 2 to 100, got {v!r}",
                                 field="max_order")
            object.__setattr__(self, "max_order", int(v))
        _positive(self, "il_a", "nominal_voltage_v")
        _choice(self, "wiring", ("3-wire", "4-wire"))
        _choice(self, "voltage_connection", ("line-to-neutral", "line-to-line"))
        _choice(self, "flicker_path", ("auto", "voltage", "reference-impedance",
                                       "system-impedance"))
        _choice(self, "lamp", ("230V", "120V"))
        _text(self, "reference")
        if not isinstance(self.flicker, bool):
            raise InputError(f"must be true or false, got {self.flicker!r}", field="flicker")
        z = self.system_impedance_ohm
        if z is not None:
            try:
                z = tuple(float(x) for x in z)
            except (TypeError, ValueError):
                z = ()
            if len(z) not in (2, 4) or not all(math.isfinite(x) for x in z):
                raise InputError(f"give R,X or R,X,RN,XN in ohm, got {self.system_impedance_ohm!r}",
                                 field="system_impedance_ohm")
            object.__setattr__(self, "system_impedance_ohm", z)
        if self.flicker_path == "system-impedance" and z is None:
            raise InputError("the system-impedance path needs `system_impedance_ohm` "
                             "R,X[,RN,XN]", field="system_impedance_ohm")

    def analyze_kwargs(self, max_order: int) -> dict:
        """Keyword arguments of :func:`pqcheck.analyze`, with the order to analyse up to."""
        kw = {k: getattr(self, k) for k in ANALYZE_FIELDS}
        kw["max_order"] = max_order
        return kw

    @property
    def wants_flicker(self) -> bool:
        """Flicker asked for, by the switch or by a flicker setting."""
        return bool(self.flicker or self.flicker_path != "auto" or self.system_impedance_ohm)


ANALYZE_FIELDS = ("nominal_hz", "max_order", "il_a", "wiring", "reference", "voltage_connection")
"""Fields of :class:`AnalysisSettings` that :func:`pqcheck.analyze` takes."""


RESOLVE_FIELDS = ("voltage_level_v", "isc_a", "il_a", "generation", "equipment_class",
                  "equipment_kind", "rsce", "ssc_va", "rated_apparent_power_va", "switching")
"""Fields of :class:`LimitSelection` that :func:`pqcheck.limits.resolve` takes (row
selectors)."""
ASSESS_FIELDS = ("il_a", "rated_current_a", "iref_a", "active_power_w")
"""Fields of :class:`LimitSelection` that :func:`pqcheck.assess.assess` takes (reference
values)."""


@dataclass(frozen=True)
class LimitSelection:
    """One limit table with the values that select its rows and scale its limits.

    Attributes
    ----------
    table : str
        A bundled table id or the path of a ``.toml`` file (:func:`pqcheck.limits.load_table`).
    voltage_level_v : float or None
        Nominal bus voltage at the PCC (IEEE 519). [V]
    isc_a : float or None
        Maximum short-circuit current at the PCC (IEEE 519, with ``il_a``). [A]
    il_a : float or None
        Maximum demand load current IL at the PCC. [A]
    generation : bool or None
        Power-generation equipment (IEEE 519 first ISC/IL row).
    equipment_class : str or None
        IEC 61000-3-2 class.
    equipment_kind : str or None
        IEC 61000-3-12 kind of equipment.
    rsce : float or None
        Short-circuit ratio Rsce. [unitless]
    ssc_va : float or None
        Short-circuit power at the point of connection, to compute Rsce. [VA]
    rated_apparent_power_va : float or None
        Rated apparent power of the equipment, to compute Rsce. [VA]
    switching : str or None
        How the equipment is switched (IEC 61000-3-3 / -3-11 dmax limit).
    rated_current_a : float or None
        Rated current (IEEE 1547; Iref of IEC 61000-3-12 unless ``iref_a``). [A]
    iref_a : float or None
        Reference current Iref (IEC 61000-3-12). [A]
    active_power_w : float or None
        Declared active input power for per-watt limits; None: measured. [W]
    """

    table: str = ""
    voltage_level_v: float | None = None
    isc_a: float | None = None
    il_a: float | None = None
    generation: bool | None = None
    equipment_class: str | None = None
    equipment_kind: str | None = None
    rsce: float | None = None
    ssc_va: float | None = None
    rated_apparent_power_va: float | None = None
    switching: str | None = None
    rated_current_a: float | None = None
    iref_a: float | None = None
    active_power_w: float | None = None

    def __post_init__(self):
        table = os.fspath(self.table) if self.table else ""
        if not isinstance(table, str) or not table.strip():
            raise InputError("must name a bundled table id or the path of a .toml file",
                             field="table")
        object.__setattr__(self, "table", table.strip())
        _positive(self, "voltage_level_v", "isc_a", "il_a", "rsce", "ssc_va",
                  "rated_apparent_power_va", "rated_current_a", "iref_a", "active_power_w")
        _text(self, "equipment_class", "equipment_kind", "switching")
        if self.generation is not None and not isinstance(self.generation, bool):
            raise InputError(f"must be true or false, got {self.generation!r}",
                             field="generation")

    def resolve_kwargs(self) -> dict:
        """Keyword arguments of :func:`pqcheck.limits.resolve` (None values left out)."""
        return {k: getattr(self, k) for k in RESOLVE_FIELDS if getattr(self, k) is not None}

    def assess_kwargs(self) -> dict:
        """Keyword arguments of :func:`pqcheck.assess.assess`."""
        return {k: getattr(self, k) for k in ASSESS_FIELDS}


@dataclass(frozen=True)
class ReportDetails:
    """What a report says about the run, as the user gave it (empty: the report's default).

    Attributes
    ----------
    title, equipment, site, operator, report_id : str or None
        Free text; None where not given.
    """

    title: str | None = None
    equipment: str | None = None
    site: str | None = None
    operator: str | None = None
    report_id: str | None = None

    def __post_init__(self):
        _text(self, "title", "equipment", "site", "operator", "report_id")


@dataclass(frozen=True)
class RunSpec:
    """Everything needed to reproduce one capture check (see the module docstring).

    Attributes
    ----------
    reader : ReaderOptions
    channels : ChannelRoles
    analysis : AnalysisSettings
    limits : tuple of LimitSelection
        One per table, in the order they are applied; empty for an analysis only.
    declared : Declared
        What the user declares about the test besides the selectors (measurement location,
        equipment behaviour and cycle, representative period, phases:
        :class:`pqcheck.gates.Declared`), for the assessment's gates.
    report : ReportDetails
    """

    reader: ReaderOptions = field(default_factory=ReaderOptions)
    channels: ChannelRoles = field(default_factory=ChannelRoles)
    analysis: AnalysisSettings = field(default_factory=AnalysisSettings)
    limits: tuple = ()
    declared: Declared = field(default_factory=Declared)
    report: ReportDetails = field(default_factory=ReportDetails)

    def __post_init__(self):
        for name, cls in _PART_TYPES.items():
            if not isinstance(getattr(self, name), cls):
                raise InputError(f"must be a {cls.__name__}", field=name)
        lims = tuple(self.limits)
        if any(not isinstance(x, LimitSelection) for x in lims):
            raise InputError("must be a sequence of LimitSelection", field="limits")
        object.__setattr__(self, "limits", lims)

    def with_capture(self, path) -> RunSpec:
        """The same spec for another capture file."""
        return dataclasses.replace(self, reader=dataclasses.replace(self.reader,
                                                                    path=os.fspath(path)))

    def to_dict(self) -> dict:
        """Plain-JSON form (``version`` and one mapping per part, every field present)."""
        d = {"version": SPEC_VERSION}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            d[f.name] = [_part_dict(x) for x in v] if f.name == "limits" else _part_dict(v)
        return d

    @classmethod
    def from_dict(cls, d) -> RunSpec:
        """The spec of :meth:`to_dict` (missing fields take their defaults).

        Raises
        ------
        InputError
            Not a mapping, an unknown field or a value out of range (naming the field path,
            e.g. ``run_spec.limits[0].il_a``).
        """
        if not isinstance(d, dict):
            raise InputError("must be a mapping", field="run_spec")
        version = d.get("version", SPEC_VERSION)
        if version != SPEC_VERSION:
            raise InputError(f"this pqcheck reads run specification version {SPEC_VERSION}, "
                             f"got {version!r}", field="run_spec.version")
        parts = {f.name: f for f in dataclasses.fields(cls)}
        unknown = [k for k in d if k not in parts and k != "version"]
        if unknown:
            raise InputError(f"unknown field {unknown[0]!r}", field=f"run_spec.{unknown[0]}")
        kw = {}
        for name in parts:
            if name not in d:
                continue
            if name == "limits":
                if not isinstance(d[name], list):
                    raise InputError("must be a list", field="run_spec.limits")
                kw[name] = tuple(_part_from(LimitSelection, x, f"run_spec.limits[{k}]")
                                 for k, x in enumerate(d[name]))
            else:
                kw[name] = _part_from(_PART_TYPES[name], d[name], f"run_spec.{name}")
        return cls(**kw)


_PART_TYPES = {"reader": ReaderOptions, "channels": ChannelRoles, "analysis": AnalysisSettings,
               "declared": Declared, "report": ReportDetails}
PARTS = (ReaderOptions, ChannelRoles, AnalysisSettings, LimitSelection, Declared, ReportDetails)


def _part_dict(part) -> dict:
    out = {}
    for f in dataclasses.fields(part):
        v = getattr(part, f.name)
        if isinstance(v, tuple):  # records inside (the declared instrument chain) as mappings
            v = [_part_dict(x) if dataclasses.is_dataclass(x) else x for x in v]
        out[f.name] = v
    return out


def _part_from(cls, d, where: str):
    if not isinstance(d, dict):
        raise InputError("must be a mapping", field=where)
    names = {f.name for f in dataclasses.fields(cls)}
    for k in d:
        if k not in names:
            raise InputError(f"unknown field {k!r}", field=f"{where}.{k}")
    try:
        return cls(**{k: tuple(v) if isinstance(v, list) else v for k, v in d.items()})
    except InputError as exc:
        raise InputError(exc.problem, field=f"{where}.{exc.field}" if exc.field else where
                         ) from None


def field_json_types(cls) -> dict:
    """JSON Schema ``type`` of each field of a spec part, from its annotation (used by the
    published schema, so a new field is described without a second edit)."""
    hints = typing.get_type_hints(cls)
    out = {}
    for f in dataclasses.fields(cls):
        out[f.name] = _json_type(hints[f.name])
    return out


def _json_type(tp):
    args = typing.get_args(tp)
    origin = typing.get_origin(tp)
    if origin in (typing.Union, types.UnionType):
        kinds = []
        for a in args:
            t = _json_type(a)
            kinds += t if isinstance(t, list) else [t]
        return list(dict.fromkeys(kinds))
    return {str: "string", bool: "boolean", int: "integer", float: "number", tuple: "array",
            type(None): "null"}.get(tp, "object")
