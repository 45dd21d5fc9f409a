"""Look-alikes of a breeze front in generated scenarios, labelled by kind, and unlabelled nuisances.

- Synoptic cold front (Ahrens, Meteorology Today): pressure falls ahead and rises sharply behind, the
  wind veers (backs in the south), dewpoint FALLS, gusty, any time of day, moving with the
  large-scale flow (8-14 m/s here, from memory).
- Thunderstorm gust front (Engerer, Stensrud & Coniglio 2008): pressure jump 2-4.5 hPa, temperature
  drop 5-11 K, strong gusts, rain, 30-60 min; the dewpoint change is small either way (from memory).
  Half of them move in from the sea side, so their wind comes from the onshore sector.
- Nuisances (no label): cloud shadows (temperature dip only; common practice) and spells of light
  variable wind (under 1.5 m/s, direction wandering; ICAO Annex 3).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .sim_events import iso, smoothstep
from .sim_plan import DayPlan
from .sim_setting import Setting, unit
from .sim_weather import MIN_PER_DAY, Clock, Fields, wind_vector


def _xy(setting: Setting) -> tuple[np.ndarray, np.ndarray]:
    return np.array([p.x_km for p in setting.stations]), np.array([p.y_km for p in setting.stations])


@dataclass
class ColdFront:
    day: int
    heading_deg: float
    speed_ms: float
    passage_min: np.ndarray  # scenario minute of passage per station
    shift_min: np.ndarray  # wind-shift duration per station

    def switch(self) -> np.ndarray:
        """(stations, 1440) weight moving the day's synoptic wind from its start to its end value."""
        m = np.arange(self.day * MIN_PER_DAY, (self.day + 1) * MIN_PER_DAY, dtype=float)[None, :]
        return smoothstep((m - self.passage_min[:, None]) / self.shift_min[:, None])


def plan_cold_front(setting: Setting, plan: DayPlan, rng: np.random.Generator) -> ColdFront:
    south = setting.hemisphere == "south"
    heading = rng.uniform(40.0, 75.0) if south else rng.uniform(95.0, 135.0)
    speed = rng.uniform(8.0, 14.0)
    x, y = _xy(setting)
    hx, hy = unit(heading)
    proj = x * hx + y * hy
    cross_min = (proj - proj.min()) * 1000.0 / speed / 60.0
    h0 = rng.uniform(0.5, max(0.6, 23.3 - cross_min.max() / 60.0))  # any time of day
    passage = plan.index * MIN_PER_DAY + h0 * 60.0 + cross_min
    return ColdFront(plan.index, float(heading), float(speed), passage, rng.uniform(3.0, 15.0, len(x)))


def apply_cold_front(fields: Fields, setting: Setting, cf: ColdFront, clock: Clock,
                     rng: np.random.Generator) -> list[dict[str, Any]]:
    """Pressure, temperature, moisture, gust and rain changes of a cold front (the wind turn is in
    the background's synoptic switch). The new air mass blends out over the following day."""
    n = len(setting.stations)
    start = max(0, int(cf.passage_min.min() - 7 * 60))
    stop = min(clock.minutes, int(cf.passage_min.max() + 30 * 60))
    sl = slice(start, stop)
    m = np.arange(start, stop, dtype=float)[None, :]
    tp = cf.passage_min[:, None]
    fall, rise = rng.uniform(1.0, 3.0, n)[:, None], rng.uniform(1.0, 2.5, n)[:, None]
    lead = rng.uniform(180.0, 360.0, n)[:, None]
    rise_len = rng.uniform(60.0, 120.0, n)[:, None]
    taper = 1.0 - smoothstep((m - tp - 6 * 60.0) / (18 * 60.0))
    ahead = np.clip((m - (tp - lead)) / lead, 0.0, 1.0)
    after = smoothstep((m - tp) / rise_len)
    f = fields
    f.pres[:, sl] += (-fall * ahead + (fall + rise) * after) * taper
    dT = rng.uniform(2.5, 7.0, n)[:, None]
    dTd = rng.uniform(2.5, 8.0, n)[:, None]
    f.temp[:, sl] -= dT * smoothstep((m - tp) / rng.uniform(20.0, 60.0, n)[:, None]) * taper
    f.dew[:, sl] -= dTd * smoothstep((m - tp) / rng.uniform(20.0, 90.0, n)[:, None]) * taper
    gusty = smoothstep((m - tp) / 10.0) * (1.0 - smoothstep((m - tp - rng.uniform(180, 360, n)[:, None]) / 120.0))
    f.gustiness[:, sl] *= 1.0 + 0.35 * gusty
    f.gust_add[:, sl] += rng.uniform(1.0, 3.0, n)[:, None] * gusty * np.exp(-np.clip(m - tp, 0, None) / 60.0)
    rain_start = tp + rng.uniform(-10.0, 10.0, n)[:, None]
    rain_len = rng.uniform(15.0, 40.0, n)[:, None]
    inside = (m >= rain_start) & (m < rain_start + rain_len)
    f.rain[:, sl] += inside * rng.uniform(0.4, 5.0, n)[:, None] / rain_len
    # Timed at the middle of the wind shift (its steepest point), as for every passage label.
    return [{"station": p.id, "kind": "cold_front",
             "time": iso(clock.start_epoch + (cf.passage_min[i] + 0.5 * cf.shift_min[i]) * 60.0),
             "note": f"synoptic cold front moving towards {cf.heading_deg:.0f} deg at {cf.speed_ms:.1f} m/s"}
            for i, p in enumerate(setting.stations) if cf.passage_min[i] < clock.minutes]


def gust_front(fields: Fields, setting: Setting, plan: DayPlan, clock: Clock,
               rng: np.random.Generator, breeze_min: np.ndarray | None = None) -> list[dict[str, Any]]:
    """An afternoon thunderstorm outflow crossing part of the network.

    `breeze_min` (scenario minute of the day's breeze passage per station, NaN if none): the outflow
    is timed to reach no station from 90 min before to 45 min after its breeze passage, so that
    neither hides the other (the storm is put later; a station it cannot miss is left out).
    """
    n = len(setting.stations)
    from_sea = rng.random() < 0.5
    heading = (setting.inland_bearing_deg + rng.normal(0.0, 25.0)) if from_sea else rng.uniform(0.0, 360.0)
    speed = rng.uniform(7.0, 14.0)
    half_width = rng.uniform(8.0, 20.0)
    x, y = _xy(setting)
    k = int(rng.integers(n))
    hx, hy = unit(heading)
    lat_off = rng.uniform(-0.5, 0.5) * half_width
    cx, cy = x[k] + lat_off * hy, y[k] - lat_off * hx  # a point on the track near station k
    along = (x - cx) * hx + (y - cy) * hy
    lateral = np.abs(-(x - cx) * hy + (y - cy) * hx)
    hit = lateral < half_width
    h0 = rng.uniform(13.5, 18.0)
    arr = clock.minute_of(plan.index, h0) + (along - along[hit].min()) * 1000.0 / speed / 60.0
    if breeze_min is not None:
        b = np.where(np.isnan(breeze_min), -np.inf, breeze_min)
        clash = hit & (arr > b - 90.0) & (arr < b + 45.0)
        if clash.any():
            arr = arr + min(float(np.max((b + 45.0 - arr)[clash])), 240.0)
        hit &= ~((arr > b - 90.0) & (arr < b + 45.0))
        hit &= arr < clock.minute_of(plan.index, 20.5)
    hit &= arr < clock.minutes - 5
    if not hit.any():
        return []
    q = 1.0 - 0.35 * lateral / half_width
    dur = rng.uniform(30.0, 60.0, n)[:, None]
    up = rng.uniform(3.0, 8.0, n)[:, None]
    start = int(np.nanmin(arr[hit]) - 10)
    stop = min(clock.minutes, int(np.nanmax(arr[hit]) + 7 * 60))
    sl = slice(start, stop)
    m = np.arange(start, stop, dtype=float)[None, :]
    ta = np.where(hit, arr, np.inf)[:, None]
    rise = smoothstep((m - ta) / up)
    w_wind = rise * (1.0 - smoothstep((m - ta - 0.6 * dur) / (0.4 * dur)))
    outflow = heading + 180.0 + rng.normal(0.0, 15.0, n)
    uo, vo = wind_vector(outflow, rng.uniform(7.0, 13.0, n))
    f = fields
    f.u[:, sl] = f.u[:, sl] * (1.0 - w_wind) + w_wind * uo[:, None]
    f.v[:, sl] = f.v[:, sl] * (1.0 - w_wind) + w_wind * vo[:, None]
    f.gust_add[:, sl] += w_wind * (rng.uniform(3.0, 8.0, n) * q)[:, None] * np.exp(-np.clip(m - ta, 0, None) / 25.0)
    f.gustiness[:, sl] *= 1.0 + 0.3 * w_wind
    dp = (rng.uniform(2.0, 4.5, n) * (0.85 + 0.15 * q))[:, None]
    f.pres[:, sl] += dp * rise * (1.0 - smoothstep((m - ta - 0.5 * dur) / dur))
    dT = (rng.uniform(5.0, 11.0, n) * (0.85 + 0.15 * q))[:, None]
    cool = smoothstep((m - ta) / (1.5 * up))
    recover = 0.4 * smoothstep((m - ta) / dur) + 0.6 * smoothstep((m - ta - dur) / 360.0)
    f.temp[:, sl] -= dT * cool * (1.0 - recover)
    f.dew[:, sl] += rng.uniform(-2.0, 2.0, n)[:, None] * smoothstep((m - ta) / up) * (1.0 - recover)
    r0 = ta + rng.uniform(1.0, 8.0, n)[:, None]
    total = rng.uniform(4.0, 25.0, n)[:, None]
    shape = np.where(m >= r0, np.exp(-np.clip(m - r0, 0, None) / (0.35 * dur)), 0.0)
    f.rain[:, sl] += total * shape / (0.35 * dur)
    note = "thunderstorm outflow from the sea side" if from_sea else "thunderstorm outflow"
    return [{"station": setting.stations[i].id, "kind": "gust_front",
             "time": iso(clock.start_epoch + (arr[i] + 0.5 * float(up[i, 0])) * 60.0), "note": note}
            for i in np.flatnonzero(hit)]


def cloud_shadows(fields: Fields, setting: Setting, plan: DayPlan, clock: Clock,
                  rng: np.random.Generator) -> list[dict[str, Any]]:
    """Temperature dips under passing cloud (no wind or moisture change). Returned as nuisances."""
    out = []
    for i, p in enumerate(setting.stations):
        for _ in range(int(rng.poisson(2.0))):
            m0 = float(clock.minute_of(plan.index, rng.uniform(10.0, 16.5)))
            dur = rng.uniform(8.0, 40.0)
            depth = rng.uniform(0.5, 2.0) * float(fields.solar[min(int(m0), clock.minutes - 1)])
            a, b = int(m0), min(clock.minutes, int(m0 + dur) + 1)
            if a >= b:
                continue
            x = (np.arange(a, b) - m0) / dur
            fields.temp[i, a:b] -= depth * np.sin(np.pi * np.clip(x, 0.0, 1.0))
            out.append({"station": p.id, "kind": "cloud_shadow", "time": iso(clock.start_epoch + m0 * 60.0),
                        "duration_min": round(dur, 1), "depth_c": round(depth, 2)})
    return out


def light_variable(fields: Fields, setting: Setting, plan: DayPlan, clock: Clock,
                   rng: np.random.Generator) -> list[dict[str, Any]]:
    """Spells of light wind whose direction wanders, at some stations, early morning of light days."""
    out = []
    for i, p in enumerate(setting.stations):
        if rng.random() > 0.35:
            continue
        m0 = int(clock.minute_of(plan.index, rng.uniform(5.0, 8.5)))
        dur = int(rng.uniform(60.0, 180.0))
        a, b = m0, min(clock.minutes, m0 + dur)
        if a >= b:
            continue
        direction = rng.uniform(0, 360) + np.cumsum(rng.normal(0.0, 25.0, b - a))
        speed = rng.uniform(0.3, 1.3, b - a)
        edge = np.minimum(np.arange(b - a), np.arange(b - a)[::-1]) / 15.0
        w = smoothstep(edge)
        uu, vv = wind_vector(direction, speed)
        fields.u[i, a:b] = (1 - w) * fields.u[i, a:b] + w * uu
        fields.v[i, a:b] = (1 - w) * fields.v[i, a:b] + w * vv
        out.append({"station": p.id, "kind": "light_variable_wind", "time": iso(clock.start_epoch + a * 60.0),
                    "duration_min": b - a})
    return out


def is_light(plan: DayPlan) -> bool:
    return max(plan.syn_speed_ms, plan.end_speed_ms) < 1.6 or math.isclose(plan.syn_speed_ms, 0.0)
