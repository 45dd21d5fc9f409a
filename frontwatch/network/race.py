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
from collections.abc import Collection
from dataclasses import dataclass
from itertools import chain
from typing import Any

import numpy as np

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

njit: Any
try:  # optional: the pattern kernel below runs as plain Python without it
    from numba import njit
except ImportError:  # pragma: no cover - exercised where numba is absent
    njit = None

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
_RAD2DEG = 180.0 / math.pi  # math.degrees(x) is x * (180 / pi)
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
    return _pattern_of(minute_dirs)


def _pattern_of(minute_dirs: Collection[tuple[float, float]]) -> Pattern:
    """analyse_pattern through the compiled kernel: (t, dir) pairs (NaN directions are skipped)."""
    return _pattern_of_flat(np.fromiter(chain.from_iterable(minute_dirs), float, 2 * len(minute_dirs)))


def _pattern_of_flat(flat: np.ndarray) -> Pattern:
    """_pattern_of for the pairs laid out flat (t0, dir0, t1, dir1, ...) in a contiguous array."""
    code, tr, pe, am = _pattern(flat, 2.0, 3.0)
    trend, period, amp = float(tr), float(pe), float(am)  # (plain floats from the uncompiled kernel too)
    if code == 0:
        return Pattern("unknown", None, None, None)
    if code == 1:
        return Pattern("persistent", trend, None, None)
    if code == 2:
        return Pattern("oscillating", trend, period, amp)
    return Pattern("steady" if code == 3 else "unsettled", trend, None, None)


def _pattern_py(td: np.ndarray, sq: float, cube: float) -> tuple[int, float, float, float]:
    """The pattern analysis over a flat array (t0, dir0, t1, dir1, ...) of one-minute directions:
    (kind code 0 unknown, 1 persistent, 2 oscillating, 3 steady, 4 unsettled; trend, period,
    amplitude, NaN where none). numba compiles it where it is installed; it is also the plain Python.

    The arithmetic is calc.wind's circular mean and Yamartino spread (the same sums in the same
    order) and Python's own float semantics (math.degrees is x * 180/pi; % takes the divisor's
    sign, as numba's does), so compiled and plain give the same bits. The powers come in as
    `sq` and `cube` (2 and 3) so that numba calls pow() as Python does, instead of turning a
    constant exponent into products that differ from pow() in the last bit now and then."""
    nan = math.nan
    m = td.shape[0] // 2
    n = 0
    for i in range(m):
        if td[2 * i + 1] == td[2 * i + 1]:
            n += 1
    if n < PATTERN_MIN_POINTS:
        return 0, nan, nan, nan
    ts = np.empty(n)
    rs = np.empty(n)
    sn = np.empty(n)
    cn = np.empty(n)
    fin = np.zeros(n, dtype=np.bool_)
    ds = np.empty(n)
    j = 0
    for i in range(m):
        d = td[2 * i + 1]
        if d == d:
            ts[j] = td[2 * i]
            ds[j] = d
            if math.isfinite(d):
                r = d * _DEG
                sn[j] = math.sin(r)
                cn[j] = math.cos(r)
                fin[j] = True
            j += 1
    ss = 0.0
    cs = 0.0
    k_dirs = 0
    for j in range(n):
        if fin[j]:
            ss += sn[j]
            cs += cn[j]
            k_dirs += 1
    if k_dirs == 0 or math.hypot(ss, cs) < _RESULTANT_EPS * k_dirs:
        ref = nan
    else:
        ref = (math.atan2(ss, cs) * _RAD2DEG) % 360.0
        if ref >= 360.0:
            ref = 0.0
    t0 = ts[0]
    for j in range(n):
        ts[j] = (ts[j] - t0) / 60.0
        x = (ds[j] - ref) % 360.0  # angle_diff_deg(d, ref)
        rs[j] = x - 360.0 if x > 180.0 else x
    k = max(n // 4, 5)
    late = 0.0
    for j in range(n - k, n):
        late += rs[j]
    early = 0.0
    for j in range(k):
        early += rs[j]
    trend = late / k - early / k
    # Linear detrend, then the residual's sd and crossings of zero (with a small dead band).
    tsum = 0.0
    rsum = 0.0
    for j in range(n):
        tsum += ts[j]
        rsum += rs[j]
    tm = tsum / n
    rm = rsum / n
    tc = np.empty(n)
    stt = 0.0
    for j in range(n):
        tc[j] = ts[j] - tm
        stt += math.pow(tc[j], sq)
        rs[j] = rs[j] - rm  # now r - rm
    b = 0.0
    if stt > 0:
        sxr = 0.0
        for j in range(n):
            sxr += tc[j] * rs[j]
        b = sxr / stt
    e = np.empty(n)
    see = 0.0
    for j in range(n):
        e[j] = rs[j] - b * tc[j]  # r - rm - b * (t - tm)
        see += e[j] * e[j]
    sd = math.sqrt(see / n)
    amp = math.sqrt(2.0) * sd
    band = 0.3 * sd
    n_cross = 0
    first_cross = last_cross = 0.0
    sign = 0
    last_t = last_e = nan
    have_last = False
    for j in range(n):
        t = ts[j]
        x = e[j]
        s = 1 if x > band else (-1 if x < -band else 0)
        if s != 0:
            if sign != 0 and s != sign and have_last:
                c = last_t + (t - last_t) * (last_e / (last_e - x)) if last_e != x else t
                if n_cross == 0:
                    first_cross = c
                last_cross = c
                n_cross += 1
            sign = s
            last_t = t
            last_e = x
            have_last = True
    period = nan
    if n_cross >= 2:
        period = 2.0 * (last_cross - first_cross) / (n_cross - 1)
    # Lag-1 autocorrelation of the residual: a smooth swing of period P gives about cos(2 pi / P)
    # (0.87 for 12 min); minute-to-minute noise gives about 0.
    r1 = 0.0
    if sd > 0:
        sab = 0.0
        for j in range(n - 1):
            sab += e[j] * e[j + 1]
        r1 = sab / (sd * sd * n)
    if abs(trend) >= PERSIST_DEG and abs(trend) >= 1.5 * amp:
        return 1, trend, nan, nan
    if (n_cross >= OSC_MIN_CROSSINGS and amp >= OSC_MIN_DEG and r1 >= OSC_MIN_AUTOCORR
            and n_cross >= 2 and period >= OSC_MIN_PERIOD_MIN):
        return 2, trend, period, amp
    # Yamartino spread of the last ten points (calc.wind.yamartino_sigma_deg over the same sums)
    ss = 0.0
    cs = 0.0
    k_dirs = 0
    for j in range(max(0, n - 10), n):
        if fin[j]:
            ss += sn[j]
            cs += cn[j]
            k_dirs += 1
    if k_dirs == 0:
        return 4, trend, nan, nan  # NaN spread: not steady
    ms = ss / k_dirs
    mc = cs / k_dirs
    eps = min(math.sqrt(max(0.0, 1.0 - (ms * ms + mc * mc))), 1.0)
    y = math.asin(eps) * (1.0 + _YAM_B * math.pow(eps, cube)) * _RAD2DEG
    return (3 if y <= STEADY_SPREAD_DEG else 4), trend, nan, nan


_pattern = njit(cache=True)(_pattern_py) if njit is not None else _pattern_py


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
        # The last PATTERN_MIN minutes' (time, direction), flat for the pattern kernel, each written
        # twice (at its slot and PATTERN_MIN slots on), so that they are always one contiguous slice:
        # the kernel's input without building an array every analysis (`minutes` reads them back).
        self._ring = np.empty(4 * PATTERN_MIN)
        self._ring_n = 0  # minutes written to the ring so far
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

    def _remember_minute(self, t: float, d: float) -> None:
        i = 2 * (self._ring_n % PATTERN_MIN)
        r = self._ring
        r[i] = r[i + 2 * PATTERN_MIN] = t
        r[i + 1] = r[i + 1 + 2 * PATTERN_MIN] = d
        self._ring_n += 1

    @property
    def minutes(self) -> list[tuple[float, float]]:
        """The last PATTERN_MIN data minutes' (time, vector-mean direction), oldest first."""
        return [(t, d) for t, d in self._minute_array().reshape(-1, 2).tolist()]

    def _minute_array(self) -> np.ndarray:
        """The minutes flat, (t0, dir0, t1, dir1, ...), as a view of the ring."""
        n = self._ring_n
        if n <= PATTERN_MIN:
            return self._ring[:2 * n]
        i = 2 * (n % PATTERN_MIN)
        return self._ring[i:i + 2 * PATTERN_MIN]

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
        n_spans = len(spans)
        i = 0
        lo = m_now - spans[0]
        for b in reversed(self.buckets):  # (one loop, no next() per bucket: it runs every minute)
            m = b[0]
            while m < lo:  # older than the current span: that span is complete
                out.append((ss, cs, nd, su, sv, nv, sp, ns))
                i += 1
                if i == n_spans:
                    return out
                lo = m_now - spans[i]
            if m < m_now:
                ss += b[1]
                cs += b[2]
                nd += b[3]
                su += b[4]
                sv += b[5]
                nv += b[6]
                sp += b[7]
                ns += b[8]
        while i < n_spans:
            out.append((ss, cs, nd, su, sv, nv, sp, ns))
            i += 1
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
        self._remember_minute(now, one_dir)
        d10, spread10, speed10, n10 = _stat_fields(*sums[-1])  # (its WindowStat only for a report)
        shift = None if d10 is None else angle_diff_deg(d10, self.axis_deg)
        # The pattern needs tens of minutes to change: analyse every PATTERN_EVERY_MIN data minutes
        # (chosen by the minute's number, so replay and restore agree), believe it after PATTERN_HOLD.
        if int(now // 60.0) % PATTERN_EVERY_MIN == 0:
            pat = _pattern_of_flat(self._minute_array())
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
        self._ring_n = 0
        for a, b in s["minutes"]:
            self._remember_minute(_f(a), _f(b))
        self.pattern_kind, self.pattern_candidate, self.pattern_count = s["pattern"]
        self.last_pattern = Pattern(*s["last_pattern"])
        self.breeze_run_start, self.breeze_run_len, self.breeze_fail, self.new_breeze_since = s["breeze"]
        self.last_report_at = float(s["last_report_at"])
        lr = s["last_report"]
        self.last_report = None if lr is None else (lr[0], lr[1], lr[2], lr[3])
