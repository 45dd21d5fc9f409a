"""frontwatch.calc.moisture against the CRC Handbook table, DOMAIN.md check values and MetPy."""

from __future__ import annotations

import math

import metpy.calc as mpcalc
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from metpy.units import units

from frontwatch.calc.moisture import (
    dewpoint_from_rh,
    dewpoint_from_vapor_pressure,
    mixing_ratio,
    mixing_ratio_from_dewpoint,
    potential_temperature,
    relative_humidity,
    saturation_vapor_pressure,
)

# CRC Handbook of Chemistry and Physics, vapour pressure of water (values as listed in DOMAIN.md 4).
CRC_TABLE_HPA = [(0.0, 6.113), (10.0, 12.281), (20.0, 23.388), (30.0, 42.455)]


@pytest.mark.parametrize(("temp_c", "es_hpa"), CRC_TABLE_HPA)
def test_bolton_within_a_tenth_of_a_percent_of_crc_table(temp_c: float, es_hpa: float) -> None:
    # Bolton 1980, Mon. Wea. Rev. 108: claimed within 0.1 % over -30..35 degC.
    assert saturation_vapor_pressure(temp_c) == pytest.approx(es_hpa, rel=1e-3)


def test_saturated_mixing_ratio_check_value() -> None:
    # DOMAIN.md section 4: r = 0.622 e / (p - e), saturated at 20 degC, 1000 hPa -> 14.88 g/kg.
    r = mixing_ratio(saturation_vapor_pressure(20.0), 1000.0)
    assert r * 1000.0 == pytest.approx(14.88, abs=0.005)
    assert mixing_ratio_from_dewpoint(20.0, 1000.0) == r


def test_saturation_vapor_pressure_near_metpy() -> None:
    # MetPy >= 1.6 uses Ambaum (2020) eq. 13 for es over liquid water. Bolton agrees with it to
    # 0.4 % over -30..35 degC (measured: 0.04 % at 10 degC, 0.39 % at 35 degC), so the tolerance is
    # 0.5 %. At 30 degC MetPy gives 42.35 hPa against the CRC table's 42.455 hPa, Bolton 42.456:
    # the gap is mostly on MetPy's side of the table.
    t = np.linspace(-30.0, 35.0, 131)
    ref = mpcalc.saturation_vapor_pressure(t * units.degC).m_as("hPa")
    ours = np.array([saturation_vapor_pressure(float(x)) for x in t])
    np.testing.assert_allclose(ours, ref, rtol=5e-3)


@settings(max_examples=150, deadline=None)
@given(temp_c=st.floats(-30.0, 35.0), rh=st.floats(2.0, 100.0))
def test_dewpoint_from_rh_near_metpy(temp_c: float, rh: float) -> None:
    # MetPy dewpoint_from_relative_humidity: inverse Bolton applied to RH * es_Ambaum(T); the es
    # difference above moves the dewpoint by under 0.1 K over Bolton's -30..35 degC (measured
    # 0.070 K at 35 degC, 100 %).
    ref = float(mpcalc.dewpoint_from_relative_humidity(temp_c * units.degC, rh * units.percent).m_as("degC"))
    assert dewpoint_from_rh(temp_c, rh) == pytest.approx(ref, abs=0.1)


@settings(max_examples=150, deadline=None)
@given(e=st.floats(0.1, 80.0))
def test_dewpoint_from_vapor_pressure_matches_metpy_exactly(e: float) -> None:
    # MetPy metpy.calc.dewpoint inverts Bolton 1980 just as frontwatch does: same formula.
    ref = float(mpcalc.dewpoint(e * units.hPa).m_as("degC"))
    assert dewpoint_from_vapor_pressure(e) == pytest.approx(ref, abs=1e-9)


@given(temp_c=st.floats(-40.0, 50.0), rh=st.floats(1.0, 100.0))
def test_rh_dewpoint_round_trip(temp_c: float, rh: float) -> None:
    td = dewpoint_from_rh(temp_c, rh)
    assert td <= temp_c + 1e-9
    assert relative_humidity(temp_c, td) == pytest.approx(rh, rel=1e-9)


@settings(max_examples=100, deadline=None)
@given(td=st.floats(-30.0, 35.0), p=st.floats(700.0, 1050.0))
def test_mixing_ratio_near_metpy(td: float, p: float) -> None:
    # MetPy mixing_ratio uses epsilon = Mw/Md = 0.6219569 (vs 0.622 here: 0.007 % apart); feed both
    # the same vapour pressure so only the formula is compared.
    e = saturation_vapor_pressure(td)
    ref = float(mpcalc.mixing_ratio(e * units.hPa, p * units.hPa).m_as(""))
    assert mixing_ratio(e, p) == pytest.approx(ref, rel=1e-4)


@settings(max_examples=100, deadline=None)
@given(t=st.floats(-40.0, 45.0), p=st.floats(500.0, 1080.0))
def test_potential_temperature_matches_metpy(t: float, p: float) -> None:
    # MetPy potential_temperature: T (1000/p)^(Rd/cp), Rd/cp = 0.28571 (vs 0.2857 here).
    ref = float(mpcalc.potential_temperature(p * units.hPa, t * units.degC).m_as("K"))
    assert potential_temperature(t, p) == pytest.approx(ref, rel=1e-5)


def test_potential_temperature_at_reference_pressure() -> None:
    # Poisson's equation: theta = T at p = p0.
    assert potential_temperature(15.0, 1000.0) == pytest.approx(288.15)


def test_outside_the_domain_gives_nan_not_an_exception() -> None:
    # Decoded raw input reaches these functions before QC: they must not raise (see moisture.py).
    assert math.isnan(saturation_vapor_pressure(-243.5))
    assert math.isnan(saturation_vapor_pressure(-300.0))
    assert saturation_vapor_pressure(-243.4) == 0.0  # exp underflow, the formula's own limit
    assert math.isnan(dewpoint_from_vapor_pressure(0.0))
    assert math.isnan(dewpoint_from_vapor_pressure(-1.0))
    assert math.isnan(dewpoint_from_vapor_pressure(1e300))
    assert math.isnan(dewpoint_from_rh(-243.4, 50.0))
    assert math.isnan(dewpoint_from_rh(1e300, 100.0))
    assert math.isnan(relative_humidity(-243.4, -250.0))
    assert math.isnan(mixing_ratio(10.0, 10.0))
    assert math.isnan(potential_temperature(20.0, 0.0))
    assert math.isnan(potential_temperature(20.0, -5.0))


@given(t=st.floats(allow_nan=True, allow_infinity=True), rh=st.floats(allow_nan=True, allow_infinity=True))
def test_dewpoint_from_rh_never_raises(t: float, rh: float) -> None:
    td = dewpoint_from_rh(t, rh)
    assert isinstance(td, float)
