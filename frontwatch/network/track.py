"""Group stations' breeze-front passages into fronts, fit each front's motion, and detect stalls.

A passage joins an open front when its onset is where that front's fit (or prior) puts the front at
that station, within a tolerance, and the station is near the front's other stations; otherwise it
starts a new front. Each station appears at most once in a front. A front is 'stalled' when a
station it should have reached by now (past a margin) reports nothing while its data still flow,
and no station further along has reported (then it was a missed detection, not a stall).

State is a few fronts, each holding at most one arrival per station: bounded by the network size.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..calc.density import BREEZE_FRONT_SPEEDS_MS
from ..events import PassageEvent
from ..timeutil import compact_z
from .fit import FrontFit, fit_front
from .prior import PassageFacts, density_prior

JOIN_TOL_S = 20 * 60.0  # an onset this close to the prediction (or 3 sd) joins the front
JOIN_SIGMAS = 3.0
JOIN_TOL_MAX_S = 60 * 60.0
JOIN_MODEL_REL_ERR = 0.12  # as forecast.MODEL_REL_ERR  # however uncertain the prediction (a prior far from its station), no more
JOIN_SPEED_MS = BREEZE_FRONT_SPEEDS_MS  # speeds a breeze front may have between two stations (see _prior_join)
JOIN_MIN_DQ_M = 2000.0  # ... when the new station is at least this much further along the motion
LINK_M = 60_000.0  # a joining station is at most this far from one already in the front
OVERDUE_MIN_S = 15 * 60.0  # a station is overdue this long (or 2.5 sd) after its predicted time
OVERDUE_SIGMAS = 2.5
STALL_MIN_OVERDUE = 2  # overdue stations needed to call a stall (fewer if fewer are ahead)
STATION_UP_S = 15 * 60.0  # a station counts as reporting if its data are this fresh
FRONT_TTL_S = 4 * 3600.0  # a front with no new passage for this long is closed
MAX_FRONTS = 12
# The assumed speed-up of a front (fit.accelerated_eta) stops at this local clock hour of its day:
# the breeze and the land-sea temperature contrast that drives it grow until about mid-afternoon,
# around the day's highest temperature, and no longer after it (common practice; the hour is from
# memory). Used when the tracker is given a local clock.
ACCEL_END_LOCAL_H = 15.0


@dataclass(frozen=True, slots=True)
class Arrival:
    """One station's passage as part of a front (positions in local metres)."""

    station: str
    x: float
    y: float
    onset: float
    detected_at: float
    confidence: float
    shore_to_deg: float
    dir_before_deg: float | None
    dir_after_deg: float | None
    speed_before_ms: float | None
    speed_after_ms: float | None
    gust_after_ms: float | None
    temp_change_c: float | None
    temp_after_c: float | None
    onset_spread_s: float = 0.0  # PassageEvent.onset_spread_s (states from before stop 13 lack it: 0)

    def to_state(self) -> list[Any]:
        return [getattr(self, f) for f in self.__slots__]

    @classmethod
    def from_state(cls, s: list[Any]) -> Arrival:
        return cls(*s)


def _num(x: float | None) -> float | None:
    return None if x is None or x != x else float(x)


def arrival_from_event(ev: PassageEvent, x: float, y: float, onshore_from_deg: float) -> Arrival:
    sb = None
    if ev.speed_after_ms is not None and ev.speed_change_ms is not None:
        sb = _num(ev.speed_after_ms - ev.speed_change_ms)
    return Arrival(ev.station, x, y, ev.onset, ev.detected_at, ev.confidence, (onshore_from_deg + 180.0) % 360.0,
                   _num(ev.wind_dir_before_deg), _num(ev.wind_dir_after_deg), sb, _num(ev.speed_after_ms),
                   _num(ev.gust_after_ms), _num(ev.temp_change_c), _num(ev.temp_after_c), ev.onset_spread_s)


@dataclass
class Front:
    """One front: its arrivals (station -> Arrival), its fit, and its stall state."""

    key: str
    arrivals: dict[str, Arrival] = field(default_factory=dict)
    last_change: float = 0.0  # data time of the last arrival that joined
    stalled_at: float | None = None
    overdue: list[str] = field(default_factory=list)
    fit: FrontFit | None = None
    # (deadline, station) of stations not yet reached, further along than any reached one, soonest
    # first: the station is overdue after its deadline (set from the fit at each new arrival).
    deadlines: list[tuple[float, str]] = field(default_factory=list)
    cache: dict[str, Any] = field(default_factory=dict)  # values derived from the arrivals (reset by refit)
    accel_until: float | None = None  # data time the assumed speed-up stops (ACCEL_END_LOCAL_H of its day)

    def refit(self) -> None:
        self.cache.clear()
        # Only passages timed to the minute are fitted: one found across a station's silence is
        # known to within half the gap (up to 30 min), which would pull the fit (it still counts
        # as reached). If none is timed, the untimed ones are all there is.
        timed = [a for a in self.arrivals.values() if not a.onset_spread_s] or list(self.arrivals.values())
        pts = [(a.x, a.y, a.onset) for a in timed]
        prior = density_prior(
            PassageFacts(a.shore_to_deg, a.temp_change_c, a.temp_after_c, a.dir_before_deg, a.speed_before_ms)
            for a in self.arrivals.values()
        )
        self.fit = fit_front(pts, prior, accel_until=self.accel_until)

    @property
    def basis(self) -> str:
        return "fit" if self.fit is not None and not self.fit.used_prior else "prior"

    @property
    def first_onset(self) -> float:
        return min(a.onset for a in self.arrivals.values())

    @property
    def last_onset(self) -> float:
        return max(a.onset for a in self.arrivals.values())

    def max_progress(self) -> float:
        f = self.fit
        assert f is not None
        return max(f.progress(a.x, a.y) for a in self.arrivals.values())

    def to_state(self) -> dict[str, Any]:
        return {"key": self.key, "arrivals": [a.to_state() for a in self.arrivals.values()],
                "last_change": self.last_change, "stalled_at": self.stalled_at, "overdue": list(self.overdue),
                "deadlines": [list(d) for d in self.deadlines], "accel_until": self.accel_until}

    @classmethod
    def from_state(cls, s: dict[str, Any]) -> Front:
        arr = [Arrival.from_state(a) for a in s["arrivals"]]
        f = cls(key=s["key"], arrivals={a.station: a for a in arr}, last_change=float(s["last_change"]),
                stalled_at=s["stalled_at"], overdue=list(s["overdue"]),
                deadlines=[(float(d[0]), str(d[1])) for d in s["deadlines"]], accel_until=s.get("accel_until"))
        f.refit()
        return f


class FrontTracker:
    """The open fronts of a network. `positions` maps station id -> (x, y, onshore_from_deg)."""

    def __init__(self, positions: dict[str, tuple[float, float, float]],
                 local_hour: Callable[[float], float] | None = None) -> None:
        self.positions = positions
        self.local_hour = local_hour  # epoch s -> local clock hour; None: the speed-up has no end hour
        self.fronts: list[Front] = []
        self._ids = list(positions)
        self._x = np.array([positions[k][0] for k in self._ids], dtype=float)
        self._y = np.array([positions[k][1] for k in self._ids], dtype=float)

    def add(self, ev: PassageEvent) -> Front | None:
        """Add a breeze-front passage; returns the front it joined or started (None if unknown station)."""
        pos = self.positions.get(ev.station)
        if pos is None:
            return None
        arr = arrival_from_event(ev, pos[0], pos[1], pos[2])
        best: Front | None = None
        best_z = math.inf
        for fr in self.fronts:
            if ev.station in fr.arrivals or fr.fit is None:
                continue
            if min(math.hypot(a.x - arr.x, a.y - arr.y) for a in fr.arrivals.values()) > LINK_M:
                continue
            # The onset may fall anywhere between the sped-up and the constant-speed predictions
            # (fronts also slow down), give or take the fit's sd and a model error growing with the
            # time since the front's last passage.
            t_acc, t_lin, sd = fr.fit.predict(arr.x, arr.y)
            ahead = max(max(t_acc, t_lin) - fr.last_onset, 0.0)
            tol = min(max(JOIN_TOL_S, JOIN_SIGMAS * math.hypot(sd, JOIN_MODEL_REL_ERR * ahead)), JOIN_TOL_MAX_S)
            lo, hi = min(t_acc, t_lin), max(t_acc, t_lin)
            t_pred = t_acc
            err = lo - arr.onset if arr.onset < lo else (arr.onset - hi if arr.onset > hi else 0.0)
            err = max(0.0, err - arr.onset_spread_s)  # (an untimed onset: anywhere in its spread)
            if fr.stalled_at is not None and arr.onset > t_pred:
                # A stalled front that moves on later: accept a late arrival further along.
                err = 0.0 if fr.fit.progress(arr.x, arr.y) > fr.max_progress() else err
            z = err / tol
            if z > 1.0 and fr.fit.used_prior:
                z = self._prior_join(fr, arr)
            if z <= 1.0 and z < best_z:
                best, best_z = fr, z
        if best is None:
            until = None
            if self.local_hour is not None:
                until = ev.onset + (ACCEL_END_LOCAL_H - self.local_hour(ev.onset)) * 3600.0
            best = Front(key=f"{ev.station}-{compact_z(ev.onset)}", accel_until=until)
            self.fronts.append(best)
            if len(self.fronts) > MAX_FRONTS:
                self.fronts.pop(0)
        best.arrivals[ev.station] = arr
        best.last_change = ev.detected_at
        best.stalled_at = None
        best.overdue = []
        best.refit()
        self._set_deadlines(best)
        return best

    @staticmethod
    def _prior_join(fr: Front, arr: Arrival) -> float:
        """Join score (<= 1 joins) of a passage against a front known only from its prior (one or two
        stations, or stations on a line).

        The prior's speed is a guess good to a factor of two or so (the depth of the marine air and
        k are not observed), so its predicted time is no test of membership: a passage further along
        the front's motion than any station it reached joins when the speed it implies from the
        furthest one lies within the speeds breeze fronts have, JOIN_SPEED_MS (a lake-breeze front
        averaged 1.4 m/s, Keeler & Kristovich 2012; sea-breeze fronts from under 3 to over 6 m/s,
        Linacre & Geerts 1997; the bounds are wider than that, from memory). It scores just under 1:
        a front whose own prediction fits the passage is preferred."""
        f = fr.fit
        assert f is not None
        far = max(fr.arrivals.values(), key=lambda a: f.progress(a.x, a.y))
        dq = f.progress(arr.x, arr.y) - f.progress(far.x, far.y)
        dt = arr.onset - far.onset
        if dq < JOIN_MIN_DQ_M or dt <= 0.0:
            return math.inf
        v = dq / dt
        return 0.99 if JOIN_SPEED_MS[0] <= v <= JOIN_SPEED_MS[1] else math.inf

    def refit(self, fr: Front) -> None:
        """Refit a front whose arrivals were revised in place (the prior's facts), with its deadlines."""
        fr.refit()
        self._set_deadlines(fr)

    def _set_deadlines(self, fr: Front) -> None:
        f = fr.fit
        fr.deadlines = []
        if f is None or not self._ids:
            return
        dx = self._x - f.ref[0]
        dy = self._y - f.ref[1]
        t = f.t0 + f.sx * dx + f.sy * dy
        cols = [np.ones_like(dx), dx, dy]
        if f.curv:
            q = f.u[0] * dx + f.u[1] * dy
            lo, hi = f.q_span
            q2 = np.where(q > hi, hi * hi + 2 * hi * (q - hi), np.where(q < lo, lo * lo + 2 * lo * (q - lo), q * q))
            t = t + f.curv * q2
            cols.append(q2)
        g = np.column_stack(cols)
        var = np.einsum("ij,jk,ik->i", g, np.array(f.cov), g)
        sd = np.sqrt(np.maximum(var, 0.0))
        s = math.hypot(f.sx, f.sy)
        prog = (f.sx * dx + f.sy * dy) / s if s > 0 else np.zeros_like(dx)
        reach = fr.max_progress()
        first = fr.first_onset
        ok = (t >= first) & (prog > reach)
        dl = t + np.maximum(OVERDUE_MIN_S, OVERDUE_SIGMAS * sd)
        for i in np.nonzero(ok)[0]:
            sid = self._ids[i]
            if sid not in fr.arrivals:
                fr.deadlines.append((float(dl[i]), sid))
        fr.deadlines.sort()

    def check_stalls(self, now: float, last_seen: dict[str, float]) -> list[Front]:
        """Mark fronts that stalled by `now`; returns the fronts whose stall state changed.

        Cheap when nothing is due: each front keeps its stations' deadlines sorted.
        """
        changed = []
        for fr in self.fronts:
            if fr.stalled_at is not None or not fr.deadlines or now <= fr.deadlines[0][0]:
                continue
            live = [(dl, sid) for dl, sid in fr.deadlines if now - last_seen.get(sid, -math.inf) <= STATION_UP_S]
            overdue = [sid for dl, sid in live if dl < now]
            # One silent station may be a missed detection: with more stations ahead, wait for two.
            if overdue and len(overdue) >= min(STALL_MIN_OVERDUE, len(live)):
                fr.stalled_at = now
                fr.overdue = sorted(overdue)
                changed.append(fr)
            elif not overdue:  # only silent stations are past due: drop them, wait for the next deadline
                fr.deadlines = [d for d in fr.deadlines if d[0] >= now]
        return changed

    def stall_progress(self, fr: Front) -> float | None:
        """Progress (m along the motion) beyond which the stalled front is not expected; None if moving.

        That is the furthest station it reached, not the nearest overdue one: the front stopped
        somewhere between them, and nothing shows it went beyond the last station that saw it (a
        decelerating front stops soon after its last station). A site in between is told so."""
        if fr.stalled_at is None or fr.fit is None or not fr.overdue:
            return None
        return fr.max_progress()

    def expire(self, now: float) -> list[Front]:
        """Close fronts with no new passage for FRONT_TTL_S; returns them."""
        gone = [fr for fr in self.fronts if now - fr.last_change > FRONT_TTL_S]
        if gone:
            self.fronts = [fr for fr in self.fronts if now - fr.last_change <= FRONT_TTL_S]
        return gone

    def get(self, key: str) -> Front | None:
        for fr in self.fronts:
            if fr.key == key:
                return fr
        return None

    def snapshot(self) -> list[dict[str, Any]]:
        return [fr.to_state() for fr in self.fronts]

    def restore(self, snap: list[dict[str, Any]]) -> None:
        self.fronts = [Front.from_state(s) for s in snap]
