"""Judge, after the fact and independently of the online detector, which days of the shared real
record hold a sea-breeze front passage, and compare with the detector's events.

Rule (written before looking at the detector's output, from DOMAIN.md section 2 and the record's
README): between 09:00 and 19:00 local, some minute t where, comparing the 30 minutes before t with
minutes 10-40 after it (the vane reports a 10-minute running mean, so its turn lags),
- the mean wind after is in the onshore sector (the sea lies S/SW: 215 +/- 70 deg) at >= 1 m/s and
  the wind before was outside it (or calm);
- temperature fell by >= 0.8 degC and dewpoint rose by >= 0.5 degC (marine air);
- no rain from 30 minutes before to 40 minutes after (a rain outflow is not a breeze front).
Usage: python tools/real_record_days.py RECORD.csv.gz examples/real-coastal-s116.toml [EVENTS.jsonl]
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

from frontwatch.config import load_network
from frontwatch.replay import merge, read_file
from frontwatch.timeutil import LocalClock


def judged_days(path: str, cfg_path: str) -> dict[str, float]:
    cfg = load_network(cfg_path)
    d = merge([read_file(path, cfg)])
    c = d.columns
    t = c["time"]
    tm = np.round((t - t[0]) / 60).astype(int)
    n = tm[-1] + 1
    grid = {k: np.full(n, np.nan) for k in ("temp_c", "dewpoint_c", "wind_speed_ms", "wind_dir_deg", "rain_mm")}
    for k in grid:
        grid[k][tm] = c[k]
    rain = np.nan_to_num(grid["rain_mm"])
    s, dd = grid["wind_speed_ms"], np.radians(grid["wind_dir_deg"])
    u, v = -s * np.sin(dd), -s * np.cos(dd)
    u = np.where(s == 0, 0, u)
    v = np.where(s == 0, 0, v)
    clock = LocalClock(cfg.tz)
    st = cfg.stations[0]
    days: dict[str, float] = {}

    def mean(a, lo, hi):
        seg = a[lo:hi]
        ok = np.isfinite(seg)
        return float(seg[ok].mean()) if ok.sum() >= (hi - lo) // 2 else np.nan

    def in_sector(uu, vv):
        sp = np.hypot(uu, vv)
        if not sp >= 1.0:
            return None
        d = (np.degrees(np.arctan2(-uu, -vv)) + 360) % 360
        return abs((d - st.onshore_from_deg + 180) % 360 - 180) <= st.onshore_halfwidth_deg

    for i in range(40, n - 45):
        tt = t[0] + 60 * i
        h = clock.hour(tt)
        if not 9 <= h < 19:
            continue
        day = clock.day_key(tt)
        if day in days:
            continue
        if rain[i - 30:i + 40].sum() > 0:
            continue
        dT = mean(grid["temp_c"], i + 10, i + 40) - mean(grid["temp_c"], i - 30, i)
        dTd = mean(grid["dewpoint_c"], i + 10, i + 40) - mean(grid["dewpoint_c"], i - 30, i)
        if not (dT <= -0.8 and dTd >= 0.5):
            continue
        after = in_sector(mean(u, i + 10, i + 40), mean(v, i + 10, i + 40))
        before = in_sector(mean(u, i - 30, i), mean(v, i - 30, i))
        if after and not before:
            days[day] = tt
    return days


def main() -> None:
    path, cfg_path = sys.argv[1], sys.argv[2]
    days = judged_days(path, cfg_path)
    cfg = load_network(cfg_path)
    clock = LocalClock(cfg.tz)
    print(f"{len(days)} days judged to hold a breeze-front passage:")
    for day, tt in sorted(days.items()):
        print(f"  {day} about {clock.hour(tt):05.2f} local")
    if len(sys.argv) > 3:
        evs = [json.loads(x) for x in Path(sys.argv[3]).read_text().splitlines()]
        from frontwatch.timeutil import parse_time

        got = {}
        for e in evs:
            if e["kind"] == "breeze_front":
                got.setdefault(clock.day_key(parse_time(e["onset"])), []).append(e)
        hit = [d for d in days if d in got]
        print(f"detector breeze_front days: {len(got)}; judged days flagged: {len(hit)}/{len(days)}; "
              f"flagged days not judged: {len(set(got) - set(days))}")
        for d in sorted(set(days) - set(got)):
            print("  missed", d)


if __name__ == "__main__":
    main()
