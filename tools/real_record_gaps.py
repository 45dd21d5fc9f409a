"""Cut one silence a day out of the shared real record and see what the detector makes of it: how
many of the day's breeze fronts are still found (across the gap: the bridged calls of
frontwatch/detect/station.py), whether judged days are lost, and whether a silence makes a breeze
front where there was none (at night, or on a day without one before).

Each day gets one gap of 20-50 minutes: on a day with a breeze front it starts 5-35 minutes before
the day's first onset (so the passage falls in it or just after it), otherwise at a random time
between 09 and 17 local. Random draws from --seed.

Usage: python tools/real_record_gaps.py RECORD.csv.gz NET.toml [--seed 1]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from real_record_days import judged_days  # noqa: E402

from frontwatch.config import load_network  # noqa: E402
from frontwatch.replay import Decoded, merge, read_file, run_decoded  # noqa: E402
from frontwatch.timeutil import LocalClock  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("record")
    ap.add_argument("network")
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    cfg = load_network(a.network)
    clock = LocalClock(cfg.tz)
    d = merge([read_file(a.record, cfg)])
    fronts = [e for e in run_decoded(d, cfg).events if e.kind == "breeze_front"]
    judged = set(judged_days(a.record, a.network))
    first: dict[str, float] = {}
    for e in fronts:
        first.setdefault(clock.day_key(e.onset), e.onset)
    rng = np.random.default_rng(a.seed)
    t = d.columns["time"]
    day_of = np.array([clock.day_key(x) for x in t])
    keep = np.ones(len(t), bool)
    across = 0
    for day in dict.fromkeys(day_of.tolist()):
        if day in first:
            g0 = first[day] - rng.uniform(5, 35) * 60
            across += 1
        else:
            t_day = t[np.argmax(day_of == day)]
            g0 = t_day + (rng.uniform(9, 17) - clock.hour(t_day)) * 3600
        g1 = g0 + rng.uniform(20, 50) * 60
        keep &= ~((t >= g0) & (t < g1))
    holed = Decoded(d.station[keep], {k: v[keep] for k, v in d.columns.items()})
    after = [e for e in run_decoded(holed, cfg).events if e.kind == "breeze_front"]
    bridged = [e for e in after if e.note and "silent" in e.note]
    days0 = {clock.day_key(e.onset) for e in fronts}
    days1 = {clock.day_key(e.onset) for e in after}
    print(f"one gap a day, {across} of them across a day's first breeze front (seed {a.seed})")
    print(f"breeze-front days: {len(days0)} without the gaps, {len(days1)} with them "
          f"(lost {len(days0 - days1)}, new {len(days1 - days0)})")
    print(f"judged days flagged: {len(judged & days0)}/{len(judged)} without, {len(judged & days1)}/{len(judged)} with")
    print(f"calls across a gap: {len(bridged)}, {sum(clock.day_key(e.onset) in days0 for e in bridged)} of them on "
          f"days with a breeze front without the gaps")
    for day in sorted(days1 - days0):
        print(f"  new: {day}{' (a judged day)' if day in judged else ''}")
    print(f"breeze fronts at night (outside 08-20 local) with the gaps: "
          f"{sum(not 8 <= clock.hour(e.onset) < 20 for e in after)}")


if __name__ == "__main__":
    main()
