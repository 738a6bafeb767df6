"""Archival form of pqcheck's PDFs: PDF/A-3b (ISO 19005-3, level B).

reportlab writes the document (every font embedded as a TrueType subset); this module adds
what ISO 19005 asks of an archival file and reportlab does not write: an XMP metadata stream
that agrees with the document information dictionary and declares the PDF/A part and
conformance level, and an output intent with an ICC colour profile (sRGB, made by Pillow's
littleCMS binding, so nothing is downloaded or bundled).

Why part 3 and not part 2: the results JSON travels inside every report as an embedded file.
PDF/A-2 allows only embedded files that are themselves PDF/A; PDF/A-3 allows any file when
its file specification names its relationship to the document (``/AFRelationship /Data``)
and its MIME type, which :mod:`pqcheck.report.pdf` writes. Everything else PDF/A-2b requires
holds for part 3 as well.

The result has not been run through a conformance validator here (none is installable from
the package registries this project uses); ``tests/test_report_archival.py`` checks the
properties listed above on every report.
"""

from __future__ import annotations

import io
from datetime import datetime, timezone

__all__ = ["to_pdfa", "PDFA_PART", "PDFA_CONFORMANCE"]

PDFA_PART = "3"
PDFA_CONFORMANCE = "B"


def _srgb_profile() -> bytes:
    from PIL import ImageCms

    return ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes()


def to_pdfa(pdf: bytes, *, created: datetime | None = None) -> bytes:
    """Return ``pdf`` with the XMP metadata and output intent of PDF/A-3b.

    Parameters
    ----------
    pdf : bytes
        A document written by reportlab with embedded fonts and a document information
        dictionary (title, author, subject, keywords, creator).
    created : datetime, optional
        Creation time to record (default: now, UTC).

    Returns
    -------
    bytes
        The same pages and attachments, with ``/Metadata`` and ``/OutputIntents`` in the
        catalogue.
    """
    import pikepdf

    created = (created or datetime.now(timezone.utc)).astimezone(timezone.utc)
    src = pikepdf.open(io.BytesIO(pdf))
    if "/Trapped" in src.docinfo:  # no XMP counterpart in PDF/A-3's schemas; not needed
        del src.docinfo["/Trapped"]
    with src.open_metadata(set_pikepdf_as_editor=False) as meta:
        meta.load_from_docinfo(src.docinfo, raise_failure=False)
        meta["pdfaid:part"] = PDFA_PART
        meta["pdfaid:conformance"] = PDFA_CONFORMANCE
        stamp = created.isoformat(timespec="seconds")
        meta["xmp:CreateDate"] = stamp
        meta["xmp:ModifyDate"] = stamp
        meta["xmp:MetadataDate"] = stamp
        creator = str(src.docinfo.get("/Creator", "pqcheck"))
        meta["xmp:CreatorTool"] = creator
    icc = pikepdf.Stream(src, _srgb_profile())
    icc["/N"] = 3
    intent = pikepdf.Dictionary({
        "/Type": pikepdf.Name("/OutputIntent"),
        "/S": pikepdf.Name("/GTS_PDFA1"),
        "/OutputConditionIdentifier": pikepdf.String("sRGB IEC61966-2.1"),
        "/Info": pikepdf.String("sRGB IEC61966-2.1"),
        "/DestOutputProfile": icc,
    })
    src.Root.OutputIntents = pikepdf.Array([intent])
    # ISO 19005-3 clause 6.8: an embedded file is associated with the document through the
    # catalogue's /AF array (reportlab writes the file specification, not the array)
    names = src.Root.get("/Names")
    files = names.get("/EmbeddedFiles") if names is not None else None
    if files is not None and "/AF" not in src.Root:
        specs = [files.Names[k] for k in range(1, len(files.Names), 2)]
        src.Root.AF = pikepdf.Array(specs)
    out = io.BytesIO()
    src.save(out, static_id=False, deterministic_id=True)
    return out.getvalue()
