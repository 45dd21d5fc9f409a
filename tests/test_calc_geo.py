"""frontwatch.calc.geo against pyproj's geodesic on a sphere of the same radius (pyproj comes with MetPy)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from frontwatch.calc.geo import (
    EARTH_RADIUS_M,
    haversine_m,
    initial_bearing_deg,
    latlon_from_xy,
    local_xy_arr,
    local_xy_m,
    wrap_lon_deg,
)
from frontwatch.calc.wind import angle_diff_deg

pyproj = pytest.importorskip("pyproj")
SPHERE = pyproj.Geod(a=EARTH_RADIUS_M, b=EARTH_RADIUS_M)

lats = st.floats(-85.0, 85.0)
lons = st.floats(-180.0, 180.0)
near = st.floats(-0.45, 0.45)  # about +-50 km in latitude: the scale of a station network


def test_one_degree_of_latitude() -> None:
    # Arc of 1 deg on the IUGG mean sphere: pi R / 180 = 111.195 km (also pyproj's value).
    assert haversine_m(0.0, 0.0, 1.0, 0.0) == pytest.approx(111_195.08, abs=0.01)
    assert SPHERE.inv(0.0, 0.0, 0.0, 1.0)[2] == pytest.approx(111_195.08, abs=0.01)


@settings(max_examples=200, deadline=None)
@given(lat1=lats, lon1=lons, lat2=lats, lon2=lons)
def test_haversine_matches_pyproj_sphere(lat1: float, lon1: float, lat2: float, lon2: float) -> None:
    _, _, ref = SPHERE.inv(lon1, lat1, lon2, lat2)
    assert haversine_m(lat1, lon1, lat2, lon2) == pytest.approx(ref, rel=1e-9, abs=1.0)


@settings(max_examples=200, deadline=None)
@given(lat1=lats, lon1=lons, dlat=near, dlon=near)
def test_bearing_matches_pyproj_forward_azimuth(lat1: float, lon1: float, dlat: float, dlon: float) -> None:
    lat2, lon2 = lat1 + dlat, wrap_lon_deg(lon1 + dlon)
    assume(abs(dlat) > 1e-6 or abs(dlon) > 1e-6)
    az, _, _ = SPHERE.inv(lon1, lat1, lon2, lat2)
    b = initial_bearing_deg(lat1, lon1, lat2, lon2)
    assert 0.0 <= b < 360.0
    assert abs(angle_diff_deg(b, az)) < 1e-6


def test_bearing_values() -> None:
    assert initial_bearing_deg(0.0, 0.0, 1.0, 0.0) == pytest.approx(0.0)
    assert initial_bearing_deg(0.0, 0.0, 0.0, 1.0) == pytest.approx(90.0)
    assert initial_bearing_deg(0.0, 179.5, 0.0, -179.5) == pytest.approx(90.0)  # across the date line
    assert math.isnan(initial_bearing_deg(10.0, 20.0, 10.0, 20.0))


@settings(max_examples=200, deadline=None)
@given(lat0=st.floats(-60.0, 60.0), lon0=lons, dlat=near, dlon=near)
def test_local_plane_distance_error_is_bounded(lat0: float, lon0: float, dlat: float, dlon: float) -> None:
    # The documented error of the equirectangular plane (geo.py): relative error about
    # |dlat| tan|lat0| (radians) from using cos(lat0) for the whole network, plus O((d/R)^2).
    lat, lon = lat0 + dlat, wrap_lon_deg(lon0 + dlon)
    x, y = local_xy_m(lat, lon, lat0, lon0)
    _, _, ref = SPHERE.inv(lon0, lat0, lon, lat)
    assume(ref > 10.0)
    bound = 0.6 * abs(math.radians(dlat)) * math.tan(math.radians(abs(lat0))) + 1e-4
    assert abs(math.hypot(x, y) - ref) / ref <= bound


def test_documented_error_figure() -> None:
    # geo.py says: about 0.4 % for an east-west length 25 km north of a reference point at 45 deg.
    lat0, lon0 = 45.0, 10.0
    dlat = math.degrees(25_000.0 / EARTH_RADIUS_M)
    xa, _ = local_xy_m(lat0 + dlat, lon0, lat0, lon0)
    xb, _ = local_xy_m(lat0 + dlat, lon0 + 0.2, lat0, lon0)
    _, _, ref = SPHERE.inv(lon0, lat0 + dlat, lon0 + 0.2, lat0 + dlat)
    err = abs((xb - xa) - ref) / ref
    assert 0.003 < err < 0.005


@given(lat0=st.floats(-70.0, 70.0), lon0=lons, dlat=near, dlon=near)
def test_local_xy_round_trip(lat0: float, lon0: float, dlat: float, dlon: float) -> None:
    lat, lon = lat0 + dlat, wrap_lon_deg(lon0 + dlon)
    x, y = local_xy_m(lat, lon, lat0, lon0)
    lat_b, lon_b = latlon_from_xy(x, y, lat0, lon0)
    assert lat_b == pytest.approx(lat, abs=1e-9)
    assert abs(wrap_lon_deg(lon_b - lon)) < 1e-9


def test_local_xy_axes_and_date_line() -> None:
    x, y = local_xy_m(0.0, 0.1, 0.0, 0.0)
    assert x == pytest.approx(11_119.5, abs=0.1) and y == 0.0
    x, y = local_xy_m(0.1, 0.0, 0.0, 0.0)
    assert x == 0.0 and y == pytest.approx(11_119.5, abs=0.1)
    x, _ = local_xy_m(0.0, 179.9, 0.0, -179.9)
    assert x == pytest.approx(-22_239.0, abs=0.1)


def test_local_xy_arr_matches_scalar() -> None:
    rng = np.random.default_rng(3)
    la = rng.uniform(-40.0, -39.0, 50)
    lo = rng.uniform(179.5, 180.5, 50)
    xa, ya = local_xy_arr(la, lo, -39.5, 180.0)
    for i in range(50):
        x, y = local_xy_m(float(la[i]), float(lo[i]), -39.5, 180.0)
        assert xa[i] == pytest.approx(x, abs=1e-6)
        assert ya[i] == pytest.approx(y, abs=1e-6)
