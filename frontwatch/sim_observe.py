"""From true fields to what stations report: turbulence and sensor noise, running-mean wind, gusts,
quantisation, sensor faults, and the canonical record table (DESIGN 3.1).

Noise magnitudes at `noise_scale` 1 (from memory; ordinary automatic stations): wind turbulence
0.12 m/s at night and 0.3 m/s by day, plus 12-20 % of the mean speed, minute to minute persistent; temperature 0.06-0.18 K;
dewpoint 0.12 K; pressure 0.03 hPa. Quantisation 0.1 degC, 1 deg, 0.1 m/s, 0.1 hPa, 0.2 mm rain
(tipping bucket). A speed under 0.3 m/s (a cup anemometer's starting threshold, from memory) is
calm: speed 0 and no direction. Faults after Zahumensky (2004): spikes, a stuck vane, dropouts and
gaps, repeated rows, and now and then a row out of order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .sim_events import iso
from .sim_weather import Clock, Fields, ar1, direction_speed

COLUMNS = ["station", "time", "wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c",
           "pressure_hpa", "rain_mm"]
CALM_MS = 0.3


@dataclass
class Reported:
    """(stations, minutes) arrays of reported values; NaN = missing."""

    wdir: np.ndarray
    speed: np.ndarray
    gust: np.ndarray
    temp: np.ndarray
    dew: np.ndarray
    pres: np.ndarray
    rain: np.ndarray
    present: np.ndarray  # bool: the station sent a record that minute


def running_mean(a: np.ndarray, window: int) -> np.ndarray:
    """Trailing running mean along time (shorter window at the start)."""
    c = np.cumsum(a, axis=1)
    out = c.copy()
    out[:, window:] = c[:, window:] - c[:, :-window]
    counts = np.minimum(np.arange(1, a.shape[1] + 1), window)
    return out / counts


def running_max(a: np.ndarray, window: int) -> np.ndarray:
    out = a.copy()
    for k in range(1, window):
        out[:, k:] = np.maximum(out[:, k:], a[:, :-k])
    return out


def observe(fields: Fields, rng: np.random.Generator, noise_scale: float, smeared: np.ndarray,
            no_pressure: np.ndarray, no_rain: np.ndarray, exposure: np.ndarray | None = None,
            turbulence_scale: float | None = None) -> Reported:
    """Add turbulence and sensor noise, smear the wind of `smeared` stations, quantise.

    `noise_scale` scales the sensors' own (white) noise; `turbulence_scale` (default: the same)
    the air's: the wind's turbulence, the minute-to-minute wander of temperature and dewpoint
    (persistent, AR(1)) and the spread of the gusts. `exposure` (per station) scales the wind a
    station sees: below 1 for a sheltered mast.
    """
    f = fields
    shape = f.shape
    s = noise_scale
    a = noise_scale if turbulence_scale is None else turbulence_scale
    solar = f.solar[None, :]
    ex = np.ones((shape[0], 1)) if exposure is None else np.asarray(exposure, dtype=float)[:, None]
    mu, mv = f.u * ex, f.v * ex
    mean_speed = np.hypot(mu, mv)
    sigma = a * (0.12 + 0.18 * solar + (0.12 + 0.08 * solar) * mean_speed)  # quieter at night
    u = mu + sigma * ar1(rng, shape, 0.8)
    v = mv + sigma * ar1(rng, shape, 0.8)
    if a == s:  # one scale: the arithmetic of before, so existing scenarios stay bit for bit the same
        temp = f.temp + s * ((0.06 + 0.12 * solar) * ar1(rng, shape, 0.9) + 0.03 * rng.standard_normal(shape))
        dew = f.dew + s * (0.12 * ar1(rng, shape, 0.9) + 0.05 * rng.standard_normal(shape))
    else:
        temp = f.temp + a * (0.06 + 0.12 * solar) * ar1(rng, shape, 0.9) + s * 0.03 * rng.standard_normal(shape)
        dew = f.dew + a * 0.12 * ar1(rng, shape, 0.9) + s * 0.05 * rng.standard_normal(shape)
    dew = np.minimum(dew, temp - 0.2)
    pres = f.pres + s * 0.03 * rng.standard_normal(shape)

    wdir, speed = direction_speed(u, v)
    spread = np.clip(np.exp(0.2 * a * rng.standard_normal(shape)), 0.5, 2.0)
    excess = f.gustiness * (0.3 + (0.22 + 0.15 * solar) * speed) * spread
    gust = speed + excess + f.gust_add * ex
    if smeared.any():
        su = running_mean(u[smeared], 10)
        sv = running_mean(v[smeared], 10)
        wdir[smeared], speed[smeared] = direction_speed(su, sv)
        gust[smeared] = running_max(gust[smeared], 10)

    speed = np.round(speed, 1)
    calm = speed < CALM_MS
    speed[calm] = 0.0
    wdir = np.round(wdir) % 360.0
    wdir[calm] = np.nan
    gust = np.maximum(np.round(gust, 1), speed)
    cum = np.floor(np.cumsum(np.clip(f.rain, 0, None), axis=1) / 0.2)  # tips of a 0.2 mm bucket
    rain = np.diff(cum, axis=1, prepend=0.0) * 0.2
    pres = np.round(pres, 1)
    pres[no_pressure] = np.nan
    rain = np.round(rain, 1)
    rain[no_rain] = np.nan
    return Reported(wdir, speed, gust, np.round(temp, 1), np.round(dew, 1), pres, rain,
                    np.ones(shape, dtype=bool))


def add_faults(rep: Reported, rng: np.random.Generator, clock: Clock, ids: list[str],
               rate: float = 1.0) -> list[dict[str, Any]]:
    """Spikes, stuck vanes, field dropouts and gaps, in place. Returns one record per fault."""
    n, T = rep.temp.shape
    days = max(1, T // 1440)
    faults: list[dict[str, Any]] = []

    def rec(i: int, kind: str, m0: int, m1: int, **kw: Any) -> None:
        faults.append({"station": ids[i], "kind": kind, "start": iso(clock.start_epoch + m0 * 60),
                       "end": iso(clock.start_epoch + m1 * 60), **kw})

    # Spikes: one-minute outliers.
    for _ in range(int(rng.poisson(rate * n * days * 0.6))):
        i, m = int(rng.integers(n)), int(rng.integers(T))
        field = str(rng.choice(["temp", "dew", "pres", "speed"]))
        arr = getattr(rep, field)
        if np.isnan(arr[i, m]):
            continue
        jump = {"temp": rng.choice([-1, 1]) * rng.uniform(5, 15), "dew": rng.choice([-1, 1]) * rng.uniform(6, 15),
                "pres": rng.choice([-1, 1]) * rng.uniform(4, 12), "speed": rng.uniform(12, 25)}[field]
        arr[i, m] = round(arr[i, m] + jump, 1)
        if field == "speed":
            rep.gust[i, m] = max(rep.gust[i, m], arr[i, m])
        rec(i, f"spike_{field}", m, m + 1, delta=round(float(jump), 1))
    # Stuck vane: direction frozen for hours while the speed goes on.
    for i in range(n):
        if rng.random() < rate * 0.06 * days:
            m0 = int(rng.integers(T))
            m1 = min(T, m0 + int(rng.uniform(120, 480)))
            held = rep.wdir[i, m0] if not np.isnan(rep.wdir[i, m0]) else float(rng.integers(360))
            rep.wdir[i, m0:m1] = np.where(rep.speed[i, m0:m1] > 0, held, np.nan)
            rec(i, "stuck_vane", m0, m1, held_deg=float(held))
    # Dropouts of one field, and gaps (no record at all).
    names = {"temp": "temp_c", "dew": "dewpoint_c", "pres": "pressure_hpa", "speed": "wind_speed_ms"}
    for i in range(n):
        for _ in range(int(rng.poisson(rate * 0.1 * days))):
            field = str(rng.choice(list(names)))
            m0 = int(rng.integers(T))
            m1 = min(T, m0 + int(rng.uniform(10, 120)))
            getattr(rep, field)[i, m0:m1] = np.nan
            if field == "speed":
                rep.wdir[i, m0:m1] = np.nan
                rep.gust[i, m0:m1] = np.nan
            rec(i, "dropout", m0, m1, field=names[field])
        for _ in range(int(rng.poisson(rate * 0.12 * days))):
            m0 = int(rng.integers(T))
            m1 = min(T, m0 + int(rng.uniform(5, 150)))
            rep.present[i, m0:m1] = False
            rec(i, "gap", m0, m1)
    return faults


def to_table(rep: Reported, clock: Clock, ids: list[str], rng: np.random.Generator, rate: float,
             faults: list[dict[str, Any]]) -> pd.DataFrame:
    """Rows in arrival order (time, then station), with repeated rows and late rows mixed in."""
    n, T = rep.temp.shape
    times = np.datetime_as_string(clock.epoch.astype("datetime64[s]"), unit="s")
    times = np.char.add(times, "Z").astype(object)
    present = rep.present.T.ravel()
    key = np.arange(n * T, dtype=float)  # file order: minute-major
    key = key[present]
    sidx = np.tile(np.arange(n), T)[present]
    tidx = np.repeat(np.arange(T), n)[present]
    rows = len(key)
    if rate > 0 and rows:
        dup = rng.random(rows) < rate * 3e-4
        late = rng.random(rows) < rate * 1e-4
        key = key + late * n * rng.uniform(2, 10, rows)  # delivered 2-10 minutes late
        for j in np.flatnonzero(dup):
            faults.append({"station": ids[sidx[j]], "kind": "repeated_row", "start": times[tidx[j]],
                           "end": times[tidx[j]]})
        for j in np.flatnonzero(late):
            faults.append({"station": ids[sidx[j]], "kind": "late_row", "start": times[tidx[j]],
                           "end": times[tidx[j]]})
        rep_idx = np.flatnonzero(dup)
        key = np.r_[key, key[rep_idx] + 0.5]
        sidx = np.r_[sidx, sidx[rep_idx]]
        tidx = np.r_[tidx, tidx[rep_idx]]
    order = np.argsort(key, kind="stable")
    sidx, tidx = sidx[order], tidx[order]

    def col(a: np.ndarray) -> np.ndarray:
        return a[sidx, tidx]

    wdir = col(rep.wdir)
    return pd.DataFrame({
        "station": np.asarray(ids, dtype=object)[sidx],
        "time": times[tidx],
        "wind_dir_deg": pd.arrays.IntegerArray(np.where(np.isnan(wdir), 0, wdir).astype(np.int64), np.isnan(wdir)),
        "wind_speed_ms": col(rep.speed), "wind_gust_ms": col(rep.gust), "temp_c": col(rep.temp),
        "dewpoint_c": col(rep.dew), "pressure_hpa": col(rep.pres), "rain_mm": col(rep.rain),
    }, columns=COLUMNS)
