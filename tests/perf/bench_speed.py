#!/usr/bin/env python3
"""Speed and memory of `cracktip reduce`, as ratios measured in one run on this machine.

    python tests/perf/bench_speed.py [--repeat N] [--keep DIR]

Not part of the test run (pytest collects test_*.py only).  The records are
synthetic (reduce.synthetic), written to a temporary folder first; nothing
is timed while they are written.  Each figure is a ratio of two times (or
sizes) measured here, interleaved in one run, so the machine's speed cancels;
the best (shortest) of the repeats are compared, as the machine is shared
and the best run is the one least disturbed by other work (the medians are
printed beside them, and the load average before and after).

Targets (issue 7):

- reduce vs read: the whole reduction of one 1,000,000-sample CSV record
  (read, channel detection, fit, secant, K, checks, JSON) at most 1.3 times
  what ``pandas.read_csv`` alone takes to parse the file;
- scaling: 400 ordinary records at most 4.4 times 100 (in this process, one
  job: the reduction's own growth, no start-up to hide it); ``cracktip
  reduce --jobs 2`` at least 1.6 times faster than ``--jobs 1`` (whole
  processes, start-up included);
- start-up: ``cracktip reduce`` of one ordinary record, as a process, at
  most 1.5 times a process that imports numpy and pandas and reads that
  record;
- memory: the peak resident memory of reducing the 1,000,000-sample record
  at most 4 times its float64 arrays (three channels, 24 MB) above the
  interpreter's baseline (numpy, pandas and cracktip imported).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
ENV = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}

N_LONG = 1_000_000
N_ORDINARY = 5_000  # samples of an ordinary record (e.g. 10 Hz for eight minutes)
ROW = {"heat": "H1", "geometry": "C(T)", "B_mm": 25, "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3,
       "a3_mm": 25.0, "yield_MPa": 500, "E_GPa": 72}
CRACKTIP = "from reduce.cli import console; console()"  # what the `cracktip` script runs


def write_record(path, rec):
    import pandas as pd

    pd.DataFrame({"Time (s)": rec.time_s, "Load (kN)": rec.load_kN, "COD (mm)": rec.disp_mm}
                 ).to_csv(path, index=False, float_format="%.6f")


def write_sheet(path, names):
    import csv

    with open(path, "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=["specimen", "record", *ROW])
        w.writeheader()
        for name in names:
            w.writerow(dict(ROW, specimen=name, record=f"{name}.csv"))


def make_data(d: Path):
    from reduce.synthetic import make_record

    write_record(d / "long.csv", make_record("I", n=N_LONG, noise_kN=0.01, offset_mm=0.01, seed=1))
    names = [f"R{i:03d}" for i in range(400)]
    for i, name in enumerate(names):
        rec = make_record("I II III".split()[i % 3], n=N_ORDINARY, noise_kN=0.01 + 0.005 * (i % 4),
                          offset_mm=0.002 * (i % 7), seed=i)
        write_record(d / f"{name}.csv", rec)
    write_sheet(d / "one.csv", names[:1])
    write_sheet(d / "s100.csv", names[:100])
    write_sheet(d / "s400.csv", names)
    write_sheet(d / "long_sheet.csv", [])
    with open(d / "long_sheet.csv", "a") as f:
        f.write(",".join(["LONG", "long.csv", *map(str, ROW.values())]) + "\n")


def timed(fn):
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


def interleaved(fns: dict, repeat: int) -> dict:
    """Times of each function, run in turn, the order reversed every other round."""
    times = {k: [] for k in fns}
    keys = list(fns)
    for r in range(repeat):
        for k in (keys if r % 2 == 0 else keys[::-1]):
            times[k].append(timed(fns[k]))
    return times


def med(ts):
    return statistics.median(ts)


def verdict(ratio, target, at_most=True):
    ok = ratio <= target if at_most else ratio >= target
    return f"{'meets' if ok else 'MISSES'} target {'<=' if at_most else '>='} {target}"


def bench_reduce_vs_read(d, repeat):
    import pandas as pd

    from reduce.cli import results_json
    from reduce.construction import loading_envelope, secant_construction
    from reduce.pipeline import reduce_arrays, reduce_specimen
    from reduce.records import read_record
    from reduce.sheet import read_sheet

    path = d / "long.csv"
    (spec,) = read_sheet(d / "long_sheet.csv")

    def reduce_whole():
        result, _ = reduce_specimen(spec)
        assert result.error is None, result.error
        results_json([result])

    def read_only():
        read_record(path).sha256

    from reduce import records

    def reduce_pandas_only():  # as where the fast path could not be compiled
        scan, records._scan = records._scan, None
        try:
            reduce_whole()
        finally:
            records._scan = scan

    reduce_whole()  # warm: file in the page cache, modules imported
    t = interleaved({"pandas.read_csv": lambda: pd.read_csv(path), "reduce": reduce_whole,
                     "read_record": read_only}, repeat)
    # apart, so that pandas' memory use does not disturb the timings above
    p = interleaved({"pandas.read_csv (again)": lambda: pd.read_csv(path),
                     "reduce, pandas only": reduce_pandas_only}, max(3, repeat // 3))
    rec = read_record(path)
    parts = interleaved({
        "loading_envelope": lambda: loading_envelope(rec.load_kN, rec.disp_mm),
        "secant_construction": lambda: secant_construction(rec.load_kN, rec.disp_mm),
        "reduce_arrays": lambda: reduce_arrays(rec.load_kN, rec.disp_mm, spec, rec.time_s),
    }, repeat)
    ratio = min(t["reduce"]) / min(t["pandas.read_csv"])
    print(f"\n1. reduce vs read, {N_LONG:,}-sample CSV ({path.stat().st_size / 1e6:.1f} MB), "
          f"{repeat} rounds")
    for k, v in {**t, **p, **parts}.items():
        print(f"   {k:22s} median {med(v) * 1e3:7.1f} ms   min {min(v) * 1e3:7.1f} ms")
    ep = med(parts["reduce_arrays"]) - med(parts["loading_envelope"]) - med(parts["secant_construction"])
    print(f"   (reduce_arrays less envelope and construction, i.e. K, checks and the "
          f"elastic-plastic hook: {ep * 1e3:.1f} ms)")
    print(f"   ratio reduce / pandas: {ratio:.2f} (medians: "
          f"{med(t['reduce']) / med(t['pandas.read_csv']):.2f}); {verdict(ratio, 1.3)}")
    print(f"   (without the compiled fast path: "
          f"{min(p['reduce, pandas only']) / min(p['pandas.read_csv (again)']):.2f})")
    return ratio


def bench_scaling(d, repeat):
    from reduce.batch import reduce_sheets

    def run(sheet, jobs):
        def go():
            b = reduce_sheets([d / sheet], jobs=jobs, keep_records=False)
            assert all(r.result.error is None for r in b.rows), "a row failed"
        return go

    run("s100.csv", 1)()  # warm
    t = interleaved({"100 rows, 1 job": run("s100.csv", 1), "400 rows, 1 job": run("s400.csv", 1),
                     "400 rows, 2 jobs": run("s400.csv", 2)}, repeat)

    def command(jobs):
        return lambda: subprocess.run(
            [sys.executable, "-c", CRACKTIP, "reduce", str(d / "s400.csv"), "--jobs", str(jobs),
             "--quiet"], check=True, stdout=subprocess.DEVNULL, env=ENV, cwd=ROOT)

    command(1)()  # warm: bytecode cached
    c = interleaved({"cracktip reduce --jobs 1": command(1), "cracktip reduce --jobs 2": command(2)},
                    repeat)
    growth = min(t["400 rows, 1 job"]) / min(t["100 rows, 1 job"])
    speedup = min(c["cracktip reduce --jobs 1"]) / min(c["cracktip reduce --jobs 2"])
    print(f"\n2. scaling, records of {N_ORDINARY:,} samples, {repeat} rounds "
          f"({os.cpu_count()} cores)")
    for k, v in {**t, **c}.items():
        print(f"   {k:26s} median {med(v):6.2f} s   min {min(v):6.2f} s")
    print(f"   growth 400/100 rows (in process, 1 job): {growth:.2f}; {verdict(growth, 4.4)}")
    print(f"   speed-up --jobs 2 over --jobs 1 (whole command, 400 rows): {speedup:.2f}; "
          f"{verdict(speedup, 1.6, at_most=False)}")
    print(f"   (in process, 400 rows: {min(t['400 rows, 1 job']) / min(t['400 rows, 2 jobs']):.2f})")
    return growth, speedup


def bench_startup(d, repeat):
    record = d / "R000.csv"
    floor = [sys.executable, "-c", f"import numpy, pandas; pandas.read_csv({str(record)!r})"]
    ours = [sys.executable, "-c", CRACKTIP, "reduce", str(d / "one.csv"), "--quiet"]

    def run(cmd):
        return lambda: subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=ENV, cwd=ROOT)

    run(floor)(), run(ours)()  # warm: bytecode cached
    t = interleaved({"numpy+pandas, read": run(floor), "cracktip reduce": run(ours)}, repeat)
    ratio = min(t["cracktip reduce"]) / min(t["numpy+pandas, read"])
    probe = ("import sys; from reduce.cli import main; main(sys.argv[1:]); "
             "print(sorted(m for m in ('matplotlib', 'reportlab', 'pypdf', 'openpyxl', 'scipy', "
             "'tqdm') if m in sys.modules), file=sys.stderr)")
    loaded = subprocess.run([sys.executable, "-c", probe, "reduce", str(d / "one.csv"), "--quiet"],
                            capture_output=True, text=True, env=ENV, cwd=ROOT).stderr.strip()
    print(f"\n3. start-up, one record of {N_ORDINARY:,} samples, whole processes, {repeat} rounds")
    for k, v in t.items():
        print(f"   {k:22s} median {med(v) * 1e3:6.0f} ms   min {min(v) * 1e3:6.0f} ms")
    print(f"   libraries of the drawing commands loaded by `reduce`: {loaded}")
    print(f"   ratio: {ratio:.2f}; {verdict(ratio, 1.5)}")
    return ratio


def bench_memory(d):
    # Linux: the peak resident size (VmHWM) is reset at the baseline by writing 5 to
    # /proc/self/clear_refs; ru_maxrss cannot be used, as a child inherits its parent's
    probe = (
        "import json, sys\n"
        "import numpy, pandas\n"
        "from reduce.cli import results_json\n"
        "from reduce.pipeline import reduce_specimen\n"
        "from reduce.sheet import read_sheet\n"
        "def status(key):\n"
        "    with open('/proc/self/status') as f:\n"
        "        return next(int(l.split()[1]) for l in f if l.startswith(key + ':'))\n"
        "(spec,) = read_sheet(sys.argv[1])\n"
        "open('/proc/self/clear_refs', 'w').write('5')\n"
        "base = status('VmRSS')\n"
        "result, rec = reduce_specimen(spec)\n"
        "results_json([result])\n"
        "peak = status('VmHWM')\n"
        "print(json.dumps([base, peak, rec.load_kN.size, rec.time_s is not None]))\n")
    base, peak, n, has_time = json.loads(subprocess.run(
        [sys.executable, "-c", probe, str(d / "long_sheet.csv")], check=True, capture_output=True,
        text=True, env=ENV, cwd=ROOT).stdout)
    arrays = 8 * n * (3 if has_time else 2)
    above = (peak - base) * 1024  # /proc/self/status is in kB
    ratio = above / arrays
    print(f"\n4. memory, {n:,}-sample record: baseline {base / 1024:.0f} MB, peak {peak / 1024:.0f} MB, "
          f"{above / 1e6:.0f} MB above baseline for {arrays / 1e6:.0f} MB of float64 arrays")
    print(f"   ratio: {ratio:.2f}; {verdict(ratio, 4.0)}")
    return ratio


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--repeat", type=int, default=9, help="rounds of each timing (default 9)")
    p.add_argument("--keep", metavar="DIR", help="write the records here and keep them")
    args = p.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(args.keep or tmp)
        d.mkdir(parents=True, exist_ok=True)
        print(f"writing records to {d} ...", flush=True)
        make_data(d)
        print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores; cracktip at {ROOT}")
        # An installed program runs from compiled bytecode (pip compiles it on
        # install).  The processes timed here get the same: their bytecode is
        # cached in a folder of this run, even where PYTHONDONTWRITEBYTECODE
        # is set, and each command is run once before it is timed.
        ENV.pop("PYTHONDONTWRITEBYTECODE", None)
        ENV["PYTHONPYCACHEPREFIX"] = str(d / "pycache")
        print(f"bytecode of the timed processes cached in {d / 'pycache'}")
        try:
            from reduce import _scan  # noqa: F401
            print("text records: compiled fast path (reduce/_scan.c)")
        except ImportError:
            print("text records: pandas only -- reduce._scan is not built "
                  "(python3 -m pip install -e . builds it); the figures are not the product's")
        print(f"load average before: {load()}  (other work on the machine skews the figures)")
        results = {
            "reduce vs read (<= 1.3)": bench_reduce_vs_read(d, args.repeat),
            "memory (<= 4)": bench_memory(d),
            "start-up (<= 1.5)": bench_startup(d, args.repeat),
        }
        growth, speedup = bench_scaling(d, args.repeat)
        results["growth 400/100 (<= 4.4)"] = growth
        results["--jobs 2 speed-up (>= 1.6)"] = speedup
    print(f"\nload average after: {load()}")
    print("summary: " + "; ".join(f"{k} {v:.2f}" for k, v in results.items()))


def load():
    try:
        return " ".join(open("/proc/loadavg").read().split()[:3])
    except OSError:
        return "unknown"


if __name__ == "__main__":
    main()
