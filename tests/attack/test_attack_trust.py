"""Attacks on trust: an edited cache, a capture rewritten in place under its old size and
modification time, a capture that grows while it is read, duplicate captures in a resumed
batch.

The promises under attack: a cache hit is as trustworthy as a fresh run (entries carry a keyed
checksum of the stored numbers; a capture is recognised by its content, or by a fingerprint
that a rewrite cannot keep); the SHA-256 a report records covers exactly the bytes analysed; a
batch resumes by path and content, so equal bytes under another name still get their rows.
"""

from __future__ import annotations

import json
import os
import time

import numpy as np
import pytest
from _kit import (
    EXIT,
    LIMITS,
    VERDICTS,
    capture_text,
    finish,
    invoke,
    outcome,
    sha256,
    snapshot,
    spawn,
    write_capture,
)

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX file semantics")


def _check(cap, cache, *extra):
    return invoke(["check", cap, *LIMITS, "--format", "json", "-q", "--cache-dir", cache,
                   *extra])


def _tamper_results(cache):
    """Scale every stored float array of every cached analysis result by 0.01 and shift every
    number in their JSON descriptions; returns how many files were edited."""
    n = 0
    for f in cache.rglob("*"):
        if not f.is_file() or f.name.startswith("."):
            continue
        if f.suffix == ".npz":
            with np.load(f, allow_pickle=False) as z:
                arrays = {k: z[k] for k in z.files}
            arrays = {k: (v * 0.01 if v.dtype.kind == "f" else v) for k, v in arrays.items()}
            with open(f, "wb") as fh:
                np.savez(fh, **arrays)
            n += 1
        elif f.suffix == ".f64":
            data = np.fromfile(f, dtype="<f8") * 0.01
            data.tofile(f)
            n += 1
    return n


@pytest.mark.parametrize("streamed", [False, True])
def test_an_edited_cache_entry_is_detected_and_recomputed(tmp_path, monkeypatch, streamed):
    import pqcheck.readers as readers

    if streamed:  # the block-by-block reader, whose parsed samples are cached too
        monkeypatch.setattr(readers, "STREAM_OVER_BYTES", 1024)
    cap = write_capture(tmp_path / "cap.csv", h5=0.25)  # fails the 12 % limit of I5
    cache = tmp_path / "cache"
    before = snapshot(cap)
    first = _check(cap, cache)
    assert first.code == EXIT["fail"], first.stderr
    assert _tamper_results(cache) >= 1
    second = _check(cap, cache)
    outcome(second, codes=[EXIT["fail"]], inputs_before=before)
    assert json.loads(second.stdout)["verdict"] == "fail"
    assert json.loads(second.stdout)["checks"] == json.loads(first.stdout)["checks"]
    assert "cache" in second.stderr.lower() and "recomput" in second.stderr.lower(), (
        "an edited cache entry is announced")
    third = _check(cap, cache)  # the recomputed entry replaced the edited one
    assert third.code == EXIT["fail"] and "recomput" not in third.stderr.lower()


def test_capture_rewritten_in_place_with_old_size_and_mtime(tmp_path, monkeypatch):
    import pqcheck.readers as readers

    monkeypatch.setattr(readers, "STREAM_OVER_BYTES", 1024)  # the fingerprint path
    cap = tmp_path / "cap.csv"
    cap.write_text(capture_text(h5=0.02, width=12))
    st = os.stat(cap)
    cache = tmp_path / "cache"
    first = _check(cap, cache)
    assert first.code in VERDICTS and first.code != EXIT["fail"], first.stderr
    # same size, other content (the fifth at 25 %), and the old times put back, as copy
    # tools that keep times do
    new = capture_text(h5=0.25, width=12)
    assert len(new.encode()) == st.st_size
    with open(cap, "r+") as fh:
        fh.write(new)
    os.utime(cap, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert os.stat(cap).st_mtime_ns == st.st_mtime_ns and os.stat(cap).st_size == st.st_size
    second = _check(cap, cache)
    assert second.code == EXIT["fail"], "the old cached result was served for new content"
    doc = json.loads(second.stdout)
    assert doc["capture"]["sha256"] == sha256(cap)


def test_capture_growing_while_read_is_not_reported_as_its_first_rows(tmp_path):
    d = tmp_path / "w"
    d.mkdir()
    cap = write_capture(d / "cap.csv", dur_s=2.0)
    t_next = 2.0
    proc = spawn(["report", cap, *LIMITS, "-o", d / "r.pdf", "--json", d / "r.json", "-q",
                  "--no-cache"], cwd=d)
    # a logger still appending rows to the file for as long as the report runs
    w = 2 * np.pi * 50.0
    t_end = time.monotonic() + 120.0
    with open(cap, "a") as fh:
        while proc.poll() is None and time.monotonic() < t_end:
            for _ in range(64):
                x = t_next
                fh.write(f"{x:.9g},{100 * np.sin(w * x):.9g},{325 * np.sin(w * x):.9g}\n")
                t_next += 1 / 6400.0
            fh.flush()
            time.sleep(0.005)
    run = finish(proc)
    state = outcome(run, codes=[EXIT["usage"], EXIT["inconclusive"]],
                    outputs=[d / "r.pdf", d / "r.json"], out_dirs=[d],
                    message=r"cap\.csv: .*changed while")
    if state == "complete":  # inconclusive, with the finding, and the hash of what was read
        doc = json.loads((d / "r.json").read_text())
        codes = [f["code"] for c in doc["captures"] for f in c["analysis"]["findings"]]
        assert any("changed" in c for c in codes), codes


def test_batch_resume_gives_rows_to_a_copy_under_another_name(tmp_path):
    fleet = tmp_path / "fleet"
    a = write_capture(fleet / "a.csv")
    res = tmp_path / "results.csv"
    argv = ["batch", fleet, *LIMITS, "--csv", res, "-q", "--jobs", "1", "--no-cache"]
    first = invoke(argv)
    assert first.code in VERDICTS, first.stderr
    (fleet / "sub").mkdir()
    (fleet / "sub" / "copy-of-a.csv").write_bytes(a.read_bytes())
    (fleet / "b.csv").write_bytes(a.read_bytes())
    before = snapshot(fleet)
    second = invoke(argv)
    outcome(second, codes=[first.code], inputs_before=before)
    import pyarrow.csv as pacsv

    caps = set(pacsv.read_csv(res).column("capture").to_pylist())
    assert {str(fleet / "a.csv"), str(fleet / "b.csv"),
            str(fleet / "sub" / "copy-of-a.csv")} <= caps, caps
    third = invoke([*argv, "--format", "json"])  # nothing left to do: all three skipped
    doc = json.loads(third.stdout)
    assert doc["run"]["checked"] == 0 and doc["run"]["skipped"] == 3
    assert len(doc["captures"]) == 3
