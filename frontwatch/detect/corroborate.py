"""Network corroboration of breeze fronts: a breeze front forms at the shore and moves inland
(DOMAIN.md section 1), so an inland station's call needs the network to have seen one recently.

A station is 'coastal' when no other station facing the same way (onshore bearings within
SAME_SHORE_DEG) lies more than COAST_MARGIN_KM towards the water from it (along the pair's shore
normal, the bisector of their onshore bearings: the water lies where the onshore wind blows from;
on a curved shore either bearing alone puts each of two stations at the water seaward of the
other). A coastal
station's breeze front stands on its own. An inland station's stands when any other station called
a breeze-like change (accepted or not) within the last `hours`, or when a station nearer the water
saw a front earlier the same breeze day (within the daytime window) at a distance a density
current could have covered since (stations far apart: 40 km at 1-2 m/s takes longer than `hours`);
otherwise it is reported as a `wind_shift` with a note, since the signature alone did not convince
the network. The first inland call after a missed coastal passage is the only one lost: it still
counts as 'seen' for the others.

A *weak* call (the classifier accepted a signature below what stands on its own: the air alone
where the vane is missing or stuck, a wind that has turned out of the offshore half but carries
under 1 m/s of onshore flow yet, or inland an already-onshore wind where only the air changed; see
classify.py) needs more. Inland: the latest front among the stations nearer the water on the same
shore came before it, at a time a density current could have taken to come this far (implied speed
between MIN_FRONT_MS and MAX_FRONT_MS). At the shore: any other station's front within `hours`.
An unconfirmed weak call marks nothing as seen. In a single-station network the detector makes a
weak call only once it has persisted through its whole decision window, on a wind turned out of
the offshore half (classify.py), and it stands: there is no one to ask. At the network's only
station at the shore (`unconfirmable`) a weak call is never confirmed: a front forms there first,
so another station's call before it can only be a look-alike. It is reported as a wind shift and,
like any unconfirmed weak call, lets a clear inland call that follows at a density current's pace
stand.

A station's detector marks a breeze front found within repeat_min of its previous one (and not much
stronger) as a `repeat`. When the station's last breeze front that the network let stand is that
recent, the repeat is the same regime going on (a wobble of the onshore wind) and is dropped; when
the call before was one the network did not confirm (a look-alike inland ahead of the day's front),
the repeat is checked as a passage of its own. A clear inland call with no front seen stands too
when a station nearer the water made a weak call the network could not confirm, before it and at a
density current's pace (the first station to see a front may show it only weakly). That weak
call is then reported again, as a breeze front decided when the front stood inland (the events
are never retracted, so the wind shift stays; the breeze front's id differs by kind), unless
its station had a front of its own that day. Pure and deterministic; state is four items per
station (three times and the last unconfirmed weak call).
"""

from __future__ import annotations

import math
from dataclasses import fields, replace
from typing import Any

from ..calc.density import BREEZE_FRONT_SPEEDS_MS
from ..calc.geo import local_xy_m
from ..calc.wind import angle_diff_deg
from ..config import NetworkConfig
from ..events import PassageEvent
from .classify import edge_turn

COAST_MARGIN_KM = 2.0
SAME_SHORE_DEG = 30.0
MIN_FRONT_MS, MAX_FRONT_MS = BREEZE_FRONT_SPEEDS_MS  # front speeds a weak inland call may imply
WEAK_ONSHORE_MS = 1.0  # onshore flow below which a breeze front's wind alone is not convincing


def is_weak(ev: PassageEvent, onshore_from_deg: float, halfwidth_deg: float, coastal: bool = False) -> bool:
    """True when a breeze-front event's signature is below what stands on its own. The classifier's
    paths that accept less (classify.py) leave these marks in the event: under 1 m/s of onshore flow
    ('halted_offshore', or 'air_only' under a stuck vane); no usable wind after
    ('air_only'); a wind already onshore before, so the air alone told ('marine_air_only'), except
    at the shore where the wind swung from the sector's edge towards its middle (classify.edge_turn)."""
    if ev.untimed or ev.wind_dir_after_deg is None or ev.speed_after_ms is None:
        return True
    if ev.wind_dir_before_deg is not None:
        before = abs(angle_diff_deg(ev.wind_dir_before_deg, onshore_from_deg))
        after = abs(angle_diff_deg(ev.wind_dir_after_deg, onshore_from_deg))
        if before <= halfwidth_deg and not (coastal and edge_turn(before, after, halfwidth_deg)):
            return True
    onshore = ev.speed_after_ms * math.cos(math.radians(ev.wind_dir_after_deg - onshore_from_deg))
    return onshore < WEAK_ONSHORE_MS


class Corroborator:
    def __init__(self, config: NetworkConfig) -> None:
        self.hours = config.detector.corroborate_hours
        # A front and its passages inland belong to one breeze day: from the front's forming to its
        # passage far inland takes up to the whole daytime window (a 40 km trip at 1-2 m/s is 6-11
        # hours), longer than `hours` between two stations far apart (and never less than `hours`).
        day = config.detector.day_end_h - config.detector.day_start_h
        self.same_day_s = max(day, self.hours) * 3600.0
        sts = config.stations
        # a lone station's detector makes a weak call only once it has persisted through the whole
        # decision window (classify.py): no other station could confirm it, and it stands
        self.alone = len(sts) == 1
        lat0 = sum(s.lat for s in sts) / len(sts) if sts else 0.0
        lon0 = sum(s.lon for s in sts) / len(sts) if sts else 0.0
        xy = {s.id: local_xy_m(s.lat, s.lon, lat0, lon0) for s in sts}
        self.onshore = {s.id: (s.onshore_from_deg, s.onshore_halfwidth_deg) for s in sts}
        self.coastal: dict[str, bool] = {}
        # station -> [(other station nearer the water on the same shore, its distance seaward, m)]
        self.seaward: dict[str, list[tuple[str, float]]] = {}
        for s in sts:
            seaward = []
            for o in sts:
                dd = angle_diff_deg(o.onshore_from_deg, s.onshore_from_deg)
                # only stations on the same stretch of shore (facing the same way) can be 'nearer the coast'
                if o.id == s.id or abs(dd) > SAME_SHORE_DEG:
                    continue
                # ... measured along the pair's own shore normal, the bisector of their bearings: on a
                # curved shore, along either station's bearing alone each of two stations at the water
                # lies seaward of the other (on a straight coast the bearings agree and so does this)
                m = math.radians(s.onshore_from_deg + 0.5 * dd)
                d = math.sin(m) * (xy[o.id][0] - xy[s.id][0]) + math.cos(m) * (xy[o.id][1] - xy[s.id][1])
                if d > COAST_MARGIN_KM * 1000.0:
                    seaward.append((o.id, d))
            self.seaward[s.id] = seaward
            self.coastal[s.id] = not seaward
        # A coastal station with no other at the shore: a front forms there first, so no other
        # station can have seen it before this one's weak call (another's call before it is a
        # look-alike, and confirms nothing).
        shore = [k for k, c in self.coastal.items() if c]
        self.unconfirmable = set(shore) if len(shore) == 1 and len(sts) > 1 else set()
        self.last_seen: dict[str, float] = {}  # station -> onset of its last breeze-like call
        self.repeat_s = config.detector.repeat_min * 60.0
        self.last_front: dict[str, float] = {}  # station -> onset of its last breeze front let stand
        self.last_weak: dict[str, float] = {}  # station -> onset of its last weak call not confirmed
        # station -> its last weak call not confirmed (as the detector made it), while a front
        # further inland may still confirm it (see _confirm_late); bounded: one per station
        self.pending_weak: dict[str, PassageEvent] = {}
        # weak calls confirmed by the last check() (drained by the engine, which reports them first)
        self.late: list[PassageEvent] = []

    def _travelled(self, ev: PassageEvent, seen_at: dict[str, float] | None = None,
                   within_s: float | None = None) -> bool:
        """The front was last seen nearer the water (the latest call among this station's seaward
        neighbours, in `seen_at`: by default the calls that marked the front seen) before this
        onset, within `within_s` (default `hours`), at a distance a density current could have
        covered since."""
        at = self.last_seen if seen_at is None else seen_at
        seen = [(t, k, dist) for k, dist in self.seaward.get(ev.station, [])
                if (t := at.get(k)) is not None and t < ev.onset]
        if not seen:
            return False
        t, _, dist = max(seen)
        dt = ev.onset - t
        limit = self.hours * 3600.0 if within_s is None else within_s
        return dt <= limit and MIN_FRONT_MS <= dist / dt <= MAX_FRONT_MS

    def check(self, ev: PassageEvent) -> PassageEvent | None:
        """The event as the network reports it (a breeze front may become a wind shift), or None
        for a repeat of a breeze front that stood."""
        if ev.kind != "breeze_front":
            return ev
        if ev.repeat:
            last = self.last_front.get(ev.station)
            if last is not None and ev.onset - last < self.repeat_s:
                return None
            ev = replace(ev, repeat=False)
        got = self._check(ev)
        if got.kind == "breeze_front":
            self.last_front[ev.station] = ev.onset
            self.pending_weak.pop(ev.station, None)  # its own front came: nothing left to confirm
            self._confirm_late(got)
        return got

    def _confirm_late(self, ev: PassageEvent) -> None:
        """Weak calls nearer the water that a front standing at ev's station now confirms.

        The first station to see a front may show it only weakly (a stuck vane, a light turn, marine
        air under an onshore wind), when no other station has seen the front yet: it was reported as
        a wind shift. When the front then stands further inland on the same shore, at a time a
        density current could have taken from there (MIN_FRONT_MS to MAX_FRONT_MS, within `hours`),
        and that station has had no front of its own that day, its weak call was the front's passage:
        it is reported again, as a breeze front decided now (detected_at is this event's, the note
        says so; its id differs from the wind shift's by kind). Each weak call is confirmed once."""
        for k, dist in self.seaward.get(ev.station, []):
            weak = self.pending_weak.get(k)
            if weak is None or weak.onset >= ev.onset:
                continue
            dt = ev.onset - weak.onset
            if dt > self.hours * 3600.0 or not MIN_FRONT_MS <= dist / dt <= MAX_FRONT_MS:
                continue
            before = self.last_front.get(k)
            if before is not None and 0 <= weak.onset - before <= self.same_day_s:
                continue  # the day's front had already passed there: a wobble behind it
            del self.pending_weak[k]
            self.last_front[k] = weak.onset
            self.last_seen[k] = max(self.last_seen.get(k, weak.onset), weak.onset)
            note = f"weak breeze-front signature confirmed later by the front at {ev.station}"
            self.late.append(replace(weak, detected_at=max(weak.detected_at, ev.detected_at), note=note))
        self.late.sort(key=lambda e: (e.onset, e.station))

    def _check(self, ev: PassageEvent) -> PassageEvent:
        if self.hours <= 0:
            return ev
        # another station's breeze-like call within the hours before this one
        recent = any(0 <= ev.onset - t <= self.hours * 3600.0 for k, t in self.last_seen.items() if k != ev.station)
        coastal = self.coastal.get(ev.station, True)
        if ev.station in self.onshore and is_weak(ev, *self.onshore[ev.station], coastal):
            # A weak call inland must fit a front travelling from the water; at the shore (no station
            # nearer the water) it needs another station's front within the hours, like a strong
            # inland call, unless it is the network's only shore station (nothing can come before
            # it there but a look-alike). Unconfirmed, it marks nothing as seen.
            if self.alone or (ev.station not in self.unconfirmable and (recent if coastal else self._travelled(ev))):
                self.last_seen[ev.station] = ev.onset
                return ev
            self.last_weak[ev.station] = ev.onset
            self.pending_weak[ev.station] = ev
            return _demoted(ev, "weak breeze-like change with no front seen nearer the coast in time to reach it")
        self.last_seen[ev.station] = ev.onset
        # A clear inland call after a weak one nearer the water that the network could not confirm
        # then (the first station to see the front showed it weakly: a stuck vane, a light turn),
        # at a time a density current could have taken to come this far: the two agree on a front.
        # Likewise after a front nearer the water earlier the same breeze day, when the stations are
        # so far apart that it took longer than `hours` to come this far at a density current's pace.
        if coastal or recent or self._travelled(ev, self.last_weak) or \
                self._travelled(ev, within_s=self.same_day_s):
            return ev
        return _demoted(ev, "breeze-like change inland with no breeze front seen nearer the coast")

    def snapshot(self) -> dict[str, Any]:
        return {"last_seen": dict(self.last_seen), "last_front": dict(self.last_front),
                "last_weak": dict(self.last_weak),
                "pending_weak": {k: [getattr(e, f.name) for f in fields(PassageEvent)]
                                 for k, e in self.pending_weak.items()}}

    def restore(self, snap: dict[str, Any]) -> None:
        self.last_seen = {k: float(v) for k, v in snap["last_seen"].items()}
        # (a snapshot from before repeats were the network's: none let stand, as after a restart)
        self.last_front = {k: float(v) for k, v in snap.get("last_front", {}).items()}
        self.last_weak = {k: float(v) for k, v in snap.get("last_weak", {}).items()}
        self.pending_weak = {k: PassageEvent(*v) for k, v in snap.get("pending_weak", {}).items()}
        self.late = []


def _demoted(ev: PassageEvent, note: str) -> PassageEvent:
    """A breeze-front call the network did not confirm: reported as a wind shift, saying why."""
    return replace(ev, kind="wind_shift", confidence=round(min(ev.confidence, 0.5), 3), note=note)
