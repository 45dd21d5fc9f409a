"""Race-course monitor: the wind at a course, against its axis, for a race committee.

Per minute, from the site station's observations:
- vector-mean direction (of the wind vectors), scalar mean speed and Yamartino (1984) direction spread
  over the last 2, 5 and 10 whole data minutes (running sums per minute: cheap once a minute);
- the 10-minute direction against the course axis (signed; positive = veered, clockwise of the axis);
- the pattern over the last PATTERN_MIN minutes of one-minute directions: a 'persistent' shift (the
  late mean moved away from the early mean by more than the oscillation explains), an 'oscillating'
  wind (repeated crossings of the detrended mean by a smooth swing, lag-1 autocorrelation >= 0.5,
  which minute-to-minute noise does not have; period from the mean spacing of crossings, amplitude
  sqrt(2) x the residual sd, as for a sinusoid), 'steady', or 'unsettled';
- 'new breeze filled in and steady': the 10-minute wind is onshore, at speed, with a small spread,
  and has stayed so for NEW_BREEZE_HOLD_MIN minutes; reported with the minute it first was so.
A report goes out only when the summary changes meaningfully: the pattern (analysed every 3 minutes,
believed when two analyses agree) or the new-breeze flag (believed after 3 minutes) changes, or the
10-minute direction or spread moved by REPORT_DIR_DEG since the last report (then at most every
REPORT_MIN_GAP_S). Thresholds are common practice on race committees, not from a published source;
they are module constants.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass
from typing import Any

from ..calc.wind import (
    angle_diff_deg,
    circular_mean_deg,
    in_sector,
    vector_mean,
    wind_components,
    wind_direction,
    yamartino_sigma_deg,
)
from ..timeutil import iso_z

WINDOWS_MIN = (2, 5, 10)
PATTERN_MIN = 40
PATTERN_MIN_POINTS = 20
PERSIST_DEG = 10.0
OSC_MIN_DEG = 4.0
OSC_MIN_CROSSINGS = 3
OSC_MIN_AUTOCORR = 0.5
OSC_MIN_PERIOD_MIN = 4.0
STEADY_SPREAD_DEG = 12.0
NEW_BREEZE_MIN_MS = 2.0
NEW_BREEZE_MAX_SPREAD_DEG = 15.0
NEW_BREEZE_HOLD_MIN = 3
NEW_BREEZE_LOSS_MIN = 5
PATTERN_EVERY_MIN = 3
PATTERN_HOLD = 2  # analyses in a row
REPORT_DIR_DEG = 10.0
REPORT_MIN_GAP_S = 300.0  # between reports that only say the wind moved
_YAM_B = 2.0 / math.sqrt(3.0) - 1.0  # Yamartino (1984) eq. 2 coefficient
_DEG = math.pi / 180.0  # as calc.wind (the pattern analysis repeats its circular sums)
_RESULTANT_EPS = 1e-9  # as calc.wind.circular_mean_deg: below it no mean direction exists


def _r(x: float | None, nd: int = 1) -> float | None:
    return None if x is None or x != x else round(float(x), nd)


def _j(x: float) -> float | None:
    """NaN -> None, so snapshots are strict JSON."""
    return None if x != x else x


def _f(x: float | None) -> float:
    return math.nan if x is None else float(x)


@dataclass(frozen=True, slots=True)
class WindowStat:
    minutes: int
    dir_deg: float | None
    spread_deg: float | None
    speed_ms: float | None
    n: int

    def to_dict(self) -> dict[str, Any]:
        return {"minutes": self.minutes, "dir_deg": _r(self.dir_deg, 0), "spread_deg": _r(self.spread_deg),
                "speed_ms": _r(self.speed_ms), "n": self.n}


@dataclass(frozen=True, slots=True)
class Pattern:
    kind: str  # steady | oscillating | persistent | unsettled | unknown
    trend_deg: float | None
    period_min: float | None
    amplitude_deg: float | None


@dataclass(frozen=True, slots=True)
class CourseReport:
    """One race-course summary (type 'course'; docs/alerts.md)."""

    site: str
    issued_at: float
    axis_deg: float
    windows: tuple[WindowStat, ...]
    shift_deg: float | None
    pattern: Pattern
    new_breeze: bool
    new_breeze_since: float | None

    def to_dict(self) -> dict[str, Any]:
        p = self.pattern
        return {
            "type": "course",
            "site": self.site,
            "issued_at": iso_z(self.issued_at),
            "axis_deg": self.axis_deg,
            "windows": [w.to_dict() for w in self.windows],
            "shift_deg": _r(self.shift_deg, 0),
            "pattern": p.kind,
            "trend_deg": _r(p.trend_deg, 0),
            "oscillation_period_min": _r(p.period_min),
            "oscillation_amplitude_deg": _r(p.amplitude_deg),
            "new_breeze": self.new_breeze,
            "new_breeze_since": None if self.new_breeze_since is None else iso_z(self.new_breeze_since),
        }


def window_stat(samples: list[tuple[float, float, float]], now: float, minutes: int) -> WindowStat:
    """Vector-mean direction, Yamartino spread and scalar mean speed of samples (t, dir, speed) in
    the `minutes` before `now`. Calm samples (NaN direction) count in the speed only."""
    t0 = now - minutes * 60.0
    dirs = []
    spd = []
    for t, d, s in samples:
        if t >= t0:
            if s == s:
                spd.append(s)
            if d == d:
                dirs.append(d)
    if not spd and not dirs:
        return WindowStat(minutes, None, None, None, 0)
    pairs = [(s, d) for t, d, s in samples if t >= t0 and s == s and (d == d or s == 0.0)]
    _, vdir = vector_mean([p[0] for p in pairs], [p[1] for p in pairs]) if pairs else (math.nan, math.nan)
    if vdir != vdir and dirs:
        vdir = circular_mean_deg(dirs)
    return WindowStat(minutes, None if vdir != vdir else vdir,
                      yamartino_sigma_deg(dirs) if dirs else None,
                      sum(spd) / len(spd) if spd else None, len(spd))


def yamartino_from_sums(mean_sin: float, mean_cos: float) -> float:
    """Yamartino (1984) sigma, deg, from the mean sine and cosine of the directions (the same
    formula as calc.wind.yamartino_sigma_deg, for running sums)."""
    eps = min(math.sqrt(max(0.0, 1.0 - (mean_sin * mean_sin + mean_cos * mean_cos))), 1.0)
    return math.degrees(math.asin(eps) * (1.0 + _YAM_B * eps**3))


def _stat(minutes: int, ss: float, cs: float, nd: float, su: float, sv: float, nv: float, sp: float,
          ns: float) -> WindowStat:
    """A WindowStat from running sums (sin, cos, n dirs, u, v, n vectors, speed, n speeds)."""
    return WindowStat(minutes, *_stat_fields(ss, cs, nd, su, sv, nv, sp, ns))


def _stat_fields(ss: float, cs: float, nd: float, su: float, sv: float, nv: float, sp: float,
                 ns: float) -> tuple[float | None, float | None, float | None, int]:
    """_stat's (dir_deg, spread_deg, speed_ms, n), without making the WindowStat."""
    if ns == 0 and nd == 0:
        return None, None, None, 0
    vdir = wind_direction(su / nv, sv / nv) if nv else math.nan
    if vdir != vdir and nd:
        vdir = math.degrees(math.atan2(ss, cs)) % 360.0
    spread = yamartino_from_sums(ss / nd, cs / nd) if nd else None
    return None if vdir != vdir else vdir, spread, sp / ns if ns else None, int(ns)


def _dir_of(ss: float, cs: float, nd: float, su: float, sv: float, nv: float, sp: float, ns: float) -> float:
    """_stat's direction alone (NaN where it has none): what the pattern needs of the last minute."""
    if ns == 0 and nd == 0:
        return math.nan
    vdir = wind_direction(su / nv, sv / nv) if nv else math.nan
    if vdir != vdir and nd:
        vdir = math.degrees(math.atan2(ss, cs)) % 360.0
    return vdir


def analyse_pattern(minute_dirs: list[tuple[float, float]]) -> Pattern:
    """Classify one-minute directions [(t, dir)] as persistent shift / oscillation / steady / unsettled."""
    pts = [(t, d) for t, d in minute_dirs if d == d]
    return _analyse(pts, [_trig(d) for _, d in pts])


def _trig(d: float) -> tuple[float, float] | None:
    """(sin, cos) of a direction, None where it is not finite (as calc.wind's circular sums skip it)."""
    if not math.isfinite(d):
        return None
    r = d * _DEG
    return math.sin(r), math.cos(r)


def _analyse(pts: list[tuple[float, float]], trig: list[tuple[float, float] | None]) -> Pattern:
    """analyse_pattern over the non-NaN points, given each one's _trig (a monitor keeps them from
    minute to minute: each minute's direction is in about PATTERN_MIN / PATTERN_EVERY_MIN analyses).
    The arithmetic is calc.wind's circular mean and Yamartino spread over the same sums, in the
    same order, so the result is the same to the bit."""
    if len(pts) < PATTERN_MIN_POINTS:
        return Pattern("unknown", None, None, None)
    ss = cs = 0.0
    k_dirs = 0
    for tc in trig:
        if tc is not None:
            ss += tc[0]
            cs += tc[1]
            k_dirs += 1
    if k_dirs == 0 or math.hypot(ss, cs) < _RESULTANT_EPS * k_dirs:
        ref = math.nan
    else:
        ref = math.degrees(math.atan2(ss, cs)) % 360.0
        if ref >= 360.0:
            ref = 0.0
    t0 = pts[0][0]
    ts = [(t - t0) / 60.0 for t, _ in pts]
    rs = [x - 360.0 if (x := (d - ref) % 360.0) > 180.0 else x for _, d in pts]  # angle_diff_deg(d, ref)
    n = len(rs)
    k = max(n // 4, 5)
    trend = sum(rs[-k:]) / k - sum(rs[:k]) / k
    # Linear detrend, then the residual's sd and crossings of zero (with a small dead band).
    tm = sum(ts) / n
    rm = sum(rs) / n
    tcs = [t - tm for t in ts]
    stt = sum([x ** 2 for x in tcs])
    drs = [r - rm for r in rs]
    b = sum([x * r for x, r in zip(tcs, drs, strict=True)]) / stt if stt > 0 else 0.0
    e = [r - b * x for x, r in zip(tcs, drs, strict=True)]  # r - rm - b * (t - tm)
    sd = math.sqrt(sum([x * x for x in e]) / n)
    amp = math.sqrt(2.0) * sd
    band = 0.3 * sd
    crossings: list[float] = []
    sign = 0
    last_t = last_e = None
    for t, x in zip(ts, e, strict=True):
        s = 1 if x > band else (-1 if x < -band else 0)
        if s != 0:
            if sign != 0 and s != sign and last_t is not None and last_e is not None:
                crossings.append(last_t + (t - last_t) * (last_e / (last_e - x)) if last_e != x else t)
            sign = s
            last_t, last_e = t, x
    period = None
    if len(crossings) >= 2:
        period = 2.0 * (crossings[-1] - crossings[0]) / (len(crossings) - 1)
    # Lag-1 autocorrelation of the residual: a smooth swing of period P gives about cos(2 pi / P)
    # (0.87 for 12 min); minute-to-minute noise gives about 0.
    r1 = sum([a * b for a, b in zip(e, e[1:], strict=False)]) / (sd * sd * n) if sd > 0 else 0.0
    if abs(trend) >= PERSIST_DEG and abs(trend) >= 1.5 * amp:
        return Pattern("persistent", trend, None, None)
    if (len(crossings) >= OSC_MIN_CROSSINGS and amp >= OSC_MIN_DEG and r1 >= OSC_MIN_AUTOCORR
            and period is not None and period >= OSC_MIN_PERIOD_MIN):
        return Pattern("oscillating", trend, period, amp)
    # Yamartino spread of the last ten points (calc.wind.yamartino_sigma_deg over the same sums)
    ss = cs = 0.0
    k_dirs = 0
    for tc in trig[-10:]:
        if tc is not None:
            ss += tc[0]
            cs += tc[1]
            k_dirs += 1
    y = yamartino_from_sums(ss / k_dirs, cs / k_dirs) if k_dirs else math.nan
    return Pattern("steady" if y <= STEADY_SPREAD_DEG else "unsettled", trend, None, None)


class CourseMonitor:
    """The race-course monitor of one site (fed its station's observations)."""

    def __init__(self, site: str, axis_deg: float, onshore_from_deg: float, onshore_halfwidth_deg: float) -> None:
        self.site = site
        self.axis_deg = axis_deg
        self.onshore_from_deg = onshore_from_deg
        self.halfwidth = onshore_halfwidth_deg
        # One bucket per data minute: [minute, sum sin, sum cos, n dirs, sum u, sum v, n vectors,
        # sum speed, n speeds]; windows add up the last k buckets (trigonometry once per record).
        self.buckets: deque[list[float]] = deque(maxlen=max(WINDOWS_MIN) + 2)
        self.minutes: deque[tuple[float, float]] = deque(maxlen=PATTERN_MIN)
        self._minute_trig: deque[tuple[float, float] | None] = deque(maxlen=PATTERN_MIN)  # _trig of each
        self.pattern_kind = "unknown"  # the reported (debounced) pattern
        self.pattern_candidate = "unknown"
        self.pattern_count = 0
        self.last_pattern = Pattern("unknown", None, None, None)
        self.breeze_run_start: float | None = None
        self.breeze_run_len = 0
        self.breeze_fail = 0
        self.new_breeze_since: float | None = None
        self.last_report: tuple[str, bool, float | None, float | None] | None = None
        self.last_report_at = -1e18

    def add(self, t: float, dir_deg: float, speed_ms: float) -> None:
        m = float(t // 60.0)
        b = self.buckets[-1] if self.buckets else None
        if b is None or b[0] != m:
            b = [m, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0]
            self.buckets.append(b)
        if speed_ms == speed_ms:
            b[7] += speed_ms
            b[8] += 1
            if speed_ms == 0.0:
                b[6] += 1  # calm: a zero vector
            elif dir_deg == dir_deg:
                u, v = wind_components(speed_ms, dir_deg)
                b[4] += u
                b[5] += v
                b[6] += 1
        if dir_deg == dir_deg:
            r = math.radians(dir_deg)
            b[1] += math.sin(r)
            b[2] += math.cos(r)
            b[3] += 1

    def window(self, now: float, minutes: int) -> WindowStat:
        """Statistics of the `minutes` whole data minutes before the one `now` falls in."""
        return self.windows(now, (minutes,))[0]

    def windows(self, now: float, spans: tuple[int, ...] = (1, *WINDOWS_MIN)) -> tuple[WindowStat, ...]:
        """window() for several spans (ascending), in one pass over the buckets, newest first."""
        return tuple(_stat(k, *sums) for k, sums in zip(spans, self._sums(now, spans), strict=True))

    def _sums(self, now: float, spans: tuple[int, ...] = (1, *WINDOWS_MIN)) -> list[tuple[float, ...]]:
        """The running sums (_stat's arguments) of each span, accumulated newest bucket first."""
        m_now = now // 60.0
        ss = cs = nd = su = sv = nv = sp = ns = 0.0
        out: list[tuple[float, ...]] = []
        it = reversed(self.buckets)
        b = next(it, None)
        for k in spans:
            while b is not None and b[0] >= m_now - k:
                if b[0] < m_now:
                    ss += b[1]
                    cs += b[2]
                    nd += b[3]
                    su += b[4]
                    sv += b[5]
                    nv += b[6]
                    sp += b[7]
                    ns += b[8]
                b = next(it, None)
            out.append((ss, cs, nd, su, sv, nv, sp, ns))
        return out

    def tick(self, now: float) -> CourseReport | None:
        """Once a data minute: update the summary; returns a report when it changed meaningfully."""
        quiet = not self.buckets or self.buckets[-1][0] < now // 60.0 - max(WINDOWS_MIN) - 1
        if quiet and self.last_report is None:
            return None  # nothing heard for longer than the longest window, nothing said yet
        # The 1-minute direction and the 10-minute statistics every minute; the 2- and 5-minute
        # ones only for a report (the same sums as windows(), so the same figures).
        sums = self._sums(now)
        one_dir = _dir_of(*sums[0])
        self.minutes.append((now, one_dir))
        self._minute_trig.append(_trig(one_dir))
        d10, spread10, speed10, n10 = _stat_fields(*sums[-1])  # (its WindowStat only for a report)
        shift = None if d10 is None else angle_diff_deg(d10, self.axis_deg)
        # The pattern needs tens of minutes to change: analyse every PATTERN_EVERY_MIN data minutes
        # (chosen by the minute's number, so replay and restore agree), believe it after PATTERN_HOLD.
        if int(now // 60.0) % PATTERN_EVERY_MIN == 0:
            if len(self._minute_trig) == len(self.minutes):
                pts = [m for m in self.minutes if m[1] == m[1]]
                pat = _analyse(pts, [tc for m, tc in zip(self.minutes, self._minute_trig, strict=True)
                                     if m[1] == m[1]])
            else:  # (minutes set from outside)
                pat = analyse_pattern(list(self.minutes))
            self.last_pattern = pat
            if pat.kind == self.pattern_candidate:
                self.pattern_count += 1
            else:
                self.pattern_candidate, self.pattern_count = pat.kind, 1
            if self.pattern_count >= PATTERN_HOLD:
                self.pattern_kind = pat.kind
        pat = self.last_pattern
        ok = (d10 is not None and spread10 is not None and speed10 is not None
              and speed10 >= NEW_BREEZE_MIN_MS and spread10 <= NEW_BREEZE_MAX_SPREAD_DEG
              and in_sector(d10, self.onshore_from_deg, self.halfwidth))
        if ok:
            self.breeze_fail = 0
            if self.breeze_run_start is None:
                self.breeze_run_start = now
                self.breeze_run_len = 0
            self.breeze_run_len += 1
            if self.new_breeze_since is None and self.breeze_run_len >= NEW_BREEZE_HOLD_MIN:
                self.new_breeze_since = self.breeze_run_start
        else:
            self.breeze_fail += 1
            if self.new_breeze_since is None:
                self.breeze_run_start = None
            elif self.breeze_fail >= NEW_BREEZE_LOSS_MIN:
                self.new_breeze_since = None
                self.breeze_run_start = None
        if self.pattern_kind != pat.kind:
            pat = Pattern(self.pattern_kind, pat.trend_deg, None, None)
        key = (self.pattern_kind, self.new_breeze_since is not None, d10, spread10)
        last = self.last_report
        if last is not None and last[0] == key[0] and last[1] == key[1]:
            moved = False
            if (key[2] is None) != (last[2] is None):
                moved = True
            elif key[2] is not None and last[2] is not None:
                moved = abs(angle_diff_deg(key[2], last[2])) >= REPORT_DIR_DEG
            if key[3] is not None and last[3] is not None and abs(key[3] - last[3]) >= REPORT_DIR_DEG:
                moved = True
            if not moved or now - self.last_report_at < REPORT_MIN_GAP_S:
                return None
        if n10 == 0 and last is None:
            return None
        self.last_report = key
        self.last_report_at = now
        wins = (*(_stat(k, *sm) for k, sm in zip(WINDOWS_MIN[:-1], sums[1:-1], strict=True)),
                WindowStat(WINDOWS_MIN[-1], d10, spread10, speed10, n10))
        return CourseReport(self.site, now, self.axis_deg, wins, shift,
                            pat if pat.kind == self.pattern_kind else Pattern(self.pattern_kind, None, None, None),
                            self.new_breeze_since is not None, self.new_breeze_since)

    def snapshot(self) -> dict[str, Any]:
        return {"buckets": [list(b) for b in self.buckets],
                "minutes": [[_j(v) for v in m] for m in self.minutes],
                "pattern": [self.pattern_kind, self.pattern_candidate, self.pattern_count],
                "last_pattern": [self.last_pattern.kind, self.last_pattern.trend_deg, self.last_pattern.period_min,
                                 self.last_pattern.amplitude_deg],
                "breeze": [self.breeze_run_start, self.breeze_run_len, self.breeze_fail, self.new_breeze_since],
                "last_report": None if self.last_report is None else list(self.last_report),
                "last_report_at": self.last_report_at}

    def restore(self, s: dict[str, Any]) -> None:
        self.buckets = deque(([float(x) for x in b] for b in s["buckets"]), maxlen=self.buckets.maxlen)
        self.minutes = deque(((_f(a), _f(b)) for a, b in s["minutes"]), maxlen=PATTERN_MIN)
        self._minute_trig = deque((_trig(d) if d == d else None for _, d in self.minutes), maxlen=PATTERN_MIN)
        self.pattern_kind, self.pattern_candidate, self.pattern_count = s["pattern"]
        self.last_pattern = Pattern(*s["last_pattern"])
        self.breeze_run_start, self.breeze_run_len, self.breeze_fail, self.new_breeze_since = s["breeze"]
        self.last_report_at = float(s["last_report_at"])
        lr = s["last_report"]
        self.last_report = None if lr is None else (lr[0], lr[1], lr[2], lr[3])
