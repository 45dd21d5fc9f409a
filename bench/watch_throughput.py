"""Cost of SiteWatch.observe on the engine's hot path: observations per second, against a reference
loop measured in the same run.

The engine calls observe(obs, event) for every clean observation; the core as a whole must keep
200,000 observations/s, so the watch's share must be small. Three loops over the same
pre-built observations (a generated network, one record per station a minute, a few passages):
- reference: a loop that only reads obs.time (what any consumer pays at least);
- watch, no sites' stations: observations of stations no site watches;
- watch, all: every station, including the race-course site's station and the passages.

    .venv/bin/python bench/watch_throughput.py --stations 200 --hours 24
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from frontwatch.config import parse_network  # noqa: E402
from frontwatch.network.synthetic import front_events, observation_stream  # noqa: E402
from frontwatch.network.watch import SiteWatch  # noqa: E402
from frontwatch.timeutil import parse_time  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--stations", type=int, default=200)
    ap.add_argument("--hours", type=float, default=24.0)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    side = max(2, int(a.stations**0.5))
    stations = [{"id": f"B{i:02d}{j:02d}", "lat": -27.0 - 0.03 * j, "lon": 153.3 - 0.03 * i, "onshore_from_deg": 90}
                for i in range(side) for j in range(side)]
    sites = [{"id": "venue", "lat": -27.1, "lon": 153.1, "gust_limit_ms": 10.0},
             {"id": "course", "lat": -27.05, "lon": 153.28, "course_axis_deg": 90.0}]
    cfg = parse_network({"network": {"utc_offset_hours": 10}, "stations": stations, "sites": sites})
    t0 = parse_time("2026-01-14T00:00:00Z")
    evs = front_events(cfg, t0=t0 + 2 * 3600, speed_ms=3.0, heading_deg=270.0, lat0=-27.0, lon0=153.3)
    stream = list(observation_stream(cfg, evs, t0, t0 + a.hours * 3600))
    watched = {s.station for s in SiteWatch(cfg).sites if s.station} | {"B0000"}
    plain = [(o, e) for o, e in stream if o.station not in watched and e is None]
    n = len(stream)

    def ref() -> float:
        t = time.perf_counter()
        acc = 0.0
        for o, _ in stream:
            acc += o.time
        return time.perf_counter() - t

    def watch(items: list) -> float:  # type: ignore[type-arg]
        w = SiteWatch(cfg)
        obs = w.observe
        t = time.perf_counter()
        for o, e in items:
            obs(o, e)
        return time.perf_counter() - t

    r = [ref() for _ in range(a.repeat)]
    wp = [watch(plain) for _ in range(a.repeat)]
    wa = [watch(stream) for _ in range(a.repeat)]
    print(f"{len(cfg.stations)} stations, {a.hours:g} h, {n} observations, {len(evs)} passages; median of {a.repeat}")
    print(f"  reference loop      {n / statistics.median(r):>12,.0f} obs/s")
    print(f"  watch, plain path   {len(plain) / statistics.median(wp):>12,.0f} obs/s  "
          f"({statistics.median(wp) / len(plain) * 1e9:.0f} ns/obs)")
    print(f"  watch, everything   {n / statistics.median(wa):>12,.0f} obs/s  "
          f"({statistics.median(wa) / n * 1e9:.0f} ns/obs; ratio to reference "
          f"{statistics.median(wa) / statistics.median(r):.1f}x)")


if __name__ == "__main__":
    main()
