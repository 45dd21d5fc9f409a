"""A breeze front as a density current: reduced gravity, propagation speed, and the opposing-wind effect.

The marine air behind a breeze front is a gravity (density) current: its front advances at
U = k sqrt(g' h), with g' = g (delta theta / theta) the reduced gravity and h the depth of the cool
layer (Benjamin 1968, J. Fluid Mech. 31; Simpson & Britter 1980, Q. J. R. Meteorol. Soc. 106).
k of about 0.7 to 1 is seen in the field (from memory, DOMAIN.md): it is a parameter here. (Inviscid
theory for a current in deep surroundings gives k = sqrt(2) (von Karman 1940, Benjamin 1968; from
memory): real fronts are slower, so k = 1 is a default, not a constant of nature.)
Units: K, m, m/s.
"""

from __future__ import annotations

import math

G = 9.80665  # standard acceleration of gravity, m/s2 (CGPM 1901; ISO 80000-3)
NAN = float("nan")
# Speeds a breeze front may have inland, m/s. Observed: about 1.4 m/s on average for a lake-breeze
# front (Keeler & Kristovich 2012), under 3 to over 6 m/s for sea-breeze fronts (Linacre & Geerts
# 1997); the density-current speed k sqrt(g' h) with 5 K and 1 km stays near 10 m/s (Benjamin 1968).
# The bounds are generous on both sides (from memory): they only rule out the impossible. Used to
# judge whether two stations' passages can be one front (network tracking, weak-call corroboration).
BREEZE_FRONT_SPEEDS_MS = (0.5, 10.0)


def reduced_gravity(delta_theta_k: float, theta_k: float) -> float:
    """Reduced gravity g' = g delta_theta / theta, m/s2 (Boussinesq; e.g. Simpson & Britter 1980).

    `delta_theta_k` is the potential-temperature deficit of the dense (marine) air, K (> 0 for a
    front that advances); `theta_k` the reference potential temperature, K.
    """
    if theta_k <= 0.0:
        raise ValueError(f"theta_k must be a positive absolute temperature, got {theta_k}")
    return G * delta_theta_k / theta_k


def density_current_speed(delta_theta_k: float, theta_k: float, depth_m: float, k: float = 1.0) -> float:
    """Front speed of a density current, m/s: U = k sqrt(g' h) (Benjamin 1968).

    Check value (DOMAIN.md): delta theta 3 K, theta 300 K, h 500 m gives sqrt(g' h) = 7.00 m/s.
    NaN when g' h < 0 (the 'dense' air is the lighter one: no such current).
    """
    gh = reduced_gravity(delta_theta_k, theta_k) * depth_m
    if gh < 0.0:
        return NAN
    return k * math.sqrt(gh)


def depth_from_speed(speed_ms: float, delta_theta_k: float, theta_k: float, k: float = 1.0) -> float:
    """Depth of the cool layer, m, that a front speed implies: h = (U / k)^2 / g' (the inverse above)."""
    gp = reduced_gravity(delta_theta_k, theta_k)
    if gp <= 0.0 or k <= 0.0:
        raise ValueError(f"need positive reduced gravity and k, got g'={gp}, k={k}")
    return (speed_ms / k) ** 2 / gp


def opposed_front_speed(u0_ms: float, opposing_wind_ms: float, factor: float = 0.6) -> float:
    """Ground speed of a front against an opposing wind V, m/s: U = U0 - factor V.

    Simpson & Britter (1980) found an opposing flow slows a gravity current by about 0.6 V.
    A result <= 0 means the front cannot advance (it stalls or is pushed back); it is returned as
    is so the caller can tell 'stalled' from 'slow'. A negative V (a following wind) is applied with
    the same factor: that is a linear extrapolation, not a result of the paper.
    """
    return u0_ms - factor * opposing_wind_ms
