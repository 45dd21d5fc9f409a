"""frontwatch.calc.density against the DOMAIN.md check value and its own inverse."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from frontwatch.calc.density import (
    G,
    density_current_speed,
    depth_from_speed,
    opposed_front_speed,
    reduced_gravity,
)


def test_density_current_check_value() -> None:
    # Benjamin 1968 / Simpson & Britter 1980 formula, check value from DOMAIN.md section 1:
    # delta theta 3 K, theta 300 K, h 500 m -> sqrt(g' h) = 7.00 m/s.
    assert density_current_speed(3.0, 300.0, 500.0) == pytest.approx(7.00, abs=0.005)
    assert density_current_speed(3.0, 300.0, 500.0, k=0.7) == pytest.approx(0.7 * 7.0024, abs=1e-3)


def test_reduced_gravity_definition() -> None:
    # g' = g dtheta/theta with standard gravity 9.80665 m/s2 (ISO 80000-3).
    assert G == 9.80665
    assert reduced_gravity(3.0, 300.0) == pytest.approx(0.0980665, rel=1e-12)
    with pytest.raises(ValueError, match="theta_k"):
        reduced_gravity(3.0, 0.0)


def test_no_current_when_the_cool_air_is_not_dense() -> None:
    assert math.isnan(density_current_speed(-1.0, 300.0, 500.0))
    assert density_current_speed(0.0, 300.0, 500.0) == 0.0


@given(dth=st.floats(0.1, 15.0), theta=st.floats(250.0, 320.0), h=st.floats(10.0, 3000.0),
       k=st.floats(0.3, 1.5))
def test_depth_is_the_inverse_of_speed(dth: float, theta: float, h: float, k: float) -> None:
    u = density_current_speed(dth, theta, h, k)
    assert depth_from_speed(u, dth, theta, k) == pytest.approx(h, rel=1e-9)


@given(dth=st.floats(0.1, 15.0), h=st.floats(10.0, 3000.0))
def test_speed_scales_with_square_roots(dth: float, h: float) -> None:
    # U ~ sqrt(dtheta h): four times the depth doubles the speed.
    assert density_current_speed(dth, 300.0, 4.0 * h) == pytest.approx(2.0 * density_current_speed(dth, 300.0, h))


def test_depth_from_speed_refuses_nonsense() -> None:
    with pytest.raises(ValueError):
        depth_from_speed(3.0, -1.0, 300.0)
    with pytest.raises(ValueError):
        depth_from_speed(3.0, 2.0, 300.0, k=0.0)


def test_opposed_front_speed() -> None:
    # Simpson & Britter 1980: an opposing wind V slows the front by about 0.6 V (DOMAIN.md section 1).
    assert opposed_front_speed(5.0, 2.0) == pytest.approx(3.8)
    assert opposed_front_speed(5.0, 0.0) == 5.0
    assert opposed_front_speed(5.0, 2.0, factor=0.5) == pytest.approx(4.0)
    assert opposed_front_speed(3.0, 10.0) < 0.0  # stalled: returned as is, not clipped
