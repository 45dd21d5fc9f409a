"""SiteWatch: the network part of the core. Passage events in; site forecasts, alerts and race-course
reports out.

The engine calls observe(obs, event) for every clean observation. The common path (no passage, same
data minute, a station no site watches) is a dict store and two comparisons. A breeze-front passage
updates the front tracker and then every site's forecast and alert. Work that depends on the clock
(stalls, overdue sites, imminent, clear, race-course summaries) runs once per data minute. Data
time only; state is bounded by the numbers of stations, sites and open fronts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

from ..alerts.lifecycle import (
    ACTIVE,
    APPROACHING,
    ARRIVED_STATE,
    CLEAR_AFTER_S,
    IMMINENT,
    ISSUE_LEAD_S,
    AlertMessage,
    SiteAlerts,
)
from ..calc.geo import haversine_m, local_xy_m
from ..calc.wind import wind_components, wind_direction
from ..config import NetworkConfig, SiteConfig
from ..events import PassageEvent
from ..obs import Observation
from ..timeutil import LocalClock
from .forecast import ARRIVED, EXPECTED, NOT_EXPECTED, SiteForecast, forecast_for_site
from .race import CourseMonitor, CourseReport
from .track import FRONT_TTL_S, LINK_M, STATION_UP_S, Front, FrontTracker

SITE_STATION_MAX_M = 5000.0  # the nearest station stands for a site only this close
ARRIVAL_MATCH_S = 30 * 60.0
PENDING_CROSS_M = 20_000.0  # stations this far across the site's track count as checkpoints before it  # a passage at the site's station this long before a front's first onset still counts
MAX_HEADING_DOUBT_DEG = 45.0  # the heading sd a confirming station's margin allows for, at most (see _beyond)
DIR_EMA_ALPHA = 0.1  # weight of a new record in the site station's running wind (about 10 records)
# A station detector decides a few minutes after the onset, while the marine air is still arriving
# and the temperature still falling (the transition takes some 5 to 15 minutes at a station, with
# the sensors' lag; common practice, from memory), so the drop it reports is partial, and with it
# the density-current speed of the prior (prior.py: U grows as the root of the drop). The
# temperature of the station's records DROP_WINDOW_S after the onset gives the drop behind the
# front; where it shows more cooling, the passage takes it and its front's forecasts are renewed.
DROP_WINDOW_S = (10 * 60.0, 20 * 60.0)
DROP_MIN_RECORDS = 3
DROP_MIN_DEEPER_C = 0.1  # a refinement that changes the drop by less is not worth a new forecast

Output = SiteForecast | AlertMessage | CourseReport


@dataclass(slots=True)
class _Drop:
    """A passage whose temperature drop is being remeasured (see DROP_WINDOW_S)."""

    front: str  # the key of the front it joined
    onset: float
    before: float  # the temperature before the front, as the detector measured the drop from it
    total: float = 0.0  # sum and count of the temperatures in the window so far
    n: int = 0

    def to_state(self) -> list[Any]:
        return [self.front, self.onset, self.before, self.total, self.n]

    @classmethod
    def from_state(cls, v: list[Any]) -> _Drop:
        return cls(str(v[0]), float(v[1]), float(v[2]), float(v[3]), int(v[4]))


class _Site:
    """Per-site state: its place, station, the front it follows, its last forecast and its alerts.

    `station`: the configured one, whose passage is the site's arrival, or else the nearest within
    SITE_STATION_MAX_M, which only stands in (its wind, its data's freshness). A site without a
    station of its own is 'arrived' (estimated) once a station at least as far along the front has
    reported.
    """

    def __init__(self, cfg: SiteConfig, x: float, y: float, station: str | None, alerts: SiteAlerts) -> None:
        self.cfg = cfg
        self.x = x
        self.y = y
        self.station = station
        self.alerts = alerts
        self.front: str | None = None
        self.last_fc: SiteForecast | None = None
        self.arrived: tuple[str, float] | None = None  # (front, time) once the front has arrived here
        self.own_station = cfg.station is not None  # configured: its passage is the site's
        self.next_eval = -math.inf  # data time before which the clock alone cannot change its outputs


def nearest_station(config: NetworkConfig, lat: float, lon: float) -> tuple[str, float]:
    """(id, distance m) of the station nearest to (lat, lon)."""
    best = min(config.stations, key=lambda s: (haversine_m(lat, lon, s.lat, s.lon), s.id))
    return best.id, haversine_m(lat, lon, best.lat, best.lon)


class SiteWatch:
    """Front tracking, site forecasts, alerts and race-course monitors for one network."""

    def __init__(self, config: NetworkConfig) -> None:
        self.config = config
        st = config.stations
        self.lat0 = sum(s.lat for s in st) / len(st)
        self.lon0 = sum(s.lon for s in st) / len(st)
        pos = {}
        for s in st:
            x, y = local_xy_m(s.lat, s.lon, self.lat0, self.lon0)
            pos[s.id] = (x, y, s.onshore_from_deg)
        tz = config.tz
        self.clock = LocalClock(tz)
        self.tracker = FrontTracker(pos, self.clock.hour)
        self.day_end_h = config.detector.day_end_h
        self.sites: list[_Site] = []
        self.monitors: dict[str, CourseMonitor] = {}  # site id -> monitor
        self._watched: dict[str, list[CourseMonitor]] = {}  # station -> monitors it feeds
        self._ema: dict[str, list[float]] = {}  # site station -> running (u, v)
        for sc in config.sites:
            near, dist = nearest_station(config, sc.lat, sc.lon)
            sid = sc.station or near
            confirm = sc.station or (near if dist <= SITE_STATION_MAX_M else None)
            x, y = local_xy_m(sc.lat, sc.lon, self.lat0, self.lon0)
            self.sites.append(_Site(sc, x, y, confirm, SiteAlerts(sc, tz, confirm)))
            self._ema.setdefault(sid, [0.0, 0.0, 0.0])
            self._watched.setdefault(sid, [])
            if sc.course_axis_deg is not None:
                stc = config.station(sid)
                assert stc is not None
                mon = CourseMonitor(sc.id, sc.course_axis_deg, stc.onshore_from_deg, stc.onshore_halfwidth_deg)
                self.monitors[sc.id] = mon
                self._watched[sid].append(mon)
        self._site_stations = {s.station for s in self.sites if s.station is not None}
        self._site_wind = {s.cfg.id: s.station or nearest_station(config, s.cfg.lat, s.cfg.lon)[0] for s in self.sites}
        self.last_seen: dict[str, float] = {}
        self.passages: dict[str, float] = {}  # site station -> onset of its latest breeze-front passage
        self.minute = -1
        self._next_tick = -math.inf  # data time of the next minute boundary
        self.refining: dict[str, _Drop] = {}  # station -> its latest passage while its drop is remeasured

    # ---- the hot path -------------------------------------------------------------------------
    def observe(self, obs: Observation, event: PassageEvent | None) -> list[Output]:
        t = obs.time
        st = obs.station
        self.last_seen[st] = t
        if st in self._watched:
            self._watch_obs(obs, self._watched[st])
        if st in self.refining:
            self.refine_temp(st, t, obs.temp_c)
        if event is None and t < self._next_tick:
            return []
        out: list[Output] = []
        if event is not None and event.kind == "breeze_front":
            out.extend(self._on_passage(event, t))
        if t >= self._next_tick:
            self.minute = int(t // 60.0)
            self._next_tick = (self.minute + 1) * 60.0
            out.extend(self._tick(t))
        return out

    def passage(self, ev: PassageEvent, now: float) -> list[Output]:
        """A breeze front reported with no record of its own: a weak call the network confirmed
        after the fact, at data time `now`, just before the confirming event (which observe() then
        takes). The tracker and the sites' own stations take it; the sites are evaluated with the
        confirming passage, not before: a front known from this old passage alone would give ETAs
        already past, an alert that the next passage at once overtakes."""
        if ev.kind != "breeze_front":
            return []
        if ev.station in self._site_stations:
            self.passages[ev.station] = ev.onset
        self.tracker.add(ev)
        return []

    def _watch_obs(self, obs: Observation, mons: list[CourseMonitor]) -> None:
        self.watch_wind(obs.station, obs.time, obs.wind_dir_deg, obs.wind_speed_ms, mons)

    def watch_wind(self, station: str, t: float, d: float, s: float, mons: list[CourseMonitor]) -> None:
        """What a watched station's record does to the running wind and the course monitors
        (`mons`, those it feeds): the whole of observe() for a record of it that neither carries
        an event nor reaches the next minute, apart from last_seen (frontwatch.batch calls it so,
        without an Observation)."""
        if d == d and s == s:
            u, v = wind_components(s, d)
            e = self._ema[station]
            a = DIR_EMA_ALPHA if e[2] else 1.0
            e[0] += a * (u - e[0])
            e[1] += a * (v - e[1])
            e[2] = 1.0
        for mon in mons:
            mon.add(t, d, s)

    def refine_temp(self, station: str, t: float, temp: float) -> None:
        """A record of a station whose passage's drop is being measured (observe() calls it, and
        frontwatch.batch for such a station's records within a minute)."""
        r = self.refining[station]
        if temp == temp and r.onset + DROP_WINDOW_S[0] <= t < r.onset + DROP_WINDOW_S[1]:
            r.total += temp
            r.n += 1

    def _refined(self, now: float) -> list[Output]:
        """Passages whose drop window has ended: take the drop behind the front where it is deeper
        than the detector's (the expected conditions at sites use it too), refit the front and, where
        its motion comes from the prior, renew its sites' forecasts."""
        out: list[Output] = []
        for st in [k for k, r in self.refining.items() if now >= r.onset + DROP_WINDOW_S[1]]:
            r = self.refining.pop(st)
            fr = self.tracker.get(r.front)
            a = None if fr is None else fr.arrivals.get(st)
            if fr is None or a is None or r.n < DROP_MIN_RECORDS or a.temp_change_c is None:
                continue
            drop = r.total / r.n - r.before
            if drop > a.temp_change_c - DROP_MIN_DEEPER_C:
                continue
            fr.arrivals[st] = replace(a, temp_change_c=drop)
            prior_based = fr.fit is not None and fr.fit.used_prior
            self.tracker.refit(fr)
            if not prior_based:  # only the prior uses the drop: a fitted front's forecasts do not change
                continue
            for site in self.sites:
                if site.front is None or site.front == fr.key:
                    out.extend(self._evaluate(site, now, fr, emit_forecast=False, emit_if_eta_moved=True))
        return out

    # ---- passages -----------------------------------------------------------------------------
    def _on_passage(self, ev: PassageEvent, now: float) -> list[Output]:
        if ev.station in self._site_stations:
            self.passages[ev.station] = ev.onset
        fr = self.tracker.add(ev)
        if fr is None or fr.fit is None:
            return []
        if ev.temp_change_c is not None and ev.temp_after_c is not None:
            self.refining[ev.station] = _Drop(fr.key, ev.onset, ev.temp_after_c - ev.temp_change_c)
        out: list[Output] = []
        for site in self.sites:
            out.extend(self._evaluate(site, now, fr, emit_forecast=True))
        return out

    def _arrived_at(self, site: _Site, fr: Front, now: float) -> float | None:
        if site.arrived is not None and site.arrived[0] == fr.key:
            return site.arrived[1]  # once arrived, the time stays (later refits do not move it)
        if site.station is None or not site.own_station:  # (the first test narrows the type)
            # No station of its own (a nearest one only stands in: a station a few km away sees the
            # front up to an hour before or after the site, at 1-2 m/s): estimated from the track
            # once a station at least as far along has reported (the stand-in too, if it is). Only
            # when no live station lies further along either (nothing could confirm it) is the ETA
            # passing enough, with the front still moving and every station short of the site
            # reached. (A front that slows and stops just short of the site shows as silence at the
            # stations beyond it: the site stays 'imminent', then 'not expected'.)
            f = fr.fit
            if f is None:
                return None
            p = f.progress(site.x, site.y)
            eta = f.predict(site.x, site.y)[0]
            if eta < fr.first_onset - ARRIVAL_MATCH_S:
                return None  # behind where the front was first seen: not on its path (forecast says so)
            tol = self._heading_doubt(f)
            if any(self._beyond(f, a.x, a.y, site, p, tol) for a in fr.arrivals.values()):
                return eta
            if fr.stalled_at is None and now >= eta and self._pending(site, fr, now) == 0 \
                    and not self._confirmable(site, fr, now):
                return eta  # (a checkpoint short of the site still to report: wait for it or a stall)
            return None
        a = fr.arrivals.get(site.station)
        if a is not None:
            return a.onset
        seen = self.passages.get(site.station)
        if seen is not None and fr.first_onset - ARRIVAL_MATCH_S <= seen <= fr.last_change + FRONT_TTL_S:
            return seen
        return None

    @staticmethod
    def _heading_doubt(f: Any) -> float:
        """tan of the front's heading sd (at most MAX_HEADING_DOUBT_DEG): see _beyond."""
        hd_sd = f.speed_heading_sd()[1]
        return math.tan(math.radians(min(hd_sd if hd_sd == hd_sd else MAX_HEADING_DOUBT_DEG, MAX_HEADING_DOUBT_DEG)))

    @staticmethod
    def _beyond(f: Any, x: float, y: float, site: _Site, p_site: float, tol: float) -> bool:
        """True when (x, y) is at least as far along the front's motion as the site, even with the
        front's heading off by its sd (`tol`, its tangent): a station far across the track from the
        site may be ahead of it or behind it by minutes to an hour as the heading turns (a
        two-station front's heading is good to some 20 deg; across 28 km that is 10 km of progress)."""
        s = math.hypot(f.sx, f.sy)
        if s == 0:
            return False
        cross = abs((x - site.x) * f.sy - (y - site.y) * f.sx) / s
        return f.progress(x, y) >= p_site + cross * tol

    def _confirmable(self, site: _Site, fr: Front, now: float) -> bool:
        """True when a live station the front has not reached lies at least as far along its motion
        as the site (within LINK_M of it): its passage would confirm the site's."""
        f = fr.fit
        if f is None:
            return False
        p_site = f.progress(site.x, site.y)
        for sid, (x, y, _) in self.tracker.positions.items():
            if sid in fr.arrivals or now - self.last_seen.get(sid, -math.inf) > STATION_UP_S:
                continue
            if f.progress(x, y) >= p_site and math.hypot(x - site.x, y - site.y) <= LINK_M:
                return True
        return False

    def _pending(self, site: _Site, fr: Front, now: float) -> int:
        """Live stations not yet reached that lie between the front's reach and the site, near its track."""
        f = fr.fit
        if f is None or not fr.deadlines:
            return 0
        p_site = f.progress(site.x, site.y)
        s = math.hypot(f.sx, f.sy)
        ux, uy = (f.sx / s, f.sy / s) if s > 0 else (0.0, 0.0)
        n = 0
        for _, sid in fr.deadlines:
            if (sid == site.station and site.own_station) or now - self.last_seen.get(sid, -math.inf) > STATION_UP_S:
                continue
            x, y, _ = self.tracker.positions[sid]
            if f.progress(x, y) >= p_site:
                continue
            cross = abs((x - site.x) * uy - (y - site.y) * ux)
            if cross <= PENDING_CROSS_M:
                n += 1
        return n

    def _forecast(self, site: _Site, fr: Front, now: float) -> SiteForecast:
        up = site.station is not None and now - self.last_seen.get(site.station, -math.inf) <= STATION_UP_S
        arrived = self._arrived_at(site, fr, now)
        first = fr.first_onset
        day_end = first + (self.day_end_h - self.clock.hour(first)) * 3600.0
        fc = forecast_for_site(site.cfg.id, site.x, site.y, fr, now, self.tracker.stall_progress(fr), arrived,
                               station_up=up, upstream_pending=0 if arrived is not None else self._pending(site, fr, now),
                               day_end=day_end)
        if arrived is not None and site.front == fr.key:
            site.arrived = (fr.key, arrived)
        return fc

    def _evaluate(self, site: _Site, now: float, changed: Front | None, emit_forecast: bool,
                  emit_if_eta_moved: bool = False) -> list[Output]:
        """Re-forecast one site. `changed` is a front that just changed (it may take the site over).
        A forecast is written when it says something new (emit_forecast), when its status or front
        changed, or (emit_if_eta_moved) when its ETA moved by a minute or more."""
        cur = self.tracker.get(site.front) if site.front is not None else None
        fr = cur
        fc = self._forecast(site, cur, now) if cur is not None else None
        if changed is not None and changed is not cur:
            fc_new = self._forecast(site, changed, now)
            if cur is None or fc is None or fc.status == NOT_EXPECTED:
                take = fc_new.status != NOT_EXPECTED
            elif fc.status == EXPECTED:  # keep the current front unless the new one is better supported
                take = fc_new.status != NOT_EXPECTED and len(changed.arrivals) > len(cur.arrivals)
            else:  # arrived: only a new front still to come
                take = fc_new.status == EXPECTED
            if take:
                fr, fc = changed, fc_new
                site.front = changed.key
        if fr is None or fc is None:
            return []
        out: list[Output] = []
        last = site.last_fc
        moved = emit_if_eta_moved and last is not None and last.eta is not None and fc.eta is not None and \
            abs(fc.eta - last.eta) >= 60.0
        if (emit_forecast and not fc.same_as(last)) or last is None or last.status != fc.status \
                or last.front != fc.front or moved:
            out.append(fc)
            site.last_fc = fc
        msg = site.alerts.step(now, fc, self._current_dir(self._site_wind[site.cfg.id]),
                               None if site.station is None else self.last_seen.get(site.station))
        if msg is not None:
            out.append(msg)
        site.next_eval = self._next_eval(site, fc, now)
        return out

    def _next_eval(self, site: _Site, fc: SiteForecast, now: float) -> float:
        """When the clock alone may next change this site's outputs (passages and stalls re-evaluate
        it anyway): keeps the once-a-minute work small while nothing is due."""
        st = site.alerts.state
        if fc.status == EXPECTED:
            if st in (APPROACHING, IMMINENT) or fc.eta is None:
                return now + 60.0
            return max(now + 60.0, fc.eta - ISSUE_LEAD_S - 60.0)  # nothing happens before the alert horizon
        if fc.status == ARRIVED and st == ARRIVED_STATE and site.alerts.arrived_at is not None:
            return max(now + 60.0, site.alerts.arrived_at + CLEAR_AFTER_S)
        if fc.status == ARRIVED and site.station is None and fc.eta is not None and fc.eta > now:
            return now + 60.0
        return math.inf

    def _current_dir(self, station: str) -> float | None:
        e = self._ema.get(station)
        if e is None or not e[2]:
            return None
        d = wind_direction(e[0], e[1])
        return None if d != d else d

    # ---- once a data minute -------------------------------------------------------------------
    def _tick(self, now: float) -> list[Output]:
        out: list[Output] = self._refined(now) if self.refining else []
        tr = self.tracker
        if tr.fronts:
            stalled = {fr.key for fr in tr.check_stalls(now, self.last_seen)}
            gone = {fr.key for fr in tr.expire(now)}
            for site in self.sites:
                if site.front is None:
                    if site.alerts.state in ACTIVE:
                        msg = site.alerts.step(now, None)
                        if msg is not None:
                            out.append(msg)
                    continue
                if site.front in gone:
                    site.front = None
                    last = site.alerts.fc
                    ended = None if last is None or last.status != EXPECTED else replace(
                        last, issued_at=now, status=NOT_EXPECTED, eta=None, eta_earliest=None, eta_latest=None,
                        reason="expired")
                    if ended is not None:
                        out.append(ended)
                        site.last_fc = ended
                    msg = site.alerts.step(now, ended)
                    if msg is not None:
                        out.append(msg)
                    continue
                if now >= site.next_eval or site.front in stalled:
                    out.extend(self._evaluate(site, now, None, emit_forecast=False))
        else:
            for site in self.sites:
                if site.alerts.state in ACTIVE:
                    msg = site.alerts.step(now, None)
                    if msg is not None:
                        out.append(msg)
        for mon in self.monitors.values():
            rep = mon.tick(now)
            if rep is not None:
                out.append(rep)
        return out

    # ---- state --------------------------------------------------------------------------------
    def snapshot(self) -> dict[str, Any]:
        return {
            "minute": self.minute,
            "last_seen": dict(self.last_seen),
            "passages": dict(self.passages),
            "refining": {k: v.to_state() for k, v in self.refining.items()},
            "ema": {k: list(v) for k, v in self._ema.items()},
            "fronts": self.tracker.snapshot(),
            "sites": {s.cfg.id: {"front": s.front, "last_fc": None if s.last_fc is None else s.last_fc.to_state(),
                                 "arrived": None if s.arrived is None else list(s.arrived),
                                 "next_eval": None if math.isinf(s.next_eval) else s.next_eval,
                                 "alerts": s.alerts.snapshot()} for s in self.sites},
            "monitors": {k: m.snapshot() for k, m in self.monitors.items()},
        }

    def restore(self, snap: dict[str, Any]) -> None:
        self.minute = int(snap["minute"])
        self._next_tick = (self.minute + 1) * 60.0 if self.minute >= 0 else -math.inf
        self.last_seen = {k: float(v) for k, v in snap["last_seen"].items()}
        self.passages = {k: float(v) for k, v in snap["passages"].items()}
        self.refining = {k: _Drop.from_state(v) for k, v in snap.get("refining", {}).items()}
        for k, v in snap["ema"].items():
            if k in self._ema:
                self._ema[k] = [float(x) for x in v]
        self.tracker.restore(snap["fronts"])
        for s in self.sites:
            d = snap["sites"].get(s.cfg.id)
            if d is None:
                continue
            s.front = d["front"]
            s.last_fc = None if d["last_fc"] is None else SiteForecast.from_state(d["last_fc"])
            s.arrived = None if d["arrived"] is None else (str(d["arrived"][0]), float(d["arrived"][1]))
            s.next_eval = math.inf if d["next_eval"] is None else float(d["next_eval"])
            s.alerts.restore(d["alerts"])
        for k, m in self.monitors.items():
            if k in snap["monitors"]:
                m.restore(snap["monitors"][k])
