"""frontwatch.calc.wind against published check values, MetPy, scipy.stats, and its own invariants."""

from __future__ import annotations

import math

import metpy.calc as mpcalc
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from metpy.units import units
from scipy import stats

from frontwatch.calc.wind import (
    angle_diff_arr,
    angle_diff_deg,
    circular_mean_deg,
    in_sector,
    mean_resultant_length,
    onshore_component,
    vector_mean,
    wind_components,
    wind_components_arr,
    wind_direction,
    wind_direction_arr,
    wind_speed,
    yamartino_sigma_deg,
)

directions = st.floats(min_value=0.0, max_value=360.0, exclude_max=True, allow_nan=False)
speeds = st.floats(min_value=0.01, max_value=100.0, allow_nan=False)


# --- published check values -------------------------------------------------------------------

def test_yamartino_check_values() -> None:
    # Yamartino 1984, J. Climate Appl. Meteor. 23; values as listed in DOMAIN.md section 4.
    assert yamartino_sigma_deg([350.0, 10.0]) == pytest.approx(10.008, abs=5e-4)
    assert yamartino_sigma_deg([0.0, 180.0]) == pytest.approx(103.92, abs=5e-3)


def test_yamartino_upper_bound_is_the_papers_constant() -> None:
    # Yamartino 1984: the estimator tops out at asin(1) * 2/sqrt(3) rad = 103.923 deg for cancelling vectors.
    assert yamartino_sigma_deg([0.0, 90.0, 180.0, 270.0]) == pytest.approx(math.degrees(math.pi / math.sqrt(3)))


def test_yamartino_no_spread_and_missing() -> None:
    assert yamartino_sigma_deg([123.0] * 10) < 1e-5
    assert math.isnan(yamartino_sigma_deg([]))
    assert math.isnan(yamartino_sigma_deg([math.nan, math.nan]))
    assert yamartino_sigma_deg([350.0, math.nan, 10.0]) == pytest.approx(10.008, abs=5e-4)


# --- MetPy as the reference for components and direction -----------------------------------

def test_wind_components_match_metpy_on_a_grid() -> None:
    # MetPy 1.x metpy.calc.wind_components (same meteorological convention: direction FROM).
    s, d = np.meshgrid(np.linspace(0.0, 30.0, 13), np.arange(0.0, 360.0, 7.5))
    u_ref, v_ref = mpcalc.wind_components(s * units("m/s"), d * units.degree)
    for si, di, ur, vr in zip(s.ravel(), d.ravel(), u_ref.m_as("m/s").ravel(), v_ref.m_as("m/s").ravel(),
                              strict=True):
        u, v = wind_components(float(si), float(di))
        assert u == pytest.approx(ur, abs=1e-9)
        assert v == pytest.approx(vr, abs=1e-9)
    ua, va = wind_components_arr(s, d)
    np.testing.assert_allclose(ua, u_ref.m_as("m/s"), atol=1e-9)
    np.testing.assert_allclose(va, v_ref.m_as("m/s"), atol=1e-9)


@settings(max_examples=150, deadline=None)
@given(u=st.floats(-50, 50, allow_nan=False), v=st.floats(-50, 50, allow_nan=False))
def test_wind_direction_matches_metpy(u: float, v: float) -> None:
    # MetPy returns north as 360 and calm as 0; frontwatch uses 0 and NaN (documented in wind.py).
    ref = float(mpcalc.wind_direction(u * units("m/s"), v * units("m/s")).m_as("degree"))
    ours = wind_direction(u, v)
    if u == 0.0 and v == 0.0:
        assert math.isnan(ours) and ref == 0.0
        return
    assert 0.0 <= ours < 360.0
    assert abs(angle_diff_deg(ours, ref)) < 1e-9
    assert wind_speed(u, v) == pytest.approx(float(mpcalc.wind_speed(u * units("m/s"), v * units("m/s")).m),
                                             rel=1e-12, abs=1e-12)


def test_cardinal_directions() -> None:
    # Meteorological convention (WMO-No. 8): a wind FROM the north blows southward, v < 0.
    assert wind_components(10.0, 0.0) == pytest.approx((0.0, -10.0))
    assert wind_components(10.0, 90.0) == pytest.approx((-10.0, 0.0))
    assert wind_direction(0.0, -5.0) == 0.0
    assert wind_direction(-5.0, 0.0) == pytest.approx(90.0)
    assert wind_direction(0.0, 5.0) == pytest.approx(180.0)
    assert wind_direction(5.0, 0.0) == pytest.approx(270.0)
    assert math.isnan(wind_direction(0.0, 0.0))
    assert wind_components(0.0, math.nan) == (0.0, 0.0)
    assert wind_direction(-1e-300, -1.0) < 360.0


def test_direction_arr_matches_scalar() -> None:
    rng = np.random.default_rng(7)
    u = rng.normal(0, 5, 500)
    v = rng.normal(0, 5, 500)
    u[:3] = 0.0
    v[:3] = 0.0
    d = wind_direction_arr(u, v)
    assert np.isnan(d[:3]).all()
    for ui, vi, di in zip(u[3:], v[3:], d[3:], strict=True):
        assert di == pytest.approx(wind_direction(float(ui), float(vi)), abs=1e-9)


# --- invariants (hypothesis) ----------------------------------------------------------------

@given(s=speeds, d=directions)
def test_components_direction_round_trip(s: float, d: float) -> None:
    u, v = wind_components(s, d)
    assert abs(angle_diff_deg(wind_direction(u, v), d)) < 1e-9
    assert wind_speed(u, v) == pytest.approx(s, rel=1e-12)


@given(a=st.floats(-1e6, 1e6, allow_nan=False), b=st.floats(-1e6, 1e6, allow_nan=False))
def test_angle_diff_range_and_consistency(a: float, b: float) -> None:
    d = angle_diff_deg(a, b)
    assert -180.0 < d <= 180.0
    # b + d is a (modulo whole turns), to the float precision of the inputs.
    turns = (b + d - a) / 360.0
    assert abs(turns - round(turns)) < 1e-9 * max(1.0, abs(a), abs(b))
    assert float(angle_diff_arr(a, b)) == d


def test_angle_diff_values() -> None:
    assert angle_diff_deg(10.0, 350.0) == pytest.approx(20.0)
    assert angle_diff_deg(350.0, 10.0) == pytest.approx(-20.0)
    assert angle_diff_deg(0.0, 180.0) == 180.0
    assert angle_diff_deg(180.0, 0.0) == 180.0
    assert math.isnan(angle_diff_deg(math.nan, 0.0))


@given(d=directions, c=directions, h=st.floats(0.0, 180.0))
def test_in_sector_agrees_with_angle_diff(d: float, c: float, h: float) -> None:
    assert in_sector(d, c, h) == (abs(angle_diff_deg(d, c)) <= h)


def test_in_sector_edges_and_nan() -> None:
    assert in_sector(20.0, 350.0, 30.0)  # inclusive edge across north
    assert not in_sector(21.0, 350.0, 30.0)
    assert not in_sector(math.nan, 0.0, 90.0)


@given(s=speeds, d=directions, onshore=directions)
def test_onshore_component_is_projection(s: float, d: float, onshore: float) -> None:
    # Projection of the wind vector on the unit vector of a wind blowing FROM the onshore bearing.
    u, v = wind_components(s, d)
    ue, ve = wind_components(1.0, onshore)
    assert onshore_component(s, d, onshore) == pytest.approx(u * ue + v * ve, abs=1e-9)


def test_onshore_component_values() -> None:
    assert onshore_component(5.0, 75.0, 75.0) == pytest.approx(5.0)
    assert onshore_component(5.0, 255.0, 75.0) == pytest.approx(-5.0)
    assert onshore_component(5.0, 165.0, 75.0) == pytest.approx(0.0, abs=1e-12)
    assert onshore_component(0.0, math.nan, 75.0) == 0.0


# --- circular statistics against scipy.stats -----------------------------------------------

@settings(max_examples=200, deadline=None)
@given(st.lists(directions, min_size=1, max_size=60))
def test_circular_mean_matches_scipy_circmean(dirs: list[float]) -> None:
    # scipy.stats.circmean(high=360) computes the same unit-vector mean; compare where it is defined.
    # Where the unit vectors (nearly) cancel, the mean direction is numerically arbitrary in both.
    assume(mean_resultant_length(dirs) >= 1e-6)
    ref = float(stats.circmean(dirs, high=360.0, low=0.0))
    ours = circular_mean_deg(dirs)
    assert 0.0 <= ours < 360.0
    assert abs(angle_diff_deg(ours, ref)) < 1e-6
    assert abs(angle_diff_deg(circular_mean_deg(np.array(dirs)), ours)) < 1e-9


def test_circular_mean_values() -> None:
    assert angle_diff_deg(circular_mean_deg([350.0, 10.0]), 0.0) == pytest.approx(0.0, abs=1e-9)
    assert circular_mean_deg([80.0, 100.0, math.nan]) == pytest.approx(90.0)
    assert math.isnan(circular_mean_deg([0.0, 180.0]))
    assert math.isnan(circular_mean_deg([]))


@settings(max_examples=150, deadline=None)
@given(centre=directions, offsets=st.lists(st.floats(-8.0, 8.0), min_size=2, max_size=60))
def test_yamartino_near_scipy_circstd_for_small_spread(centre: float, offsets: list[float]) -> None:
    # Yamartino's estimator and scipy's circstd (sqrt(-2 ln R)) are different functions of R; both
    # tend to the ordinary standard deviation for a small spread, where their relative difference is
    # O(sigma^2): under 1 % for a spread within +-8 deg (sigma < 0.14 rad).
    dirs = [(centre + o) % 360.0 for o in offsets]
    ours = yamartino_sigma_deg(dirs)
    ref = float(stats.circstd(dirs, high=360.0, low=0.0))
    linear = float(np.std(offsets))
    if linear < 1e-3:
        assert ours < 1e-3 + 1e-5 and ref < 1e-3 + 1e-5
        return
    assert ours == pytest.approx(ref, rel=0.01)
    assert ours == pytest.approx(linear, rel=0.01)


def test_yamartino_differs_from_circstd_for_wide_spread() -> None:
    # Documented difference (wind.py): circstd = sqrt(-2 ln R) (Mardia & Jupp, Directional Statistics)
    # grows without bound as R -> 0; Yamartino's estimator caps at 103.92 deg.
    r = math.cos(math.radians(89.5))  # resultant length of {0, 179}
    assert float(stats.circstd([0.0, 179.0], high=360.0)) == pytest.approx(math.degrees(math.sqrt(-2 * math.log(r))))
    assert float(stats.circstd([0.0, 179.0], high=360.0)) > 170.0
    assert 103.0 < yamartino_sigma_deg([0.0, 179.0]) < 103.93


# --- vector mean ----------------------------------------------------------------------------

def test_vector_mean_values() -> None:
    s, d = vector_mean([10.0, 10.0], [350.0, 10.0])
    assert s == pytest.approx(10.0 * math.cos(math.radians(10.0)))
    assert abs(angle_diff_deg(d, 0.0)) < 1e-9
    # A calm counts as a zero vector; a NaN direction at speed is missing.
    assert vector_mean([0.0, 4.0], [math.nan, 90.0]) == pytest.approx((2.0, 90.0))
    assert vector_mean([3.0, 4.0], [math.nan, 90.0]) == pytest.approx((4.0, 90.0))
    s0, d0 = vector_mean([5.0, 5.0], [0.0, 180.0])
    assert s0 == pytest.approx(0.0, abs=1e-12)
    assert all(math.isnan(x) for x in vector_mean([], []))
    with pytest.raises(ValueError):
        vector_mean(np.array([1.0, 2.0]), np.array([1.0]))


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.floats(0.0, 40.0), directions), min_size=1, max_size=40))
def test_vector_mean_matches_metpy_components(pairs: list[tuple[float, float]]) -> None:
    # Reference: MetPy wind_components, averaged, then MetPy wind_speed/wind_direction.
    s = np.array([p[0] for p in pairs])
    d = np.array([p[1] for p in pairs])
    u, v = mpcalc.wind_components(s * units("m/s"), d * units.degree)
    um, vm = u.mean(), v.mean()
    ref_s = float(mpcalc.wind_speed(um, vm).m_as("m/s"))
    ours_s, ours_d = vector_mean(list(s), list(d))
    arr_s, arr_d = vector_mean(s, d)
    assert ours_s == pytest.approx(ref_s, abs=1e-9)
    assert arr_s == pytest.approx(ref_s, abs=1e-9)
    assert ours_s <= float(s.mean()) + 1e-9  # vector mean never exceeds the scalar mean
    if ref_s > 1e-6:
        ref_d = float(mpcalc.wind_direction(um, vm).m_as("degree"))
        assert abs(angle_diff_deg(ours_d, ref_d)) < 1e-6
        assert abs(angle_diff_deg(arr_d, ref_d)) < 1e-6
