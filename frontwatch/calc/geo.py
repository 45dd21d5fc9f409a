"""Station geometry on a spherical Earth: great-circle distance, bearing, and a local flat x/y plane.

Distances over a station network (tens of km) are small against the Earth's radius, so the tracker
works on a local tangent plane: the equirectangular projection about a reference point,
x = R cos(lat0) dlon, y = R dlat (radians). East-west lengths are off by a relative error of about
|lat - lat0| tan(lat0) (radians): about 0.4 % 25 km north or south of a reference point at 45 deg,
which is small against the scatter of front timing; tests/test_calc_geo.py measures it.
Angles in degrees, lengths in metres.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

EARTH_RADIUS_M = 6_371_008.8  # mean Earth radius R1 (IUGG; Moritz 2000, Geodetic Reference System 1980)
_DEG = math.pi / 180.0

FloatArray = npt.NDArray[np.float64]


def wrap_lon_deg(dlon: float) -> float:
    """A longitude difference folded into [-180, 180) (so neighbours across the date line stay close)."""
    return (dlon + 180.0) % 360.0 - 180.0


def local_xy_m(lat: float, lon: float, lat0: float, lon0: float) -> tuple[float, float]:
    """(x east, y north), metres, of (lat, lon) on the equirectangular plane about (lat0, lon0)."""
    x = EARTH_RADIUS_M * math.cos(lat0 * _DEG) * wrap_lon_deg(lon - lon0) * _DEG
    y = EARTH_RADIUS_M * (lat - lat0) * _DEG
    return x, y


def local_xy_arr(
    lat: npt.ArrayLike, lon: npt.ArrayLike, lat0: float, lon0: float
) -> tuple[FloatArray, FloatArray]:
    """Element-wise `local_xy_m` for arrays of latitudes and longitudes."""
    la = np.asarray(lat, dtype=float)
    dlon = (np.asarray(lon, dtype=float) - lon0 + 180.0) % 360.0 - 180.0
    x = EARTH_RADIUS_M * math.cos(lat0 * _DEG) * np.radians(dlon)
    y = EARTH_RADIUS_M * np.radians(la - lat0)
    return x, y


def latlon_from_xy(x_m: float, y_m: float, lat0: float, lon0: float) -> tuple[float, float]:
    """The inverse of `local_xy_m`: (lat, lon) in degrees of a point on the plane about (lat0, lon0)."""
    lat = lat0 + math.degrees(y_m / EARTH_RADIUS_M)
    lon = lon0 + math.degrees(x_m / (EARTH_RADIUS_M * math.cos(lat0 * _DEG)))
    return lat, wrap_lon_deg(lon)


def haversine_m(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Great-circle distance on a sphere of radius EARTH_RADIUS_M, metres (haversine formula;
    Sinnott 1984, Sky and Telescope 68, 'Virtues of the haversine')."""
    p1 = lat1 * _DEG
    p2 = lat2 * _DEG
    a = math.sin((p2 - p1) / 2.0) ** 2 + math.cos(p1) * math.cos(p2) * math.sin((lon2 - lon1) * _DEG / 2.0) ** 2
    return 2.0 * EARTH_RADIUS_M * math.asin(min(1.0, math.sqrt(a)))


def initial_bearing_deg(lat1: float, lon1: float, lat2: float, lon2: float) -> float:
    """Initial great-circle bearing from point 1 to point 2, degrees clockwise from north in [0, 360).

    A bearing TO (not a wind direction FROM). NaN for coincident points.
    """
    if lat1 == lat2 and wrap_lon_deg(lon2 - lon1) == 0.0:
        return float("nan")
    p1 = lat1 * _DEG
    p2 = lat2 * _DEG
    dl = (lon2 - lon1) * _DEG
    y = math.sin(dl) * math.cos(p2)
    x = math.cos(p1) * math.sin(p2) - math.sin(p1) * math.cos(p2) * math.cos(dl)
    b = math.degrees(math.atan2(y, x)) % 360.0
    return 0.0 if b >= 360.0 else b
