"""Breeze events of generated scenarios: the sea-breeze front by day and the land breeze at night.

The front forms at the shore late morning and moves inland as a density current, U = k sqrt(g' h),
g' = g dtheta/theta (Benjamin 1968; Simpson & Britter 1980), slowed by an opposing large-scale wind
by about 0.6 V (Simpson & Britter 1980), and speeding up through the day from under 3 to over
6 m/s (Linacre & Geerts 1997). k = 0.7-1 and the ranges of dtheta and depth are from memory
(DOMAIN.md). At passage the wind turns onshore and often freshens, temperature drops against the
day's trend and dewpoint rises (Miller et al. 2003; Linacre & Geerts 1997), pressure rises a little
(about 1 hPa or less); all weaken inland. The onshore wind then veers slowly (backs in the south),
common practice. The land breeze is night-time, offshore and weak (Ahrens).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .sim_plan import DayPlan
from .sim_setting import Setting, unit
from .sim_weather import Clock, Fields, wind_vector

G = 9.80665  # standard gravity, m/s2
THETA = 300.0  # K, reference potential temperature


def smoothstep(x: np.ndarray) -> np.ndarray:
    x = np.clip(x, 0.0, 1.0)
    return x * x * (3.0 - 2.0 * x)


def iso(epoch: float) -> str:
    from .timeutil import iso_z

    return iso_z(round(epoch))


@dataclass
class FrontTrack:
    """Where the front line is: distance travelled (km) at each scenario minute from formation."""

    minute: np.ndarray
    distance_km: np.ndarray
    speed_ms: np.ndarray

    def arrival(self, dist_km: np.ndarray) -> np.ndarray:
        """Fractional scenario minute at which the front reaches each distance; NaN if never."""
        reach = dist_km <= self.distance_km[-1] - 1e-6
        out = np.full(dist_km.shape, np.nan)
        out[reach] = np.interp(dist_km[reach], self.distance_km, self.minute)
        return out


def front_distance(setting: Setting, shore_km: np.ndarray, along_km: np.ndarray, dev_deg: float) -> np.ndarray:
    """Distance (km) the front travels from its formation line to reach each place.

    The line moves along the shore normal turned by `dev_deg`, so it forms progressively along the
    coast: the shore point at one end of the network's stretch of coast first.
    """
    s = math.sin(math.radians(dev_deg))
    a_ref = setting.along_span_km[0] if s > 0 else setting.along_span_km[1]
    return shore_km * math.cos(math.radians(dev_deg)) + (along_km - a_ref) * s


def _track(m0: float, m_end: float, early: float, late: float,
           acc_h: float, stall_km: float | None) -> FrontTrack:
    minutes = np.arange(math.floor(m0), math.ceil(m_end) + 1, dtype=float)
    minutes[0] = m0
    tau_h = (minutes - m0) / 60.0
    speed = early + (late - early) * np.clip(tau_h / acc_h, 0.0, 1.0)
    dt = np.diff(minutes, prepend=m0) * 60.0
    if stall_km is None:
        dist = np.cumsum(speed * dt) / 1000.0
    else:  # decelerates over the last ~2 km and stops short of stall_km
        dist = np.empty_like(speed)
        s = 0.0
        for i in range(len(speed)):
            f = min(1.0, max(0.0, (stall_km - s) / 2.0))
            speed[i] *= f
            s += speed[i] * dt[i] / 1000.0
            dist[i] = s
    return FrontTrack(minutes, dist, speed)


def breeze_front(fields: Fields, setting: Setting, plan: DayPlan, clock: Clock, rng: np.random.Generator,
                 weak_inland: bool, front_id: str) -> tuple[list[dict[str, Any]], dict[str, Any], list[dict[str, Any]]]:
    """Apply one day's breeze front to the fields; return (labels, front description, breeze ends)."""
    south = setting.hemisphere == "south"
    B = setting.inland_bearing_deg
    # Heading = shore normal turned by up to 20 deg; on a long coast less, so that the line forms
    # along the whole stretch within ~10 km of travel (about an hour), as heating is near-uniform.
    span = setting.along_span_km[1] - setting.along_span_km[0]
    dev_max = min(20.0, math.degrees(math.asin(min(1.0, 10.0 / span))))
    dev = float(np.clip(rng.normal(0.0, 8.0), -dev_max, dev_max))
    heading = (B + dev) % 360.0
    d_st, a_st = setting.shore_km, setting.along_km
    dist = front_distance(setting, d_st, a_st, dev)
    site_d = np.array([s.shore_km for s in setting.sites])
    site_a = np.array([s.along_km for s in setting.sites])
    site_dist = front_distance(setting, site_d, site_a, dev)
    # The line is not straight: lobes and clefts of up to ~1 km along it (from memory), so arrival
    # order follows the distance along the heading only to within the lobe size.
    lobe_km, lobe_len = float(rng.uniform(0.0, 1.0)), float(rng.uniform(8.0, 20.0))
    phase = float(rng.uniform(0.0, 2 * math.pi))
    dist = np.maximum(0.0, dist + lobe_km * np.sin(2 * math.pi * a_st / lobe_len + phase))
    site_dist = np.maximum(0.0, site_dist + lobe_km * np.sin(2 * math.pi * site_a / lobe_len + phase))

    # Opposing component of the large-scale wind (an offshore wind blows FROM the inland bearing).
    syn_dir = math.radians((plan.syn_from_deg + plan.end_from_deg) / 2.0 - B)
    v_opp = max(0.0, (plan.syn_speed_ms + plan.end_speed_ms) / 2.0 * math.cos(syn_dir))
    dtheta, depth, k = rng.uniform(1.0, 3.0), rng.uniform(200.0, 600.0), rng.uniform(0.7, 1.0)
    u_dc = k * math.sqrt(G * dtheta / THETA * depth)
    late = float(np.clip(u_dc - 0.6 * v_opp, 1.0, 6.0))
    early = float(max(0.6, late * rng.uniform(0.35, 0.6)))
    acc_h = float(rng.uniform(2.5, 4.0))
    h0 = float(np.clip(rng.uniform(10.0, 12.0) + 0.08 * v_opp, 9.5, 13.0))
    h_dissolve = float(rng.uniform(17.5, 19.0))
    m0 = float(clock.minute_of(plan.index, h0))
    m_dissolve = float(clock.minute_of(plan.index, h_dissolve))
    stall_km = None
    if plan.kind == "breeze_stall" and len(dist) > 1:
        stall_km = float(rng.uniform(0.35, 0.75) * dist.max())
    track = _track(m0, m_dissolve, early, late, acc_h, stall_km)
    arr = track.arrival(dist)
    site_arr = track.arrival(site_dist)

    # Per-station passage signature, weaker inland.
    L = rng.uniform(6.0, 12.0) if weak_inland else rng.uniform(25.0, 45.0)
    decay = np.exp(-d_st / L)
    n = len(d_st)
    floor = 0.2 if weak_inland else 0.5  # DOMAIN.md: drops and rises of 0.5-3 degC at passage
    dT = np.maximum(floor, rng.uniform(1.0, 3.0) * (0.25 + 0.75 * decay))
    dTd = np.maximum(floor, rng.uniform(1.0, 3.0) * (0.3 + 0.7 * decay))
    dp = rng.uniform(0.0, 0.8, n) * (0.4 + 0.6 * decay)
    vb = rng.uniform(2.5, 5.0) * (0.55 + 0.45 * decay)
    tau = rng.uniform(2.0, 10.0, n)
    off = np.clip(rng.normal(0.0, 6.0, n), -12.0, 12.0)
    veer = rng.uniform(4.0, 10.0) * (-1.0 if south else 1.0)  # deg per hour
    m_decay = m_dissolve + rng.uniform(45.0, 90.0)
    decay_len = rng.uniform(60.0, 120.0)

    sl = clock.day_slice(plan.index)
    m = np.arange(sl.start, sl.stop, dtype=float)[None, :]
    hit = ~np.isnan(arr)
    ma = np.where(hit, arr, np.inf)[:, None]
    w_on = smoothstep((m - ma) / tau[:, None])
    w = w_on * (1.0 - smoothstep((m - m_decay) / decay_len))
    onshore = setting.onshore_from[:, None]
    # Veering (backing) mostly after the station's own onset, a little with the circulation's age.
    age_h = (0.3 * (m - m0) + 0.7 * np.clip(m - ma, 0.0, None)) / 60.0
    direction = onshore + off[:, None] + np.clip(veer * age_h, -30.0, 30.0)
    # The breeze freshens over the first ~1.5 h behind its front.
    # The breeze freshens over the first ~1.5 h behind its front; the head of the current brings a
    # short surge (Simpson & Britter 1980 describe the raised head; its size here is from memory).
    head = (rng.uniform(0.0, 1.5, n) * (0.4 + 0.6 * decay))[:, None]
    head_len = rng.uniform(5.0, 15.0, n)[:, None]
    surge = head * smoothstep((m - ma) / tau[:, None]) * (1.0 - smoothstep((m - ma - tau[:, None]) / head_len))
    ub, vb_ = wind_vector(direction, vb[:, None] * (0.75 + 0.25 * smoothstep((m - ma) / 90.0)) + surge)
    f = fields
    # Behind the front the marine layer keeps a little of the alongshore large-scale wind only.
    ax, ay = unit(onshore + 90.0)
    along = 0.15 * (f.u[:, sl] * ax + f.v[:, sl] * ay)
    f.u[:, sl] = f.u[:, sl] * (1.0 - w) + w * (ub + along * ax)
    f.v[:, sl] = f.v[:, sl] * (1.0 - w) + w * (vb_ + along * ay)
    f.gustiness[:, sl] *= 1.0 - 0.3 * w  # marine air is more stable: less gusty
    idx = np.clip(np.where(hit, arr, sl.start) - sl.start, 0, sl.stop - sl.start - 1).astype(int)
    t_at = f.temp[np.arange(n), sl.start + idx][:, None]
    tb = f.temp[:, sl]
    # Marine air: cooler by dT at passage, then warming at only a quarter of the inland rate.
    # The marine air stays when the breeze dies in the evening: its coolness fades only as the land
    # cools below it, and its moisture over a few hours.
    diff = np.minimum(0.0, -dT[:, None] - 0.75 * (tb - t_at))
    # Temperature and moisture follow the wind shift by 0-4 min (sensor response and mixing).
    lag_t = rng.uniform(0.0, 4.0, n)[:, None]
    lag_d = rng.uniform(0.0, 4.0, n)[:, None]
    w_t = smoothstep((m - ma - lag_t) / tau[:, None])
    w_d = smoothstep((m - ma - lag_d) / tau[:, None])
    f.temp[:, sl] = tb + w_t * diff
    f.dew[:, sl] += w_d * (1.0 - smoothstep((m - m_decay) / 240.0)) * dTd[:, None]
    f.pres[:, sl] += w * dp[:, None]

    labels = []
    for i in np.flatnonzero(hit):
        # The passage is timed at the middle of the wind's transition, where it changes fastest: how
        # a passage is read off a station trace (common practice). fronts.jsonl keeps the leading edge.
        labels.append({"station": setting.stations[i].id, "kind": "breeze_front",
                       "time": iso(clock.start_epoch + (arr[i] + 0.5 * tau[i]) * 60.0), "front": front_id,
                       "transition_min": round(float(tau[i]), 1),
                       "change": {"temp_c": round(-float(dT[i]), 2), "dewpoint_c": round(float(dTd[i]), 2),
                                  "pressure_hpa": round(float(dp[i]), 2), "speed_after_ms": round(float(vb[i]), 2)}})
    # The breeze dying in the evening (the large-scale wind returns) is a real wind shift but no
    # passage: kept as a nuisance record, not a label.
    ends = [{"station": setting.stations[i].id, "kind": "breeze_end", "front": front_id,
             "time": iso(clock.start_epoch + m_decay * 60.0), "duration_min": round(float(decay_len), 1)}
            for i in np.flatnonzero(hit)]
    a_ref = setting.along_span_km[0] if math.sin(math.radians(dev)) > 0 else setting.along_span_km[1]
    ox, oy = _shore_point(setting, a_ref)
    olat, olon = setting.latlon(ox, oy)
    sel = np.unique(np.r_[np.arange(0, len(track.minute), 10), len(track.minute) - 1])
    t_stall = None
    if stall_km is not None:
        stopped = np.flatnonzero(track.speed_ms < 0.1)
        if len(stopped):
            t_stall = iso(clock.start_epoch + track.minute[stopped[0]] * 60.0)
    front = {
        "id": front_id, "date": _local_date(clock, plan.index), "kind": "sea_breeze",
        "origin_time": iso(clock.start_epoch + m0 * 60.0),
        "origin": {"lat": round(olat, 5), "lon": round(olon, 5)},
        "heading_deg": round(heading, 1),
        "geometry": "straight line moving along heading_deg" if setting.shore == "straight"
        else "ring spreading out from the bay; heading_deg is the bay axis turned by the deviation",
        "speed_model": {
            "formula": "speed = early + (late - early) * min(1, hours_since_origin / accel_hours); "
                       "late = clip(k*sqrt(g*dtheta/theta*depth) - 0.6*opposing_wind, 1, 6)",
            "early_ms": round(early, 6), "late_ms": round(late, 6), "accel_hours": round(acc_h, 6),
            "k": round(float(k), 6), "dtheta_k": round(float(dtheta), 6), "depth_m": round(float(depth), 4),
            "density_current_ms": round(u_dc, 6), "opposing_wind_ms": round(v_opp, 6)},
        "track": [{"time": iso(clock.start_epoch + track.minute[j] * 60.0),
                   "distance_km": round(float(track.distance_km[j]), 3),
                   "speed_ms": round(float(track.speed_ms[j]), 3)} for j in sel],
        "stall_km": None if stall_km is None else round(stall_km, 3), "stall_time": t_stall,
        "dissolved_time": iso(clock.start_epoch + m_dissolve * 60.0),
        "inland_decay_km": round(float(L), 2),
        "lobes": {"amplitude_km": round(lobe_km, 3), "wavelength_km": round(lobe_len, 3),
                  "note": "station_distance_km includes them; a straight line along heading_deg is off by "
                          "up to amplitude_km"},
        "station_distance_km": {p.id: round(float(x), 3) for p, x in zip(setting.stations, dist, strict=True)},
        "station_arrivals": {p.id: (None if np.isnan(x) else iso(clock.start_epoch + x * 60.0))
                             for p, x in zip(setting.stations, arr, strict=True)},
        "site_arrivals": {s.id: (None if np.isnan(x) else iso(clock.start_epoch + x * 60.0))
                          for s, x in zip(setting.sites, site_arr, strict=True)},
        "breeze_end_time": iso(clock.start_epoch + m_decay * 60.0),
    }
    return labels, front, ends


def _shore_point(setting: Setting, along: float) -> tuple[float, float]:
    if setting.shore == "straight":
        tx, ty = unit(setting.inland_bearing_deg + 90.0)
        return float(along * tx), float(along * ty)
    ux, uy = unit(setting.inland_bearing_deg + math.degrees(along / setting.bay_radius_km))
    return float(setting.bay_radius_km * ux), float(setting.bay_radius_km * uy)


def _local_date(clock: Clock, day: int) -> str:
    from datetime import UTC, datetime, timedelta

    # start_epoch is local midnight; shift by whole days and read the date of that local midnight.
    return (datetime.fromtimestamp(0, UTC) + timedelta(days=clock.start_local_days + day)).strftime("%Y-%m-%d")


def land_breeze(fields: Fields, setting: Setting, plan: DayPlan, clock: Clock,
                rng: np.random.Generator, end_before: float | None = None) -> list[dict[str, Any]]:
    """The night after `plan`'s day: an offshore drift near the coast. Labels at onset per station.

    `end_before` (scenario minute) ends it early, e.g. ahead of a cold front the next day."""
    d = setting.shore_km
    reach = rng.uniform(8.0, 18.0)
    on = d < reach
    on[int(np.argmin(d))] = True
    base_h = rng.uniform(21.0, 23.5)
    n = len(d)
    onset = clock.minute_of(plan.index, base_h + (d / reach) * rng.uniform(0.0, 1.5) + rng.normal(0, 0.25, n))
    end = float(clock.minute_of(plan.index + 1, rng.uniform(7.5, 9.0)))
    if end_before is not None:
        end = min(end, end_before - 60.0)
    on &= onset < end - 60.0
    start_m = int(onset.min() - 200)
    stop_m = min(clock.minutes, int(end + 90))
    if start_m >= clock.minutes or not on.any():
        return []
    sl = slice(max(0, start_m), stop_m)
    m = np.arange(sl.start, sl.stop, dtype=float)[None, :]
    tau = rng.uniform(10.0, 30.0, n)
    speed = rng.uniform(1.0, 2.5, n) * (1.0 - 0.5 * np.clip(d / reach, 0, 1))
    direction = setting.onshore_from + 180.0 + rng.normal(0.0, 15.0, n)
    ul, vl = wind_vector(direction, speed)
    w = smoothstep((m - onset[:, None]) / tau[:, None]) * (1.0 - smoothstep((m - end) / 60.0))
    w *= on[:, None]
    # A quiet evening ahead of it: the large-scale wind is light, so the drift is the change.
    quiet = smoothstep((m - (onset[:, None] - 180.0)) / 60.0) * (1.0 - smoothstep((m - end) / 60.0))
    quiet *= on[:, None]
    f = fields
    for arr_, add in ((f.u, ul), (f.v, vl)):
        base = arr_[:, sl] * (1.0 - 0.75 * quiet)
        arr_[:, sl] = base * (1.0 - w) + w * add[:, None]
    f.dew[:, sl] -= w * rng.uniform(0.2, 1.0, n)[:, None]  # drier land air (from memory)
    labels = []
    for i in np.flatnonzero(on & (onset < clock.minutes)):
        labels.append({"station": setting.stations[i].id, "kind": "land_breeze",
                       "time": iso(clock.start_epoch + (onset[i] + 0.5 * tau[i]) * 60.0),
                       "transition_min": round(float(tau[i]), 1)})
    return labels


__all__ = ["FrontTrack", "breeze_front", "front_distance", "land_breeze", "smoothstep"]
