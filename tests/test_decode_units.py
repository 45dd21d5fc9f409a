"""Unit suffixes, time zones and RH -> dewpoint in frontwatch.obs.decode_record, against pint (via
MetPy's unit registry), exact unit definitions and MetPy's dewpoint."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import metpy.calc as mpcalc
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from metpy.units import units

from frontwatch.calc.moisture import dewpoint_from_rh
from frontwatch.errors import DecodeError
from frontwatch.obs import decode_record

T = "2026-01-14T02:37:00Z"
T_EPOCH = datetime(2026, 1, 14, 2, 37, tzinfo=UTC).timestamp()


def _one(field: str, value: float) -> float:
    obs = decode_record({"station": "KB01", "time": T, field: value})
    canon = {"wind_speed": "wind_speed_ms", "wind_gust": "wind_gust_ms", "temp": "temp_c",
             "dewpoint": "dewpoint_c", "pressure": "pressure_hpa"}[field.rpartition("_")[0]]
    return float(getattr(obs, canon))


# (suffix field, pint unit, canonical pint unit, exact factor or None, source of the exact value)
SPEEDS = [
    ("wind_speed_kt", "knot", "m/s", 1852.0 / 3600.0, "knot = 1 nautical mile (1852 m exactly) per hour (NIST SP 811)"),
    ("wind_gust_kt", "knot", "m/s", 1852.0 / 3600.0, "same"),
    ("wind_speed_mph", "mile/hour", "m/s", 0.44704, "international mile = 1609.344 m (NIST SP 811)"),
    ("wind_speed_kmh", "km/hour", "m/s", 1.0 / 3.6, "SI"),
]


@pytest.mark.parametrize(("field", "unit", "canon", "factor", "source"), SPEEDS)
@settings(max_examples=50, deadline=None)
@given(v=st.floats(0.0, 200.0))
def test_speed_suffixes(field: str, unit: str, canon: str, factor: float, source: str, v: float) -> None:
    ref = (v * units(unit)).m_as(canon)
    assert _one(field, v) == pytest.approx(ref, rel=1e-12, abs=1e-12)  # pint
    assert _one(field, v) == pytest.approx(v * factor, rel=1e-12, abs=1e-12)  # exact definition


def test_knot_is_exact() -> None:
    # 1 kt = 1852/3600 m/s exactly (nautical mile = 1852 m, NIST SP 811); 0.514444 is 8.6e-7 low.
    assert _one("wind_speed_kt", 3600.0) == pytest.approx(1852.0, rel=1e-15)


@settings(max_examples=100, deadline=None)
@given(v=st.floats(-80.0, 140.0))
def test_fahrenheit(v: float) -> None:
    # degF -> degC: (F - 32) 5/9 exactly (NIST SP 811); pint's offset units agree.
    ref = units.Quantity(v, units.degF).m_as(units.degC)
    assert _one("temp_f", v) == pytest.approx(ref, abs=1e-9)
    assert _one("dewpoint_f", v) == pytest.approx((v - 32.0) * 5.0 / 9.0, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(v=st.floats(200.0, 340.0))
def test_kelvin(v: float) -> None:
    # K -> degC: T - 273.15 exactly (SI definition of the degree Celsius).
    ref = units.Quantity(v, units.kelvin).m_as(units.degC)
    assert _one("temp_k", v) == pytest.approx(ref, abs=1e-9)
    assert _one("dewpoint_k", v) == pytest.approx(v - 273.15, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(v=st.floats(25.0, 32.0))
def test_inches_of_mercury(v: float) -> None:
    # Conventional inch of mercury = 3.386389 kPa (NIST SP 811, to the 7 digits it gives);
    # pint defines it from 13.5951 g/cm3 and standard gravity: the two agree to 1e-7.
    ref = (v * units.inHg).m_as("hPa")
    assert _one("pressure_inhg", v) == pytest.approx(ref, rel=1e-7)
    assert _one("pressure_inhg", v) == pytest.approx(v * 33.86389, rel=2e-7)


def test_other_pressure_suffixes() -> None:
    assert _one("pressure_pa", 101325.0) == pytest.approx(1013.25)
    assert _one("pressure_kpa", 101.325) == pytest.approx(1013.25)
    assert _one("pressure_hpa", 1013.25) == 1013.25


def test_numbers_as_text_and_empty_cells() -> None:
    # CSV rows arrive as text: an empty cell is missing, a number in text is read.
    obs = decode_record({"station": "KB01", "time": T, "temp_c": " 21.5 ", "pressure_hpa": ""})
    assert obs.temp_c == 21.5 and math.isnan(obs.pressure_hpa)


def test_column_mapping_with_units() -> None:
    obs = decode_record({"id": "KB01", "ts": T, "WSPD": 10.0}, columns={"id": "station", "ts": "time",
                                                                       "WSPD": "wind_speed_kt"})
    assert obs.station == "KB01" and obs.time == T_EPOCH
    assert obs.wind_speed_ms == pytest.approx(10.0 * 1852.0 / 3600.0)


# --- time zones -----------------------------------------------------------------------------

def test_naive_time_refused_without_a_zone() -> None:
    # DESIGN 3.1: naive times are refused unless a time zone is configured.
    with pytest.raises(DecodeError) as info:
        decode_record({"station": "KB01", "time": "2026-01-14T12:37:00"})
    assert info.value.code == "bad_time" and info.value.field == "time" and info.value.station == "KB01"
    assert "no offset" in str(info.value)


@pytest.mark.parametrize("tz", [timezone(timedelta(hours=10)), ZoneInfo("Australia/Brisbane")])
def test_naive_time_accepted_with_a_zone(tz: timezone | ZoneInfo) -> None:
    # Brisbane keeps UTC+10 all year (IANA tz database: no daylight saving in Queensland).
    obs = decode_record({"station": "KB01", "time": "2026-01-14T12:37:00"}, naive_tz=tz)
    assert obs.time == T_EPOCH


def test_explicit_offsets_win_over_the_naive_zone() -> None:
    for text in ("2026-01-14T02:37:00Z", "2026-01-14T12:37:00+10:00", "2026-01-13T21:37:00-05:00"):
        obs = decode_record({"station": "KB01", "time": text}, naive_tz=timezone(timedelta(hours=3)))
        assert obs.time == T_EPOCH, text


def test_daylight_saving_zone_for_naive_times() -> None:
    # Sydney is UTC+11 in January (daylight saving), UTC+10 in July (IANA tz database).
    tz = ZoneInfo("Australia/Sydney")
    jan = decode_record({"station": "KB01", "time": "2026-01-14T13:37:00"}, naive_tz=tz)
    assert jan.time == T_EPOCH
    jul = decode_record({"station": "KB01", "time": "2026-07-14T12:37:00"}, naive_tz=tz)
    assert jul.time == datetime(2026, 7, 14, 2, 37, tzinfo=UTC).timestamp()


# --- RH -> dewpoint -------------------------------------------------------------------------

@settings(max_examples=100, deadline=None)
@given(t=st.floats(-30.0, 35.0), rh=st.floats(1.0, 100.0))
def test_rh_gives_dewpoint(t: float, rh: float) -> None:
    obs = decode_record({"station": "KB01", "time": T, "temp_c": t, "rh_pct": rh})
    assert obs.dewpoint_c == dewpoint_from_rh(t, rh)
    # MetPy dewpoint_from_relative_humidity (es from Ambaum 2020): within 0.1 K over -30..35 degC,
    # as measured in tests/test_calc_moisture.py.
    ref = float(mpcalc.dewpoint_from_relative_humidity(t * units.degC, rh * units.percent).m_as("degC"))
    assert obs.dewpoint_c == pytest.approx(ref, abs=0.1)


def test_rh_after_unit_conversion_and_precedence() -> None:
    # RH is applied to the temperature in degC, whatever unit it came in.
    f = decode_record({"station": "KB01", "time": T, "temp_f": 68.0, "rh_pct": 50.0})
    c = decode_record({"station": "KB01", "time": T, "temp_c": 20.0, "rh_pct": 50.0})
    assert f.dewpoint_c == pytest.approx(c.dewpoint_c, abs=1e-12)
    # A reported dewpoint wins over one derived from RH.
    both = decode_record({"station": "KB01", "time": T, "temp_c": 20.0, "rh_pct": 50.0, "dewpoint_c": 5.0})
    assert both.dewpoint_c == 5.0
    # RH a little over 100 % (sensor tolerance) is held at 100 %: dewpoint = temperature.
    sat = decode_record({"station": "KB01", "time": T, "temp_c": 20.0, "rh_pct": 100.4})
    assert sat.dewpoint_c == pytest.approx(20.0, abs=1e-9)
    # Impossible RH gives no dewpoint (QC downstream sees it missing), not an error.
    for rh in (0.0, -5.0, 130.0):
        obs = decode_record({"station": "KB01", "time": T, "temp_c": 20.0, "rh_pct": rh})
        assert math.isnan(obs.dewpoint_c), rh
