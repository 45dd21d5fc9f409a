"""The station detector on passage shapes drawn independently of frontwatch's scenario generator:
how often a breeze front is found (and how late) as each shape parameter varies, and how often a
look-alike is taken for one.

The shapes here are written from DOMAIN.md's description, not from frontwatch/sim*.py, and differ
from it on purpose: the wind *rotates* through the turn (or dies to a near-calm convergence first)
instead of blending two wind vectors; the air change may lag the wind by up to 12 minutes and ramp
over its own time; the noise is white plus a slow random walk (drift) rather than AR(1). One
coastal station a day (onshore from 200 deg), one event a day at 11:00-16:00 local on a warming
day. Values are judgements of plausible ranges, from memory.

    .venv/bin/python bench/detector_stress.py [--days 300] [--seed 1]
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from collections import defaultdict
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from frontwatch.config import parse_network  # noqa: E402
from frontwatch.engine import Engine  # noqa: E402
from frontwatch.events import PassageEvent  # noqa: E402
from frontwatch.obs import Observation  # noqa: E402

T0 = 1782864000.0  # 2026-07-01T00:00Z; the network's local time is UTC
ONSHORE = 200.0
NET = {"network": {"name": "stress", "utc_offset_hours": 0},
       "stations": [{"id": "X", "lat": 40.0, "lon": 0.0, "onshore_from_deg": ONSHORE}]}
KINDS = ("breeze", "breeze", "breeze", "shadow", "synoptic_veer", "moist_pulse", "gust_front", "calm_day")


def _day(rng: np.random.Generator, kind: str, day: int) -> tuple[list[Observation], dict[str, Any]]:
    n = 1440
    m = np.arange(n, dtype=float)
    t = T0 + day * 86400.0 + 60.0 * m
    onset = float(rng.uniform(11 * 60, 16 * 60))
    # background: a warming day, wind from outside the onshore sector (offshore or alongshore)
    temp = 20.0 + rng.uniform(4, 9) * np.clip(np.sin(np.pi * (m - 6 * 60) / (14 * 60)), 0, None)
    dew = np.full(n, rng.uniform(8, 16))
    pres = np.full(n, 1012.0) - 0.0005 * (m - 720)
    bg_dir = (ONSHORE + 180.0 + rng.uniform(-100, 100)) % 360.0
    bg_spd = rng.uniform(1.0, 6.0)
    wdir = np.full(n, bg_dir)
    wspd = np.full(n, bg_spd)
    gust_add = np.zeros(n)
    rain = np.zeros(n)
    p: dict[str, Any] = {"kind": kind, "onset": t[0] + 60.0 * onset, "bg_spd": round(bg_spd, 1)}
    after = m >= onset
    if kind == "breeze":
        ramp = rng.uniform(2, 25)  # minutes the wind takes to rotate onshore
        calm = rng.uniform(0, 8) if rng.random() < 0.4 else 0.0  # convergence lull before the turn
        lag = rng.uniform(0, 12)  # air change behind the wind's
        aramp = rng.uniform(3, 20)
        dT, dTd = rng.uniform(0.4, 3.0), rng.uniform(0.3, 3.0)
        on_spd = rng.uniform(1.5, 6.0)
        target = (ONSHORE + rng.uniform(-40, 40)) % 360.0
        p.update(ramp=ramp, calm=calm, lag=lag, aramp=aramp, dT=dT, dTd=dTd, on_spd=on_spd)
        f = np.clip((m - onset - calm) / ramp, 0, 1)
        turn = ((target - bg_dir + 180.0) % 360.0) - 180.0
        wdir = (bg_dir + turn * f) % 360.0
        lull = (m >= onset) & (m < onset + calm)
        wspd = np.where(lull, 0.4 * bg_spd * rng.uniform(0.2, 0.6), bg_spd + (on_spd - bg_spd) * f)
        fa = np.clip((m - onset - lag) / aramp, 0, 1)
        t_on = temp[int(onset)]
        temp = np.where(m >= onset + lag, np.minimum(temp, t_on) - dT * fa + 0.2 * (temp - t_on) * fa, temp)
        dew = dew + dTd * fa
        pres = pres + rng.uniform(0, 0.6) * fa
    elif kind == "shadow":  # cooling under cloud: no moisture, no wind change; recovers
        dur, depth = rng.uniform(10, 45), rng.uniform(0.5, 2.5)
        g = np.clip((m - onset) / 4, 0, 1) * np.clip((onset + dur - m) / 6, 0, 1)
        temp = temp - depth * g
        p.update(dur=dur, depth=depth)
    elif kind == "synoptic_veer":  # the large-scale wind turns onshore; the air stays as it was
        ramp = rng.uniform(5, 40)
        f = np.clip((m - onset) / ramp, 0, 1)
        target = (ONSHORE + rng.uniform(-40, 40)) % 360.0
        turn = ((target - bg_dir + 180.0) % 360.0) - 180.0
        wdir = (bg_dir + turn * f) % 360.0
        wspd = bg_spd + (rng.uniform(2, 7) - bg_spd) * f
    elif kind == "moist_pulse":  # a moisture rise and a little cooling with no wind change (e.g. an
        # irrigated field upwind, evaporation after a shower nearby)
        f = np.clip((m - onset) / rng.uniform(5, 20), 0, 1)
        dew = dew + rng.uniform(0.5, 2.0) * f
        temp = temp - rng.uniform(0.0, 0.6) * f
    elif kind == "gust_front":  # outflow from the onshore side: big drop, gusts, pressure jump, rain
        f = np.clip((m - onset) / rng.uniform(2, 6), 0, 1)
        temp = temp - rng.uniform(4, 9) * f
        dew = dew + rng.uniform(-1.5, 1.5) * f
        pres = pres + rng.uniform(1.5, 4.0) * f * np.exp(-np.clip(m - onset, 0, None) / 60)
        wdir = np.where(after, (ONSHORE + rng.uniform(-30, 30)) % 360.0, wdir)
        wspd = np.where(after, rng.uniform(6, 12), wspd)
        gust_add = np.where(after, rng.uniform(6, 12), 0.0)
        rain = np.where((m >= onset + 3) & (m < onset + 40), rng.uniform(0.1, 1.0), 0.0)
    # noise: white plus a slow random walk (drift); turbulence grows with the speed
    noise = rng.uniform(0.5, 1.5)
    p["noise"] = round(noise, 2)

    def walk(scale: float) -> np.ndarray:
        w = np.cumsum(rng.standard_normal(n)) * scale / math.sqrt(60.0)
        return w - np.convolve(w, np.ones(61) / 61, mode="same")  # keep only its slow wander

    temp = temp + noise * (0.08 * rng.standard_normal(n) + walk(0.15))
    dew = np.minimum(dew + noise * (0.1 * rng.standard_normal(n) + walk(0.2)), temp - 0.1)
    spd_obs = np.clip(wspd * (1 + noise * 0.15 * rng.standard_normal(n)) + noise * 0.2 * rng.standard_normal(n), 0, None)
    dir_obs = (wdir + noise * (6.0 + 25.0 / np.maximum(wspd, 0.5)) * rng.standard_normal(n)) % 360.0
    gust = spd_obs * (1.3 + 0.2 * rng.random(n)) + gust_add
    pres = pres + noise * 0.03 * rng.standard_normal(n)
    out = []
    for i in range(n):
        s = round(float(spd_obs[i]), 1)
        out.append(Observation("X", float(t[i]), float("nan") if s < 0.3 else round(float(dir_obs[i])),
                               0.0 if s < 0.3 else s, round(float(gust[i]), 1), round(float(temp[i]), 1),
                               round(float(dew[i]), 1), round(float(pres[i]), 1), round(float(rain[i]), 1)))
    return out, p


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--days", type=int, default=300)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    rng = np.random.default_rng(a.seed)
    cfg = parse_network(NET)
    t_start = time.perf_counter()
    rows: list[dict[str, Any]] = []
    for day in range(a.days):
        kind = KINDS[int(rng.integers(len(KINDS)))]
        obs, p = _day(rng, kind, day)
        eng = Engine(cfg)  # a fresh station each day: days are independent trials
        evs = [x for o in obs for x in eng.feed(o) if isinstance(x, PassageEvent)]
        bf = [e for e in evs if e.kind == "breeze_front"]
        hit = [e for e in bf if abs(e.onset - p["onset"]) <= 20 * 60]
        p["found"] = bool(hit)
        p["delay"] = (hit[0].detected_at - p["onset"]) / 60.0 if hit else None
        p["false"] = len(bf) - len(hit) if kind == "breeze" else len(bf)
        p["called"] = sorted({e.kind for e in evs})
        rows.append(p)
    br = [r for r in rows if r["kind"] == "breeze"]
    print(f"{a.days} station-days, seed {a.seed} ({time.perf_counter() - t_start:.0f} s)")
    found = sum(r["found"] for r in br)
    delays = sorted(r["delay"] for r in br if r["delay"] is not None)
    print(f"breeze fronts found: {found}/{len(br)} ({found / max(1, len(br)):.0%}); median delay "
          f"{delays[len(delays) // 2] if delays else float('nan'):.1f} min; extra breeze calls on breeze days "
          f"{sum(r['false'] for r in br)}")
    for name, edges in (("ramp", (2, 8, 15, 25)), ("calm", (0, 0.01, 4, 8)), ("lag", (0, 4, 8, 12)), ("aramp", (3, 8, 14, 20)),
                        ("dT", (0.4, 0.8, 1.5, 3.0)), ("dTd", (0.3, 0.8, 1.5, 3.0)),
                        ("on_spd", (1.5, 2.5, 4, 6)), ("noise", (0.5, 0.85, 1.2, 1.5)), ("bg_spd", (1, 2.5, 4, 6))):
        cells = []
        for lo, hi in zip(edges, edges[1:], strict=False):
            sel = [r for r in br if lo <= r[name] < hi or (hi == edges[-1] and r[name] == hi)]
            if sel:
                dl = sorted(r["delay"] for r in sel if r["delay"] is not None)
                med = f" ({dl[len(dl) // 2]:.0f} min)" if dl else ""
                cells.append(f"{lo:g}-{hi:g}: {sum(r['found'] for r in sel)}/{len(sel)}{med}")
        print(f"  by {name:7s} " + "   ".join(cells))
    by: dict[str, list[int]] = defaultdict(lambda: [0, 0])
    for r in rows:
        if r["kind"] != "breeze":
            by[r["kind"]][0] += r["false"] > 0
            by[r["kind"]][1] += 1
    print("look-alike days with a breeze front called: " +
          ", ".join(f"{k} {v[0]}/{v[1]}" for k, v in sorted(by.items())))


if __name__ == "__main__":
    main()
