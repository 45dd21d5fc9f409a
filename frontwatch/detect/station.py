"""The station detector: update(obs) -> PassageEvent | None, with bounded, serialisable state.

Per observation it appends one row to a fixed-length ring and feeds a cheap gate; only when the
gate opens (or a candidate is pending) does it score change points over the window and classify
the signature. One prototype per network is cloned per station (its onshore bearing, sector and
wind averaging are per station; the settings and local clock are shared).
"""

from __future__ import annotations

import itertools
import math
import warnings
from collections import deque
from datetime import tzinfo
from typing import Any

import numpy as np

from ..config import DetectorSettings, StationConfig
from ..events import PassageEvent
from ..obs import Observation
from ..timeutil import LocalClock
from .changepoint import best_split
from .classify import Signature, classify, recent_turn
from .gate import Gate

njit: Any
try:
    from numba import njit
except ImportError:  # pragma: no cover - exercised where numba is absent
    njit = None

NAN = float("nan")
RAD = math.pi / 180.0
# Row layout in the ring: time, T, Td, onshore, alongshore, p, u, v, gust, rain
_T, _TC, _TD, _ON, _AL, _P, _U, _V, _G, _R = range(10)
NCOL = 10  # columns of a ring row (frontwatch.scan writes rows of the same layout)
WEIGHTS = np.array([1.0, 1.0, 1.0, 0.7, 0.5])
MIN_ROWS = 20  # rows the window needs before any evaluation
# A silence longer than this inside the window is bridged (see _bridged); shorter ones the decision
# window spans anyway. Up to RESET_GAP_S, beyond which the window restarts.
BRIDGE_GAP_S = 10 * 60.0
HELD_ONSET_S = 120.0  # a candidate's onset may move this much between minutes and be the same one
# A vane whose minute-to-minute changes are under this share of its ten-minute changes is taken to
# report a running mean (see _inferred_averaging); INFERRED_AVERAGING is the window then assumed.
SMOOTH_RATIO = 0.075
INFERRED_AVERAGING = 10
RESET_GAP_S = 60 * 60.0  # after a silence this long the window restarts (a shorter gap is bridged: a front that passed during it shows as a change across it)


def _dir_from(u: float, v: float) -> float:
    if u == 0.0 and v == 0.0:
        return NAN
    return (math.degrees(math.atan2(-u, -v)) + 360.0) % 360.0


def _angle(a: float, b: float) -> float:
    """Smallest absolute angle between two bearings (NaN if either is NaN)."""
    d = abs((a - b + 180.0) % 360.0 - 180.0)
    return d


class StationDetector:
    """Online breeze-front detector for one station (see frontwatch.detect.changepoint/classify)."""

    def __init__(self, settings: DetectorSettings, tz: tzinfo | None = None, southern: bool = False,
                 station: StationConfig | None = None, alone: bool = False, emit_repeats: bool = False) -> None:
        self.settings = settings
        self.alone = alone  # the network's only station: no other can confirm a weak call
        # A breeze front within repeat_min of the last one (and not much stronger) is dropped here as
        # the same regime going on; with emit_repeats it is emitted marked `repeat` instead, for the
        # network to decide (the Engine's detectors: the last call may have been one the network
        # did not confirm, and then this is the passage; corroborate.py).
        self.emit_repeats = emit_repeats
        self.tz = tz
        self.southern = southern
        self.station = station
        self.clock = LocalClock(tz)
        self.maxlen = settings.baseline_min + settings.max_wait_min + 20
        self._ring: deque[tuple[float, ...]] = deque(maxlen=self.maxlen)
        # The ring as an (n, NCOL) array instead, while frontwatch.batch keeps it so (None: the
        # deque holds it); the deque is made from it only when the record path or a snapshot needs it.
        self._ring_rows: np.ndarray | None = None
        self.gate = Gate()
        self.pending = False
        self.weak_onset = -1e18  # onset of the pending candidate while it is a weak call that holds
        self.quiet_until = -1e18
        # ... and until when only a breeze front may be called (after a cold front: see _evaluate)
        self.others_quiet_until = -1e18
        self.last_onset: dict[str, float] = {}  # kind -> onset of the last event of that kind
        self.last_evidence: dict[str, float] = {}  # kind -> its evidence (a much stronger one may follow)
        self.last_untimed = -1e18  # onset of the last call whose channels came apart in time
        self.inland = False  # another station lies nearer the water on the same shore (set by the Engine)
        # Analysts' hook (frontwatch label): when a list, breeze-front candidates that failed exactly
        # one condition are appended as (station, onset, decided_at, note). Not part of the state.
        self.near_misses: list[tuple[str, float, float, str]] | None = None
        if station is not None:
            o = station.onshore_from_deg * RAD
            self._sin_o, self._cos_o = math.sin(o), math.cos(o)
            self.halfwidth = station.onshore_halfwidth_deg
            self.averaging = station.wind_averaging_min
            self.sid = station.id
        else:
            self._sin_o, self._cos_o, self.halfwidth, self.averaging, self.sid = 0.0, 1.0, 70.0, 1, "?"

    def clone(self, station: StationConfig) -> StationDetector:
        """A fresh detector for `station` with this prototype's settings and clock."""
        return StationDetector(self.settings, self.tz, self.southern, station, self.alone, self.emit_repeats)

    # ------------------------------------------------------------------ the ring
    @property
    def ring(self) -> deque[tuple[float, ...]]:
        """The last rows (time, T, Td, onshore, alongshore, p, u, v, gust, rain), oldest first."""
        if self._ring_rows is not None:
            self._ring = deque(map(tuple, self._ring_rows.tolist()), maxlen=self.maxlen)
            self._ring_rows = None
        return self._ring

    @ring.setter
    def ring(self, value: deque[tuple[float, ...]]) -> None:
        self._ring = value
        self._ring_rows = None

    def ring_rows(self) -> np.ndarray:
        """The ring as an (n, NCOL) float array (frontwatch.batch); do not modify it."""
        if self._ring_rows is not None:
            return self._ring_rows
        r = self._ring
        return np.array(r, dtype=float).reshape(len(r), NCOL)

    def set_ring_rows(self, rows: np.ndarray) -> None:
        """Make the ring these rows (at most maxlen, in time order; kept, not copied)."""
        self._ring_rows = rows

    def ring_last_time(self) -> float:
        """Time of the ring's newest row (NaN when empty)."""
        a = self._ring_rows
        if a is not None:
            return float(a[-1, 0]) if len(a) else NAN
        r = self._ring
        return r[-1][0] if r else NAN

    # ------------------------------------------------------------------ hot path
    def update(self, obs: Observation) -> PassageEvent | None:
        t = obs.time
        ring = self.ring
        if ring and t - ring[-1][_T] > RESET_GAP_S:
            ring.clear()
            self.pending = False
            self.gate = Gate()
        s = obs.wind_speed_ms
        d = obs.wind_dir_deg
        if s == s and d == d:
            r = d * RAD
            u = -s * math.sin(r)
            v = -s * math.cos(r)
        elif s == 0.0:
            u = v = 0.0  # calm
        else:
            u = v = NAN
        so, co = self._sin_o, self._cos_o
        on = -(u * so + v * co)
        al = -u * co + v * so
        ring.append((t, obs.temp_c, obs.dewpoint_c, on, al, obs.pressure_hpa, u, v, obs.wind_gust_ms, obs.rain_mm))
        if self.gate.update(obs.temp_c, obs.dewpoint_c, u, v) or self.pending:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # empty slices of all-missing channels
                return self.evaluate_if_due(len(ring), t)
        return None

    def evaluate_if_due(self, n_rows: int, t: float, arr: np.ndarray | None = None) -> PassageEvent | None:
        """Score and decide at `t` (the gate opened or a candidate is pending) once the window holds
        MIN_ROWS rows and the quiet time after the last event is over. update() calls it, and
        frontwatch.batch with the window as an array."""
        if n_rows < MIN_ROWS or t - (self.settings.confirm_min - 1) * 60.0 < self.quiet_until:
            return None
        return self._evaluate(t, arr)

    # ------------------------------------------------------------------ scoring and deciding
    def _evaluate(self, now: float, arr: np.ndarray | None = None) -> PassageEvent | None:
        """Score and decide at `now`. `arr` is the ring as an array when the caller has it already
        (frontwatch.batch keeps a station's rows in one array); else it is built from the ring."""
        st = self.settings
        from_ring = arr is None
        if arr is None:
            ring = self.ring
            arr = np.fromiter(itertools.chain.from_iterable(ring), float, len(ring) * NCOL).reshape(len(ring), NCOL)
        t = arr[:, _T]
        x = arr[:, _TC:_P + 1]
        # The windows are set in minutes for per-minute records; a station reporting less often
        # (every 5 or 10 minutes) needs them to hold enough of its records: a baseline of at least
        # 6.5 intervals (the split needs 6 records before), a decision window of 2.5, and one
        # interval after the onset. At one record a minute these are the settings themselves.
        dt = _cadence_s(t)
        t_real = t
        gap_after = -1  # index of the first record after the newest bridged gap
        # (cheap test first: only a window spanning more than its records' intervals can hold one)
        if len(t) > 1 and t[-1] - t[0] > (len(t) - 1) * dt + BRIDGE_GAP_S:
            t, gap_after = _bridged(t, dt)
            if gap_after >= 0:
                arr = arr.copy()  # (t_real is a view of the caller's or the ring's array)
                arr[:, _T] = t
        baseline_s = max(st.baseline_min * 60.0, 6.5 * dt)
        wait_s = max(st.max_wait_min * 60.0, 2.5 * dt)
        first = max(int(np.searchsorted(t, now - wait_s, side="left")),
                    int(np.searchsorted(t_real, self.quiet_until, side="left")))
        last = int(np.searchsorted(t, now - max((st.confirm_min - 1) * 60.0, dt), side="right")) - 1
        w = WEIGHTS
        avg = self.averaging
        if avg <= 1 and dt <= 60.0:  # the test is set for one record a minute
            avg = _inferred_averaging(arr[:first, _U], arr[:first, _V])
        ow = w if avg <= 1 else w * np.array([1.0, 1.0, 0.3, 0.3, 0.5])
        sp = best_split(t, x, w, first, last, baseline_s, ow)
        if sp is None or sp.strength < st.min_score:
            self.pending = False
            return None
        o = sp.onset_index
        t_o = t[o]
        if t_real[o] < self.quiet_until:
            self.pending = False
            return None
        rows = list(self.ring) if from_ring and gap_after < 0 else None  # (bridged: the rows' times are arr's)
        sig = self._signature(arr, rows, sp, o, now, baseline_s, dt, avg)
        can_wait = now - t_o < wait_s
        t_o_real = float(t_real[o])
        held = self.pending and abs(t_o_real - self.weak_onset) <= HELD_ONSET_S
        dec = classify(sig, st, self.halfwidth, can_wait, avg, not self.alone, held, self.inland)
        if dec.kind is None:
            self.pending = bool(dec.wait)
            if dec.weak_held:
                self.weak_onset = t_o_real
            elif not held or not dec.wait:
                self.weak_onset = -1e18
            # A near miss failed exactly one condition. ('confirmable' is the network's part, not
            # the signature's: a station that no other can confirm first fails it with every weak
            # signature.)
            failed = [f for f in dec.failed if f != "confirmable"]
            if self.near_misses is not None and not dec.wait and len(failed) == 1:
                self.near_misses.append((self.sid, t_o_real, float(now), "breeze front? not " + failed[0]))
            return None
        self.pending = False
        if dec.onset_shift_min:  # an untimed change: timed by its latest channel (classify.py)
            t_o_real += 60.0 * dec.onset_shift_min
        if (o == gap_after or t_o_real < self.others_quiet_until) and dec.kind != "breeze_front":
            # Across a silence only a breeze front is called: the other kinds are timed by their
            # onset, and an evening's cooling and turn across a gap looks like a land breeze.
            # Likewise in the quiet time after a cold front (below).
            return None
        # A wind shift is the weakest call: it only briefly blocks a stronger kind that may follow
        # (a cold front's pre-frontal veer, a breeze front after a cloud-shadow wobble). A cold
        # front's drier air is no breeze front's moister one going on: the breeze front that may
        # follow is held off as briefly (the other kinds for the whole refractory time).
        # An untimed call (a weak one the network may refuse) holds the station as briefly: the
        # clear call that may form minutes later is then checked as a repeat of it (below).
        quiet = 10.0 if dec.kind == "wind_shift" or dec.untimed else float(st.refractory_min)
        self.quiet_until = t_o_real + (10.0 if dec.kind == "cold_front" else quiet) * 60.0
        self.others_quiet_until = t_o_real + quiet * 60.0
        repeat = st.repeat_min if dec.kind in ("breeze_front", "land_breeze") else st.refractory_min
        # (after an untimed call, any breeze front within repeat_min is its repeat, however much
        # stronger: the same passage, better timed; the network drops it if the first stood)
        # A breeze front after half an hour of wind from outside the onshore sector (not calm) is no
        # wobble of an onshore regime going on: that regime ended, and this is a passage of its own
        # (the call before may have been a look-alike, which must not hide the day's front).
        ended = dec.kind == "breeze_front" and sig.dir_before == sig.dir_before and sig.early_dir == sig.early_dir \
            and sig.before_offset_deg > self.halfwidth and sig.early_offset_deg > self.halfwidth
        again = not ended and t_o_real - self.last_onset.get(dec.kind, -1e18) < repeat * 60 and \
            (dec.evidence <= 1.5 * self.last_evidence.get(dec.kind, 0.0) or
             t_o_real - self.last_untimed < repeat * 60)
        if dec.untimed:
            self.last_untimed = t_o_real
        if again and not (self.emit_repeats and dec.kind == "breeze_front"):
            return None  # the same regime going on (a wobble of the onshore wind), not a new passage
        if not again:
            self.last_onset[dec.kind] = t_o_real
            self.last_evidence[dec.kind] = dec.evidence
        conf = dec.confidence * (1.0 - math.exp(-sp.strength / st.min_score))
        # a change across a bridged gap happened while the station was silent: timed to its middle
        gap_s = t_o_real - float(t_real[o - 1]) if o == gap_after else 0.0
        return PassageEvent(
            station=self.sid, kind=dec.kind, detected_at=float(now),
            onset=t_o_real - 0.5 * gap_s, onset_spread_s=0.5 * gap_s,
            note=f"the change came while the station was silent ({gap_s / 60:.0f} min gap); "
                 "its onset is the gap's middle" if gap_s else None,
            confidence=round(min(0.99, max(0.05, conf)), 3),
            wind_dir_before_deg=_opt(sig.early_dir if dec.kind == "breeze_front" and recent_turn(sig, self.halfwidth)
                                     else sig.dir_before),
            wind_dir_after_deg=None if sig.dir_after != sig.dir_after else sig.dir_after,
            speed_change_ms=_opt(sig.speed_after - sig.speed_before),
            temp_change_c=_opt(sig.temp_change), dewpoint_change_c=_opt(sig.dewpoint_change),
            pressure_change_hpa=_opt(sig.pressure_change), speed_after_ms=_opt(sig.speed_after),
            gust_after_ms=_opt(sig.gust_after), temp_after_c=_opt(float(np.nanmean(arr[-3:, _TC]))
                                                                    if np.isfinite(arr[-3:, _TC]).any() else NAN),
            repeat=again, untimed=dec.untimed,
        )

    def _signature(self, arr: np.ndarray, rows: list[Any] | None, sp: Any, o: int, now: float, baseline_s: float,
                   dt: float, averaging: int) -> Signature:
        """The signature of the change at `o`. `rows`: the window as Python rows, or None to take
        only the rows it reads (from half an hour before the onset) from `arr`."""
        st = self.settings
        t = arr[:, _T]
        t_o = t[o]
        n = len(t)
        pre_lo = int(np.searchsorted(t, t_o - baseline_s, side="left"))
        wind_lo = int(np.searchsorted(t, t_o - max(15 * 60.0, 2.5 * dt), side="left"))
        # the window's times increase (QC refuses the rest): the rows from 30 min before the onset
        rain_lo = int(np.searchsorted(t, t_o - 1800.0, side="left"))
        rec_lo = max(o, n - 3)
        if rows is None:
            off = min(wind_lo, rain_lo, o)  # rows[i - off] is row i
            rows = arr[off:].tolist()
        else:
            off = 0
        xd = sp.detrended
        with np.errstate(all="ignore"):
            # Significance of each channel's shift over the whole 'after' [o, n) so far: a change
            # that persists gains evidence minute by minute, a wobble that reverts loses it.
            (pre, n_pre), (rec, _), (post, n_post) = sp.range_means((pre_lo, o), (rec_lo, n), (o, n))
            z = (post - pre) / sp.sigma * np.sqrt(n_pre * n_post / np.maximum(n_pre + n_post, 1))
        # (rows: the ring as Python rows; the small parts below are cheaper in plain Python than in numpy)
        u0, v0 = _mean2(rows, wind_lo - off, o - off, _U, _V)
        ue, ve = _mean2(rows, rain_lo - off, wind_lo - off, _U, _V)  # 30 to 15 minutes before the onset
        ur, vr = _mean2(rows, rec_lo - off, n - off, _U, _V)
        if averaging > 1 and ur == ur and u0 == u0:
            # The station reports an A-minute running mean: after k minutes only k/A of the new wind
            # is in it, so un-smear the latest mean towards the wind that is actually blowing.
            k = (now - t_o) / 60.0 + 1.0
            if k < averaging:
                f = averaging / k
                ur = u0 + (ur - u0) * f
                vr = v0 + (vr - v0) * f
        s0 = math.hypot(u0, v0) if u0 == u0 else NAN
        s1 = math.hypot(ur, vr) if ur == ur else NAN
        d0 = _dir_from(u0, v0) if s0 == s0 and s0 >= st.calm_ms else NAN
        d1 = _dir_from(ur, vr) if s1 == s1 and s1 >= st.calm_ms else NAN
        se = math.hypot(ue, ve) if ue == ue else NAN
        de = _dir_from(ue, ve) if se == se and se >= st.calm_ms else NAN
        onshore = (math.degrees(math.atan2(self._sin_o, self._cos_o)) + 360.0) % 360.0
        # spread of the recent wind: circular std of the per-sample directions (Mardia's sqrt(-2 ln R))
        cx = cy = 0.0
        k = 0
        for r in rows[rec_lo - off:]:
            sp_ = math.hypot(r[_U], r[_V])
            if sp_ > 0:  # NaN compares false
                cx += r[_U] / sp_
                cy += r[_V] / sp_
                k += 1
        if k:
            rlen = math.hypot(cx / k, cy / k)
            spread = math.degrees(math.sqrt(-2.0 * math.log(min(1.0, max(rlen, 1e-9)))))
        else:
            spread = 180.0
        rate = NAN
        if n - 3 >= o:
            a, b = rows[-3], rows[-1]
            if a[_TC] == a[_TC] and b[_TC] == b[_TC]:
                rate = (b[_TC] - a[_TC]) / ((b[_T] - a[_T]) / 60.0)
        p_after = [v for v in xd[o:, 4].tolist() if v == v]
        pj = max(p_after) - float(pre[4]) if p_after and pre[4] == pre[4] else NAN
        gusts = [r[_G] for r in rows[o - off:] if r[_G] == r[_G]]
        gust = max(gusts) if gusts else NAN
        # the strongest wind since the onset, as a 3-record mean (one gusty minute is no squall)
        winds = [math.hypot(r[_U], r[_V]) for r in rows[o - off:] if r[_U] == r[_U]]
        peak = max((winds[i] + winds[i + 1] + winds[i + 2]) / 3.0 for i in range(len(winds) - 2)) \
            if len(winds) >= 3 else NAN
        # rain from half an hour before the onset: a rain-cooled outflow starts with its rain
        rains = [r[_R] for r in rows[rain_lo - off:] if r[_R] == r[_R]]
        rain = sum(rains) if rains else NAN
        deps = [r[_TC] - r[_TD] for r in rows[rec_lo - off:] if r[_TC] - r[_TD] == r[_TC] - r[_TD]]
        depression = sum(deps) / len(deps) if deps else NAN
        du, dv = (ur - u0, vr - v0) if ur == ur and u0 == u0 else (NAN, NAN)
        dspd = math.hypot(du, dv) if du == du else NAN
        dchg = _dir_from(du, dv) if dspd == dspd and dspd > 0 else NAN
        on0 = -(u0 * self._sin_o + v0 * self._cos_o) if u0 == u0 else NAN
        on1 = -(ur * self._sin_o + vr * self._cos_o) if ur == ur else NAN
        return Signature(
            strength=sp.strength, minutes_after=(now - t_o) / 60.0, local_hour=self.clock.hour(t_o),
            dir_before=d0, dir_after=d1, speed_before=s0, speed_after=s1, spread_after=spread,
            turn_deg=_angle(d0, d1), onshore_before=on0, onshore_after=on1,
            after_offset_deg=_angle(d1, onshore) if d1 == d1 else NAN,
            change_offset_deg=_angle(dchg, onshore) if dchg == dchg else 180.0, change_speed=_nz0(dspd),
            before_offset_deg=_angle(d0, onshore) if d0 == d0 else 180.0,
            z_temp=_nz0(float(z[0])), z_dewpoint=_nz0(float(z[1])), z_onshore=_nz0(float(z[2])),
            temp_change=float(rec[0] - pre[0]), temp_rate=rate, dewpoint_change=float(rec[1] - pre[1]),
            pressure_change=float(rec[4] - pre[4]), pressure_jump=pj, gust_after=gust, rain_after=rain,
            depression_after=depression,
            # minutes between the temperature's, the dewpoint's and the onshore wind's own change times
            change_times_min=tuple(float((t[i] - t_o) / 60.0) for i in sp.channel_split[:3]),
            sample_min=dt / 60.0,
            early_dir=de, early_offset_deg=_angle(de, onshore) if de == de else 180.0, peak_speed_after=peak,
        )

    # ------------------------------------------------------------------ state
    def snapshot(self) -> dict[str, Any]:
        return {"ring": [[None if v != v else v for v in row] for row in self.ring], "gate": self.gate.state(),
                "pending": bool(self.pending), "weak_onset": self.weak_onset, "quiet_until": self.quiet_until,
                "others_quiet_until": self.others_quiet_until,
                "last_onset": dict(self.last_onset), "last_evidence": dict(self.last_evidence),
                "last_untimed": self.last_untimed}

    def restore(self, snap: dict[str, Any]) -> None:
        self.ring = deque((tuple(NAN if v is None else float(v) for v in row) for row in snap["ring"]),
                          maxlen=self.maxlen)
        self.gate = Gate()
        self.gate.set_state(snap["gate"])
        self.pending = bool(snap["pending"])
        self.weak_onset = float(snap.get("weak_onset", -1e18))  # (snapshots from before stop 13: none held)
        self.quiet_until = float(snap["quiet_until"])
        self.others_quiet_until = float(snap.get("others_quiet_until", self.quiet_until))  # (before stop 13: one)
        self.last_onset = {k: float(v) for k, v in snap["last_onset"].items()}
        self.last_evidence = {k: float(v) for k, v in snap["last_evidence"].items()}
        self.last_untimed = float(snap.get("last_untimed", -1e18))  # (before stop 15: none)


def _bridged(t: np.ndarray, dt: float) -> tuple[np.ndarray, int]:
    """The window's times with each silence longer than BRIDGE_GAP_S shortened to one reporting
    interval (the records before it moved later), and the index of the first record after the
    newest such gap (-1 and the times unchanged when there is none). The windows are then counted
    in reported minutes: a front that passed while the station was silent shows as a change across
    the gap, which the decision window still holds when the station reports again, against a
    baseline from before the gap."""
    d = np.diff(t)
    long = np.flatnonzero(d > BRIDGE_GAP_S)
    if not len(long):
        return t, -1
    excess = np.zeros_like(d)
    excess[long] = d[long] - dt
    shift = np.concatenate([np.cumsum(excess[::-1])[::-1], [0.0]])
    return t + shift, int(long[-1]) + 1


def _cadence_s(t: np.ndarray) -> float:
    """The station's reporting interval, s: the median spacing of the window's records (gaps do
    not move a median), never under a minute (the windows are set for per-minute records)."""
    if len(t) < 3:
        return 60.0
    d = np.diff(t)
    n = len(d)
    # np.median's value, without its overhead (most of an evaluation's time otherwise): at most a
    # minute when more than half the spacings are, else the middle of the sorted spacings.
    if np.count_nonzero(d <= 60.0) > n // 2:
        return 60.0
    if np.isnan(d).any():
        return 60.0  # np.median: NaN, and max(60.0, NaN) is 60.0
    s = sorted(d.tolist())
    med = s[n // 2] if n % 2 else (s[n // 2 - 1] + s[n // 2]) / 2.0
    return max(60.0, float(med))


def _inferred_averaging(u: np.ndarray, v: np.ndarray) -> int:
    """1, or INFERRED_AVERAGING when the wind before the candidate (u, v, m/s, one row a minute)
    looks like an undeclared running mean.

    An A-minute running mean changes from one minute to the next by 1/A of what enters and leaves
    its window, so its 1-minute differences are a small share of its 10-minute ones: in mean
    square about 0.1 for a 10-minute mean of white turbulence and 0.02-0.05 of turbulence that
    persists from minute to minute, against (1 - r)/(1 - r^10) for 1-minute means of AR(1)
    turbulence with lag-one correlation r (1 for white noise, 0.22 at r = 0.8, 0.15 at 0.9).
    Measured on 50-row windows (tests/test_core_averaging.py; docs/tuning.md): generated 1-minute
    stations about 1 % under 0.1, running-mean ones 99 %; the shared real record, a 10-minute
    running mean by its README, median 0.035, 95 % under 0.076. The window then assumed is the
    10-minute standard averaging time of the surface wind (WMO-No. 8, the CIMO Guide; from
    memory). Too few rows or a calm: 1.
    """
    if len(u) < 21:
        return 1
    s1, n1, s10, n10 = _smooth_sums(u, v)
    if n1 < 30 or n10 < 20 or not s10 > 0.0:
        return 1
    return INFERRED_AVERAGING if s1 / n1 < SMOOTH_RATIO * (s10 / n10) else 1


def _smooth_sums_py(u: np.ndarray, v: np.ndarray) -> tuple[float, int, float, int]:
    """Sums of squared 1-minute and 10-minute changes of u and v, and their counts (NaN skipped).
    Plain loops in a fixed order: numba compiles it where it is installed (a numpy version costs
    some 25 us a call, a tenth of an evaluation), and compiled and plain give the same bits."""
    s1 = s10 = 0.0
    n1 = n10 = 0
    for x in (u, v):
        for i in range(1, len(x)):
            a = x[i] - x[i - 1]
            if a == a:
                s1 += a * a
                n1 += 1
        for i in range(10, len(x)):
            a = x[i] - x[i - 10]
            if a == a:
                s10 += a * a
                n10 += 1
    return s1, n1, s10, n10


_smooth_sums = njit(cache=True)(_smooth_sums_py) if njit is not None else _smooth_sums_py


def _mean2(rows: list[tuple[float, ...]], lo: int, hi: int, i: int, j: int) -> tuple[float, float]:
    """Means of columns i and j over rows[lo:hi], skipping rows where either is NaN."""
    si = sj = 0.0
    k = 0
    for r in rows[lo:hi]:
        a, b = r[i], r[j]
        if a == a and b == b:
            si += a
            sj += b
            k += 1
    return (si / k, sj / k) if k else (NAN, NAN)


def _nz0(x: float) -> float:
    return 0.0 if x != x else x


def _opt(x: float) -> float | None:
    return None if x != x else float(x)
