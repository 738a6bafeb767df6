"""Speed and memory of `pqcheck analyze` on long three-phase captures, against baselines
measured in the same run.

Run on demand (never part of the unit tests):

    python benchmarks/bench_long_capture.py                # 60 s and 10 min captures
    python benchmarks/bench_long_capture.py --scaling      # adds a 40 min capture (memory growth)
    python benchmarks/bench_long_capture.py --repeat 5 --durations 60
    python benchmarks/bench_long_capture.py --digits full  # values at 17 significant digits
    python benchmarks/bench_long_capture.py --digits savetxt  # numpy.savetxt's default %.18e
    python benchmarks/bench_long_capture.py --no-time-column  # six channels, rate given

What is measured, each in a fresh process, interleaved over the repetitions, medians reported:

- ``read``: the file's bytes read in 1 MiB blocks (the floor: disk/page cache);
- ``parse``: pqcheck's own reader alone (the compiled parser of
  ``pqcheck/readers/_numcsv.py`` on two threads, the blocks it hands the analysis, the SHA-256
  on a thread; no analysis);
- ``pandas``: pandas' C engine, chunked, alone (what pqcheck parses with under
  ``PQCHECK_NO_JIT=1``);
- ``naive``: a simple baseline, ``pandas.read_csv`` of the whole file plus a Python loop of
  ``numpy.fft.rfft`` over every 4000-sample window of every channel computing THD (no
  synchronisation, no groups, no power: much less than pqcheck does);
- ``cold``: ``pqcheck analyze --no-cache --format json`` end to end (process start, imports,
  parse, IEC 61000-4-7 analysis, JSON);
- ``cached``: the same command with the cache warm (second run of the same file);
- ``arrow`` (and ``polars``, ``duckdb`` when installed): other parsers of the whole file;
- ``fft``: the bare batched ``scipy.fft.rfft`` of every 4000-sample window of every channel
  of the same capture as ``.npy`` (2 workers);
- ``binary``: ``pqcheck analyze`` of that ``.npy`` (no text parse).

Peak RSS is each child's own ``VmHWM`` at exit. The captures are generated here: a 49.95 Hz
three-phase set, currents with 20 % fifth and 10 % seventh harmonic (THD 22.36 %), printed
like a scope export; the THD pqcheck reports is checked against that known content.
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

FS = 20_000
F0 = 49.95
"""Fundamental of the generated captures [Hz]: off nominal, as a real supply always is, so that
every window is resampled (at exactly 50 Hz and 20 kS/s a window is 4000 whole samples and
the resampling is the identity)."""
EXPECTED_THD = 100 * np.sqrt(0.2**2 + 0.1**2)


def generate(path: Path, seconds: float, full: bool = False, savetxt: bool = False,
             time_column: bool = True) -> None:
    """Write a 7-column three-phase capture (time, ia, ib, ic, va, vb, vc): rounded as a
    scope prints (3 and 2 decimals), or with ``full`` every value at full precision (the
    shortest text that reads back as the same float64: up to 17 significant digits, as a
    simulator or ``pandas.to_csv`` writes them), or with ``savetxt`` as ``numpy.savetxt``
    writes by default (``%.18e``: 19 significant digits and an exponent, 25 bytes a number)
    under a ``time_s,ia,...`` header. Without ``time_column`` the six channels alone (the
    sample rate is then given to each reader)."""
    import pyarrow as pa
    import pyarrow.csv as pc

    rng = np.random.default_rng(1)
    block = FS * 30
    n_total = int(FS * seconds)
    if savetxt:
        with open(path, "w") as fh:
            for lo in range(0, n_total, block):
                cols = _signals(lo, min(block, n_total - lo), rng, full=True,
                                time_column=time_column)
                head = "time_s,ia,ib,ic,va,vb,vc" if time_column else "ia,ib,ic,va,vb,vc"
                np.savetxt(fh, np.column_stack([cols[k] for k in cols]), delimiter=",",
                           header=head if lo == 0 else "", comments="")
        return
    with pa.OSFile(str(path), "wb") as sink:
        writer = None
        for lo in range(0, n_total, block):
            table = pa.table(_signals(lo, min(block, n_total - lo), rng, full, time_column))
            if writer is None:
                writer = pc.CSVWriter(sink, table.schema,
                                      write_options=pc.WriteOptions(quoting_style="none"))
            writer.write_table(table)
        writer.close()


def _signals(lo: int, n: int, rng, full: bool, time_column: bool = True) -> dict:
    """Samples ``lo`` to ``lo + n`` of the seven columns (six without ``time_column``), by
    name (rounded unless ``full``)."""
    t = (lo + np.arange(n)) / FS
    cols = {"time [s]": np.round(t, 6)} if time_column else {}
    for k, ph in enumerate("abc"):
        th = 2 * np.pi * F0 * t - 2 * np.pi * k / 3
        i = 141.4 * (np.sin(th) + 0.2 * np.sin(5 * th) + 0.1 * np.sin(7 * th))
        i = i + rng.normal(0, 0.05, n)
        cols[f"i{ph} [A]"] = i if full else np.round(i, 3)
    for k, ph in enumerate("abc"):
        th = 2 * np.pi * F0 * t - 2 * np.pi * k / 3
        v = 325.3 * np.sin(th) + rng.normal(0, 0.1, n)
        cols[f"v{ph} [V]"] = v if full else np.round(v, 2)
    return cols


CHILD_READ = """
import sys
with open(sys.argv[1], 'rb') as fh:
    while fh.read(1 << 20):
        pass
"""

CHILD_PARSE = """
import sys
from pqcheck.readers.stream import stream_delimited
n = 0
rate = float(sys.argv[2]) if len(sys.argv) > 2 else None  # given when there is no time column
for block in stream_delimited(sys.argv[1], sample_rate_hz=rate).blocks(1 << 18):
    n += block.shape[1]
print(n)
"""

CHILD_PARSE_PANDAS = """
import sys, numpy as np, pandas as pd
n = 0
for chunk in pd.read_csv(sys.argv[1], engine='c', dtype=np.float64, chunksize=1 << 20):
    n += len(chunk)
"""

CHILD_PARSE_ARROW = """
import sys, pyarrow.csv as pc
t = pc.read_csv(sys.argv[1])
print(t.num_rows)
"""

CHILD_PARSE_POLARS = """
import sys, polars as pl
print(pl.read_csv(sys.argv[1]).height)
"""

CHILD_PARSE_DUCKDB = """
import sys, duckdb
# every value converted (a sum over every column, streamed): count(*) alone converts none
# and is no parse; fetchall, since DuckDB 2 relations have no fetchone
print(duckdb.sql(f"select sum(columns(*)) from read_csv_auto('{sys.argv[1]}')").fetchall())
"""

CHILD_FFT = """
import sys, numpy as np
from scipy import fft
x = np.load(sys.argv[1], mmap_mode='r')
N = 4000
block = 64 * N
for lo in range(0, x.shape[0] - N + 1, block):
    seg = np.ascontiguousarray(x[lo:lo + block].T)
    w = seg.shape[1] // N
    spec = fft.rfft(seg[:, : w * N].reshape(seg.shape[0], w, N), axis=-1, workers=2)
"""

CHILD_NAIVE = """
import sys, numpy as np, pandas as pd
df = pd.read_csv(sys.argv[1])
data = df.to_numpy()[:, int(sys.argv[2]):]  # without the time column, if there is one
N = 4000
thd = []
for c in range(data.shape[1]):
    x = data[:, c]
    for w in range(len(x) // N):
        X = np.abs(np.fft.rfft(x[w * N:(w + 1) * N]))
        h = X[10:510:10]
        thd.append(np.sqrt(np.sum(h[1:] ** 2)) / h[0])
print(100 * np.sqrt(np.mean(np.square(thd[:len(thd) // 2]))))
"""


WRAP = """
import atexit, os, runpy, sys
def _hwm():
    for line in open('/proc/self/status'):
        if line.startswith('VmHWM'):
            open(os.environ['PQ_BENCH_HWM'], 'w').write(line.split()[1])
atexit.register(_hwm)
mode, what = sys.argv[1], sys.argv[2]
sys.argv = [what] + sys.argv[3:]
if mode == '-m':
    runpy.run_module(what, run_name='__main__', alter_sys=True)
else:
    exec(compile(what, '<child>', 'exec'), {'__name__': '__main__'})
"""


def run_child(argv, env=None):
    """Run a Python command (``[python, -c, code, ...]`` or ``[python, -m, module, ...]``);
    return (seconds, peak RSS in MB, stdout). The peak RSS is the child's own high-water
    mark (``VmHWM`` at exit; ``ru_maxrss`` would count the memory of this process, which the
    child is forked from)."""
    hwm = Path(tempfile.mkstemp(prefix="pq-bench-hwm-")[1])
    env = dict(os.environ if env is None else env, PQ_BENCH_HWM=str(hwm))
    t0 = time.perf_counter()
    proc = subprocess.run([argv[0], "-c", WRAP] + list(argv[1:]), capture_output=True,
                          env=env)
    dt = time.perf_counter() - t0
    if proc.returncode != 0:
        raise RuntimeError(f"{argv[:3]} failed: {proc.stderr.decode()[-2000:]}")
    text = hwm.read_text().strip()
    hwm.unlink()
    return dt, (int(text) / 1024 if text else float("nan")), proc.stdout.decode()


PARSERS = ("parse", "pandas", "arrow", "polars", "duckdb")


CHILD_TO_NPY = """
import sys, json, numpy as np, pyarrow.csv as pc
t = pc.read_csv(sys.argv[1])
names = t.column_names[int(sys.argv[3]):]  # without the time column, if there is one
np.save(sys.argv[2], np.column_stack([t.column(n).to_numpy() for n in names]))
print(json.dumps([n.split(' [')[0] for n in names]))
"""


def to_npy(csv: Path, time_column: bool = True) -> Path:
    """The same capture as a .npy array (samples x channels) with its JSON side file, written
    by a child process (so that this process stays small: a child's peak RSS counts the
    memory of the process it was forked from)."""
    out = csv.with_suffix(".npy")
    _, _, cols = run_child([sys.executable, "-c", CHILD_TO_NPY, str(csv), str(out),
                            str(int(time_column))])
    out.with_suffix(".json").write_text(json.dumps({"columns": json.loads(cols),
                                                    "sample_rate_hz": FS}))
    return out


def measure(path: Path, repeat: int, cache_dir: Path, time_column: bool = True):
    py = sys.executable
    npy = to_npy(path, time_column)
    opts = ["--nominal-frequency", "50", "--current", "ia,ib,ic", "--voltage", "va,vb,vc",
            "--format", "json", "--quiet"]
    pq = [py, "-m", "pqcheck.cli", "analyze", str(path)] + opts
    if not time_column:
        pq += ["--sample-rate", str(FS)]
    jobs = {
        "read": [py, "-c", CHILD_READ, str(path)],
        "parse": [py, "-c", CHILD_PARSE, str(path)] + ([] if time_column else [str(FS)]),
        "pandas": [py, "-c", CHILD_PARSE_PANDAS, str(path)],
        "arrow": [py, "-c", CHILD_PARSE_ARROW, str(path)],
        "polars": [py, "-c", CHILD_PARSE_POLARS, str(path)],
        "duckdb": [py, "-c", CHILD_PARSE_DUCKDB, str(path)],
        "naive": [py, "-c", CHILD_NAIVE, str(path), str(int(time_column))],
        "fft": [py, "-c", CHILD_FFT, str(npy)],
        "binary": [py, "-m", "pqcheck.cli", "analyze", str(npy)] + opts + ["--no-cache"],
        "cold": pq + ["--no-cache"],
        "cached": pq + ["--cache-dir", str(cache_dir)],
    }
    for name in ("polars", "duckdb"):  # optional parsers: measured when installed
        if subprocess.run([py, "-c", f"import {name}"], capture_output=True).returncode:
            del jobs[name]
    # warm the cache once, and the page cache for every job
    run_child(jobs["cached"])
    times = {k: [] for k in jobs}
    rss = {k: [] for k in jobs}
    thd = None
    for _ in range(repeat):
        for name, argv in jobs.items():  # interleaved
            dt, mb, out = run_child(argv)
            times[name].append(dt)
            rss[name].append(mb)
            if name == "cold":
                thd = json.loads(out)["channels"][0]["thd_percent"]
    med = {k: statistics.median(v) for k, v in times.items()}
    peak = {k: max(v) for k, v in rss.items()}
    return med, peak, thd, times


def machine() -> str:
    cpu = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    import numpy
    import pandas
    import scipy

    return (f"{cpu}, {os.cpu_count()} cores, Python {platform.python_version()}, numpy "
            f"{numpy.__version__}, scipy {scipy.__version__}, pandas {pandas.__version__}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--durations", type=float, nargs="+", default=[60.0, 600.0],
                    help="capture lengths in seconds (default 60 600)")
    ap.add_argument("--scaling", action="store_true",
                    help="also run a capture 4x the longest, to see memory growth")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--digits", choices=["scope", "full", "savetxt"], default="scope",
                    help="values rounded as a scope prints them (default), at full "
                         "precision (17 significant digits), or as numpy.savetxt writes them "
                         "by default (%%.18e)")
    ap.add_argument("--workdir", type=Path, default=None,
                    help="where to write the generated captures (default: a temporary folder)")
    ap.add_argument("--no-time-column", action="store_true",
                    help="captures of the six channels alone (no time column; the sample "
                         "rate is given to pqcheck)")
    args = ap.parse_args(argv)
    durations = list(args.durations)
    if args.scaling:
        durations.append(4 * max(durations))
    print(f"machine: {machine()}; values: {args.digits} precision"
          + ("; no time column" if args.no_time_column else ""))
    if args.workdir is not None:
        Path(args.workdir).mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(dir=args.workdir) as tmp:
        tmp = Path(tmp)
        rows = []
        for seconds in durations:
            path = tmp / f"capture-{int(seconds)}s.csv"
            t0 = time.perf_counter()
            generate(path, seconds, full=args.digits == "full",
                     savetxt=args.digits == "savetxt", time_column=not args.no_time_column)
            size = path.stat().st_size / 1e6
            print(f"\n{seconds:g} s capture: {size:.0f} MB (generated in "
                  f"{time.perf_counter() - t0:.1f} s)")
            reps = args.repeat if seconds <= 600 else 1
            med, peak, thd, times = measure(path, reps, tmp / "cache",
                                            not args.no_time_column)
            for k in med:
                print(f"  {k:<7} {med[k]:8.2f} s   peak RSS {peak[k]:7.0f} MB")
            # the fastest general-purpose parser (pqcheck's own reader is part of what is
            # measured, not a baseline)
            fastest = min((k for k in PARSERS if k in med and k != "parse"), key=med.get)
            n_ch = 6 * FS * seconds
            print(f"  fastest parser other than pqcheck's: {fastest}; pqcheck's own reader "
                  f"{med['parse'] / med[fastest]:.2f} x it")
            print(f"  binary         = {n_ch / med['binary'] / 1e6:.1f} M channel-samples/s "
                  "(target >= 100)")
            print(f"  binary / fft   = {med['binary'] / med['fft']:.1f}")
            print(f"  cold / parser  = {med['cold'] / med[fastest]:.2f}  (target <= 1.3)")
            if reps > 1:  # the same ratio within each repetition: how much the machine drifts
                each = sorted(c / f for c, f in zip(times["cold"], times[fastest]))
                print(f"                   per repetition {each[0]:.2f} to {each[-1]:.2f}")
            print(f"  cold / naive   = {med['cold'] / med['naive']:.2f}  (target < 1)")
            print(f"  cold / cached  = {med['cold'] / med['cached']:.1f}  (target >= 5)")
            print(f"  THD reported {thd:.3f} %, known content {EXPECTED_THD:.3f} %")
            rows.append((seconds, size, med, peak, thd))
            path.unlink()
            path.with_suffix(".npy").unlink()
        if len(rows) > 1:
            base = rows[-2] if args.scaling else rows[0]
            last = rows[-1]
            growth = last[3]["cold"] / base[3]["cold"] - 1
            print(f"\npeak RSS of cold analyze, {last[0]:g} s vs {base[0]:g} s: "
                  f"{100 * growth:+.1f} %")
    return 0


if __name__ == "__main__":
    sys.exit(main())
