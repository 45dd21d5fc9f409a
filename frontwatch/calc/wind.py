"""Wind vectors and circular statistics of wind direction.

Conventions (meteorological, as in WMO-No. 8 and MetPy's `wind_components`):
- a direction is the bearing the wind blows FROM, degrees clockwise from true north, in [0, 360);
- u is the eastward and v the northward component of the air's motion, m/s;
- a calm wind (speed 0) has no direction: NaN. NaN directions are skipped by the statistics below,
  except `vector_mean`, where a calm (speed 0, direction NaN) counts as a zero vector.

The plain functions take and return floats (they sit in per-observation hot paths); functions that
summarise a window take any iterable of floats, and numpy arrays go through a vectorised path.
The `*_arr` variants are element-wise numpy versions of the scalar functions.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np
import numpy.typing as npt

NAN = float("nan")
_DEG = math.pi / 180.0
# Yamartino (1984) eq. 2 coefficient: 2/sqrt(3) - 1 = 0.1547...
_YAMARTINO_B = 2.0 / math.sqrt(3.0) - 1.0
# Below this resultant length the mean direction is undefined (opposed unit vectors cancel).
_RESULTANT_EPS = 1e-9

FloatArray = npt.NDArray[np.float64]


def wind_components(speed_ms: float, dir_from_deg: float) -> tuple[float, float]:
    """(u, v) in m/s from speed (m/s) and direction FROM (deg): u = -s sin d, v = -s cos d.

    A wind from the north (d = 0) blows southward: v < 0. Calm (speed 0, any direction incl. NaN)
    gives (0, 0). Same formula as MetPy `wind_components`.
    """
    if speed_ms == 0.0:
        return 0.0, 0.0
    d = dir_from_deg * _DEG
    return -speed_ms * math.sin(d), -speed_ms * math.cos(d)


def wind_direction(u: float, v: float) -> float:
    """Direction the wind blows FROM, degrees in [0, 360), of components (u, v); NaN when calm (0, 0).

    d = atan2(-u, -v) (the inverse of `wind_components`). MetPy's `wind_direction` returns north
    as 360 and calm as 0; here north is 0 and calm is NaN.
    """
    if u == 0.0 and v == 0.0:
        return NAN
    d = math.degrees(math.atan2(-u, -v)) % 360.0
    return 0.0 if d >= 360.0 else d  # -1e-17 % 360 rounds to 360.0


def wind_speed(u: float, v: float) -> float:
    """Speed, m/s, of components (u, v): hypot(u, v)."""
    return math.hypot(u, v)


def wind_components_arr(speed_ms: npt.ArrayLike, dir_from_deg: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Element-wise `wind_components` for arrays; calm (speed 0) gives (0, 0) even with NaN direction."""
    s = np.asarray(speed_ms, dtype=float)
    d = np.radians(np.asarray(dir_from_deg, dtype=float))
    calm = s == 0.0
    u = np.where(calm, 0.0, -s * np.sin(d))
    v = np.where(calm, 0.0, -s * np.cos(d))
    return u, v


def wind_direction_arr(u: npt.ArrayLike, v: npt.ArrayLike) -> FloatArray:
    """Element-wise `wind_direction`: degrees FROM in [0, 360), NaN where u = v = 0."""
    ua = np.asarray(u, dtype=float)
    va = np.asarray(v, dtype=float)
    d = np.degrees(np.arctan2(-ua, -va)) % 360.0
    d = np.where(d >= 360.0, 0.0, d)
    return np.where((ua == 0.0) & (va == 0.0), np.nan, d)


def angle_diff_deg(a: float, b: float) -> float:
    """Signed smallest difference a - b of two bearings, degrees in (-180, 180]; NaN if either is NaN.

    Positive means a is clockwise of b (a veer from b to a).
    """
    d = (a - b) % 360.0
    return d - 360.0 if d > 180.0 else d


def angle_diff_arr(a: npt.ArrayLike, b: npt.ArrayLike) -> FloatArray:
    """Element-wise `angle_diff_deg`."""
    d = (np.asarray(a, dtype=float) - np.asarray(b, dtype=float)) % 360.0
    return np.where(d > 180.0, d - 360.0, d)


def onshore_component(speed_ms: float, dir_from_deg: float, onshore_from_deg: float) -> float:
    """Wind component along the shore normal, m/s: s cos(d - d_onshore); positive = onshore.

    `onshore_from_deg` is the bearing an onshore wind blows FROM (the station's shore normal, from
    water to land, as in the network file). Calm (speed 0) gives 0; a NaN direction at speed gives NaN.
    """
    if speed_ms == 0.0:
        return 0.0
    return speed_ms * math.cos((dir_from_deg - onshore_from_deg) * _DEG)


def in_sector(dir_from_deg: float, centre_deg: float, halfwidth_deg: float) -> bool:
    """True when the direction lies within +-halfwidth of the centre (inclusive); False for NaN."""
    return abs(angle_diff_deg(dir_from_deg, centre_deg)) <= halfwidth_deg


def _unit_sums(dirs: Iterable[float]) -> tuple[float, float, int]:
    """Sums of sin and cos of the finite directions and their count."""
    if isinstance(dirs, np.ndarray):
        r = np.radians(np.asarray(dirs, dtype=float))
        r = r[np.isfinite(r)]
        return float(np.sin(r).sum()), float(np.cos(r).sum()), int(r.size)
    s = c = 0.0
    n = 0
    for d in dirs:
        if math.isfinite(d):
            r = d * _DEG
            s += math.sin(r)
            c += math.cos(r)
            n += 1
    return s, c, n


def circular_mean_deg(dirs: Iterable[float]) -> float:
    """Mean direction of unit vectors, degrees in [0, 360): atan2(mean sin, mean cos).

    NaN directions (calm) are skipped. NaN when nothing is left or the unit vectors cancel
    (resultant length below 1e-9, e.g. {0, 180}), where no mean direction exists. Agrees with
    `scipy.stats.circmean` (high=360) where that is defined.
    """
    s, c, n = _unit_sums(dirs)
    if n == 0 or math.hypot(s, c) < _RESULTANT_EPS * n:
        return NAN
    d = math.degrees(math.atan2(s, c)) % 360.0
    return 0.0 if d >= 360.0 else d


def mean_resultant_length(dirs: Iterable[float]) -> float:
    """Length R in [0, 1] of the mean unit vector of the directions (1 = all alike); NaN if none."""
    s, c, n = _unit_sums(dirs)
    if n == 0:
        return NAN
    return min(1.0, math.hypot(s, c) / n)


def yamartino_sigma_deg(dirs: Iterable[float]) -> float:
    """Standard deviation of wind direction, degrees, by Yamartino's single-pass estimator.

    Yamartino (1984), J. Climate Appl. Meteor. 23:
    eps = sqrt(1 - (Sa^2 + Ca^2)) with Sa, Ca the mean sine and cosine;
    sigma = asin(eps) (1 + (2/sqrt(3) - 1) eps^3).
    Ranges from 0 (all alike) to 103.92 deg (unit vectors cancel). NaN directions are skipped;
    NaN if none is left. Not the same as scipy's `circstd` (sqrt(-2 ln R)), which it approaches
    only for a small spread.
    """
    s, c, n = _unit_sums(dirs)
    if n == 0:
        return NAN
    sa, ca = s / n, c / n
    eps = math.sqrt(max(0.0, 1.0 - (sa * sa + ca * ca)))
    eps = min(eps, 1.0)
    return math.degrees(math.asin(eps) * (1.0 + _YAMARTINO_B * eps**3))


def vector_mean(speeds: Iterable[float], dirs: Iterable[float]) -> tuple[float, float]:
    """Vector-mean wind (speed m/s, direction FROM deg) = the wind of the mean (u, v).

    Pairs are taken in step. A calm (speed 0) counts as a zero vector whatever its direction; a pair
    with a NaN speed, or a NaN direction at non-zero speed, is missing and skipped. Returns
    (NaN, NaN) when nothing is left, and (0.0, NaN) when the mean vector is zero. The vector-mean
    speed is at most the scalar-mean speed (WMO-No. 8 describes both averages).
    """
    if isinstance(speeds, np.ndarray) or isinstance(dirs, np.ndarray):
        s_arr = np.asarray(speeds, dtype=float)
        d_arr = np.asarray(dirs, dtype=float)
        if s_arr.shape != d_arr.shape:
            raise ValueError(f"speeds and dirs differ in shape: {s_arr.shape} vs {d_arr.shape}")
        calm = s_arr == 0.0
        ok = np.isfinite(s_arr) & (calm | np.isfinite(d_arr))
        n = int(ok.sum())
        if n == 0:
            return NAN, NAN
        u_a, v_a = wind_components_arr(s_arr[ok], d_arr[ok])
        um, vm = float(u_a.sum()) / n, float(v_a.sum()) / n
    else:
        su = sv = 0.0
        n = 0
        for s, d in zip(speeds, dirs, strict=True):
            if s != s or (d != d and s != 0.0):
                continue
            u, v = wind_components(s, d)
            su += u
            sv += v
            n += 1
        if n == 0:
            return NAN, NAN
        um, vm = su / n, sv / n
    return math.hypot(um, vm), wind_direction(um, vm)
