"""Moisture and thermodynamic quantities: saturation vapour pressure, dewpoint, mixing ratio, theta.

Temperatures in degC unless a name says otherwise; pressures in hPa; mixing ratio in kg/kg.
The functions are total: outside a formula's domain (e.g. T <= -243.5 degC for Bolton, e >= p for a
mixing ratio) they return NaN rather than raise, because they run on raw decoded input.
"""

from __future__ import annotations

import math

# Bolton (1980), Mon. Wea. Rev. 108, eq. 10: es = 6.112 exp(17.67 T / (T + 243.5)), T in degC, es in hPa.
BOLTON_A = 6.112
BOLTON_B = 17.67
BOLTON_C = 243.5
EPSILON = 0.622  # ratio of gas constants Rd/Rv (WMO/ AMS Glossary value 0.622)
KAPPA = 0.2857  # Rd/cp for dry air (AMS Glossary: 0.2857)


def saturation_vapor_pressure(temp_c: float) -> float:
    """Saturation vapour pressure over water, hPa (Bolton 1980, eq. 10; within 0.1 % for -30..35 degC).

    NaN at or below -243.5 degC, where the formula has its pole.
    """
    if temp_c <= -BOLTON_C:
        return math.nan
    return BOLTON_A * math.exp(BOLTON_B * temp_c / (temp_c + BOLTON_C))


def dewpoint_from_vapor_pressure(e_hpa: float) -> float:
    """Dewpoint, degC, from vapour pressure e in hPa: the inverse of Bolton's formula.

    NaN for e <= 0 or NaN, and for e >= 6.112 exp(17.67) hPa, which no temperature reaches.
    """
    if not e_hpa > 0.0:
        return math.nan
    g = math.log(e_hpa / BOLTON_A)
    if g >= BOLTON_B:
        return math.nan
    return BOLTON_C * g / (BOLTON_B - g)


def dewpoint_from_rh(temp_c: float, rh_pct: float) -> float:
    """Dewpoint, degC, from temperature (degC) and relative humidity (%): e = RH/100 * es(T), inverted.

    Bolton (1980) both ways. MetPy's `dewpoint_from_relative_humidity` inverts Bolton too, but since
    MetPy 1.6 takes es(T) from Ambaum (2020); the two differ by under 0.1 K in the weather range
    (tests/test_calc_moisture.py measures it).
    """
    return dewpoint_from_vapor_pressure(rh_pct / 100.0 * saturation_vapor_pressure(temp_c))


def relative_humidity(temp_c: float, dewpoint_c: float) -> float:
    """Relative humidity, %, = 100 es(Td)/es(T) (WMO-No. 8 definition over water)."""
    es_t = saturation_vapor_pressure(temp_c)
    if es_t == 0.0:
        return math.nan
    return 100.0 * saturation_vapor_pressure(dewpoint_c) / es_t


def mixing_ratio(e_hpa: float, pressure_hpa: float) -> float:
    """Mixing ratio, kg/kg: r = epsilon e / (p - e) (e.g. Wallace & Hobbs 2006, eq. 3.59); NaN if e >= p."""
    if not pressure_hpa > e_hpa:
        return math.nan
    return EPSILON * e_hpa / (pressure_hpa - e_hpa)


def mixing_ratio_from_dewpoint(dewpoint_c: float, pressure_hpa: float = 1013.25) -> float:
    """Mixing ratio, kg/kg, of air with dewpoint Td at pressure p (hPa): r(es(Td), p)."""
    return mixing_ratio(saturation_vapor_pressure(dewpoint_c), pressure_hpa)


def potential_temperature(temp_c: float, pressure_hpa: float, p0_hpa: float = 1000.0) -> float:
    """Potential temperature, K: theta = T (p0/p)^kappa, kappa = Rd/cp = 0.2857 (Poisson's equation).

    NaN for a pressure that is not positive.
    """
    if not pressure_hpa > 0.0:
        return math.nan
    return (temp_c + 273.15) * (p0_hpa / pressure_hpa) ** KAPPA
