"""What the web page shows, kept in memory: latest observation per station, short time series,
recent passages, forecasts and alerts, and a numbered feed that server-sent-event clients follow
(and catch up on after a reconnect).

Memory is bounded by the number of configured stations and sites, never by time: every history is
a fixed-size ring. Observations and outputs for unknown stations or sites are counted, not kept.
Not part of the pure core: it reads the wall clock (staleness is about when data last arrived).
The service calls observe()/emit() from its event loop; a lock and thread-safe wake-ups make it
also safe to feed from another thread (tests, benchmarks).
"""

from __future__ import annotations

import asyncio
import json
import math
import re
import threading
import time
from array import array
from collections import deque
from collections.abc import Iterable
from itertools import islice
from pathlib import Path
from typing import Any

from ..config import NetworkConfig
from ..errors import ConfigError
from ..obs import Observation
from ..timeutil import iso_z, parse_time

NAN = float("nan")
_SERIES_FIELDS = ("temp_c", "dewpoint_c", "wind_speed_ms", "wind_gust_ms", "wind_dir_deg")
_KIND_RE = re.compile(r"[^a-z0-9_]")


class _Ring:
    """Fixed-capacity ring of float rows (time plus the series fields), stored in C arrays."""

    __slots__ = ("cap", "n", "head", "cols")

    def __init__(self, cap: int, ncols: int) -> None:
        self.cap = cap
        self.n = 0
        self.head = 0  # next slot to write
        self.cols = [array("d", bytes(8 * cap)) for _ in range(ncols)]

    def append(self, row: Iterable[float]) -> None:
        for col, v in zip(self.cols, row, strict=True):
            col[self.head] = v
        self.head = (self.head + 1) % self.cap
        self.n = min(self.n + 1, self.cap)

    def columns(self) -> list[list[float]]:
        start = (self.head - self.n) % self.cap
        idx = [(start + i) % self.cap for i in range(self.n)]
        return [[c[i] for i in idx] for c in self.cols]


def _num(x: float) -> float | None:
    return None if x != x or math.isinf(x) else round(x, 2)


def _clean(x: Any) -> Any:
    """JSON-safe copy: non-finite floats become null (browsers reject NaN in JSON)."""
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [_clean(v) for v in x]
    return x


def dumps(x: Any) -> str:
    try:
        return json.dumps(x, allow_nan=False, separators=(",", ":"))
    except ValueError:
        return json.dumps(_clean(x), allow_nan=False, separators=(",", ":"))
    except TypeError:
        return json.dumps(_clean(x), default=str, allow_nan=False, separators=(",", ":"))


def _time_of(v: Any) -> float | None:
    if isinstance(v, int | float) and math.isfinite(v):
        return float(v)
    if isinstance(v, str):
        try:
            return parse_time(v)
        except (ValueError, OverflowError):
            return None
    return None


def load_shoreline(path: str | Path) -> list[list[list[float]]]:
    """Read an outline file -> list of polylines, each a list of [lat, lon].

    GeoJSON (.json/.geojson: LineString, MultiLineString, Polygon, MultiPolygon, Feature or
    FeatureCollection; positions are [lon, lat] as GeoJSON says) or plain text: one 'lat lon'
    (or 'lat,lon') pair a line, a blank line between polylines, '#' starts a comment.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read shoreline file: {exc.strerror or exc}") from None
    if p.suffix.lower() in (".json", ".geojson"):
        try:
            doc = json.loads(text)
        except ValueError as exc:
            raise ConfigError(f"{p}: not valid JSON: {exc}") from None
        lines: list[list[list[float]]] = []
        _geojson_lines(doc, lines, str(p))
        return lines
    out: list[list[list[float]]] = []
    cur: list[list[float]] = []
    for no, raw in enumerate(text.splitlines(), 1):
        s = raw.split("#", 1)[0].strip()
        if not s:
            if cur:
                out.append(cur)
                cur = []
            continue
        parts = s.replace(",", " ").split()
        try:
            lat, lon = float(parts[0]), float(parts[1])
        except (ValueError, IndexError):
            raise ConfigError(f"{p}, line {no}: expected 'lat lon', got {s[:40]!r}") from None
        if not (-90 <= lat <= 90 and -180 <= lon <= 180):
            raise ConfigError(f"{p}, line {no}: lat/lon out of range: {lat}, {lon}")
        cur.append([lat, lon])
    if cur:
        out.append(cur)
    return out


def _geojson_lines(doc: Any, out: list[list[list[float]]], src: str) -> None:
    if not isinstance(doc, dict):
        raise ConfigError(f"{src}: expected a GeoJSON object")
    t = doc.get("type")
    if t == "FeatureCollection":
        for f in doc.get("features", []):
            _geojson_lines(f, out, src)
    elif t == "Feature":
        if doc.get("geometry") is not None:
            _geojson_lines(doc["geometry"], out, src)
    elif t == "GeometryCollection":
        for g in doc.get("geometries", []):
            _geojson_lines(g, out, src)
    elif t in ("LineString", "MultiLineString", "Polygon", "MultiPolygon"):
        c: Any = doc.get("coordinates") or []
        rings: Any = {"LineString": [c], "MultiLineString": c, "Polygon": c,
                 "MultiPolygon": [r for poly in (c or []) for r in poly]}[t]
        for ring in rings:
            try:
                out.append([[float(pt[1]), float(pt[0])] for pt in ring])
            except (TypeError, ValueError, IndexError):
                raise ConfigError(f"{src}: bad coordinates in a {t}") from None
    else:
        raise ConfigError(f"{src}: unsupported GeoJSON type {t!r}")


class DashboardHub:
    """Bounded in-memory view for the dashboard. Not part of the pure core: it may read the clock.

    history: feed items kept for catch-up; series_len: minutes of time series per station;
    stale_after_s: a station with no record for this long (wall clock, or data time behind the
    network's newest record) is shown as stale.
    """

    def __init__(self, config: NetworkConfig, history: int = 5000, series_len: int = 360,
                 stale_after_s: float = 600.0, shoreline: list[list[list[float]]] | None = None) -> None:
        self.config = config
        self.stale_after_s = stale_after_s
        self.shoreline = shoreline or []
        self.seq = 0
        self.feed: deque[tuple[int, str, str]] = deque(maxlen=history)  # (seq, kind, json)
        self._ids = {s.id for s in config.stations}
        self._site_ids = {s.id for s in config.sites}
        self.latest: dict[str, dict[str, Any]] = {}
        self.series: dict[str, _Ring] = {s.id: _Ring(series_len, 1 + len(_SERIES_FIELDS)) for s in config.stations}
        self.passages: dict[str, deque[dict[str, Any]]] = {s.id: deque(maxlen=20) for s in config.stations}
        self.recent: deque[dict[str, Any]] = deque(maxlen=300)  # every output, newest last
        self.alert_log: deque[dict[str, Any]] = deque(maxlen=200)
        self.events: deque[dict[str, Any]] = deque(maxlen=200)
        self.site_state: dict[str, dict[str, Any]] = {}
        self.forecasts: dict[str, dict[str, Any]] = {}
        self.courses: dict[str, dict[str, Any]] = {}  # race-course summaries (type 'course') by site
        self.front: dict[str, Any] | None = None
        self.received_wall: dict[str, float] = {}
        self.qc_trouble: dict[str, int] = {}
        self.qc_recent: dict[str, deque[tuple[float, str]]] = {}
        self.data_time: float | None = None  # newest observation time seen (event time)
        self.ignored = 0  # records/outputs for unknown stations or sites
        self.clients = 0  # open event streams
        self.closed = False  # set by close(): open event streams end, so the web server can stop
        self._lock = threading.Lock()
        self._waiters: set[tuple[asyncio.AbstractEventLoop, asyncio.Event]] = set()
        self._iso_cache: dict[float, str] = {}  # observation time -> its ISO text (many stations, one minute)

    # --- fed by the service -------------------------------------------------------------------
    def observe(self, obs: Observation, flags: list[str] | tuple[str, ...] = ()) -> None:
        """One observation as received (before or after QC) with the QC flags it got."""
        self.observe_many(((obs, flags),))

    def observe_many(self, items: Iterable[tuple[Observation, list[str] | tuple[str, ...]]]) -> None:
        """observe() for several records at once (one lock, one wake-up; what the service uses).

        Each is the record Observation.to_record gives, with the time text shared by records of
        the same minute."""
        ids = self._ids
        now = time.time()
        pushed: list[tuple[str, str]] = []
        times = self._iso_cache
        for obs, flags in items:
            st = obs.station
            if st not in ids:
                self.ignored += 1
                continue
            t = obs.time
            ts = times.get(t)
            if ts is None:
                if len(times) > 256:
                    times.clear()
                ts = times[t] = iso_z(t)
            rec = obs.to_record(ts)
            if flags:
                rec["qc"] = list(flags)
                self.qc_trouble[st] = self.qc_trouble.get(st, 0) + len(flags)
                q = self.qc_recent.setdefault(st, deque(maxlen=10))
                for f in flags:
                    q.append((t, str(f)))
            with self._lock:
                self.latest[st] = rec
                self.received_wall[st] = now
                if self.data_time is None or t > self.data_time:
                    self.data_time = t
                self.series[st].append((t, obs.temp_c, obs.dewpoint_c, obs.wind_speed_ms, obs.wind_gust_ms,
                                        obs.wind_dir_deg))
            pushed.append(("obs", dumps(rec)))
        if pushed:
            with self._lock:
                for kind, data in pushed:
                    self.seq += 1
                    self.feed.append((self.seq, kind, data))
            self._wake()

    def emit(self, out: dict[str, Any]) -> None:
        """An event, forecast or alert object (its contract JSON). No 'type' means a passage event."""
        kind = _KIND_RE.sub("", str(out.get("type", "event")).lower()) or "event"
        site = str(out.get("site", ""))
        if ("site" in out or kind in ("alert", "forecast", "course")) and site not in self._site_ids:
            self.ignored += 1
            return
        item = {**out, "type": kind}
        with self._lock:
            if kind == "event":
                st = out.get("station")
                if st not in self._ids:
                    self.ignored += 1
                    return
                self.passages[st].append(item)
                self.events.append(item)
            elif kind == "alert":
                self.site_state[site] = item
                self.alert_log.append(item)
            elif kind == "forecast":
                self.forecasts[site] = item
            elif kind == "course":
                self.courses[site] = item
            # A front drawn by the tracker may come as its own output or inside another one; the
            # tracker's forecasts name their front by key (a string), which the page shows as text.
            if isinstance(out.get("front"), dict):
                self.front = {**out["front"], "issued_at": out.get("issued_at")}
            elif kind == "front":
                self.front = item
            self.recent.append(item)
        self._push(kind, item)

    def _push(self, kind: str, payload: dict[str, Any]) -> None:
        data = dumps(payload)
        with self._lock:
            self.seq += 1
            self.feed.append((self.seq, kind, data))
        self._wake()

    def close(self) -> None:
        """End every open event stream (call before stopping the web server: a stream that never
        ends would keep a graceful shutdown waiting for ever). Browsers reconnect and catch up."""
        self.closed = True
        self._wake()

    def _wake(self) -> None:
        with self._lock:
            waiters = list(self._waiters)
        try:
            here: asyncio.AbstractEventLoop | None = asyncio.get_running_loop()
        except RuntimeError:
            here = None
        for loop, ev in waiters:
            if loop is here:
                ev.set()
            elif not loop.is_closed():
                loop.call_soon_threadsafe(ev.set)

    # --- read by the web app ------------------------------------------------------------------
    def oldest_seq(self) -> int:
        """The seq of the oldest item still held (seq + 1 when the feed is empty)."""
        with self._lock:
            return self.feed[0][0] if self.feed else self.seq + 1

    def since(self, seq: int, limit: int | None = None) -> list[tuple[int, str, str]]:
        """Feed items after `seq` (what a reconnecting client missed, as far as history reaches)."""
        with self._lock:
            if not self.feed or seq >= self.seq:
                return []
            first = self.feed[0][0]
            start = max(0, seq - first + 1)
            stop = None if limit is None else start + limit
            return list(islice(self.feed, start, stop))

    async def wait(self, timeout: float, after: int | None = None) -> None:
        """Wait up to `timeout` s for new items or close(). With `after` (the seq a stream has
        sent), return at once if items past it came or the hub closed before the waiter was
        registered: the caller awaited something else between its own check and this call."""
        ev = asyncio.Event()
        key = (asyncio.get_running_loop(), ev)
        with self._lock:  # checked and registered at once: a _wake() cannot fall between them
            if after is not None and (self.closed or self.seq > after):
                return
            self._waiters.add(key)
        try:
            await asyncio.wait_for(ev.wait(), timeout)
        except TimeoutError:
            pass
        finally:
            with self._lock:
                self._waiters.discard(key)

    def _station_health(self, sid: str, now: float) -> dict[str, Any]:
        wall = self.received_wall.get(sid)
        age = now - wall if wall is not None else None
        latest = self.latest.get(sid)
        lag = None
        if latest is not None and self.data_time is not None:
            lag = self.data_time - (_time_of(latest["time"]) or self.data_time)
        stale = age is None or age > self.stale_after_s or (lag is not None and lag > self.stale_after_s)
        qc = [{"time": iso_z(t), "reason": r} for t, r in self.qc_recent.get(sid, ())]
        return {"age_s": None if age is None else round(age, 1), "data_lag_s": lag, "stale": stale,
                "qc_flags": self.qc_trouble.get(sid, 0), "qc_recent": qc}

    def state(self, stale_after_s: float | None = None) -> dict[str, Any]:
        """Everything the page needs to draw itself from scratch; `seq` is where its stream resumes."""
        if stale_after_s is not None:
            self.stale_after_s = stale_after_s
        now = time.time()
        with self._lock:
            stations = []
            for st in self.config.stations:
                stations.append({
                    "id": st.id, "name": st.name, "lat": st.lat, "lon": st.lon,
                    "onshore_from_deg": st.onshore_from_deg, "onshore_halfwidth_deg": st.onshore_halfwidth_deg,
                    "latest": self.latest.get(st.id), "passages": list(self.passages[st.id])[-3:],
                    **self._station_health(st.id, now),
                })
            sites = [{"id": s.id, "name": s.name, "lat": s.lat, "lon": s.lon,
                      "station": s.station or self._nearest_station(s.lat, s.lon),
                      "gust_limit_ms": s.gust_limit_ms, "shift_limit_deg": s.shift_limit_deg,
                      "course_axis_deg": s.course_axis_deg,
                      "alert": self.site_state.get(s.id), "forecast": self.forecasts.get(s.id),
                      "course": self.courses.get(s.id)}
                     for s in self.config.sites]
            doc = {"network": self.config.network.name, "seq": self.seq, "server_time": now,
                   "data_time": None if self.data_time is None else iso_z(self.data_time),
                   "stale_after_s": self.stale_after_s, "stations": stations, "sites": sites,
                   "events": list(self.events)[-100:], "alerts": list(self.alert_log)[-100:],
                   "front": self.front, "recent": list(self.recent)[-100:],
                   "shoreline": self.shoreline, "tz_offset_min": self._tz_offset_min()}
        return _clean(doc)

    def _nearest_station(self, lat: float, lon: float) -> str | None:
        best, bid = math.inf, None
        c = math.cos(math.radians(lat))
        for st in self.config.stations:
            d = (st.lat - lat) ** 2 + ((st.lon - lon) * c) ** 2
            if d < best:
                best, bid = d, st.id
        return bid

    def _tz_offset_min(self) -> float | None:
        tz = self.config.tz
        if tz is None:
            return None
        from datetime import UTC, datetime

        t = self.data_time if self.data_time is not None else time.time()
        off = datetime.fromtimestamp(t, UTC).astimezone(tz).utcoffset()
        return None if off is None else off.total_seconds() / 60.0

    def station_series(self, sid: str) -> dict[str, Any] | None:
        """Time series (columns) and passages of one station; None if the station is unknown."""
        if sid not in self._ids:
            return None
        with self._lock:
            cols = self.series[sid].columns()
            passages = list(self.passages[sid])
        out: dict[str, Any] = {"station": sid, "time": [iso_z(t) for t in cols[0]]}
        for name, col in zip(_SERIES_FIELDS, cols[1:], strict=True):
            out[name] = [_num(v) for v in col]
        out["passages"] = passages
        return out
