"""Loading a site study: the site file, then each unit's data.

:func:`load_site` reads the site file (:func:`pqcheck.site.read_site`), then each unit's data:
a capture is a :class:`~pqcheck.record.RunSpec` (:func:`unit_spec`: up to the highest order
the site's limit table assesses, at the site's nominal frequency) run by
:func:`pqcheck.run.check.check_capture` like any capture check, saved results are read as
pqcheck wrote them; the unit's spectrum follows (:func:`pqcheck.site.spectrum_from_analysis`,
:func:`pqcheck.site.spectrum_from_dict`) and the :class:`~pqcheck.site.Site` is built
(:func:`pqcheck.site.build_site`). A problem with a unit's data is a
:class:`~pqcheck.errors.PlanError` naming the site file, the unit's line and its field;
a capture that cannot be read keeps the reader's own error, naming the capture file.
"""

from __future__ import annotations

import hashlib
import json
import re

from ..errors import InputError
from ..site import build_site, read_site, spectrum_from_analysis, spectrum_from_dict

__all__ = ["load_site", "unit_spec", "site_terms", "SITE_KEYS"]


def load_site(path, *, cache=None):
    """Read and validate a site description and the unit data it names.

    Parameters
    ----------
    path : str or os.PathLike
        The site file (TOML; write a commented one with :func:`pqcheck.site.site_template`).
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed captures and results for units given by a capture; None reads and
        analyses afresh.

    Returns
    -------
    Site

    Raises
    ------
    PlanError
        The site file is missing or not TOML, a field is unknown, has the wrong type or is
        out of its physical range, a required field is missing, a file it names does not
        exist or does not hold usable results, or the units' nominal frequencies disagree.
        The message names the file, the line and the field.
    InputError
        A capture named by a unit cannot be read or analysed (the reader's own error, naming
        the capture file).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "site.toml").write_text('[supply]\\nnominal_voltage_v = 400\\n')
    >>> load_site(d / "site.toml")
    Traceback (most recent call last):
    ...
    pqcheck.errors.PlanError: ...site.toml:1: supply: missing field 'ssc_va' or 'isc_a': ...
    """
    sf = read_site(path)
    units = [_load_unit(sf, e, cache) for e in sf.units]
    return build_site(sf, units)


SITE_KEYS = {"nominal_hz": "nominal_frequency_hz", "path": "capture"}
"""Run-specification field -> site file key, where they differ (the site boundary's table)."""

_UNIT_FIELDS = {"sample_rate_hz", "time_column", "current", "voltage", "path"}


def site_terms(text: str) -> str:
    """A library message in the site file's terms: ```field``` names become the keys of a
    unit's entry (``the unit's sample_rate_hz``) or of the site (``the site's
    nominal_frequency_hz``)."""
    def sub(m):
        name = m.group(1) or m.group(2)
        if name not in _UNIT_FIELDS and name != "nominal_hz":
            return m.group(0) if m.group(2) else name
        key = SITE_KEYS.get(name, name)
        return f"the site's {key}" if key == "nominal_frequency_hz" else f"the unit's {key}"

    return _NAMED.sub(sub, text)


#: A field named in a library message: ```name``` or a bare ``(name_with_unit)``.
_NAMED = re.compile(r"`([A-Za-z_][A-Za-z0-9_]*)`|(?<=\()([a-z][a-z0-9]*_[a-z0-9_]+)(?=\))")


def unit_spec(sf, entry):
    """The :class:`~pqcheck.record.RunSpec` of a unit given by a capture: its file and
    reader options, the site's nominal frequency, orders up to the highest the site's limit
    table assesses (no limits applied to the unit itself)."""
    from ..record import AnalysisSettings, ChannelRoles, ReaderOptions, RunSpec

    return RunSpec(
        reader=ReaderOptions(path=str(entry.path), sample_rate_hz=entry.sample_rate_hz,
                             time_column=entry.time_column),
        channels=ChannelRoles(current=entry.current, voltage=entry.voltage),
        analysis=AnalysisSettings(
            nominal_hz=None if sf.nominal_hz is None else int(sf.nominal_hz),
            max_order=sf.limit_table.max_order))


def _load_unit(sf, entry, cache):
    spec = None
    try:
        if entry.kind == "capture":
            from .check import check_capture

            spec = unit_spec(sf, entry)
            try:
                run = check_capture(spec, cache=cache, id=entry.name,
                                    load_point=entry.load_point)
            except InputError as exc:
                name = (exc.field or "").rsplit(".", 1)[-1]
                if name in _UNIT_FIELDS or name == "nominal_hz":
                    key = SITE_KEYS.get(name, name)
                    raise (sf.reader.error((key,), site_terms(exc.problem))
                           if key == "nominal_frequency_hz" else
                           sf.error(entry, key, f"{entry.text}: {site_terms(exc.problem)}")
                           ) from None
                raise
            spectrum = spectrum_from_analysis(run.result, connection=entry.connection,
                                              phase=entry.phase)
        else:
            from ..files.read import read_bounded

            raw = read_bounded(entry.path, what="results file", max_bytes=_MAX_RESULTS,
                               error=InputError)
            try:
                doc = json.loads(raw.decode("utf-8"))
            except (UnicodeDecodeError, ValueError) as exc:
                raise ValueError(f"not JSON results ({exc})") from None
            spectrum = spectrum_from_dict(doc, source=str(entry.path),
                                          sha256=hashlib.sha256(raw).hexdigest(),
                                          connection=entry.connection, phase=entry.phase,
                                          load_point=entry.load_point)
    except ValueError as exc:
        if isinstance(exc, InputError) and entry.kind == "capture":
            raise
        problem = exc.problem if isinstance(exc, InputError) else str(exc)
        raise sf.error(entry, entry.kind, f"{entry.text}: {problem}") from None
    except OSError as exc:
        raise sf.error(entry, entry.kind, f"{entry.text}: cannot read: "
                                          f"{exc.strerror or exc}") from None
    return entry.unit(spectrum, run_spec=spec)


#: Largest results file a unit may name (saved results are kilobytes to a few megabytes).
_MAX_RESULTS = 256 << 20
