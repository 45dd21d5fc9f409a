"""Write the benchmark observation file (preset `bench`: ~90 stations, ~2.5 million records).

Usage: .venv/bin/python bench/make_bench_file.py [OUT.csv] [--seed N]
Default OUT is bench/out/bench.csv (git-ignored). The network file, labels and fronts go beside it
(bench.network.toml, bench.labels.jsonl, bench.fronts.jsonl). Prints records, stations, and the
time taken to generate and to write.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from frontwatch.sim import generate, preset  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("out", nargs="?", default="bench/out/bench.csv")
    ap.add_argument("--seed", type=int, default=2027)
    args = ap.parse_args(argv)
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    scenario = generate(preset("bench", seed=args.seed))
    t1 = time.perf_counter()
    with tempfile.TemporaryDirectory(dir=out.parent) as tmp:
        paths = scenario.write(tmp)
        shutil.move(paths["observations.csv"], out)
        stem = out.with_suffix("")
        for name in ("network.toml", "labels.jsonl", "fronts.jsonl", "faults.jsonl"):
            shutil.move(paths[name], f"{stem}.{name}")
    t2 = time.perf_counter()
    obs = scenario.observations
    print(f"records {len(obs)}  stations {obs['station'].nunique()}  days {scenario.spec.days}  "
          f"labels {len(scenario.labels)}")
    print(f"generate {t1 - t0:.1f} s  write {t2 - t1:.1f} s  total {t2 - t0:.1f} s  "
          f"file {out} ({out.stat().st_size / 1e6:.0f} MB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
