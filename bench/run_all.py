"""Every benchmark in turn (what `make bench` runs), each printing its own figures.

    .venv/bin/python bench/run_all.py [--only replay,skill,...] [--quick]

--quick uses fewer runs and seeds (a smoke run, not figures to report). A benchmark that fails is
reported and the rest still run; the exit code is non-zero if any failed.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

BENCHES: dict[str, tuple[list[str], list[str]]] = {
    # name: (arguments for figures, arguments for --quick)
    "replay": (["bench_replay.py", "--runs", "3"], ["bench_replay.py", "--runs", "1"]),
    "skill": (["detector_skill.py", "--seeds", "201,202,203,204,205,206", "--days", "6"],
              ["detector_skill.py", "--seeds", "201", "--days", "3"]),
    "reference": (["reference_detectors.py", "--seeds", "201,202,203,204,205,206", "--days", "6"],
                  ["reference_detectors.py", "--seeds", "201", "--days", "2", "--presets", "ordinary"]),
    "stress": (["detector_stress.py", "--days", "500", "--seed", "2"], ["detector_stress.py", "--days", "40"]),
    "track": (["track_skill.py", "--seeds", "11", "12", "13", "14", "15", "16", "17", "18", "--days", "4"],
              ["track_skill.py", "--seeds", "11", "--days", "2"]),
    "service": (["bench_service.py", "--runs", "3"], ["bench_service.py", "--runs", "1", "--records", "5000"]),
    "dashboard": (["bench_dashboard.py"], ["bench_dashboard.py", "--seconds", "3", "--trials", "1"]),
    "tune": (["bench_tune.py"], ["bench_tune.py", "--samples", "5"]),
}


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--only", default=",".join(BENCHES), help="comma-separated: " + ", ".join(BENCHES))
    ap.add_argument("--quick", action="store_true")
    a = ap.parse_args()
    names = [n.strip() for n in a.only.split(",") if n.strip()]
    unknown = [n for n in names if n not in BENCHES]
    if unknown:
        ap.error(f"unknown benchmark(s) {', '.join(unknown)}: choose from {', '.join(BENCHES)}")
    failed = []
    for name in names:
        args = BENCHES[name][1 if a.quick else 0]
        print(f"\n=== {name}: {' '.join(args)}", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(HERE / args[0]), *args[1:]])
        print(f"=== {name}: exit {rc} after {time.perf_counter() - t0:.0f} s", flush=True)
        if rc:
            failed.append(name)
    if failed:
        print(f"\nfailed: {', '.join(failed)}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
