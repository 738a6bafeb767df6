"""Loading a site study: the site file, then each unit's data.

:func:`load_site` reads the site file (:func:`pqcheck.site.read_site`), then each unit's data:
a capture is read and analysed like any capture check (up to the highest order the site's
limit table assesses, at the site's nominal frequency), saved results are read as pqcheck
wrote them; the unit's spectrum follows (:func:`pqcheck.site.spectrum_from_analysis`,
:func:`pqcheck.site.spectrum_from_dict`) and the :class:`~pqcheck.site.Site` is built
(:func:`pqcheck.site.build_site`). A problem with a unit's data is a
:class:`~pqcheck.errors.PlanError` naming the site file, the unit's line and its field;
a capture that cannot be read keeps the reader's own error, naming the capture file.
"""

from __future__ import annotations

import hashlib
import json

from ..errors import InputError
from ..site import build_site, read_site, spectrum_from_analysis, spectrum_from_dict

__all__ = ["load_site"]


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


def _load_unit(sf, entry, cache):
    try:
        if entry.kind == "capture":
            result = _analyse(sf, entry, cache)
            spectrum = spectrum_from_analysis(result, connection=entry.connection,
                                              phase=entry.phase)
        else:
            raw = entry.path.read_bytes()
            try:
                doc = json.loads(raw.decode("utf-8"))
            except (UnicodeDecodeError, ValueError) as exc:
                raise ValueError(f"not JSON results ({exc})") from None
            spectrum = spectrum_from_dict(doc, source=str(entry.path),
                                          sha256=hashlib.sha256(raw).hexdigest(),
                                          connection=entry.connection, phase=entry.phase,
                                          load_point=entry.load_point)
    except ValueError as exc:
        if isinstance(exc, InputError):
            raise
        raise sf.error(entry, entry.kind, f"{entry.text}: {exc}") from None
    except OSError as exc:
        raise sf.error(entry, entry.kind, f"{entry.text}: cannot read: "
                                          f"{exc.strerror or exc}") from None
    return entry.unit(spectrum)


def _analyse(sf, entry, cache):
    """The analysis of a unit's capture: the site's nominal frequency, orders up to the
    highest the site's limit table assesses."""
    from .check import analyze_file

    nominal = None if sf.nominal_hz is None else int(sf.nominal_hz)
    _, result = analyze_file(
        entry.path, sample_rate_hz=entry.sample_rate_hz,
        current=None if entry.current is None else list(entry.current),
        voltage=None if entry.voltage is None else list(entry.voltage),
        time_column=entry.time_column, cache=cache, nominal_hz=nominal,
        max_order=sf.limit_table.max_order)
    return result
