"""Background weather of generated scenarios: smooth per-minute fields for every station.

Fields are (stations, minutes) numpy arrays of the *true mean* state, before sensor noise: wind as a
vector (u east, v north, m/s, the way the air moves), temperature, dewpoint, station pressure, rain.
Events (sim_events) change them in place; sim_observe adds noise, faults and quantisation.

Shapes and magnitudes (from memory unless noted): temperature minimum near 06 and maximum near 15
local time, a diurnal range of 5-8 K at the shore and 12-17 K inland; surface wind stronger by day
(mixing) and weaker at night inland (stable layer); semidiurnal pressure tide of ~0.6 hPa with maxima
near 10 and 22 local time; pressure falling with height by ~0.12 hPa per metre (hydrostatic, near sea
level); dewpoint lowered inland in the afternoon by mixing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.signal import lfilter

from .sim_plan import DayPlan
from .sim_setting import Setting, unit

MIN_PER_DAY = 1440


@dataclass
class Clock:
    """Minutes of the scenario: epoch seconds (UTC) and local hour of each minute."""

    start_epoch: int  # local midnight of day 0, as epoch seconds UTC
    minutes: int
    start_local_days: int  # the local date of day 0, as days since 1970-01-01

    @property
    def epoch(self) -> np.ndarray:
        return self.start_epoch + 60 * np.arange(self.minutes, dtype=np.int64)

    @property
    def local_hour(self) -> np.ndarray:
        return (np.arange(self.minutes) % MIN_PER_DAY) / 60.0

    def minute_of(self, day: int, local_hour: float | np.ndarray) -> np.ndarray:
        """Scenario minute (float) of a local hour on a day."""
        return day * MIN_PER_DAY + np.asarray(local_hour, dtype=float) * 60.0

    def day_slice(self, day: int, extra_min: int = 0) -> slice:
        return slice(day * MIN_PER_DAY, min(self.minutes, (day + 1) * MIN_PER_DAY + extra_min))


@dataclass
class Fields:
    u: np.ndarray
    v: np.ndarray
    temp: np.ndarray
    dew: np.ndarray
    pres: np.ndarray
    rain: np.ndarray
    gust_add: np.ndarray  # extra gust above the ordinary gust factor (m/s)
    gustiness: np.ndarray  # multiplier of the ordinary gust excess (1 = ordinary)
    solar: np.ndarray  # (minutes,) 0 at night, 1 near 13 local: drives convective mixing and gusts
    notes: list[dict] = field(default_factory=list)

    @property
    def shape(self) -> tuple[int, int]:
        return self.u.shape  # type: ignore[return-value]


def wind_vector(from_deg: float | np.ndarray, speed: float | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(u, v) of a wind blowing FROM `from_deg` at `speed` (the air moves the other way)."""
    ex, ey = unit(np.asarray(from_deg, dtype=float))
    return -np.asarray(speed) * ex, -np.asarray(speed) * ey


def direction_speed(u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Direction the wind blows FROM (0-360) and speed, from (u, v)."""
    return np.degrees(np.arctan2(-u, -v)) % 360.0, np.hypot(u, v)


def temp_shape(hour: np.ndarray) -> np.ndarray:
    """Diurnal temperature shape, -1 at 06 and +1 at 15 local time (warming 9 h, cooling 15 h)."""
    h = np.asarray(hour) % 24.0
    warm = (h >= 6.0) & (h < 15.0)
    cool_h = np.where(h >= 15.0, h - 15.0, h + 9.0)
    return np.where(warm, -np.cos(np.pi * (h - 6.0) / 9.0), np.cos(np.pi * cool_h / 15.0))


def solar_weight(hour: np.ndarray) -> np.ndarray:
    return np.clip(np.sin(np.pi * (np.asarray(hour) - 6.5) / 13.0), 0.0, None)


def night_blend(start: np.ndarray, end: np.ndarray, hour: np.ndarray, days: np.ndarray) -> np.ndarray:
    """Per-minute value: each day's `start` value, eased in from the previous day's `end` over 00-06."""
    base = start[days]
    prev = np.where(days > 0, end[np.maximum(days - 1, 0)], start[0])
    s = np.clip(hour / 6.0, 0.0, 1.0)
    s = s * s * (3.0 - 2.0 * s)
    return (1.0 - s) * prev + s * base


def ar1(rng: np.random.Generator, shape: tuple[int, int], phi: float) -> np.ndarray:
    """Unit-variance AR(1) noise along the time axis (persistence `phi` per minute)."""
    e = rng.standard_normal(shape)
    return lfilter([np.sqrt(1.0 - phi * phi)], [1.0, -phi], e, axis=1)


def build_background(setting: Setting, plans: list[DayPlan], clock: Clock, rng: np.random.Generator,
                     switch: dict[int, np.ndarray] | None = None) -> Fields:
    """Smooth background fields. `switch[day]` (stations, 1440) in 0..1 moves that day's synoptic wind
    from its start to its end value per station (a cold front); otherwise it turns linearly."""
    n = len(setting.stations)
    T = clock.minutes
    hour = clock.local_hour
    days = np.arange(T) // MIN_PER_DAY
    d = setting.shore_km[:, None]
    elev = setting.elevation[:, None]
    solar = solar_weight(hour)
    night = np.clip(-np.sin(np.pi * (hour - 6.5) / 13.0), 0.0, 1.0)

    # Synoptic wind: per day start/end vectors; eased across the night into the next day.
    su, sv = wind_vector(np.array([p.syn_from_deg for p in plans]), np.array([p.syn_speed_ms for p in plans]))
    eu, ev = wind_vector(np.array([p.end_from_deg for p in plans]), np.array([p.end_speed_ms for p in plans]))
    frac = hour / 24.0
    in_u = np.broadcast_to(su[days] + frac * (eu[days] - su[days]), (n, T)).copy()
    in_v = np.broadcast_to(sv[days] + frac * (ev[days] - sv[days]), (n, T)).copy()
    for day in switch or {}:
        sl = clock.day_slice(day)
        in_u[:, sl], in_v[:, sl] = su[day], sv[day]
    prev_u = np.where(days > 0, eu[np.maximum(days - 1, 0)], su[0])
    prev_v = np.where(days > 0, ev[np.maximum(days - 1, 0)], sv[0])
    s = np.clip(hour / 6.0, 0.0, 1.0)
    s = s * s * (3.0 - 2.0 * s)
    u = (1.0 - s) * prev_u + s * in_u
    v = (1.0 - s) * prev_v + s * in_v
    for day, w in (switch or {}).items():  # a cold front replaces whatever wind it meets
        sl = clock.day_slice(day)
        w = w[:, : sl.stop - sl.start]
        u[:, sl] = (1.0 - w) * u[:, sl] + w * eu[day]
        v[:, sl] = (1.0 - w) * v[:, sl] + w * ev[day]
    # Mixing: stronger surface wind by day, weaker at night away from the sea (stable layer).
    mix = 1.0 + 0.25 * solar - 0.45 * night * (1.0 - np.exp(-d / 6.0))
    u *= mix
    v *= mix

    def series(attr: str) -> np.ndarray:
        vals = np.array([getattr(p, attr) for p in plans])
        return night_blend(vals, vals, hour, days)

    t_mean, amp_s, amp_i = series("t_mean_c"), series("amp_shore_c"), series("amp_inland_c")
    td_mean, p_mean = series("td_mean_c"), series("p_mean_hpa")
    inland = 1.0 - np.exp(-d / 8.0)
    amp = amp_s + (amp_i - amp_s) * inland
    st_off = rng.normal(0.0, 0.4, (n, 1))
    temp = t_mean - 1.0 * (1.0 - inland) - 0.0065 * elev + st_off + amp * temp_shape(hour)
    temp += 0.6 * ar1(rng, (n, T), 0.9995)  # slow air-mass wander, tenths of a degree over hours

    mixdry = rng.uniform(0.5, 2.0, (n, 1))
    dew = td_mean + rng.normal(0.0, 0.5, (n, 1)) - mixdry * solar * (1.0 - np.exp(-d / 10.0))
    dew += 0.5 * ar1(rng, (n, T), 0.998)
    # Keep the air unsaturated: a soft floor of ~1.5 K on the dewpoint depression (fog is not modelled).
    dep = temp - dew
    dew = temp - (1.0 + np.logaddexp(0.0, (dep - 1.0) * 2.0) / 2.0)

    tide = 0.6 * np.cos(2 * np.pi * (hour - 10.0) / 12.0) + 0.3 * np.cos(2 * np.pi * (hour - 7.0) / 24.0)
    pres = p_mean - elev * 0.12 + tide - 0.5 * solar * (1.0 - np.exp(-d / 15.0))
    pres += 0.2 * ar1(rng, (n, T), 0.9995)

    z = np.zeros((n, T))
    return Fields(u=u, v=v, temp=temp, dew=dew, pres=pres, rain=z.copy(), gust_add=z.copy(),
                  gustiness=np.ones((n, T)), solar=solar)
