"""Offline replay throughput: the ~2.5-million-record benchmark file, side by side with a bare
pandas.read_csv of the same file, on one core. Prints medians of several runs, records per
second, the ratio to read_csv, and the detector state per station in bytes.

Usage: python bench/bench_replay.py [FILE.csv] [--runs 3]
(FILE defaults to bench/out/bench.csv, made by bench/make_bench_file.py when absent.)
"""

from __future__ import annotations

import argparse
import json
import os
import pickle
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import pandas as pd  # noqa: E402

from frontwatch.config import load_network  # noqa: E402
from frontwatch.replay import merge, read_file, run_decoded  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("file", nargs="?", default=str(ROOT / "bench/out/bench.csv"))
    ap.add_argument("--runs", type=int, default=3)
    a = ap.parse_args()
    path = Path(a.file)
    net = path.with_name(path.stem + ".network.toml")
    if not path.exists():
        subprocess.run([sys.executable, str(ROOT / "bench/make_bench_file.py"), str(path)], check=True)
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})  # one core, as the target says
    cfg = load_network(net)
    t_csv, t_dec, t_core, t_all = [], [], [], []
    result = None
    for _ in range(a.runs):
        t0 = time.perf_counter()
        df = pd.read_csv(path)
        t_csv.append(time.perf_counter() - t0)
        del df
        t0 = time.perf_counter()
        d = merge([read_file(path, cfg)])
        t1 = time.perf_counter()
        result = run_decoded(d, cfg)
        t2 = time.perf_counter()
        t_dec.append(t1 - t0)
        t_core.append(t2 - t1)
        t_all.append(t2 - t0)
    assert result is not None
    n = result.records
    eng = result.engine
    per_station = [len(pickle.dumps(det.snapshot())) + len(pickle.dumps(eng.qc[k].snapshot()))
                   for k, det in eng.detectors.items()]
    med = statistics.median
    print(f"file: {path} ({path.stat().st_size / 1e6:.0f} MB), {n:,} records, {len(eng.detectors)} stations, "
          f"{a.runs} runs, one core")
    print(f"pandas.read_csv alone      : median {med(t_csv):6.2f} s  ({n / med(t_csv):,.0f} records/s)")
    print(f"frontwatch decode (to obs) : median {med(t_dec):6.2f} s")
    print(f"frontwatch core (QC+detect): median {med(t_core):6.2f} s  ({n / med(t_core):,.0f} observations/s)")
    print(f"frontwatch replay, total   : median {med(t_all):6.2f} s  ({n / med(t_all):,.0f} observations/s; "
          f"{med(t_all) / med(t_csv):.1f} x read_csv)")
    print(f"events: {json.dumps(dict(result.stats.events))}")
    print(f"state per station (pickled detector + QC snapshot): median {med(per_station):,.0f} bytes, "
          f"max {max(per_station):,} bytes (bounded: a ring of {eng.detectors[next(iter(eng.detectors))].maxlen} rows)")


if __name__ == "__main__":
    main()
