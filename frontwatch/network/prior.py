"""The physical prior on a front's motion, for when fewer than three stations have reported.

Speed: the front as a density current, U = k sqrt(g' h) with g' = g dtheta / theta from the
temperature drop the stations saw (Benjamin 1968; Simpson & Britter 1980), slowed by 0.6 times an
opposing pre-front wind (Simpson & Britter 1980), and halved for a young front (EARLY_FACTOR). The depth h of the marine layer is not observed:
DEPTH_M is a default (from memory: marine layers of a few hundred metres), and the interval is wide.
Heading: inland along the stations' shore normal (the breeze blows onshore, the front moves with it).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from ..calc.density import density_current_speed, opposed_front_speed
from ..calc.wind import circular_mean_deg
from .fit import Prior

DEPTH_M = 500.0  # depth of the cool marine layer (from memory; not observed)
FROUDE_K = 0.7  # k in U = k sqrt(g'h): 0.7 to 1 in the field (from memory, DOMAIN.md)
MIN_DROP_K = 0.5  # a passage with less visible cooling still moves: floor on dtheta
MIN_SPEED_MS = 1.0  # a front still coming moves about this fast or more (lake-breeze fronts averaged
# 1.4 m/s, Keeler & Kristovich 2012); a strong opposing wind can push the formula below it
MAX_SPEED_MS = 8.0
# The prior's speed is a guess good to a factor of two or so (h and k are not observed): its sd on
# the slowness equals its mean, so that once two stations apart along the motion have reported,
# their arrival times set the speed. (With 0.7 a two-station fit could turn the front by a few
# degrees to keep a wrong prior speed: a station far along the coast and a little inland is
# "explained" by the heading as well as by the speed. Much wider, and two stations about as far
# inland as each other, which leave the speed undetermined, gave absurd speeds instead.)
SPEED_REL_SD = 1.0
# A young front runs at about half the speed it reaches later in the day ("from under 3 to over
# 6 m/s", Linacre & Geerts 1997); the prior is for the first passages, so it starts there and the
# forecast's speed-up (fit.accelerated_eta) takes it toward the density-current speed.
EARLY_FACTOR = 0.5
HEADING_SD_DEG = 20.0  # fronts form along the coast and run roughly along its normal (common practice)


@dataclass(frozen=True, slots=True)
class PassageFacts:
    """What one station saw at passage that the prior needs (None = not measured)."""

    shore_normal_to_deg: float  # bearing inland: the station's onshore_from_deg + 180
    temp_change_c: float | None
    temp_after_c: float | None
    dir_before_deg: float | None
    speed_before_ms: float | None


def density_prior(facts: Iterable[PassageFacts]) -> Prior:
    """A prior (speed, heading, with wide sds) from the passages seen so far (at least one)."""
    fl = list(facts)
    if not fl:
        raise ValueError("density_prior needs at least one passage")
    heading = circular_mean_deg([f.shore_normal_to_deg for f in fl])
    if heading != heading:
        heading = fl[0].shore_normal_to_deg
    drops = [-f.temp_change_c for f in fl if f.temp_change_c is not None and f.temp_change_c == f.temp_change_c]
    drop = max(sum(drops) / len(drops), MIN_DROP_K) if drops else 1.5
    temps = [f.temp_after_c for f in fl if f.temp_after_c is not None and f.temp_after_c == f.temp_after_c]
    theta = (sum(temps) / len(temps) + 273.15) if temps else 300.0
    u0 = density_current_speed(drop, theta, DEPTH_M, k=FROUDE_K)
    # Opposing wind: the pre-front wind's component against the motion (the wind blows TO dir+180).
    opp = []
    for f in fl:
        if f.dir_before_deg is None or f.speed_before_ms is None:
            continue
        if f.dir_before_deg != f.dir_before_deg or f.speed_before_ms != f.speed_before_ms:
            continue
        along = f.speed_before_ms * math.cos(math.radians(f.dir_before_deg + 180.0 - heading))
        opp.append(max(-along, 0.0))  # only an opposing wind: the paper's result
    v_opp = sum(opp) / len(opp) if opp else 0.0
    u = EARLY_FACTOR * opposed_front_speed(u0, v_opp)
    u = min(max(u, MIN_SPEED_MS), MAX_SPEED_MS)
    return Prior(speed_ms=u, heading_deg=heading, speed_rel_sd=SPEED_REL_SD, heading_sd_deg=HEADING_SD_DEG)
