"""Per-station quality control: range, step, persistence, dewpoint above temperature, duplicates,
out-of-order/late records and gaps (after Zahumensky 2004, WMO guidelines on QC of AWS data).

check(obs) returns the record with every flagged value set to NaN (so a flagged value never feeds
a detector) plus the flags, each a short reason used as a counter label. A record out of time
order is refused whole. Limits come from QCSettings; their numbers are from memory (DOMAIN.md).
frontwatch/scan.py repeats these steps as a compiled loop for offline replay: change both
(tests/test_core_batch.py fails when they differ).
"""

from __future__ import annotations

from typing import Any

from .config import QCSettings
from .obs import Observation

NAN = float("nan")
_FIELDS = ("temp_c", "dewpoint_c", "wind_speed_ms", "pressure_hpa")
_RECOVER = 3  # consecutive step-rejected values that agree with each other are taken as a new level


class _Channel:
    """Step and persistence state of one quantity."""

    __slots__ = ("lo", "hi", "step", "persist_s", "last", "last_t", "run_value", "run_start", "pend", "npend")

    def __init__(self, lo: float, hi: float, step: float, persist_s: float) -> None:
        self.lo, self.hi, self.step, self.persist_s = lo, hi, step, persist_s
        self.last = NAN  # last accepted value
        self.last_t = -1e18
        self.run_value = NAN
        self.run_start = 0.0
        self.pend = NAN  # a candidate new level after step rejections
        self.npend = 0

    def check(self, x: float, t: float) -> str | None:
        """None if x is good (state updated), else the failing test's name."""
        if not self.lo <= x <= self.hi:
            return "range"
        if x == self.run_value:
            if t - self.run_start > self.persist_s:
                return "stuck"
        else:
            self.run_value = x
            self.run_start = t
        last = self.last
        if last == last and t - self.last_t <= 180.0 and abs(x - last) > self.step:
            if self.npend and abs(x - self.pend) <= self.step:
                self.npend += 1
            else:
                self.npend = 1
            self.pend = x
            if self.npend < _RECOVER:
                return "step"
        self.npend = 0
        self.last = x
        self.last_t = t
        return None

    def state(self) -> list[float]:
        return [self.last, self.last_t, self.run_value, self.run_start, self.pend, self.npend]

    def set_state(self, s: list[float]) -> None:
        self.last, self.last_t, self.run_value, self.run_start, self.pend = (float(v) for v in s[:5])
        self.npend = int(s[5])


class StationQC:
    """QC state of one station. Flags are like 'temp_range', 'wind_dir_stuck', 'duplicate'."""

    def __init__(self, settings: QCSettings, station: str) -> None:
        self.settings = settings
        self.station = station
        s = settings
        persist = s.persist_min * 60.0
        self.ch = {
            "temp_c": _Channel(s.temp_min_c, s.temp_max_c, s.temp_step_c, persist),
            "dewpoint_c": _Channel(s.dewpoint_min_c, s.temp_max_c, s.dewpoint_step_c, persist),
            # Speed may sit at 0 for hours in a calm night: persistence only flags a stuck non-zero value.
            "wind_speed_ms": _Channel(0.0, s.speed_max_ms, s.speed_step_ms, persist),
            "pressure_hpa": _Channel(s.pressure_min_hpa, s.pressure_max_hpa, s.pressure_step_hpa, persist * 3),
        }
        self.vane = _Channel(0.0, 360.0, 400.0, s.vane_persist_min * 60.0)
        self._t, self._d, self._s, self._p = (self.ch[k] for k in _FIELDS)
        self.newest = -1e18

    def check(self, obs: Observation) -> tuple[Observation | None, list[str]]:
        t = obs.time
        newest = self.newest
        if t <= newest:
            if t == newest:
                return None, ["duplicate"]
            return None, ["late" if newest - t > self.settings.late_s else "out_of_order"]
        flags: list[str] = []
        if t - newest > self.settings.gap_s and newest > -1e17:
            flags.append("gap")  # informational: the record is used, detector windows see the gap
        self.newest = t
        changed = False
        # Written out per quantity (not a loop over names): this runs for every record.
        tc = obs.temp_c
        if tc == tc:
            ch = self._t
            # fast path (almost every record): in range, moving, a small step from the last value
            if ch.lo <= tc <= ch.hi and tc != ch.run_value and abs(tc - ch.last) <= ch.step \
                    and not ch.npend and t - ch.last_t <= 180.0:
                ch.run_value = ch.last = tc
                ch.run_start = ch.last_t = t
                bad = None
            else:
                bad = ch.check(tc, t)
            if bad is not None:
                flags.append("temp_" + bad)
                tc = NAN
                changed = True
        td = obs.dewpoint_c
        if td == td:
            ch = self._d
            # fast path (almost every record): in range, moving, a small step from the last value
            if ch.lo <= td <= ch.hi and td != ch.run_value and abs(td - ch.last) <= ch.step \
                    and not ch.npend and t - ch.last_t <= 180.0:
                ch.run_value = ch.last = td
                ch.run_start = ch.last_t = t
                bad = None
            else:
                bad = ch.check(td, t)
            if bad is not None:
                flags.append("dewpoint_" + bad)
                td = NAN
                changed = True
            elif tc == tc and td > tc + self.settings.dewpoint_excess_c:
                flags.append("dewpoint_above_temp")
                td = NAN
                changed = True
        ws = obs.wind_speed_ms
        if ws == ws:
            ch = self._s
            if ws == 0.0:
                ch.run_value = NAN  # calm is not a stuck anemometer
                ch.last, ch.last_t = 0.0, t
            else:
                bad = ch.check(ws, t)
                if bad is not None:
                    flags.append("wind_speed_" + bad)
                    ws = NAN
                    changed = True
        p = obs.pressure_hpa
        if p == p:
            ch = self._p
            # fast path (almost every record): in range, moving, a small step from the last value
            if ch.lo <= p <= ch.hi and p != ch.run_value and abs(p - ch.last) <= ch.step \
                    and not ch.npend and t - ch.last_t <= 180.0:
                ch.run_value = ch.last = p
                ch.run_start = ch.last_t = t
                bad = None
            else:
                bad = ch.check(p, t)
            if bad is not None:
                flags.append("pressure_" + bad)
                p = NAN
                changed = True
        wd = obs.wind_dir_deg
        if wd == wd:
            if ws != ws:
                wd = NAN  # a direction without a trusted speed cannot make a wind vector
                changed = True
            elif ws > 0.5:
                vane = self.vane  # only persistence applies to a vane (range is checked at decode)
                if wd != vane.run_value:
                    vane.run_value = wd
                    vane.run_start = t
                elif t - vane.run_start > vane.persist_s:
                    flags.append("wind_dir_stuck")
                    wd = NAN
                    changed = True
        gust = obs.wind_gust_ms
        if gust == gust and (gust < 0.0 or gust > self.settings.speed_max_ms * 1.5):
            flags.append("gust_range")
            gust = NAN
            changed = True
        if not changed:
            return obs, flags
        return Observation(obs.station, t, wd, ws, gust, tc, td, p, obs.rain_mm), flags

    def snapshot(self) -> dict[str, Any]:
        return {"newest": self.newest, "ch": {k: c.state() for k, c in self.ch.items()}, "vane": self.vane.state()}

    def restore(self, snap: dict[str, Any]) -> None:
        self.newest = float(snap["newest"])
        for k, s in snap["ch"].items():
            self.ch[k].set_state(s)
        self.vane.set_state(snap["vane"])
