"""Results export of a report: one JSON document and tidy CSV tables.

The JSON is what ``pqcheck report`` writes as its JSON file and what the PDF carries as its
``results.json`` attachment (the same bytes). The CSV tables (a folder of them) are tidy: one row per
observation, one column per variable, a ``capture`` column wherever several captures are
stacked. Both are formatted from the result objects through :mod:`pqcheck.export` and the
assessment's own dict form; nothing is recomputed.
"""

from __future__ import annotations

import json

from ..export import harmonics_frame
from ..files.atomic import OutputSet
from ..results import SCHEMA_VERSION, report_document

__all__ = ["SCHEMA_VERSION", "CSV_TABLES", "job_to_dict", "job_json", "job_frames",
           "job_csv_texts", "write_csv_dir"]


CSV_TABLES = ("captures", "channels", "harmonics", "windows", "power", "findings", "checks")
"""Names of the CSV files written by :func:`write_csv_dir` (``<name>.csv``)."""


def job_to_dict(job) -> dict:
    """JSON-ready form of a report job: the ``report`` document of
    :func:`pqcheck.results.report_document` (the one module that writes results)."""
    return report_document(job)


def job_json(job) -> bytes:
    """The results JSON as UTF-8 bytes (indented, ending with a newline)."""
    text = json.dumps(job_to_dict(job), indent=2, ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")


def job_frames(job, doc: dict | None = None) -> dict:
    """Tidy tables of a report job, by name (see :data:`CSV_TABLES`).

    Parameters
    ----------
    job : ReportJob
    doc : dict or None
        :func:`job_to_dict` of ``job`` when already computed.

    Returns
    -------
    dict of str to pandas.DataFrame
    """
    import pandas as pd

    doc = job_to_dict(job) if doc is None else doc
    caps, chans, harm, wins, power, finds, checks = [], [], [], [], [], [], []
    for run, d in zip(job.runs, doc["captures"]):
        a = d["analysis"]
        caps.append({"capture": run.id, "load_point": run.load_point,
                     "load_percent": run.load_percent, "file": a["capture"]["source"],
                     "sha256": a["capture"]["sha256"],
                     "sample_rate_hz": a["capture"]["sample_rate_hz"],
                     "duration_s": a["capture"]["duration_s"],
                     "fundamental_hz": a["fundamental_hz"], "verdict": d["verdict"]})
        for c in a["channels"]:
            chans.append({"capture": run.id, **{k: v for k, v in c.items()
                                                if k != "harmonics"}})
        hf = harmonics_frame(run.result)
        hf.insert(0, "capture", run.id)
        harm.append(hf)
        wf = run.windows_frame()  # the THD the report's figure shows
        wf.insert(0, "window", range(len(wf)))
        base = ["window", "t_start_s", "duration_s", "freq_hz", "valid"]
        for c in run.result.channels:
            part = wf[base].copy()
            part.insert(0, "capture", run.id)
            part["channel"] = c.name
            part["rms"] = wf[f"{c.name}_rms"]
            part["thd_percent"] = wf[f"{c.name}_thd_percent"]
            wins.append(part)
        if a["power"] is not None:
            for ph in a["power"]["phases"]:
                power.append({"capture": run.id, **ph})
            total = dict(a["power"]["total"])
            power.append({"capture": run.id, "phase": "total", **total})
        for f in a["findings"]:
            finds.append({"capture": run.id, "code": f["code"], "severity": f["severity"],
                          "channels": " ".join(f.get("channels", [])),
                          "orders": " ".join(str(o) for o in f.get("orders", [])),
                          "value": f.get("value"), "unit": f.get("unit", ""),
                          "message": f["message"]})
        for ad in d["assessments"]:
            for chk in ad.get("checks", []):
                row = {"capture": run.id}
                row.update({k: (" ".join(map(str, v)) if isinstance(v, list) else v)
                            for k, v in chk.items() if not isinstance(v, dict)})
                checks.append(row)
    frames = {
        "captures": pd.DataFrame(caps),
        "channels": pd.DataFrame(chans),
        "harmonics": pd.concat(harm, ignore_index=True) if harm else pd.DataFrame(),
        "windows": pd.concat(wins, ignore_index=True) if wins else pd.DataFrame(),
        "power": pd.DataFrame(power),
        "findings": pd.DataFrame(finds, columns=["capture", "code", "severity", "channels",
                                                 "orders", "value", "unit", "message"]),
        "checks": pd.DataFrame(checks),
    }
    if "order" in frames["checks"]:
        frames["checks"]["order"] = frames["checks"]["order"].astype("Int64")
    return frames


def job_csv_texts(job, doc: dict | None = None) -> list:
    """The CSV tables of a report job as text, in the order of :data:`CSV_TABLES` (the files
    ``<name>.csv`` of the report's CSV folder)."""
    frames = job_frames(job, doc)
    return [frames[name].to_csv(index=False, lineterminator="\n") for name in CSV_TABLES]


def write_csv_dir(frames: dict, folder, *, force: bool = False) -> list:
    """Write each table as ``<name>.csv`` in ``folder`` (created if missing), all of them or
    none (:class:`pqcheck.files.atomic.OutputSet`); refuses to replace existing files unless
    ``force``.

    Returns
    -------
    list of pathlib.Path
        Files written.
    """
    outputs = OutputSet(force=force)
    paths = outputs.add_folder(folder, [f"{n}.csv" for n in CSV_TABLES], "`csv`")
    for name, path in zip(CSV_TABLES, paths):
        outputs.put(path, frames[name].to_csv(index=False, lineterminator="\n"))
    return outputs.commit()
