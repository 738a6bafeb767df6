"""Speed and memory of the flicker evaluation (IEC 61000-4-15 flickermeter + IEC 61000-3-3
voltage changes) on a 2-hour capture at 6.4 kS/s, against baselines measured in the same run.

Run on demand (never part of the unit tests):

    python benchmarks/bench_flicker.py                    # 10 min and 2 h captures
    python benchmarks/bench_flicker.py --durations 600    # only the 10-minute one
    python benchmarks/bench_flicker.py --repeat 3

The captures are written here as ``.npy`` files with a JSON sidecar (a voltage and a current
channel, float64, 50 Hz): the voltage carries a rectangular fluctuation of 39 changes per
minute and 0.894 % (IEC 61000-4-15:2010 Table 5: Pst = 1.00), so every 10-minute Pst must
read 1.00 +- 5 %; the current steps between 4 A and 12 A every 30 s. Each job runs in a fresh
process (peak RSS from ``os.wait4``), interleaved over the repetitions, medians reported:

- ``read``: one pass over the capture's blocks as pqcheck opens it (memory map), summing the
  squares of the voltage: the floor (page cache, block iteration);
- ``naive``: a simple baseline, the whole voltage channel in memory through the same filter
  chain by ``scipy.signal.lfilter`` at the input rate (no decimation, no blocks), with
  percentiles by ``numpy.percentile``: the textbook way to write a flickermeter;
- ``voltage``: :func:`pqcheck.flicker.analyze_flicker` on the voltage path (flickermeter and
  d(t) on the voltage channel);
- ``current``: the same on the reference-impedance path (terminal voltage computed from the
  current through Zref with the measured voltage as the source).

The ratio printed for each job is the real-time factor (capture length / wall time) and the
time relative to ``naive``. Peak RSS counts the memory-mapped capture pages the process
touched, so ``above read`` (peak RSS minus that of ``read``, which maps the same file) is the
working memory of the job.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

FS = 6400.0
BLOCK = 1 << 20


def generate(path: Path, seconds: float) -> None:
    """Write ``path`` (.npy, columns u, i) and its JSON sidecar, block by block."""
    n = int(seconds * FS)
    arr = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(n, 2))
    for lo in range(0, n, BLOCK):
        m = min(BLOCK, n - lo)
        t = (lo + np.arange(m)) / FS
        sq = np.where(np.sin(2 * np.pi * 39 / 120 * t + np.pi / 2 + 1e-3) >= 0, 1.0, -1.0)
        w = np.sin(2 * np.pi * 50 * t)
        arr[lo:lo + m, 0] = 230 * np.sqrt(2) * (1 + 0.894 / 200 * sq) * w
        steps = np.where((t // 30) % 2 == 0, 4.0, 12.0)
        arr[lo:lo + m, 1] = np.sqrt(2) * steps * w
    arr.flush()
    del arr
    path.with_suffix(".json").write_text(json.dumps(
        {"columns": ["u_a", "i_a"], "sample_rate_hz": FS}))


CHILD = r"""
import json, sys, time
import numpy as np
job, path = sys.argv[1], sys.argv[2]
t0 = time.perf_counter()
out = {}
if job == "read":
    from pqcheck.readers import open_capture
    cap = open_capture(path)
    s = 0.0
    for b in cap.blocks(1 << 20):
        s += float(np.sum(b[0] * b[0]))
    out["sum"] = s
elif job == "naive":
    from scipy import signal
    from pqcheck.flicker.meter import LAMPS, _pinst_scale, _lowpass_cutoff_hz
    u = np.load(path, mmap_mode="r")[:, 0].astype(np.float64)
    fs = 6400.0
    x = u * u
    b, a = signal.butter(6, _lowpass_cutoff_hz(50), fs=fs)
    x = signal.lfilter(b, a, x)
    x = x / np.mean(x)
    b, a = signal.butter(1, 0.05, "high", fs=fs)
    x = signal.lfilter(b, a, x)
    z, p, k = LAMPS["230V"].analog_zpk()
    bz, az = signal.zpk2tf(*signal.bilinear_zpk(z, p, k, fs))
    x = signal.lfilter(bz, az, x)
    a1 = np.exp(-1 / (fs * 0.3))
    x = signal.lfilter([1 - a1], [1, -a1], x * x)
    n10 = int(600 * fs)
    pst = []
    for lo in range(0, x.size - n10 + 1, n10):
        seg = x[lo:lo + n10]
        q = {p: np.percentile(seg, 100 - p) for p in
             (0.1, 0.7, 1, 1.5, 2.2, 3, 4, 6, 8, 10, 13, 17, 30, 50, 80)}
        pst.append(q[50])
    out["n_pst"] = len(pst)
elif job in ("voltage", "current"):
    from pqcheck.readers import open_capture
    from pqcheck.flicker import FlickerSettings, analyze_flicker
    cap = open_capture(path)
    s = FlickerSettings(path="voltage" if job == "voltage" else "reference-impedance")
    fa = analyze_flicker(cap, nominal_hz=50, settings=s)
    c = fa.channels[0]
    out["pst"] = [round(p, 4) for p in c.meter.pst]
    out["plt"] = c.plt
    out["dc"] = c.change.dc_percent
    out["dmax"] = c.change.dmax_percent
out["wall_s"] = time.perf_counter() - t0
print(json.dumps(out))
"""


def run(job: str, path: Path) -> dict:
    proc = subprocess.Popen([sys.executable, "-c", CHILD, job, str(path)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    t0 = time.perf_counter()
    out, err = proc.communicate()
    _, status, usage = os.wait4(proc.pid, 0) if proc.returncode is None else (0, 0, None)
    wall = time.perf_counter() - t0
    if proc.returncode:
        raise SystemExit(f"{job} failed:\n{err.decode()}")
    d = json.loads(out.decode().strip().splitlines()[-1])
    d["process_s"] = wall
    d["rss_mb"] = (usage.ru_maxrss / 1024) if usage else float("nan")
    return d


def run_rss(job: str, path: Path) -> dict:
    """Run a child and read its peak RSS with os.wait4."""
    proc = subprocess.Popen([sys.executable, "-c", CHILD, job, str(path)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out = proc.stdout.read()
    err = proc.stderr.read()
    _, status, usage = os.wait4(proc.pid, 0)
    if status:
        raise SystemExit(f"{job} failed:\n{err.decode()}")
    d = json.loads(out.decode().strip().splitlines()[-1])
    d["rss_mb"] = usage.ru_maxrss / 1024
    return d


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--durations", type=float, nargs="+", default=[600.0, 7200.0])
    ap.add_argument("--repeat", type=int, default=1)
    ap.add_argument("--jobs", nargs="+", default=["read", "naive", "voltage", "current"])
    args = ap.parse_args()
    print(f"# {platform.processor() or platform.machine()}, {os.cpu_count()} cores, "
          f"Python {platform.python_version()}, numpy {np.__version__}")
    with tempfile.TemporaryDirectory(prefix="pqcheck-bench-flicker-") as tmp:
        for seconds in args.durations:
            path = Path(tmp) / f"flicker_{int(seconds)}s.npy"
            generate(path, seconds)
            res = {j: [] for j in args.jobs}
            for _ in range(args.repeat):
                for j in args.jobs:
                    res[j].append(run_rss(j, path))
            size_mb = path.stat().st_size / 2**20
            print(f"\n## {seconds:g} s at {FS:g} S/s, 2 channels ({size_mb:.0f} MB)")
            naive = (statistics.median(r["wall_s"] for r in res["naive"])
                     if "naive" in res else float("nan"))
            floor = max(r["rss_mb"] for r in res["read"]) if "read" in res else 0.0
            print(f"{'job':<9}{'wall s':>9}{'x real time':>13}{'vs naive':>10}"
                  f"{'peak RSS MB':>13}{'above read':>12}  result")
            for j in args.jobs:
                w = statistics.median(r["wall_s"] for r in res[j])
                rss = max(r["rss_mb"] for r in res[j])
                last = res[j][-1]
                extra = ""
                if j in ("voltage", "current"):
                    pst = last["pst"]
                    extra = (f"Pst {min(pst):.3f}..{max(pst):.3f} ({len(pst)} x 10 min), "
                             f"Plt {last['plt']}, dc {last['dc']:.3f} %, "
                             f"dmax {last['dmax']:.3f} %")
                print(f"{j:<9}{w:>9.2f}{seconds / w:>13.0f}{w / naive:>10.3f}{rss:>13.0f}"
                      f"{rss - floor:>12.0f}  {extra}")
            path.unlink()
            path.with_suffix(".json").unlink()


if __name__ == "__main__":
    main()
