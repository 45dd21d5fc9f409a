"""Checks of the detector's events on the shared real record that need no labels: breeze fronts
called at night (outside 08-20 local) or within 30 minutes of rain (a rain outflow, not a breeze).

Usage: python tools/real_record_checks.py RECORD.csv.gz NET.toml EVENTS.jsonl
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

from frontwatch.config import load_network
from frontwatch.replay import merge, read_file
from frontwatch.timeutil import LocalClock, parse_time


def rain_near(times: np.ndarray, rain: np.ndarray, t: float, before_s: float = 1800, after_s: float = 1800) -> float:
    lo, hi = np.searchsorted(times, [t - before_s, t + after_s])
    return float(np.nansum(rain[lo:hi]))


def main() -> None:
    rec, net, evp = sys.argv[1:4]
    cfg = load_network(net)
    d = merge([read_file(rec, cfg)])
    t = d.columns["time"]
    rain = d.columns.get("rain_mm", np.zeros(len(t)))
    clock = LocalClock(cfg.tz)
    evs = [json.loads(x) for x in Path(evp).read_text().splitlines()]
    bf = [e for e in evs if e["kind"] == "breeze_front"]
    night = [e for e in bf if not 8 <= clock.hour(parse_time(e["onset"])) < 20]
    wet = [e for e in bf if rain_near(t, rain, parse_time(e["onset"])) > 0]
    print(f"breeze fronts: {len(bf)}; at night: {len(night)}; within 30 min of rain: {len(wet)}")
    for e in night + wet:
        print("  ", e["id"], f"{clock.hour(parse_time(e['onset'])):05.2f} local",
              f"rain {rain_near(t, rain, parse_time(e['onset'])):.1f} mm")


if __name__ == "__main__":
    main()
