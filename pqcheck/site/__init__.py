"""Site interconnection study: several units at one point of common coupling (PCC).

A person preparing a utility interconnection application for a depot with several chargers
needs what the whole site will inject at the PCC, the voltage distortion that causes, and how
many more units fit. This package answers that from measured captures (or saved results) of
each kind of unit, in three modules:

:mod:`pqcheck.site.network`
    Pure functions over arrays: the IEC TR 61000-3-6 summation exponent and general summation
    law (:func:`summation_exponent`, :func:`aggregate`), the phase shift of a phase-shifting
    transformer by symmetrical components (:func:`transformer_shift`,
    :func:`vector_group_shift`), source and transformer impedances (:func:`source_impedance`,
    :func:`transformer_impedance`, :func:`harmonic_impedance`) and harmonic voltages
    (:func:`harmonic_voltages`).
:mod:`pqcheck.site.model` and :mod:`pqcheck.site.sitefile`
    The site description as frozen dataclasses (:class:`Site` with :class:`Supply`,
    :class:`SiteTransformer`, :class:`OtherLoad`, :class:`Unit`, :class:`UnitSpectrum`), the
    unit spectra (:func:`spectrum_from_analysis`, :func:`spectrum_from_dict`) and the site file
    (:func:`read_site`: TOML, every problem a :class:`~pqcheck.errors.PlanError` naming file,
    line and field, every number within its physical range; :func:`build_site`;
    :func:`site_template`). :func:`pqcheck.run.site.load_site` reads a site file and the
    units' data (captures analysed like any capture check, or saved results).
:mod:`pqcheck.site.study`
    :func:`study_site`: the estimate at the PCC, one :class:`pqcheck.assess.Check` per limit
    (the verdict rule of :func:`pqcheck.assess.overall_verdict`), the outcome under every
    summation method (:class:`SummationOutcome`) and the headroom (:class:`Headroom`), in a
    :class:`SiteStudy`; :class:`StudySpec` is what a study is run with.
    :func:`pqcheck.results.site_document` writes its results document (the one results
    schema) and reads it back.

The result is an estimate for planning. The utility's own study governs.

Model
-----
Every unit is a harmonic current source (its measured spectrum, per phase, as phasors relative
to its own phase-a voltage fundamental). Units of a kind behind a phase-shifting transformer
are rotated by :func:`transformer_shift`; units on the site bus reach the PCC through the site
transformer (ratio, vector-group shift, zero-sequence blocking) when the PCC is on its primary.
Currents of all units are combined per phase and order by the chosen summation, and the
harmonic voltage at the PCC is ``|Z_h| I_h`` with ``Z_h = R + j h X`` the supply impedance
seen from the PCC (resistance as given, reactance proportional to order). Other site load is
linear: it adds fundamental current (to IL) but no harmonics. Capacitors, cable capacitance,
resonances, background distortion of the network and the units' response to the voltage
distortion are not modelled.

A unit's harmonic currents are its IEC 61000-4-7 harmonic components (rms over the capture,
phase of the mean phasor), because phasors are needed for phase shifts and the phasor sum; the
IEEE 519 tables name the harmonic subgroup, which for a steady load differs from the component
only by the small leakage into the neighbouring bins.
"""

from .model import (
    PCC_LOCATIONS,
    OtherLoad,
    Site,
    SiteTransformer,
    Supply,
    Unit,
    UnitSpectrum,
    spectrum_from_analysis,
    spectrum_from_dict,
)
from .network import (
    SUMMATIONS,
    aggregate,
    harmonic_impedance,
    harmonic_voltages,
    source_impedance,
    summation_exponent,
    transformer_impedance,
    transformer_shift,
    vector_group_shift,
)
from .sitefile import (
    MAX_UNITS,
    RANGES,
    SCHEMA_VERSION,
    SiteFile,
    UnitEntry,
    build_site,
    read_site,
    shown_path,
    site_template,
)
from .study import (
    CAUTIONS,
    MAX_HEADROOM,
    Headroom,
    SiteStudy,
    StudySpec,
    SummationOutcome,
    study_site,
)

__all__ = [
    "SCHEMA_VERSION",
    "SUMMATIONS",
    "PCC_LOCATIONS",
    "MAX_HEADROOM",
    "MAX_UNITS",
    "RANGES",
    "CAUTIONS",
    "summation_exponent",
    "aggregate",
    "transformer_shift",
    "vector_group_shift",
    "source_impedance",
    "transformer_impedance",
    "harmonic_impedance",
    "harmonic_voltages",
    "Supply",
    "SiteTransformer",
    "OtherLoad",
    "UnitSpectrum",
    "Unit",
    "Site",
    "Headroom",
    "SummationOutcome",
    "SiteStudy",
    "SiteFile",
    "UnitEntry",
    "read_site",
    "build_site",
    "spectrum_from_analysis",
    "spectrum_from_dict",
    "study_site",
    "StudySpec",
    "site_template",
    "shown_path",
]
