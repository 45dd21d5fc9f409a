"""frontwatch.calc.pressure against the textbook worked values (DOMAIN.md section 1) and scipy."""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest
import scipy.linalg
from hypothesis import example, given, settings
from hypothesis import strategies as st

from frontwatch.calc.geo import latlon_from_xy, local_xy_arr
from frontwatch.calc.pressure import (
    bjerknes_circulation_tendency,
    circulation_mean_acceleration,
    pressure_gradient_acceleration,
)
from frontwatch.calc.wind import angle_diff_deg

LAT0, LON0 = -33.7, 151.3  # an arbitrary mid-latitude reference point


def _stations(
    xy_km: list[tuple[float, float]], p_of_xy: Callable[[float, float], float]
) -> list[tuple[float, float, float]]:
    """Stations at given plane positions (km) about (LAT0, LON0), pressure from a function of x, y (m)."""
    out = []
    for xk, yk in xy_km:
        lat, lon = latlon_from_xy(xk * 1000.0, yk * 1000.0, LAT0, LON0)
        out.append((lat, lon, p_of_xy(xk * 1000.0, yk * 1000.0)))
    return out


SQUARE = [(-50.0, -50.0), (50.0, -50.0), (50.0, 50.0), (-50.0, 50.0)]  # centroid = reference point


def test_holton_worked_value() -> None:
    # Holton, An Introduction to Dynamic Meteorology (DOMAIN.md section 1): 1 hPa per 100 km at
    # rho = 1.2 kg/m3 gives 8.3e-4 m/s2. Pressure falling eastward: the force points east (90 deg).
    pts = _stations(SQUARE, lambda x, y: 1010.0 - x / 100_000.0)
    g = pressure_gradient_acceleration(pts)
    assert g.accel_ms2 == pytest.approx(8.3e-4, abs=5e-6)
    assert g.magnitude_pa_m == pytest.approx(1e-3, rel=1e-9)
    assert g.toward_low_deg == pytest.approx(90.0)
    assert g.ax_ms2 == pytest.approx(8.333e-4, rel=1e-3) and abs(g.ay_ms2) < 1e-12
    assert g.p_centroid_hpa == pytest.approx(1010.0)
    assert g.rms_residual_hpa == pytest.approx(0.0, abs=1e-9)
    assert g.n_stations == 4
    # -(1/rho) grad p scales inversely with rho.
    assert pressure_gradient_acceleration(pts, rho=1.0).accel_ms2 == pytest.approx(1e-3, rel=1e-9)


ROUNDING_PA_M = 1e-13


@settings(max_examples=100, deadline=None)
@given(bearing=st.floats(0.0, 359.9), grad_hpa_100km=st.floats(0.05, 5.0),
       jitter=st.lists(st.tuples(st.floats(-20, 20), st.floats(-20, 20)), min_size=3, max_size=3))
# a case that found the old absolute tolerance (1e-15) below the fit's rounding: a zero east slope
# came back as 1.007e-15 Pa/m
@example(bearing=0.0, grad_hpa_100km=0.4321951707478561, jitter=[(0.0, 0.0), (-10.0, 17.0), (0.0, 4.1875)])
def test_recovers_a_planar_field_in_any_direction(bearing: float, grad_hpa_100km: float,
                                                  jitter: list[tuple[float, float]]) -> None:
    # A plane whose pressure falls towards `bearing`: the fit returns it exactly, in any orientation.
    gx = grad_hpa_100km / 100_000.0 * math.sin(math.radians(bearing))
    gy = grad_hpa_100km / 100_000.0 * math.cos(math.radians(bearing))
    xy = [(sx + jx, sy + jy) for (sx, sy), (jx, jy) in zip(SQUARE[:3] + [(0.0, -80.0)], jitter + [(0, 0)],
                                                          strict=True)]
    pts = _stations(xy, lambda x, y: 1000.0 - gx * x - gy * y)
    g = pressure_gradient_acceleration(pts)
    # The fit projects about the stations' centroid, not about (LAT0, LON0): east-west lengths are
    # rescaled by cos(lat0)/cos(LAT0), exactly, so the east slope scales by the inverse.
    scale = math.cos(math.radians(LAT0)) / math.cos(math.radians(g.lat0))
    # A slope that is zero comes back as rounding: pressures of 1e5 Pa carry about 2e-11 Pa of it
    # (double precision, eps 2.2e-16), over baselines of tens of km about 1e-15 Pa/m, times the
    # fit's conditioning. ROUNDING_PA_M allows a hundred times that; the smallest slope drawn here,
    # 5e-5 Pa/m, is checked to 1e-6 of itself (5e-11), far above it.
    assert g.dpdx_pa_m == pytest.approx(-gx * 100.0 * scale, rel=1e-6, abs=ROUNDING_PA_M)
    assert g.dpdy_pa_m == pytest.approx(-gy * 100.0, rel=1e-6, abs=ROUNDING_PA_M)
    # ... which stays within the documented equirectangular error, |lat0 - LAT0| tan|LAT0| (geo.py).
    bound = 1.1 * abs(math.radians(g.lat0 - LAT0)) * math.tan(math.radians(abs(LAT0))) + 1e-9
    assert g.magnitude_pa_m == pytest.approx(grad_hpa_100km * 1e-3, rel=bound)
    assert abs(angle_diff_deg(g.toward_low_deg, bearing)) < 0.2


def test_three_stations_match_cross_product_plane() -> None:
    # Independent check for n = 3: the plane through three points has normal (P1-P0) x (P2-P0).
    pts = [(-33.60, 151.20, 1012.3), (-33.80, 151.25, 1011.1), (-33.70, 151.45, 1013.0)]
    g = pressure_gradient_acceleration(pts)
    x, y = local_xy_arr([p[0] for p in pts], [p[1] for p in pts], g.lat0, g.lon0)
    p = np.array([q[2] for q in pts]) * 100.0
    a = np.array([x[1] - x[0], y[1] - y[0], p[1] - p[0]])
    b = np.array([x[2] - x[0], y[2] - y[0], p[2] - p[0]])
    n = np.cross(a, b)
    assert g.dpdx_pa_m == pytest.approx(-n[0] / n[2], rel=1e-9)
    assert g.dpdy_pa_m == pytest.approx(-n[1] / n[2], rel=1e-9)


def test_many_stations_match_scipy_lstsq() -> None:
    # Reference: scipy.linalg.lstsq on the same projected positions, with noisy pressures.
    rng = np.random.default_rng(11)
    lat = LAT0 + rng.uniform(-0.4, 0.4, 25)
    lon = LON0 + rng.uniform(-0.4, 0.4, 25)
    p = 1008.0 + rng.normal(0.0, 0.3, 25)
    g = pressure_gradient_acceleration(list(zip(lat, lon, p, strict=True)))
    x, y = local_xy_arr(lat, lon, g.lat0, g.lon0)
    coef, *_ = scipy.linalg.lstsq(np.column_stack([np.ones(25), x, y]), p * 100.0)
    assert g.dpdx_pa_m == pytest.approx(coef[1], rel=1e-9)
    assert g.dpdy_pa_m == pytest.approx(coef[2], rel=1e-9)
    assert g.rms_residual_hpa > 0.1  # the noise shows up as scatter about the plane


def test_nan_pressures_are_left_out() -> None:
    pts = _stations(SQUARE, lambda x, y: 1010.0 - x / 100_000.0)
    with_gap = [*pts[:3], (pts[3][0], pts[3][1], math.nan)]
    g = pressure_gradient_acceleration(with_gap)
    assert g.n_stations == 3
    assert g.toward_low_deg == pytest.approx(90.0, abs=0.1)


def test_flat_field_has_no_direction() -> None:
    g = pressure_gradient_acceleration(_stations(SQUARE, lambda x, y: 1000.0))
    assert g.magnitude_pa_m == pytest.approx(0.0, abs=1e-12)
    assert math.isnan(g.toward_low_deg)


def test_network_across_the_date_line() -> None:
    pts = [(-40.0, 179.8, 1000.0), (-40.0, -179.8, 999.6), (-39.7, 180.0, 999.8)]
    g = pressure_gradient_acceleration(pts)
    assert abs(g.lon0) > 179.0
    assert abs(angle_diff_deg(g.toward_low_deg, 90.0)) < 1.0  # lower pressure to the east


@pytest.mark.parametrize(
    ("pts", "message"),
    [
        ([(0.0, 0.0, 1000.0), (0.0, 1.0, 1001.0)], "at least 3 stations"),
        ([(0.0, 0.0, 1000.0), (0.0, 1.0, 1001.0), (1.0, 0.0, math.nan)], "at least 3 stations with a pressure, got 2"),
        ([(0.0, 0.0, 1000.0), (0.5, 0.0, 1001.0), (1.0, 0.0, 1002.0)], "on one line"),
        ([(0.0, 0.0, 1000.0), (0.0, 0.0, 1001.0), (0.0, 0.0, 1002.0)], "all at one place"),
        ([(0.0, 0.0, 1000.0), (0.0, 1.0), (1.0, 0.0, 1002.0)], "station 1: expected"),
        ([(0.0, 0.0, 1000.0), (math.nan, 1.0, 1.0), (1.0, 0.0, 1002.0)], "station 1: latitude/longitude"),
    ],
)
def test_bad_station_sets_are_refused_with_a_reason(pts: list[tuple[float, ...]], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        pressure_gradient_acceleration(pts)


def test_bad_density_is_refused() -> None:
    with pytest.raises(ValueError, match="rho"):
        pressure_gradient_acceleration(_stations(SQUARE, lambda x, y: 1000.0), rho=0.0)


def test_bjerknes_sea_breeze_example() -> None:
    # Holton, sec. 4.2 sea-breeze example (DOMAIN.md section 1): 1000/900 hPa, 10 K -> 302 m2/s2;
    # over a loop with h = 1 km, L = 20 km the mean acceleration is 7.2e-3 m/s2. The loop set-up is
    # from memory of the textbook example (DOMAIN.md says so).
    dc = bjerknes_circulation_tendency(1000.0, 900.0, 10.0)
    assert dc == pytest.approx(302.0, abs=0.5)
    assert circulation_mean_acceleration(dc, 1000.0, 20_000.0) == pytest.approx(7.2e-3, abs=5e-5)
    assert bjerknes_circulation_tendency(1000.0, 900.0, -10.0) == pytest.approx(-dc)  # land breeze: reversed
    with pytest.raises(ValueError):
        bjerknes_circulation_tendency(1000.0, 0.0, 10.0)
    with pytest.raises(ValueError):
        circulation_mean_acceleration(dc, 0.0, 0.0)
