"""Flicker and voltage fluctuation: an IEC 61000-4-15 flickermeter and the IEC 61000-3-3 /
IEC 61000-3-11 relative voltage change characteristics.

* :mod:`pqcheck.flicker.meter`: the flickermeter (Pinst, Pst, Plt);
* :mod:`pqcheck.flicker.change`: half-period rms, d(t), dc, dmax, Tmax;
* :mod:`pqcheck.flicker.impedance`: the terminal voltage behind Zref or a system impedance;
* :mod:`pqcheck.flicker.evaluate`: a capture's channels through one of the three paths;
* :mod:`pqcheck.flicker.assess`: the results against a flicker limit table.
"""

from .change import VoltageChangeResult, half_period_rms, voltage_changes
from .evaluate import ChannelFlicker, FlickerAnalysis, FlickerSettings, analyze_flicker
from .impedance import REFERENCE_IMPEDANCE, SupplyImpedance
from .meter import LAMPS, Flickermeter, FlickerResult, flickermeter, lamp_for, plt_from_pst

__all__ = ["LAMPS", "Flickermeter", "FlickerResult", "flickermeter", "lamp_for",
           "plt_from_pst", "VoltageChangeResult", "half_period_rms", "voltage_changes",
           "ChannelFlicker", "FlickerAnalysis", "FlickerSettings", "analyze_flicker",
           "REFERENCE_IMPEDANCE", "SupplyImpedance"]
