"""Options that choose limit tables, shared by `check`, `report` and `batch`.

One definition of every option; the values go into the run specification through
:func:`pqcheck.cli._fields.spec_from_options`, so the three commands accept the same words and
select the same rows. Each option's parameter name is its RunSpec field.
"""

from __future__ import annotations

import click

__all__ = ["LIMIT_OPTION_NAMES", "limit_options"]

LIMIT_OPTION_NAMES = ("table", "voltage_level_v", "isc_a", "generation", "equipment_class",
                      "equipment_kind", "rsce", "ssc_va", "rated_apparent_power_va",
                      "rated_current_a", "iref_a", "active_power_w")


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
        click.option("--limits", "table", multiple=True, required=required,
                     metavar="ID_OR_PATH", help=help_text),
        click.option("--voltage-level", "voltage_level_v", type=float, metavar="V",
                     help="Nominal bus voltage at the PCC (IEEE 519)."),
        click.option("--isc", "isc_a", type=float, metavar="A",
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
        click.option("--ssc", "ssc_va", type=float, metavar="VA",
                     help="Short-circuit power at the point of connection, to compute Rsce."),
        click.option("--rated-power", "rated_apparent_power_va", type=float, metavar="VA",
                     help="Rated apparent power of the equipment, to compute Rsce."),
        click.option("--rated-current", "rated_current_a", type=float, metavar="A",
                     help="Rated current (IEEE 1547 limits; Iref of IEC 61000-3-12 unless "
                          "--iref)."),
        click.option("--iref", "iref_a", type=float, metavar="A",
                     help="Reference current Iref (IEC 61000-3-12)."),
        click.option("--active-power", "active_power_w", type=float, metavar="W",
                     help="Active input power for per-watt limits (IEC 61000-3-2 Class D). "
                          "Default: measured."),
    ]

    def decorate(func):
        for opt in reversed(opts):
            func = opt(func)
        return func

    return decorate
