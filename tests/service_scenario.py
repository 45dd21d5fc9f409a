"""A small invented network and per-minute records with breeze-front passages, for the service tests.

Invented data (the setting "Gannet Reach" does not exist): an offshore morning wind that turns
onshore, cools and moistens as a front passes each station in turn, with seeded noise.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

NETWORK_TOML = """\
[network]
name = "gannet-reach"
utc_offset_hours = 10
gateways = ["gw1"]

[[stations]]
id = "GR01"
lat = -31.10
lon = 152.90
onshore_from_deg = 90

[[stations]]
id = "GR02"
lat = -31.10
lon = 152.85
onshore_from_deg = 90

[[stations]]
id = "GR03"
lat = -31.10
lon = 152.80
onshore_from_deg = 90
"""

START = 1767225600.0 - 10 * 3600 + 8 * 3600  # 2026-01-01 08:00 local (UTC+10), as epoch UTC
FIELDS = ["station", "time", "wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c",
          "pressure_hpa", "rain_mm"]


def rows(days: int = 1, minutes: int = 8 * 60, seed: int = 7) -> list[dict[str, object]]:
    """Per-minute records for three stations; the front passes GR01, GR02, GR03 about 25 min apart
    each day, from 11:00 local."""
    rng = np.random.default_rng(seed)
    out: list[dict[str, object]] = []
    for d in range(days):
        t0 = START + d * 86400
        for k in range(minutes):
            t = t0 + 60 * k
            for j, sid in enumerate(("GR01", "GR02", "GR03")):
                onset = 180 + 25 * j + 7 * d  # minutes after 08:00
                after = 1.0 / (1.0 + math.exp(-(k - onset) / 2.0))
                heat = 0.004 * min(k, 300)  # slow morning warming
                wd = (270 + (90 - 270) * after + rng.normal(0, 8)) % 360
                ws = max(0.0, 3.0 + 2.5 * after + rng.normal(0, 0.4))
                out.append({
                    "station": sid,
                    "time": _iso(t),
                    "wind_dir_deg": round(wd, 1),
                    "wind_speed_ms": round(ws, 2),
                    "wind_gust_ms": round(ws * 1.4 + abs(rng.normal(0, 0.3)), 2),
                    "temp_c": round(27.0 + heat - 2.5 * after + rng.normal(0, 0.08), 2),
                    "dewpoint_c": round(14.0 + 3.0 * after + rng.normal(0, 0.1), 2),
                    "pressure_hpa": round(1012.0 + 0.3 * after + rng.normal(0, 0.03), 2),
                    "rain_mm": 0.0,
                })
    return out


def _iso(t: float) -> str:
    import datetime as dt

    return dt.datetime.fromtimestamp(t, dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def write(directory: Path, days: int = 1, minutes: int = 8 * 60, seed: int = 7) -> tuple[Path, Path]:
    """(network file, observations CSV) in `directory`."""
    net = directory / "network.toml"
    net.write_text(NETWORK_TOML)
    obs = directory / "observations.csv"
    with obs.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=FIELDS)
        w.writeheader()
        w.writerows(rows(days, minutes, seed))
    return net, obs
