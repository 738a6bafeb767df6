"""The site file: :func:`read_site` reads and validates a site description (TOML),
:func:`build_site` makes the :class:`~pqcheck.site.Site` once the units' data are read (by
:func:`pqcheck.run.site.load_site`), and :func:`site_template` is the commented template
``pqcheck site new`` writes.

Every problem is a :class:`~pqcheck.errors.PlanError` naming the file, the line and the field;
every number is checked against its physical range (:data:`RANGES`) before anything is
computed with it.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..files.tomldoc import (
    BOOL,
    INT,
    LABEL,
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
from ..limits import load_table, table_path
from .model import PCC_LOCATIONS, OtherLoad, Site, SiteTransformer, Supply, Unit
from .network import SQRT3, SUMMATIONS, vector_group_shift
from .study import SITE_BASES

__all__ = ["SCHEMA_VERSION", "MAX_UNITS", "RANGES", "SiteFile", "UnitEntry", "read_site",
           "build_site", "site_template", "shown_path"]

#: Version of the site file's layout this pqcheck reads.
SCHEMA_VERSION = 1

#: Largest number of units of one kind a site file may give (a site, not a fleet).
MAX_UNITS = 10_000

#: Physical range of every number in a site file: (table, field) -> (lowest, highest, unit,
#: what it is). A value outside is refused with the field and line; the bounds are far
#: beyond real installations so that only a typing or unit mistake meets them.
RANGES = {
    ("supply", "nominal_voltage_v"): (100.0, 1.2e6, "V", "a nominal line-to-line voltage"),
    ("supply", "ssc_va"): (1e4, 1e11, "VA", "a three-phase short-circuit power"),
    ("supply", "isc_a"): (1.0, 1e6, "A", "a three-phase short-circuit current"),
    ("supply", "x_over_r"): (0.1, 100.0, "", "an X/R ratio"),
    ("transformer", "rating_va"): (1e3, 2e9, "VA", "a transformer rating"),
    ("transformer", "primary_v"): (100.0, 1.2e6, "V", "a rated line-to-line voltage"),
    ("transformer", "secondary_v"): (100.0, 1.2e6, "V", "a rated line-to-line voltage"),
    ("transformer", "impedance_percent"): (0.1, 50.0, "%", "a short-circuit impedance on "
                                                           "the transformer's own rating"),
    ("transformer", "x_over_r"): (0.1, 100.0, "", "an X/R ratio"),
    ("pcc", "il_a"): (0.01, 1e6, "A", "a maximum demand load current"),
    ("other_load", "demand_w"): (0.0, 1e10, "W", "a maximum demand"),
    ("other_load", "power_factor"): (0.01, 1.0, "", "a lagging displacement power factor"),
    ("other_load", "demand_current_a"): (0.0, 1e6, "A", "a maximum demand current"),
    ("units", "count"): (0, MAX_UNITS, "", "units of one kind on one site"),
    ("units", "phase_shift_deg"): (-180.0, 180.0, "degrees", "a phase shift"),
    ("units", "sample_rate_hz"): (10.0, 1e10, "Hz", "a sample rate"),
}

def _f(table: str, key: str, kind: str, required: str | None = None) -> Field:
    """The declaration of a number of the site file, with its physical range (:data:`RANGES`)."""
    lo, hi, unit, what = RANGES[(table, key)]
    return Field(kind, required=required, low=lo, high=hi, unit=unit, what=what)


# The site file's keys, declared (pqcheck.files.tomldoc.Field): kind, required, choices, range.
_TOP = {"schema": INT, "name": STR, "notes": STR,
        "nominal_frequency_hz": Field(POS, choices=(50.0, 60.0)),
        "summation": Field(STR, choices=SUMMATIONS),
        "supply": Field(TABLE, required="the utility supply's nominal_voltage_v, ssc_va or "
                                        "isc_a, and x_over_r"),
        "transformer": TABLE, "pcc": TABLE, "other_load": TABLE, "limits": TABLE,
        "units": Field(TABLES, required="the site lists no unit; add at least one with "
                                        "capture = \"...\" or results = \"...\"")}
_SUPPLY = {"nominal_voltage_v": _f("supply", "nominal_voltage_v", POS,
                                   "the supply's nominal line-to-line voltage [V]"),
           "ssc_va": _f("supply", "ssc_va", POS), "isc_a": _f("supply", "isc_a", POS),
           "x_over_r": _f("supply", "x_over_r", POS,
                          "the supply impedance's X/R ratio (ask the utility; typically 5 to "
                          "15 on MV networks)")}
_TRANSFORMER = {"rating_va": _f("transformer", "rating_va", POS, "rated apparent power [VA]"),
                "primary_v": _f("transformer", "primary_v", POS),
                "secondary_v": _f("transformer", "secondary_v", POS,
                                  "rated secondary line-to-line voltage [V]"),
                "impedance_percent": _f("transformer", "impedance_percent", POS,
                                        "short-circuit impedance [%]"),
                "x_over_r": _f("transformer", "x_over_r", POS,
                               "X/R ratio (typically 4 to 10 for distribution transformers)"),
                "vector_group": STR}
_PCC = {"location": Field(STR, choices=PCC_LOCATIONS,
                          hint="\"supply\": the transformer's primary, where the supply's "
                               "fault level is stated; \"bus\": the bus the units connect to"),
        "il_a": _f("pcc", "il_a", POS)}
_OTHER = {"demand_w": _f("other_load", "demand_w", NUM),
          "power_factor": _f("other_load", "power_factor", POS),
          "demand_current_a": _f("other_load", "demand_current_a", NUM)}
_LIMITS = {"table": STR, "generation": BOOL}
_UNIT = {"name": Field(STR, required="a short name for this kind of unit"),
         "capture": STR, "results": STR,
         "count": _f("units", "count", INT, "the number of identical units of this kind"),
         "load_point": Field(LABEL, required="the operating point the capture represents, e.g. "
                                             "\"100 %\" (every unit is assumed to run there)"),
         "phase_shift_deg": _f("units", "phase_shift_deg", NUM),
         "connection": Field(STR, choices=("three-phase", "single-phase")),
         "phase": Field(STR, choices=("a", "b", "c")), "current": STRS, "voltage": STRS,
         "sample_rate_hz": _f("units", "sample_rate_hz", POS), "time_column": STR}


class _Reader(DocReader):
    """Validates one parsed site document; every error names file, line and field."""

    def __init__(self, path: Path, text: str):
        super().__init__(path, text, "site file")


def read_site(path) -> SiteFile:
    """Read and validate a site description (not yet the unit data it names).

    Parameters
    ----------
    path : str or os.PathLike
        The site file (TOML; write a commented one with :func:`site_template`).

    Returns
    -------
    SiteFile
        Everything the file says, each unit as a :class:`UnitEntry` (its data file checked
        to exist); :func:`pqcheck.run.site.load_site` reads the units' data and builds the
        :class:`~pqcheck.site.Site`.

    Raises
    ------
    PlanError
        The file is missing or not TOML, a field is unknown, has the wrong type or value, a
        required field is missing, a number is outside its physical range (:data:`RANGES`)
        or a file it names does not exist. The message names the file, the line and the
        field.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "site.toml").write_text('[supply]\\nnominal_voltage_v = 400\\n')
    >>> read_site(d / "site.toml")
    Traceback (most recent call last):
    ...
    pqcheck.errors.PlanError: ...site.toml:1: supply: missing field 'ssc_va' or 'isc_a': ...
    """
    path = Path(path)
    raw, text, doc = read_document(path, "site file")
    r = _Reader(path, text)
    folder = path.resolve().parent
    top = r.table(doc, (), _TOP)
    schema = top.get("schema", SCHEMA_VERSION)
    if schema != SCHEMA_VERSION:
        raise r.error(("schema",), f"this pqcheck reads site schema {SCHEMA_VERSION}, got "
                                   f"{schema}")
    f_nom = top.get("nominal_frequency_hz")
    summation = top.get("summation", "general")

    # supply
    kp = ("supply",)
    sup = r.table(doc["supply"], kp, _SUPPLY)
    v_sup = sup["nominal_voltage_v"]
    if "ssc_va" in sup and "isc_a" in sup:
        raise r.error(kp + ("isc_a",), "give the fault level once: ssc_va or isc_a, not both")
    if "ssc_va" not in sup and "isc_a" not in sup:
        raise r.error(kp, "missing field 'ssc_va' or 'isc_a': the three-phase short-circuit "
                          "power [VA] or current [A] the utility states")
    xr = sup["x_over_r"]
    ssc = sup.get("ssc_va") or SQRT3 * v_sup * sup["isc_a"]
    supply = Supply(nominal_voltage_v=v_sup, ssc_va=ssc, x_over_r=xr)

    # transformer
    transformer = None
    if "transformer" in doc:
        kp = ("transformer",)
        tv = r.table(doc["transformer"], kp, _TRANSFORMER)
        primary = tv.get("primary_v", v_sup)
        if abs(primary - v_sup) > 0.05 * v_sup:
            raise r.error(kp + ("primary_v",),
                          f"{primary:g} V does not match supply.nominal_voltage_v = {v_sup:g} "
                          "V; the supply's fault level is stated at the transformer's primary")
        group = tv.get("vector_group", "Dyn11")
        try:
            vector_group_shift(group)
        except ValueError as exc:
            raise r.error(kp + ("vector_group",), str(exc)) from None
        transformer = SiteTransformer(
            rating_va=tv["rating_va"], primary_v=primary, secondary_v=tv["secondary_v"],
            impedance_percent=tv["impedance_percent"], x_over_r=tv["x_over_r"],
            vector_group=group)

    # PCC
    pcc = r.table(doc.get("pcc", {}), ("pcc",), _PCC)
    location = pcc.get("location")
    if location is None:
        if transformer is not None:
            raise r.error(("pcc",) if "pcc" in doc else ("transformer",),
                          "missing field 'location' in [pcc]: with a site transformer, say "
                          "where the point of common coupling is: location = \"supply\" (its "
                          "primary) or \"bus\" (its secondary, where the units connect)")
        location = "supply"

    # other load
    kp = ("other_load",)
    ol = r.table(doc.get("other_load", {}), kp, _OTHER)
    other = OtherLoad(**ol)

    # limits
    lim = r.table(doc.get("limits", {}), ("limits",), _LIMITS)
    table = lim.get("table", "ieee519-2022").strip()
    if not table:
        raise r.error(("limits", "table"), "must not be empty")
    if table_path(table) is not None:
        table = str(r.file(table, folder, ("limits", "table"), True, "limit table"))

    try:
        limit_table = load_table(table)
    except InputError as exc:
        raise r.error(("limits", "table"), f"cannot use limit table {table!r}: "
                                           f"{exc.location_message()}") from None
    if not any((b.applies_to, b.basis) in SITE_BASES for b in limit_table.blocks):
        raise r.error(("limits", "table"),
                      f"table {limit_table.id} has no limits in % of IL (currents) or % of the "
                      "fundamental (voltages); a site study needs a table for the PCC such as "
                      "ieee519-2022")

    # units
    entries = doc["units"]
    if not entries:
        raise r.error(("units",), "the site lists no unit; add at least one [[units]] entry "
                                  "with capture = \"...\" or results = \"...\"")
    units = tuple(_unit_entry(r, item, k, folder) for k, item in enumerate(entries))
    names = [u.name for u in units]
    for k, u in enumerate(units):
        if names.index(u.name) != k:
            raise r.error(("units", k, "name"),
                          f"unit name {u.name!r} is used twice; give each kind its own name")
    return SiteFile(
        name=top.get("name", "") or path.stem, nominal_hz=f_nom, supply=supply,
        units=units, transformer=transformer, pcc_location=location, other_load=other,
        summation=summation, il_a=pcc.get("il_a"), limits=table,
        generation=lim.get("generation", False), notes=top.get("notes", ""), path=path,
        sha256=hashlib.sha256(raw).hexdigest(), limit_table=limit_table, reader=r)


def build_site(sf: SiteFile, units) -> Site:
    """The :class:`~pqcheck.site.Site` of a site file once every unit's data are read.

    Parameters
    ----------
    sf : SiteFile
    units : sequence of Unit
        One per entry of ``sf.units``, in order.

    Raises
    ------
    PlanError
        The units' nominal frequencies disagree (with each other or the site's), or the
        phasor sum is asked for a unit without a voltage reference (naming file, line and
        field).
    """
    r = sf.reader
    f_nom = sf.nominal_hz
    noms = {u.spectrum.nominal_hz for u in units if u.spectrum.nominal_hz}
    if f_nom is None:
        if len(noms) > 1:
            raise r.error(("units",), f"the units' data have different nominal frequencies "
                                      f"({', '.join(f'{x:g}' for x in sorted(noms))} Hz); set "
                                      "nominal_frequency_hz")
        f_nom = noms.pop() if noms else None
        if f_nom is None:
            raise r.error((), "missing field 'nominal_frequency_hz' (50 or 60): the units' "
                              "data do not say it")
    else:
        for k, u in enumerate(units):
            if u.spectrum.nominal_hz and u.spectrum.nominal_hz != f_nom:
                raise r.error(("units", k),
                              f"the data of unit {u.name!r} are for {u.spectrum.nominal_hz:g} "
                              f"Hz but the site is {f_nom:g} Hz")
    if sf.summation == "phasor":
        for k, u in enumerate(units):
            if not u.spectrum.phase_measured:
                raise r.error(("units", k),
                              f"summation = \"phasor\" needs phase angles relative to the "
                              f"supply voltage, but the data of unit {u.name!r} have no "
                              "voltage reference; measure a voltage with the currents or use "
                              "summation = \"general\"")
    return Site(
        name=sf.name, nominal_hz=float(f_nom), supply=sf.supply, units=tuple(units),
        transformer=sf.transformer, pcc_location=sf.pcc_location, other_load=sf.other_load,
        summation=sf.summation, il_a=sf.il_a, limits=sf.limits, generation=sf.generation,
        notes=sf.notes, path=sf.path, sha256=sf.sha256, limit_table=sf.limit_table)


def _unit_entry(r: _Reader, item, k: int, folder: Path) -> UnitEntry:
    kp = ("units", k)
    vals = r.table(item, kp, _UNIT)
    name = vals["name"].strip()
    if not name:
        raise r.error(kp + ("name",), "must not be empty: a short name for this kind of unit")
    count = vals["count"]
    load_point = vals["load_point"]
    connection = vals.get("connection")
    phase = vals.get("phase")
    if phase is not None:
        if connection != "single-phase":
            raise r.error(kp + ("phase",), "phase is for single-phase units; add connection = "
                                           "\"single-phase\" or remove it")
    has_cap, has_res = "capture" in vals, "results" in vals
    if has_cap == has_res:
        raise r.error(kp, "give exactly one of 'capture' (a capture file to analyse) and "
                          "'results' (saved results of pqcheck analyze in JSON format)")
    key = "capture" if has_cap else "results"
    if not has_cap:
        for opt in ("current", "voltage", "sample_rate_hz", "time_column"):
            if opt in vals:
                raise r.error(kp + (opt,), f"{opt} is a capture option; it has no effect with "
                                           "results = ...")
    text = vals[key]
    fpath = Path(text).expanduser()
    if not fpath.is_absolute():
        fpath = folder / fpath
    if not fpath.exists():  # special files are refused where they are read
        where = "" if Path(text).is_absolute() else \
            f" (resolved against the site file's folder {folder})"
        raise r.error(kp + (key,), f"file {text!r} not found{where}")
    return UnitEntry(index=k, name=name, count=count, load_point=load_point,
                     phase_shift_deg=vals.get("phase_shift_deg", 0.0), connection=connection,
                     phase=phase, kind=key, text=text, path=fpath,
                     current=vals.get("current"), voltage=vals.get("voltage"),
                     sample_rate_hz=vals.get("sample_rate_hz"),
                     time_column=vals.get("time_column"), line=r.lines.line(kp))


@dataclass(frozen=True)
class UnitEntry:
    """One ``[[units]]`` entry of a site file, before its data are read.

    Attributes
    ----------
    index : int
        Position in the file (0-based).
    name : str
    count : int
        [unitless]
    load_point : str
    phase_shift_deg : float
        [deg]
    connection, phase : str or None
        For data with one current channel.
    kind : str
        ``"capture"`` or ``"results"``.
    text : str
        The file as written in the site file.
    path : pathlib.Path
        The file, resolved against the site file's folder.
    current, voltage : tuple of str or None
        Channel map of a capture.
    sample_rate_hz : float or None
        [Hz]
    time_column : str or None
    line : int or None
        Line of the entry.
    """

    index: int
    name: str
    count: int
    load_point: str
    phase_shift_deg: float
    connection: str | None
    phase: str | None
    kind: str
    text: str
    path: Path
    current: tuple | None = None
    voltage: tuple | None = None
    sample_rate_hz: float | None = None
    time_column: str | None = None
    line: int | None = None

    def unit(self, spectrum, *, run_spec=None) -> Unit:
        """The :class:`~pqcheck.site.Unit` of this entry with its spectrum (and the
        :class:`~pqcheck.record.RunSpec` its capture was checked with)."""
        return Unit(name=self.name, count=self.count, load_point=self.load_point,
                    spectrum=spectrum, phase_shift_deg=self.phase_shift_deg, line=self.line,
                    source_kind=self.kind, run_spec=run_spec)


@dataclass(frozen=True, eq=False)
class SiteFile:
    """A validated site file (:func:`read_site`): a :class:`~pqcheck.site.Site` without the
    units' data. Fields as :class:`~pqcheck.site.Site`; ``nominal_hz`` is None when the file
    leaves it to the units' data, ``units`` holds :class:`UnitEntry` records."""

    name: str
    nominal_hz: float | None
    supply: Supply
    units: tuple
    transformer: SiteTransformer | None
    pcc_location: str
    other_load: OtherLoad
    summation: str
    il_a: float | None
    limits: str
    generation: bool
    notes: str
    path: Path
    sha256: str
    limit_table: object
    reader: object = field(repr=False)

    def error(self, entry: UnitEntry, key: str | None, problem: str):
        """A :class:`~pqcheck.errors.PlanError` about one unit entry (file, line, field)."""
        kp = ("units", entry.index) + ((key,) if key else ())
        return self.reader.error(kp, problem)


_TEMPLATE = '''\
# pqcheck site description (schema 1)
#
# Several units (chargers, drives, inverters) at one point of common coupling (PCC): what the
# whole site injects at the PCC, the voltage distortion that causes, and how many more units
# fit. Then:
#
#     pqcheck site THIS-FILE.toml                  (table on the terminal)
#     pqcheck site THIS-FILE.toml -o site.pdf      (PDF section)
#
# The result is an estimate for planning; the utility's own study governs.
# Relative paths resolve against the folder of this file. Units are in the field names:
# _v volts, _a amperes, _va volt-amperes, _w watts, _hz hertz, _deg degrees.

schema = 1
name = "Site name"
nominal_frequency_hz = 50        # 50 or 60; default: from the units' data
summation = "general"            # how the units' harmonic currents combine:
                                 #   "general"    IEC TR 61000-3-6 summation law (exponent 1
                                 #                below order 5, 1.4 for 5 to 10, 2 above 10)
                                 #   "arithmetic" worst case, magnitudes added
                                 #   "phasor"     measured phases added (needs a voltage
                                 #                measured with every unit's currents)

# The utility supply, where its fault level is stated (ask the utility).
[supply]
nominal_voltage_v = 11000        # line-to-line
ssc_va = 250e6                   # three-phase short-circuit power ...
# isc_a = 13122                  # ... or short-circuit current (give one of them)
x_over_r = 10                    # X/R of the supply impedance

# The site transformer between the supply and the bus the units connect to. Delete this table
# when the units connect at the supply voltage.
[transformer]
rating_va = 1000e3
# primary_v = 11000              # default: supply.nominal_voltage_v
secondary_v = 400
impedance_percent = 6.0
x_over_r = 6
vector_group = "Dyn11"           # a delta winding stops zero-sequence (triplen) currents

[pcc]
location = "supply"              # "supply": the PCC is the transformer's primary (where the
                                 # fault level above is stated); "bus": its secondary
# il_a = 35                      # IL at the PCC if the utility states it; default: estimated
                                 # from the units' fundamental and the other load

# Linear load besides the units (offices, workshop, lighting), on the same bus.
[other_load]
demand_w = 80e3                  # maximum demand
power_factor = 0.9               # lagging displacement power factor
# demand_current_a = 130         # per phase at the bus, e.g. from billing demand; replaces the
                                 # estimate from demand_w and power_factor

[limits]
table = "ieee519-2022"           # bundled id or the path of your own table file
generation = false               # true: IEEE 519 rule for generation (first ISC/IL row)

# One entry per kind of unit. Give a capture to analyse or saved results: the JSON of
# pqcheck analyze CAPTURE in JSON format, or the JSON file of pqcheck report PLAN (then load_point
# picks the capture by its load point or id).
[[units]]
name = "DC charger 150 kW"
capture = "charger-150kw.csv"    # or: results = "charger-150kw.json"
count = 4
load_point = "100 %"             # the operating point the capture represents; every unit is
                                 # assumed to run there at once
phase_shift_deg = 0              # phase-shifting transformer feeding these units: angle by
                                 # which their side leads the bus (+30 Dyn11, -30 Dyn1)
# current = ["ia", "ib", "ic"]   # channel map of the capture (default: guessed)
# voltage = ["va", "vb", "vc"]
# connection = "three-phase"     # only for data with one current channel: "three-phase"
                                 # (balanced phases assumed) or "single-phase"
# phase = "a"                    # bus phase of a single-phase unit

[[units]]
name = "AC charger 22 kW"
results = "charger-22kw.json"
count = 2
load_point = "32 A"
'''


def site_template() -> str:
    """Return the commented site template that ``pqcheck site new`` writes."""
    return _TEMPLATE


def shown_path(source: str, site_path) -> str:
    """A unit's data file relative to the site file's folder when it lies inside it."""
    if site_path is None:
        return source
    try:
        return str(Path(source).resolve().relative_to(Path(site_path).resolve().parent))
    except ValueError:
        return source
