"""Options that choose and resolve limit tables, shared by `check`, `report` and `batch`.

One definition of every option and one function from parsed options to resolved limits, so
the three commands accept the same words and select the same rows.
"""

from __future__ import annotations

import math

import click

__all__ = ["LIMIT_OPTION_NAMES", "limit_options", "resolve_limits", "positive_options",
           "selectors_from", "tables_max_order", "declared_from"]

LIMIT_OPTION_NAMES = ("limits", "voltage_level", "isc", "generation", "equipment_class",
                      "equipment_kind", "rsce", "ssc", "rated_power", "rated_current", "iref",
                      "active_power", "location", "behaviour", "cycle", "representative_period",
                      "phases", "switching")


def limit_options(*, required: bool, limits_help: str | None = None):
    """Decorator adding the limit-table and row-selector options.

    Parameters
    ----------
    required : bool
        Whether ``--limits`` must be given.
    limits_help : str or None
        Help text of ``--limits`` (default: the one of `check`).
    """
    help_text = limits_help or (
        "Limit table: a bundled id (see `pqcheck limits list`) or the path of a .toml file. "
        "Repeat to check against several.")
    opts = [
        click.option("--limits", "limits", multiple=True, required=required,
                     metavar="ID_OR_PATH", help=help_text),
        click.option("--voltage-level", "voltage_level", type=float, metavar="V",
                     help="Nominal bus voltage at the PCC (IEEE 519)."),
        click.option("--isc", type=float, metavar="A",
                     help="Maximum short-circuit current at the PCC (IEEE 519, with --il)."),
        click.option("--generation", is_flag=True, default=None,
                     help="Power-generation equipment: IEEE 519 first ISC/IL row whatever "
                          "the ratio."),
        click.option("--class", "equipment_class", metavar="A|B|C|D",
                     help="Equipment class (IEC 61000-3-2)."),
        click.option("--equipment-kind", "equipment_kind", metavar="KIND",
                     help="Kind of equipment (IEC 61000-3-12): single-phase, interphase, "
                          "unbalanced-three-phase, balanced-three-phase, "
                          "balanced-three-phase-table4."),
        click.option("--rsce", type=float, metavar="N",
                     help="Short-circuit ratio Rsce (IEC 61000-3-12)."),
        click.option("--ssc", type=float, metavar="VA",
                     help="Short-circuit power at the point of connection, to compute Rsce."),
        click.option("--rated-power", "rated_power", type=float, metavar="VA",
                     help="Rated apparent power of the equipment, to compute Rsce."),
        click.option("--rated-current", "rated_current", type=float, metavar="A",
                     help="Rated current (IEEE 1547 limits; Iref of IEC 61000-3-12 unless "
                          "--iref)."),
        click.option("--iref", type=float, metavar="A",
                     help="Reference current Iref (IEC 61000-3-12)."),
        click.option("--switching", "switching", metavar="KIND",
                     help="How the equipment is switched (IEC 61000-3-3 / -3-11 dmax limit): "
                          "automatic (4 %), manual-or-delayed-restart (6 %), "
                          "attended-or-twice-daily (7 %)."),
        click.option("--active-power", "active_power", type=float, metavar="W",
                     help="Declared active input power for per-watt limits and the scope's "
                          "power bounds (IEC 61000-3-2); used when within 10 % of the "
                          "measured one. Default: measured."),
        click.option("--location", type=click.Choice(["pcc", "equipment-terminals"]),
                     help="Where the capture was taken: at the point of common coupling (IEEE "
                          "519) or at the supply terminals of the equipment (IEC 61000-3-2/-3-12)."),
        click.option("--behaviour", metavar="KIND",
                     help="Type of equipment behaviour for the observation period (IEC "
                          "61000-3-2/-3-12): quasi-stationary, short-cyclic, random, "
                          "long-cyclic. Default: quasi-stationary, listed as a deviation."),
        click.option("--cycle", type=float, metavar="S",
                     help="Operating cycle of cyclic equipment [s] (short-cyclic: 10 cycles "
                          "are observed; long-cyclic: one full cycle)."),
        click.option("--representative-period", "representative_period", is_flag=True,
                     default=False,
                     help="Declare the capture a representative period shorter than the "
                          "standard's observation, where the table allows it for the behaviour "
                          "(said on page 1 of the report)."),
        click.option("--phases", type=click.IntRange(1, 3), metavar="N",
                     help="Number of phases of the equipment (a three-phase unit captured on "
                          "fewer phases cannot pass)."),
    ]

    def decorate(func):
        for opt in reversed(opts):
            func = opt(func)
        return func

    return decorate


def declared_from(lim: dict):
    """The :class:`pqcheck.gates.Declared` of parsed options."""
    from ..gates import Declared

    return Declared(location=lim.get("location"), behaviour=lim.get("behaviour"),
                    cycle_s=lim.get("cycle"),
                    representative_period=bool(lim.get("representative_period")),
                    phases=lim.get("phases"))


def positive_options(lim: dict, il_a) -> None:
    """Refuse zero, negative or non-finite currents and powers (exit 2 naming the option)."""
    from ..errors import InputError

    for name, v in (("--rated-current", lim.get("rated_current")), ("--iref", lim.get("iref")),
                    ("--active-power", lim.get("active_power")), ("--il", il_a),
                    ("--cycle", lim.get("cycle"))):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise InputError(f"must be a positive number, got {v:g}", field=name)


def selectors_from(lim: dict, il_a) -> dict:
    """Row selectors for :func:`pqcheck.limits.resolve` from parsed options."""
    return dict(voltage_level=lim.get("voltage_level"), isc=lim.get("isc"), il=il_a,
                generation=lim.get("generation"), equipment_class=lim.get("equipment_class"),
                equipment=lim.get("equipment_kind"), rsce=lim.get("rsce"), ssc=lim.get("ssc"),
                rated_power=lim.get("rated_power"), switching=lim.get("switching"))


def resolve_limits(lim: dict, il_a) -> list:
    """Load and resolve every ``--limits`` table with the selectors given."""
    from ..errors import InputError
    from ..limits import load_table, resolve

    positive_options(lim, il_a)
    selectors = selectors_from(lim, il_a)
    out = [resolve(load_table(x), **selectors) for x in lim.get("limits") or ()]
    if out:
        unused = set.intersection(*(set(r.ignored) for r in out))
        unused.discard("il")  # IL also sets TDD in the analysis
        for name in ("equipment_class", "equipment", "rsce", "ssc", "rated_power",
                     "voltage_level", "isc", "generation"):
            if name in unused:
                ids = ", ".join(r.table_id for r in out)
                raise InputError(f"was given, but no limit table applied uses it ({ids}); "
                                 "leave it out or choose a table that has it",
                                 field=_OPTION_OF[name])
    return out


_OPTION_OF = {"equipment_class": "--class", "equipment": "--equipment-kind", "rsce": "--rsce",
              "ssc": "--ssc", "rated_power": "--rated-power", "voltage_level": "--voltage-level",
              "isc": "--isc", "generation": "--generation"}


def tables_max_order(ctx, opts: dict, resolved) -> None:
    """Without an explicit --max-order, analyse up to the highest order the tables assess."""
    src = ctx.get_parameter_source("max_order")
    orders = [r.max_order for r in resolved if r.max_order]  # flicker tables have none
    if orders and (src is None or src.name in ("DEFAULT", "DEFAULT_MAP")):
        opts["max_order"] = max(orders)
