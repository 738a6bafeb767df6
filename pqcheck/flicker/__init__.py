"""Flicker and voltage fluctuation: an IEC 61000-4-15 flickermeter and the IEC 61000-3-3 /
IEC 61000-3-11 relative voltage change characteristics.

* :mod:`pqcheck.flicker.meter`: the flickermeter (Pinst, Pst, Plt).
"""

from .meter import LAMPS, Flickermeter, FlickerResult, flickermeter, lamp_for, plt_from_pst

__all__ = ["LAMPS", "Flickermeter", "FlickerResult", "flickermeter", "lamp_for",
           "plt_from_pst"]
