"""Passage events of a front with known motion, for tests and benchmarks of the tracker.

A straight front moves at `speed_ms` toward `heading_deg` (clockwise from north) and crosses the
point (lat0, lon0) at time t0; every station it reaches before `stop_progress_m` (metres along the
motion from that point; None = no stop) gets a breeze-front passage at its crossing time, plus
onset noise, detected `delay_s` later. No I/O; a seeded numpy generator makes it repeatable.
"""

from __future__ import annotations

import math
from collections.abc import Iterator

import numpy as np

from ..calc.geo import local_xy_m
from ..config import NetworkConfig
from ..events import PassageEvent
from ..obs import Observation


def crossing_time(x: float, y: float, t0: float, speed_ms: float, heading_deg: float) -> tuple[float, float]:
    """(time, progress m) at which the front reaches (x, y) (local metres about the crossing point)."""
    h = math.radians(heading_deg)
    prog = x * math.sin(h) + y * math.cos(h)
    return t0 + prog / speed_ms, prog


def front_events(config: NetworkConfig, *, t0: float, speed_ms: float, heading_deg: float, lat0: float,
                 lon0: float, onset_sd_s: float = 0.0, delay_s: float = 240.0, stop_progress_m: float | None = None,
                 seed: int = 0, temp_change_c: float = -2.0, gust_after_ms: float = 9.0) -> list[PassageEvent]:
    """The passages of the front at the network's stations, sorted by detection time."""
    rng = np.random.default_rng(seed)
    out = []
    for st in config.stations:
        x, y = local_xy_m(st.lat, st.lon, lat0, lon0)
        t, prog = crossing_time(x, y, t0, speed_ms, heading_deg)
        if prog < 0 or (stop_progress_m is not None and prog > stop_progress_m):
            continue
        onset = float(round(t + rng.normal(0.0, onset_sd_s) if onset_sd_s else t))
        onset = 60.0 * round(onset / 60.0)
        wind_after = (heading_deg + 180.0) % 360.0
        out.append(PassageEvent(st.id, "breeze_front", onset, onset + delay_s, 0.9, (wind_after + 160.0) % 360.0,
                                wind_after, 2.0, temp_change_c, 2.0, 0.3, speed_after_ms=4.0,
                                gust_after_ms=gust_after_ms, temp_after_c=24.0))
    out.sort(key=lambda e: (e.detected_at, e.station))
    return out


def observation_stream(config: NetworkConfig, events: list[PassageEvent], start: float, end: float,
                       wind_dir: float = 250.0, wind_speed: float = 3.0) -> Iterator[tuple[Observation, PassageEvent | None]]:
    """Per-minute observations of every station from start to end, each paired with the passage event
    the station's detector would have produced with it (at its detection time)."""
    by_key = {(e.station, e.detected_at): e for e in events}
    passage = {e.station: e for e in events}
    t = start
    while t <= end:
        for st in config.stations:
            ev = by_key.get((st.id, t))
            p = passage.get(st.id)
            after = p is not None and t >= p.onset and p.wind_dir_after_deg is not None
            d = p.wind_dir_after_deg if after and p is not None and p.wind_dir_after_deg is not None else wind_dir
            yield Observation(st.id, t, d, wind_speed, wind_speed * 1.5, 25.0, 15.0, 1012.0, 0.0), ev
        t += 60.0
