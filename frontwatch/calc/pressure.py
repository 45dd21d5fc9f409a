"""Pressure-gradient force from a few stations, and the Bjerknes circulation of a sea breeze.

The horizontal pressure-gradient acceleration is a = -(1/rho) grad p: it points from high to low
pressure, across the isobars (e.g. Holton, An Introduction to Dynamic Meteorology, ch. 1).
From three or more stations, grad p is the slope of a least-squares plane p = a + b x + c y fitted on
a local tangent plane: the equirectangular projection about the stations' centroid
(frontwatch.calc.geo.local_xy_m), adequate across a station network of some 100 km.
Units: pressures in hPa at the edges, Pa and metres inside; accelerations m/s2.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from .geo import local_xy_arr, wrap_lon_deg

RHO_AIR = 1.2  # kg/m3, near-surface air density used in the textbook worked value (DOMAIN.md)
R_DRY = 287.04  # J/(kg K), gas constant of dry air (AMS Glossary of Meteorology: 287 J/(kg K))
# Stations spread across their main line by less than this fraction of their spread along it are
# treated as collinear: the cross-line slope would be dominated by the barometers' errors.
MIN_ASPECT = 1e-3
FLAT_PA = 1e-6  # Pa; a barometer resolves 1 Pa (0.01 hPa) at best


@dataclass(frozen=True, slots=True)
class PressureGradient:
    """A fitted pressure plane and the force it implies.

    `toward_low_deg` is the bearing (clockwise from north) that -grad p points TO, i.e. towards low
    pressure; it is NaN for a flat field (under FLAT_PA across the stations). (ax, ay) = -(1/rho) grad p, east and north, m/s2.
    """

    dpdx_pa_m: float
    dpdy_pa_m: float
    magnitude_pa_m: float
    toward_low_deg: float
    ax_ms2: float
    ay_ms2: float
    accel_ms2: float
    p_centroid_hpa: float  # the plane's value at the centroid
    rms_residual_hpa: float  # scatter of the stations about the plane (0 for exactly three)
    lat0: float
    lon0: float
    n_stations: int


def pressure_gradient_acceleration(
    points: Iterable[Sequence[float]], rho: float = RHO_AIR, min_aspect: float = MIN_ASPECT
) -> PressureGradient:
    """Fit p = a + b x + c y to stations given as (lat, lon, p_hpa) and return the gradient force.

    Stations whose pressure is NaN are left out. ValueError when fewer than three stations remain,
    when they are collinear or coincident (no plane is determined), or when rho is not positive.
    Check value (Holton; DOMAIN.md): 1 hPa per 100 km at rho = 1.2 kg/m3 gives 8.3e-4 m/s2.
    """
    if not rho > 0.0:
        raise ValueError(f"air density rho must be positive, got {rho}")
    rows = []
    for i, pt in enumerate(points):
        if len(pt) != 3:
            raise ValueError(f"station {i}: expected (lat, lon, p_hpa), got {len(pt)} values")
        lat, lon, p = (float(v) for v in pt)
        if not (math.isfinite(lat) and math.isfinite(lon)):
            raise ValueError(f"station {i}: latitude/longitude must be finite, got ({lat}, {lon})")
        if math.isfinite(p):
            rows.append((lat, lon, p))
    n = len(rows)
    if n < 3:
        raise ValueError(f"a pressure plane needs at least 3 stations with a pressure, got {n}")
    arr = np.array(rows, dtype=float)
    lat0 = float(arr[:, 0].mean())
    # Mean longitude via wrapped offsets from the first station, so a network across 180 deg works.
    lon_ref = float(arr[0, 1])
    lon0 = wrap_lon_deg(lon_ref + float(np.mean((arr[:, 1] - lon_ref + 180.0) % 360.0 - 180.0)))
    x, y = local_xy_arr(arr[:, 0], arr[:, 1], lat0, lon0)
    xc, yc = x - x.mean(), y - y.mean()
    sv = np.linalg.svd(np.column_stack([xc, yc]), compute_uv=False)
    if sv[0] == 0.0:
        raise ValueError(f"the {n} stations are all at one place: no pressure gradient can be fitted")
    if sv[1] < min_aspect * sv[0]:
        raise ValueError(
            f"the {n} stations lie (nearly) on one line (spread ratio {sv[1] / sv[0]:.2g} < {min_aspect}): "
            "a pressure plane needs stations not on a line"
        )
    p_pa = arr[:, 2] * 100.0
    design = np.column_stack([np.ones(n), xc, yc])
    coef, *_ = np.linalg.lstsq(design, p_pa, rcond=None)
    a, b, c = (float(v) for v in coef)
    resid = p_pa - design @ coef
    mag = math.hypot(b, c)
    # A pressure change across the network below FLAT_PA is rounding noise: no direction.
    span_pa = mag * float(sv[0]) / math.sqrt(n)
    toward_low = math.degrees(math.atan2(-b, -c)) % 360.0 if span_pa > FLAT_PA else math.nan
    ax, ay = -b / rho, -c / rho
    return PressureGradient(
        dpdx_pa_m=b,
        dpdy_pa_m=c,
        magnitude_pa_m=mag,
        toward_low_deg=toward_low,
        ax_ms2=ax,
        ay_ms2=ay,
        accel_ms2=mag / rho,
        p_centroid_hpa=a / 100.0,
        rms_residual_hpa=float(np.sqrt(np.mean(resid**2))) / 100.0,
        lat0=lat0,
        lon0=lon0,
        n_stations=n,
    )


def bjerknes_circulation_tendency(p0_hpa: float, p1_hpa: float, t_land_k_minus_sea: float) -> float:
    """Rate of change of circulation, m2/s2, of a sea-breeze loop: dC/dt = R ln(p0/p1) (T_land - T_sea).

    Bjerknes circulation theorem for a loop rising over land and sinking over sea between the
    surface pressure p0 and the level p1 (Holton, An Introduction to Dynamic Meteorology, sec. 4.2).
    Check value (DOMAIN.md): 1000/900 hPa and 10 K give 302 m2/s2.
    """
    if not (p0_hpa > 0.0 and p1_hpa > 0.0):
        raise ValueError(f"pressures must be positive, got p0={p0_hpa}, p1={p1_hpa}")
    return R_DRY * math.log(p0_hpa / p1_hpa) * t_land_k_minus_sea


def circulation_mean_acceleration(dc_dt_m2s2: float, depth_m: float, length_m: float) -> float:
    """Mean tangential acceleration, m/s2, around a rectangular loop of depth h and length L:
    dC/dt / (2 (h + L)).

    The set-up (h = 1 km, L = 20 km, giving 7.2e-3 m/s2 with the 302 m2/s2 above) is from memory of
    Holton's worked example, as DOMAIN.md says.
    """
    perimeter = 2.0 * (depth_m + length_m)
    if not perimeter > 0.0:
        raise ValueError(f"loop depth and length must give a positive perimeter, got {perimeter}")
    return dc_dt_m2s2 / perimeter
