"""Network corroboration of breeze fronts: a breeze front forms at the shore and moves inland
(DOMAIN.md section 1), so an inland station's call needs the network to have seen one recently.

A station is 'coastal' when no other station facing the same way (onshore bearings within
SAME_SHORE_DEG) lies more than COAST_MARGIN_KM towards the water from it (along its own onshore
bearing: the water lies where the onshore wind blows from). A coastal
station's breeze front stands on its own. An inland station's stands when any other station called
a breeze-like change (accepted or not) within the last `hours`; otherwise it is reported as a
`wind_shift` with a note, since the signature alone did not convince the network. The first inland
call after a missed coastal passage is the only one lost: it still counts as 'seen' for the others.
A single-station network is unaffected. Pure and deterministic; state is one time per station.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

from ..calc.geo import local_xy_m
from ..config import NetworkConfig
from ..events import PassageEvent

COAST_MARGIN_KM = 2.0
SAME_SHORE_DEG = 30.0


class Corroborator:
    def __init__(self, config: NetworkConfig) -> None:
        self.hours = config.detector.corroborate_hours
        sts = config.stations
        lat0 = sum(s.lat for s in sts) / len(sts) if sts else 0.0
        lon0 = sum(s.lon for s in sts) / len(sts) if sts else 0.0
        xy = {s.id: local_xy_m(s.lat, s.lon, lat0, lon0) for s in sts}
        self.coastal: dict[str, bool] = {}
        for s in sts:
            ex, ey = math.sin(math.radians(s.onshore_from_deg)), math.cos(math.radians(s.onshore_from_deg))
            here = ex * xy[s.id][0] + ey * xy[s.id][1]
            # only stations on the same stretch of shore (facing the same way) can be 'nearer the coast'
            seaward = [o.id for o in sts if o.id != s.id and
                       abs((o.onshore_from_deg - s.onshore_from_deg + 180.0) % 360.0 - 180.0) <= SAME_SHORE_DEG and
                       ex * xy[o.id][0] + ey * xy[o.id][1] - here > COAST_MARGIN_KM * 1000.0]
            self.coastal[s.id] = not seaward
        self.last_seen: dict[str, float] = {}  # station -> onset of its last breeze-like call

    def check(self, ev: PassageEvent) -> PassageEvent:
        if ev.kind != "breeze_front" or self.hours <= 0:
            return ev
        others = [t for k, t in self.last_seen.items() if k != ev.station]
        self.last_seen[ev.station] = ev.onset
        if self.coastal.get(ev.station, True):
            return ev
        if any(0 <= ev.onset - t <= self.hours * 3600.0 for t in others):
            return ev
        return replace(ev, kind="wind_shift", confidence=round(min(ev.confidence, 0.5), 3),
                       note="breeze-like change inland with no breeze front seen nearer the coast")

    def snapshot(self) -> dict[str, Any]:
        return {"last_seen": dict(self.last_seen)}

    def restore(self, snap: dict[str, Any]) -> None:
        self.last_seen = {k: float(v) for k, v in snap["last_seen"].items()}
