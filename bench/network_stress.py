"""The whole core (QC, station detectors, network corroboration) on network layouts and front motion
drawn independently of frontwatch's scenario generator: does anything network-level lose real
breeze fronts, or let look-alikes through, on unfamiliar geometries?

Geometries (each drawn afresh from the seed): a straight coast with stations at irregular inland
distances (0-40 km) and spacing; a round lake with stations all round its shore (each facing the
lake) and a few inland; a narrow peninsula whose two shores' fronts move inland and meet; a curved
bay whose onshore bearings sweep 90-150 deg; a sparse network of 2-3 stations; and the straight
coast in the southern hemisphere (the onshore wind backs through the afternoon instead of veering,
DOMAIN.md section 1). Days: mostly breeze days, plus cloud shadows, a synoptic veer onshore with
no air change, a synoptic cold front crossing at 8-15 m/s, a thunderstorm's gust front, and calm
days; under a large-scale wind that may be offshore, alongshore or onshore.

Everything here is written from DOMAIN.md and physical reasoning, not from frontwatch/sim*.py (not
read): the front forms at the shore late morning and moves inland as a density current (1-5 m/s at
sea, slower by a lake; an opposing wind slows it by about 0.6 times that wind, Simpson & Britter
1980), weakening inland and sometimes stalling; where the large-scale wind already blows onshore
there is no distinct front (Arritt 1993, from memory) and no label. Passage shapes follow
bench/detector_stress.py: the wind rotates through the turn (or lulls first), the air change lags
it by 0-12 minutes, the noise is white plus a slow random walk. All magnitudes are judgements of
plausible ranges (from memory), not measurements. Misses are split into detector losses (no
breeze-front call) and network losses (a call the corroboration demoted or dropped).

    .venv/bin/python bench/network_stress.py [--days 150] [--seed 1] [--geometries lake,bay] [--detail]
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, cast

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from frontwatch.config import parse_network  # noqa: E402
from frontwatch.engine import Engine  # noqa: E402
from frontwatch.events import PassageEvent  # noqa: E402
from frontwatch.labels import label_from_dict  # noqa: E402
from frontwatch.score import score  # noqa: E402
from frontwatch.timeutil import iso_z  # noqa: E402

N = 1440  # one record a minute, local 00:00-24:00
M = np.arange(N, dtype=float)
NORTH_T0, SOUTH_T0 = 1782864000.0, 1768435200.0  # 2026-07-01 and 2026-01-15, 00:00Z: each one's summer
GEOMETRIES = ("straight", "lake", "peninsula", "bay", "sparse", "south")
OFFSETS = {"straight": 1.0, "lake": -5.0, "peninsula": 3.0, "bay": 9.0, "sparse": -3.0, "south": 10.0}
DAY_KINDS = ("breeze",) * 5 + ("shadow", "veer", "cold_front", "gust_front", "calm")
TOL_S = 20 * 60.0  # the scorer's default matching tolerance


@dataclass
class Stn:
    id: str
    x: float  # km east of the network's reference point
    y: float  # km north
    onshore_cfg: float  # the bearing written in the network file (a surveyor's estimate)
    shores: dict[str, tuple[float, float, float]]  # shore -> (true shore normal deg, distance inland km, along km)

    @property
    def d(self) -> float:
        return min(v[1] for v in self.shores.values())


def _wrap(a: Any) -> Any:
    return (np.asarray(a) + 180.0) % 360.0 - 180.0


def _place(rng: np.random.Generator, sid: str, normal: float, d: float, along: float, err: float = 10.0,
           shore: str = "S") -> Stn:
    """A station d km inland of a straight shore whose water lies at bearing `normal`."""
    r = math.radians(normal)
    x = along * math.cos(r) - d * math.sin(r)
    y = -along * math.sin(r) - d * math.cos(r)
    return Stn(sid, x, y, (normal + rng.uniform(-err, err)) % 360.0, {shore: (normal, d, along)})


def _on_circle(rng: np.random.Generator, sid: str, radius: float, az: float, d: float) -> Stn:
    """A station d km outside a circle of water (lake, bay), at azimuth `az` from its centre."""
    r = math.radians(az)
    normal = (az + 180.0) % 360.0  # the water lies towards the centre
    return Stn(sid, (radius + d) * math.sin(r), (radius + d) * math.cos(r),
               (normal + rng.uniform(-10, 10)) % 360.0, {"S": (normal, d, radius * r)})


def make_geometry(name: str, rng: np.random.Generator) -> tuple[list[Stn], dict[str, Any]]:
    st: list[Stn] = []
    info: dict[str, Any] = {}
    if name in ("straight", "south", "sparse"):
        normal = float(rng.uniform(0, 360))
        if name == "sparse":
            ds = [rng.uniform(0.2, 0.6), rng.uniform(5, 15)] + ([rng.uniform(15, 30)] if rng.random() < 0.5 else [])
        else:
            ds = [rng.uniform(0.2, 0.6), rng.uniform(0.5, 1.5), rng.uniform(3, 6), rng.uniform(7, 12),
                  rng.uniform(12, 18), rng.uniform(18, 25), rng.uniform(25, 32), rng.uniform(32, 40)]
        st = [_place(rng, f"C{i + 1:02d}", normal, float(d), float(rng.uniform(0, 30))) for i, d in enumerate(ds)]
        info["shore"] = round(normal)
    elif name == "lake":
        rad = float(rng.uniform(8, 15))
        azs = [(i * 45 + rng.uniform(-15, 15)) % 360 for i in range(8)]
        st = [_on_circle(rng, f"L{i + 1:02d}", rad, az, float(rng.uniform(0.1, 0.6))) for i, az in enumerate(azs)]
        st += [_on_circle(rng, f"L{i + 9:02d}", rad, float(rng.uniform(0, 360)), float(rng.uniform(2, 8)))
               for i in range(3)]
        info["radius_km"] = round(rad, 1)
    elif name == "peninsula":
        width, axis = float(rng.uniform(12, 24)), float(rng.uniform(0, 180))
        na, nb = (axis - 90) % 360, (axis + 90) % 360  # the two shores' water bearings
        das = [rng.uniform(0.2, 0.6), rng.uniform(2, 4), rng.uniform(5, 7), width / 2 + rng.uniform(-1, 1),
               width - rng.uniform(6, 8), width - rng.uniform(3, 5), width - rng.uniform(0.2, 0.6)]
        for i, da in enumerate(das):
            s = _place(rng, f"P{i + 1:02d}", na, float(da), float(rng.uniform(0, 25)), shore="A")
            s.shores["B"] = (nb, width - float(da), s.shores["A"][2])
            if width - da < da:
                s.onshore_cfg = (nb + rng.uniform(-10, 10)) % 360.0  # faces the nearer shore
            st.append(s)
        info.update(width_km=round(width, 1), shores=(round(na), round(nb)))
    elif name == "bay":
        rad, span, a0 = float(rng.uniform(18, 30)), float(rng.uniform(90, 150)), float(rng.uniform(0, 360))
        azs = [a0 + span * (i + rng.uniform(-0.2, 0.2)) / 4 for i in range(5)]
        st = [_on_circle(rng, f"B{i + 1:02d}", rad, az % 360, float(rng.uniform(0.1, 0.6))) for i, az in enumerate(azs)]
        st += [_on_circle(rng, f"B{i + 6:02d}", rad, float(a0 + rng.uniform(10, span - 10)) % 360,
                          float(rng.uniform(4, 25))) for i in range(4)]
        info.update(radius_km=round(rad), span_deg=round(span))
    lat0 = -34.0 if name == "south" else 43.0
    net = {"network": {"name": f"stress-{name}", "utc_offset_hours": OFFSETS[name]},
           "stations": [{"id": s.id, "lat": round(lat0 + s.y / 111.2, 5),
                         "lon": round(10.0 + s.x / (111.2 * math.cos(math.radians(lat0))), 5),
                         "onshore_from_deg": round(s.onshore_cfg, 1)} for s in st]}
    return st, {"net": net, **info}


def _uv(d: Any, s: Any) -> tuple[np.ndarray, np.ndarray]:
    r = np.radians(d)
    return -np.asarray(s) * np.sin(r), -np.asarray(s) * np.cos(r)


def _dir_spd(u: Any, v: Any) -> tuple[np.ndarray, np.ndarray]:
    return (np.degrees(np.arctan2(-u, -v)) + 360.0) % 360.0, np.hypot(u, v)


def _turn(wdir: np.ndarray, wspd: np.ndarray, start: float, ramp: float, d1: Any, s1: Any
          ) -> tuple[np.ndarray, np.ndarray]:
    """From `start` on, the wind rotates (the shorter way) from its bearing then to d1 over `ramp`
    minutes while its speed goes to s1 (d1, s1 may vary with time)."""
    i0 = min(max(int(start), 0), N - 1)
    f = np.clip((M - start) / max(ramp, 1.0), 0, 1)
    nd = (wdir[i0] + _wrap(np.asarray(d1) - wdir[i0]) * f) % 360.0
    ns = wspd[i0] + (np.asarray(s1) - wspd[i0]) * f
    after = start <= M
    return np.where(after, nd, wdir), np.where(after, ns, wspd)


@dataclass
class Day:
    kind: str
    bg_dir: float
    bg_spd: float
    shore_front: dict[str, dict[str, float]] = field(default_factory=dict)
    extra: dict[str, float] = field(default_factory=dict)


def draw_day(rng: np.random.Generator, name: str, st: list[Stn]) -> Day:
    kind = DAY_KINDS[int(rng.integers(len(DAY_KINDS)))]
    normals = [v[0] for s in st for v in s.shores.values()]
    ref = normals[int(rng.integers(len(normals)))]
    rel = rng.choice([180.0, 90.0, -90.0, 0.0], p=[0.45, 0.175, 0.175, 0.2])  # offshore, alongshore, onshore
    bg_dir = (ref + rel + rng.uniform(-35, 35)) % 360.0
    day = Day(kind, bg_dir, float(rng.uniform(0.5, 7.0)))
    lake = name == "lake"
    for sh in sorted({k for s in st for k in s.shores}):
        day.shore_front[sh] = dict(
            t_form=rng.uniform(11 * 60, 13.5 * 60) if lake else rng.uniform(10.5 * 60, 13 * 60),
            speed=rng.uniform(0.8, 2.5) if lake else rng.uniform(1.5, 5.0), slow=rng.uniform(0, 0.6),
            dT=rng.uniform(0.5, 2.0) if lake else rng.uniform(1.0, 3.5),
            dTd=rng.uniform(0.3, 1.8) if lake else rng.uniform(0.5, 3.0),
            decay_km=rng.uniform(4, 12) if lake else rng.uniform(15, 50),
            on_spd=rng.uniform(1.5, 4.0) if lake else rng.uniform(2.0, 6.0),
            stall_km=(rng.uniform(2, 8) if lake else rng.uniform(3, 30)) if rng.random() < 0.3 else 1e9,
            grad=rng.uniform(-1, 1), max_off=4.0 if lake else 8.0)
    if kind == "calm":
        day.bg_spd = float(rng.uniform(0.3, 1.5))
    elif kind == "veer":
        day.extra.update(t=rng.uniform(10 * 60, 16 * 60), to=(ref + rng.uniform(-30, 30)) % 360.0,
                         spd=rng.uniform(2, 7), ramp=rng.uniform(10, 40), move=rng.uniform(0, 360))
    elif kind == "cold_front":
        south = name == "south"
        day.bg_dir = float(rng.uniform(300, 340) if south else rng.uniform(200, 240))
        day.bg_spd = float(rng.uniform(3, 8))
        day.extra.update(t=rng.uniform(10 * 60, 17 * 60), to=rng.uniform(200, 240) if south else rng.uniform(290, 330),
                         move=rng.uniform(200, 250) if south else rng.uniform(270, 320), speed=rng.uniform(8, 15),
                         dT=rng.uniform(2, 6), dTd=rng.uniform(2, 6), jump=rng.uniform(1.5, 3))
    elif kind == "gust_front":
        xs, ys = [s.x for s in st], [s.y for s in st]
        day.extra.update(t=rng.uniform(13 * 60, 18 * 60), x=float(np.mean(xs)) + rng.uniform(-15, 15),
                         y=float(np.mean(ys)) + rng.uniform(-15, 15), speed=rng.uniform(8, 15), radius=rng.uniform(15, 30))
    return day


def _arrival(rng: np.random.Generator, day: Day, shore: tuple[float, float, float], fr: dict[str, float]
             ) -> tuple[float, dict[str, float]] | None:
    """When (local minute) the front from this shore passes a station, and its strength there; None
    when it does not: already-onshore wind, suppressed, stalled, dissipated, or after 19:00."""
    normal, d, along = shore
    c = day.bg_spd * math.cos(math.radians(day.bg_dir - normal))  # onshore part of the large-scale wind
    if c > 2.0 or -c > fr["max_off"]:
        return None
    u = fr["speed"] - 0.6 * max(0.0, -c)  # Simpson & Britter 1980: an opposing wind V slows it by ~0.6 V
    stall = fr["stall_km"] if u >= 0.5 else min(fr["stall_km"], 1.0)
    u = max(u, 0.5)
    if d > stall:
        return None
    s = np.arange(0.0, d, 0.25)
    travel = float(np.sum(0.25e3 / (u * np.maximum(0.35, 1 - fr["slow"] * s / 40.0)))) / 60.0
    t = fr["t_form"] + fr["grad"] * along + 8.0 * max(0.0, -c) + travel + rng.uniform(-6, 6)
    k = math.exp(-d / fr["decay_km"])
    dT, dTd = fr["dT"] * k, fr["dTd"] * k
    if t > 19 * 60 or (dT < 0.4 and dTd < 0.4):
        return None
    return t, {"dT": dT, "dTd": dTd, "on": fr["on_spd"] * (0.6 + 0.4 * k), "normal": normal}


def station_day(rng: np.random.Generator, s: Stn, day: Day, south: bool
                ) -> tuple[dict[str, np.ndarray], list[tuple[str, float, dict[str, Any]]]]:
    """One station's day (local minutes) and its labels (kind, local minute, details)."""
    h = M / 60.0
    warm = np.clip(np.sin(np.pi * (h - 6.0) / 14.0), 0, None)
    coast = 0.5 + 0.5 * (1 - math.exp(-s.d / 5.0))
    amp = rng.uniform(2, 4) if day.kind == "calm" else rng.uniform(6, 12) * coast
    temp = rng.uniform(12, 22) + amp * warm - 0.1 * np.clip(h - 20, 0, None)
    dew = temp.min() - rng.uniform(1, 6) + np.zeros(N)
    if s.d > 3:  # inland the morning's mixing dries the air a little (common practice)
        dew -= rng.uniform(0, 2) * np.clip((h - 9) / 4, 0, 1)
    pres = rng.uniform(1005, 1020) + 0.5 * np.cos(2 * np.pi * (h - 10) / 12) + rng.uniform(-0.1, 0.1) * (h - 12)
    rain, gust_add = np.zeros(N), np.zeros(N)
    # the large-scale wind, a little different at each site, stronger in the afternoon's mixing;
    # near the shore a weak land breeze at night
    wander = np.cumsum(rng.standard_normal(N)) * (3.0 if day.kind == "calm" else 0.4)
    bgd = (day.bg_dir + rng.uniform(-10, 10) + wander) % 360.0
    bgs = day.bg_spd * rng.uniform(0.8, 1.2) * (0.7 + 0.5 * warm)
    u, v = _uv(bgd, bgs)
    if s.d < 5:
        lb = np.clip(np.maximum(8 - h, h - 20) / 2, 0, 1) * rng.uniform(0.5, 1.5)
        normal = next(iter(s.shores.values()))[0]
        lu, lv = _uv((normal + 180.0) % 360.0, lb)
        u, v = u + lu, v + lv
    wdir, wspd = _dir_spd(u, v)
    bg_dir, bg_spd = wdir.copy(), wspd.copy()
    labels: list[tuple[str, float, dict[str, Any]]] = []
    if day.kind == "breeze":
        got = [(a[0], a[1], k) for k, sh in s.shores.items()
               if (a := _arrival(rng, day, sh, day.shore_front[k])) is not None]
        if got:
            tp, p, shore = min(got, key=lambda g: g[0])
            ramp, aramp, lag = rng.uniform(2, 25), rng.uniform(3, 20), rng.uniform(0, 12)
            calm = rng.uniform(0, 8) if rng.random() < 0.4 else 0.0
            bdir = p["normal"] + rng.uniform(-25, 25) + (-1 if south else 1) * rng.uniform(3, 10) * np.clip((M - tp) / 60, 0, 4)
            bu, bv = _uv(bdir, p["on"])
            pd, ps = _dir_spd(bu + 0.15 * u, bv + 0.15 * v)
            wdir, wspd = _turn(wdir, wspd, tp + calm, ramp, pd, ps)
            lull = (tp <= M) & (tp + calm > M)
            wspd = np.where(lull, wspd * rng.uniform(0.1, 0.3), wspd)
            wdir, wspd = _turn(wdir, wspd, rng.uniform(18.5 * 60, 20 * 60), 60, bg_dir, bg_spd)  # evening: dies
            fa = np.clip((M - tp - lag) / aramp, 0, 1)
            t_on = temp[int(tp)]
            temp = np.where(tp + lag <= M, np.minimum(temp, t_on) - p["dT"] * fa + 0.2 * (temp - t_on) * fa, temp)
            dew = dew + p["dTd"] * fa
            pres = pres + rng.uniform(0, 0.5) * fa
            far = abs(float(_wrap(p["normal"] - s.onshore_cfg))) > 90
            bg_on = day.bg_spd * math.cos(math.radians(day.bg_dir - p["normal"])) > 0.0  # light onshore
            labels.append(("breeze_front", tp, {"d": s.d, "far": far, "dT": p["dT"], "shore": shore, "bg_on": bg_on,
                                             "ramp": ramp, "lag": lag, "calm": calm}))
        elif any(math.cos(math.radians(day.bg_dir - sh[0])) * day.bg_spd > 2.0 for sh in s.shores.values()):
            # an onshore large-scale wind: marine air creeps in with no distinct front (no label)
            t1 = rng.uniform(11 * 60, 15 * 60)
            f = np.clip((M - t1) / rng.uniform(120, 180), 0, 1)
            temp, dew = temp - rng.uniform(0.3, 1.0) * f, dew + rng.uniform(0.2, 0.8) * f
    elif day.kind == "shadow":
        for _ in range(int(rng.integers(0, 3))):
            t1, dur, depth = rng.uniform(10 * 60, 16 * 60), rng.uniform(10, 45), rng.uniform(0.5, 2.5)
            g = np.clip((M - t1) / 4, 0, 1) * np.clip((t1 + dur - M) / 6, 0, 1)
            temp, wspd = temp - depth * g, wspd * (1 - 0.2 * g)
            labels.append(("cloud_shadow", t1, {"d": s.d}))
    elif day.kind in ("veer", "cold_front"):
        e = day.extra
        mv = math.radians(e["move"])  # the bearing it comes from; it passes later further downstream
        tt = e["t"] - (s.x * math.sin(mv) + s.y * math.cos(mv)) * 1e3 / (e.get("speed", 10.0) * 60)
        if day.kind == "veer":
            wdir, wspd = _turn(wdir, wspd, tt, e["ramp"], e["to"], e["spd"])
            labels.append(("synoptic_veer", tt, {"d": s.d}))
        elif 30 < tt < N - 30:
            pres = pres - 0.3 * np.clip((M - tt + 180) / 60, 0, 3) * (tt > M)
            wdir, wspd = _turn(wdir, wspd, tt, rng.uniform(5, 15), e["to"], rng.uniform(6, 11))
            gust_add = np.where(tt <= M, rng.uniform(4, 8), 0.0)
            fa = np.clip((M - tt) / rng.uniform(10, 30), 0, 1)
            temp = temp - e["dT"] * fa
            dew = dew - e["dTd"] * np.clip((M - tt) / rng.uniform(15, 40), 0, 1)
            pres = pres + e["jump"] * np.clip((M - tt) / 20, 0, 1)
            labels.append(("cold_front", tt, {"d": s.d}))
    elif day.kind == "gust_front":
        e = day.extra
        dist = math.hypot(s.x - e["x"], s.y - e["y"])
        if dist < e["radius"]:
            tt = e["t"] + dist * 1e3 / (e["speed"] * 60)
            k = 1 - 0.5 * dist / e["radius"]
            frm = math.degrees(math.atan2(e["x"] - s.x, e["y"] - s.y)) % 360.0  # from the storm
            wdir = np.where(tt <= M, frm + rng.uniform(-20, 20), wdir)
            wspd = np.where(tt <= M, rng.uniform(6, 14) * k, wspd)
            gust_add = np.where(tt <= M, rng.uniform(6, 12) * k, 0.0)
            fa = np.clip((M - tt) / rng.uniform(2, 6), 0, 1)
            temp = temp - rng.uniform(4, 9) * k * fa
            dew = dew + rng.uniform(-1.5, 1.5) * fa
            pres = pres + rng.uniform(1.5, 4.0) * k * fa * np.exp(-np.clip(M - tt, 0, None) / 60)
            if dist < 0.5 * e["radius"]:
                rain = np.where((tt + 3 <= M) & (tt + rng.uniform(20, 40) > M), rng.uniform(0.1, 1.0), 0.0)
            labels.append(("gust_front", tt, {"d": s.d}))
    # noise: white plus a slow random walk; the vane's scatter grows as the wind drops
    noise = rng.uniform(0.5, 1.5)

    def walk(scale: float) -> np.ndarray:
        w = np.cumsum(rng.standard_normal(N)) * scale / math.sqrt(60.0)
        return w - np.convolve(w, np.ones(61) / 61, mode="same")

    temp = temp + noise * (0.08 * rng.standard_normal(N) + walk(0.15))
    dew = np.minimum(dew + noise * (0.1 * rng.standard_normal(N) + walk(0.2)), temp - 0.1)
    spd = np.clip(wspd * (1 + noise * 0.15 * rng.standard_normal(N)) + noise * 0.2 * rng.standard_normal(N), 0, None)
    spd = np.round(spd, 1)
    drn = np.round((wdir + noise * (6.0 + 25.0 / np.maximum(wspd, 0.5)) * rng.standard_normal(N)) % 360.0)
    gust = spd * (1.3 + 0.2 * rng.random(N)) + gust_add
    cols = {"wind_dir_deg": np.where(spd < 0.3, np.nan, drn), "wind_speed_ms": np.where(spd < 0.3, 0.0, spd),
            "wind_gust_ms": np.round(gust, 1), "temp_c": np.round(temp, 1), "dewpoint_c": np.round(dew, 1),
            "pressure_hpa": np.round(pres + noise * 0.03 * rng.standard_normal(N), 1), "rain_mm": np.round(rain, 1)}
    return cols, labels


def run_geometry(name: str, days: int, seed: int) -> dict[str, Any]:
    rng = np.random.default_rng([seed, GEOMETRIES.index(name)])
    st, info = make_geometry(name, rng)
    cfg = parse_network(info["net"])
    south = name == "south"
    t0 = (SOUTH_T0 if south else NORTH_T0) - OFFSETS[name] * 3600.0  # local midnight, epoch s
    events: list[PassageEvent] = []
    raw: list[tuple[PassageEvent, PassageEvent | None]] = []  # detector's breeze call, the network's verdict
    labels, meta, kinds = [], [], []
    eng = Engine(cfg)
    for k in range(days):
        day = draw_day(rng, name, st)
        kinds.append(day.kind)
        tday = t0 + k * 86400.0
        per = [station_day(rng, s, day, south) for s in st]
        for s, (_, lbs) in zip(st, per, strict=True):
            for kind, tm, det in lbs:
                labels.append(label_from_dict({"station": s.id, "kind": kind, "time": iso_z(tday + 60.0 * round(tm))}))
                meta.append({**det, "station": s.id, "day": k})
        eng = Engine(cfg)  # days are independent trials: a fresh engine each day
        check = eng.corroborate.check

        def spy(ev: PassageEvent, check: Any = check) -> PassageEvent | None:
            got = check(ev)
            if ev.kind == "breeze_front":
                raw.append((ev, got))
            return got

        eng.corroborate.check = spy  # type: ignore[method-assign]
        ids = np.empty(N * len(st), dtype=object)
        ids[:] = [s.id for s in st] * N
        cols = {c: np.stack([p[0][c] for p in per]).T.ravel() for c in per[0][0]}
        cols["time"] = np.repeat(tday + 60.0 * M, len(st))
        events += [o for _, o in eng.feed_columns(cast(Any, ids), cast(Any, cols)) if isinstance(o, PassageEvent)]
    rep = score(events, labels)
    return {"name": name, "st": st, "info": info, "rep": rep, "raw": raw, "labels": labels, "meta": meta,
            "kinds": kinds, "t0": t0, "events": events, "engine": eng}


def miss_reason(lb: Any, raw: list[tuple[PassageEvent, PassageEvent | None]], events: list[PassageEvent]) -> str:
    near = [(ev, got) for ev, got in raw if ev.station == lb.station and abs(ev.onset - lb.time) <= TOL_S]
    if near:
        ev, got = min(near, key=lambda x: abs(x[0].onset - lb.time))
        if got is None:
            return "net_dropped"
        if got.kind == "wind_shift":
            return "net_weak" if (got.note or "").startswith("weak") else "net_clear"
        return "split"  # its breeze call stood, but the label went to a nearer call of another kind
    other = sorted({e.kind for e in events if e.station == lb.station and abs(e.onset - lb.time) <= TOL_S})
    return "det_" + other[0] if other else "det_none"


def summarise(r: dict[str, Any]) -> dict[str, Any]:
    rep = r["rep"]
    lab_meta = {(lb.station, lb.time): m for lb, m in zip(r["labels"], r["meta"], strict=True)}
    why = [(miss_reason(lb, r["raw"], r["events"]), lab_meta[(lb.station, lb.time)]) for lb, _ in rep.misses]
    look = Counter(lb.kind for lb in r["labels"] if lb.kind != "breeze_front")
    on_look = Counter(lb.kind for _, lb in rep.false_alarms if lb is not None and lb.kind != "breeze_front")
    fa_day = Counter(r["kinds"][int((ev.onset - r["t0"]) // 86400)] for ev, lb in rep.false_alarms if lb is None)
    # look-alikes the network kept out: a detector's breeze call on a look-alike label that it demoted
    look_lbs = [lb for lb in r["labels"] if lb.kind != "breeze_front"]
    saved = sum(1 for ev, got in r["raw"] if got is not None and got.kind == "wind_shift" and
                any(lb.station == ev.station and abs(lb.time - ev.onset) <= TOL_S for lb in look_lbs))
    return {"n": rep.overall.a + rep.overall.c, "a": rep.overall.a, "b": rep.overall.b, "c": rep.overall.c,
            "csi": rep.overall.csi or 0.0, "delay": (rep.delay.median or float("nan")) / 60.0,
            "why": why, "reasons": Counter(w for w, _ in why), "look": look, "on_look": on_look,
            "fa_day": fa_day, "saved": saved, "days": Counter(r["kinds"])}


def detail(r: dict[str, Any], x: dict[str, Any]) -> None:
    """Per station: distance inland, bearing, the network's view of it, and what became of its fronts;
    then the misses by cause against distance inland and the large-scale wind."""
    rep, cor = r["rep"], r["engine"].corroborate
    hits = Counter(p.label.station for p in rep.hits)
    miss: dict[str, Counter[str]] = defaultdict(Counter)
    for (w, m) in x["why"]:
        miss[m["station"]][w] += 1
    fas = Counter(ev.station for ev, _ in rep.false_alarms)
    print(f"  {r['name']} {({k: v for k, v in r['info'].items() if k != 'net'})}")
    for s in r["st"]:
        sea = ",".join(f"{k}:{d / 1e3:.0f}" for k, d in cor.seaward[s.id]) or "-"
        dists = "/".join(f"{v[1]:.1f}" for v in s.shores.values())
        print(f"    {s.id} d={dists:>9s} km onshore={s.onshore_cfg:5.0f} coastal={str(cor.coastal[s.id])[0]} "
              f"seaward[{sea}] hits {hits[s.id]} FA {fas[s.id]} misses {dict(miss[s.id])}")
    hit_m = Counter(bool(m["bg_on"]) for lb, m in zip(r["labels"], r["meta"], strict=True)
                    if lb.kind == "breeze_front")
    for flag, name in ((False, "offshore/alongshore"), (True, "light onshore")):
        c = Counter(w for w, m in x["why"] if bool(m["bg_on"]) == flag)
        print(f"    large-scale wind {name}: {hit_m[flag]} fronts, misses {dict(c)}")
    split = [m for w, m in x["why"] if w == "split"]
    if split:
        med = [statistics.median(m[k] for m in ms) for ms in (split, [m for m in r["meta"] if "ramp" in m])
               for k in ("ramp", "lag", "calm")]
        print("    split passages: median turn {:.0f} min, air lag {:.0f} min, lull {:.0f} min "
              "(all fronts: {:.0f}, {:.0f}, {:.0f})".format(*med))
    for lo, hi in ((0, 2), (2, 10), (10, 25), (25, 41)):
        c = Counter(w for w, m in x["why"] if lo <= m["d"] < hi and not m["far"])
        print(f"    {lo}-{hi} km inland (own shore's front): misses {dict(c)}")


def main() -> None:
    ap = argparse.ArgumentParser(description=(__doc__ or "").split("\n")[0])
    ap.add_argument("--days", type=int, default=150, help="days per geometry")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--geometries", default=",".join(GEOMETRIES))
    ap.add_argument("--detail", action="store_true", help="also list every station's fate")
    a = ap.parse_args()
    t_start = time.perf_counter()
    rows = [run_geometry(g, a.days, a.seed) for g in a.geometries.split(",")]
    print(f"network stress bench: {a.days} days per geometry, seed {a.seed} "
          f"({time.perf_counter() - t_start:.0f} s); breeze_front scored with a 20-min tolerance")
    print(f"{'':38s} {'misses by cause':^54s} | {'BF on look-alike labels':^23s} | FA unlab.")
    print(f"{'geometry':10s} {'stn':>3s} {'bzday':>5s} {'front':>5s} {'hit':>4s} {'miss':>4s} {'FA':>3s} "
          f"{'CSI':>4s} {'dly':>4s} | {'none':>4s} {'other':>5s} {'split':>5s} {'nWeak':>5s} {'nClr':>4s} "
          f"{'nDrop':>5s} {'farSh':>5s} {'onBg':>4s} | {'shad':>4s} {'veer':>4s} {'cold':>4s} {'gust':>4s} "
          f"| {'bz':>3s} {'oth':>3s} | kept")
    tot: Counter[str] = Counter()
    delays: list[float] = []
    summaries = []
    for r in rows:
        x = summarise(r)
        summaries.append(x)
        rs = x["reasons"]
        other = sum(v for k, v in rs.items() if k.startswith("det_") and k != "det_none")
        far = sum(1 for _, m in x["why"] if m["far"])
        onbg = sum(1 for _, m in x["why"] if m["bg_on"])
        lk = " ".join(f"{x['on_look'][k]:>4d}" for k in ("cloud_shadow", "synoptic_veer", "cold_front", "gust_front"))
        fab = x["fa_day"]["breeze"]
        print(f"{r['name']:10s} {len(r['st']):3d} {x['days']['breeze']:5d} {x['n']:5d} {x['a']:4d} {x['c']:4d} "
              f"{x['b']:3d} {x['csi']:4.2f} {x['delay']:4.0f} | {rs['det_none']:4d} {other:5d} {rs['split']:5d} "
              f"{rs['net_weak']:5d} {rs['net_clear']:4d} {rs['net_dropped']:5d} {far:5d} {onbg:4d} | {lk} | "
              f"{fab:3d} {sum(x['fa_day'].values()) - fab:3d} | {x['saved']:4d}")
        tot.update({k: x[k] for k in ("n", "a", "b", "c")})
        tot.update({f"look_{k}": v for k, v in x["look"].items()})
        delays += [p.delay_s / 60.0 for p in r["rep"].hits]
    print(f"{'all':10s} {'':3s} {'':5s} {tot['n']:5d} {tot['a']:4d} {tot['c']:4d} {tot['b']:3d} "
          f"{tot['a'] / max(1, tot['a'] + tot['b'] + tot['c']):4.2f} "
          f"{statistics.median(delays) if delays else float('nan'):4.0f}   (look-alike labels: "
          + ", ".join(f"{k[5:]} {v}" for k, v in sorted(tot.items()) if k.startswith("look_")) + ")")
    print("causes: none = no call; other = another kind called; split = a wind shift at the turn, the breeze "
          "front after it (the label pairs with the nearer call); nWeak/nClr = the network demoted a weak/clear "
          "call; nDrop = dropped as a repeat; farSh = of the misses, fronts from the shore the station does not "
          "face; onBg = under a light onshore large-scale wind. kept = look-alike calls the network demoted.")
    if a.detail:
        for r, x in zip(rows, summaries, strict=True):
            detail(r, x)


if __name__ == "__main__":
    main()
