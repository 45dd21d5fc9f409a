"""Site forecasts: when a tracked front reaches a site, with an interval, and what comes behind it.

The ETA is the fitted front's arrival time at the site, sped up as fronts do through the day (see
FrontFit.predict) unless the fit has measured the acceleration itself. Its interval is 90 %
(1.645 sd) of the fit's own uncertainty, the assumed speed-up, and a model error that grows with the
time the front is extrapolated over (real fronts also slow down and bend): MODEL_REL_ERR of the
time from the front's latest passage to the ETA (common practice, no source). That span, not the
lead from now, is what the forecast bridges: an interval does not narrow while no station reports.
Expected post-front conditions come from the most recent upstream passages of the same front.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from ..calc.wind import circular_mean_deg
from ..timeutil import iso_z
from .track import OVERDUE_MIN_S, OVERDUE_SIGMAS, Front

Z90 = 1.645  # two-sided 90 % interval of a normal distribution
MODEL_REL_ERR = 0.12
MIN_HALF_WIDTH_S = 180.0
UPSTREAM_N = 3  # passages used for the expected post-front conditions

# Site forecast statuses (docs/alerts.md).
EXPECTED = "expected"
ARRIVED = "arrived"
NOT_EXPECTED = "not_expected"


def _r(x: float | None, nd: int = 1) -> float | None:
    return None if x is None or x != x else round(float(x), nd)


def _finite(x: float) -> float | None:
    """None for inf/NaN (a front that does not move has no finite speed): outputs stay strict JSON."""
    return x if math.isfinite(x) else None


def _iso(t: float | None) -> str | None:
    return None if t is None else iso_z(t)


@dataclass(frozen=True, slots=True)
class Expected:
    """Post-front conditions expected at the site, from upstream stations (None = not measured)."""

    wind_dir_deg: float | None
    wind_speed_ms: float | None
    wind_gust_ms: float | None
    temp_change_c: float | None

    def to_dict(self) -> dict[str, Any]:
        return {"wind_dir_deg": _r(self.wind_dir_deg, 0), "wind_speed_ms": _r(self.wind_speed_ms),
                "wind_gust_ms": _r(self.wind_gust_ms), "temp_change_c": _r(self.temp_change_c)}


@dataclass(frozen=True, slots=True)
class SiteForecast:
    """One forecast line (DESIGN 3.6, type 'forecast'). Times are epoch seconds."""

    site: str
    issued_at: float
    front: str
    status: str
    eta: float | None
    eta_earliest: float | None
    eta_latest: float | None
    front_speed_ms: float | None
    front_heading_deg: float | None
    basis: str
    stations: int
    speed_sd_ms: float | None
    heading_sd_deg: float | None
    residual_rms_s: float | None
    expected: Expected
    reason: str | None = None
    # Live stations the front should reach before the site that have not reported yet: alerts wait
    # for them (a stall short of the site shows there first).
    upstream_pending: int = 0

    @property
    def lead_s(self) -> float | None:
        return None if self.eta is None else self.eta - self.issued_at

    def same_as(self, other: SiteForecast | None) -> bool:
        """True when `other` says the same thing to a user: same status, basis and front, ETA to the
        minute, interval ends within 2 minutes."""
        if other is None:
            return False

        def m(t: float | None) -> int | None:
            return None if t is None else round(t / 60.0)

        def near(a: float | None, b: float | None, tol: float) -> bool:
            return (a is None) == (b is None) and (a is None or b is None or abs(a - b) < tol)

        return (self.status == other.status and self.basis == other.basis and self.front == other.front
                and m(self.eta) == m(other.eta) and near(self.eta_earliest, other.eta_earliest, 120.0)
                and near(self.eta_latest, other.eta_latest, 120.0))

    def to_dict(self) -> dict[str, Any]:
        lead = self.lead_s
        return {
            "type": "forecast",
            "site": self.site,
            "issued_at": iso_z(self.issued_at),
            "eta": _iso(self.eta),
            "eta_earliest": _iso(self.eta_earliest),
            "eta_latest": _iso(self.eta_latest),
            "front_speed_ms": _r(self.front_speed_ms, 2),
            "front_heading_deg": _r(self.front_heading_deg, 0),
            "basis": self.basis,
            "status": self.status,
            "reason": self.reason,
            "front": self.front,
            "stations": self.stations,
            "lead_time_min": None if lead is None or self.status != EXPECTED else round(lead / 60.0, 1),
            "front_speed_sd_ms": _r(self.speed_sd_ms, 2),
            "front_heading_sd_deg": _r(self.heading_sd_deg, 0),
            "residual_rms_s": _r(self.residual_rms_s, 0),
            "upstream_pending": self.upstream_pending,
            "expected": self.expected.to_dict(),
        }

    def to_state(self) -> dict[str, Any]:
        d = {f: getattr(self, f) for f in self.__slots__}
        d["expected"] = [getattr(self.expected, f) for f in Expected.__slots__]
        return d

    @classmethod
    def from_state(cls, d: dict[str, Any]) -> SiteForecast:
        d = dict(d)
        d["expected"] = Expected(*d["expected"])
        return cls(**d)


def expected_conditions(front: Front) -> Expected:
    """Post-front wind (circular mean direction, mean speed, highest gust) and mean temperature
    change of the front's latest UPSTREAM_N passages."""
    recent = sorted(front.arrivals.values(), key=lambda a: a.onset)[-UPSTREAM_N:]
    dirs = [a.dir_after_deg for a in recent if a.dir_after_deg is not None]
    spd = [a.speed_after_ms for a in recent if a.speed_after_ms is not None]
    gst = [a.gust_after_ms for a in recent if a.gust_after_ms is not None]
    dt = [a.temp_change_c for a in recent if a.temp_change_c is not None]
    d = circular_mean_deg(dirs) if dirs else None
    return Expected(None if d is None or d != d else d, sum(spd) / len(spd) if spd else None,
                    max(gst) if gst else None, sum(dt) / len(dt) if dt else None)


def _cached_expected(front: Front) -> Expected:
    e = front.cache.get("expected")
    if e is None:
        e = front.cache["expected"] = expected_conditions(front)
    return e  # type: ignore[no-any-return]


def forecast_for_site(
    site: str,
    x: float,
    y: float,
    front: Front,
    now: float,
    stall_progress: float | None,
    arrived_at: float | None,
    station_up: bool = True,
    upstream_pending: int = 0,
    day_end: float | None = None,
) -> SiteForecast:
    """The forecast for a site at (x, y) from `front` at data time `now`.

    `arrived_at` is the onset of the passage at the site's own station, if it has reported;
    `stall_progress` is the furthest a stalled front is known to have come (None if still moving):
    a site beyond it is 'not expected' (reason 'stalled').
    A site whose station is up and silent well past the ETA is 'not expected' (reason 'overdue'), and
    so is one the front would reach only after `day_end` (reason 'after_day_end').
    """
    f = front.fit
    assert f is not None
    sp_sd, hd_sd = f.speed_heading_sd()
    common: dict[str, Any] = dict(
        site=site, issued_at=now, front=front.key, front_speed_ms=_finite(f.speed_ms),
        front_heading_deg=f.heading_deg, basis=front.basis, stations=len(front.arrivals),
        speed_sd_ms=_finite(sp_sd), heading_sd_deg=_finite(hd_sd),
        residual_rms_s=f.residual_rms_s, expected=_cached_expected(front), upstream_pending=upstream_pending,
    )
    if arrived_at is not None:
        return SiteForecast(status=ARRIVED, eta=arrived_at, eta_earliest=None, eta_latest=None, **common)
    eta, eta_lin, sd = f.predict(x, y)
    if stall_progress is not None and f.progress(x, y) > stall_progress:
        return SiteForecast(status=NOT_EXPECTED, eta=None, eta_earliest=None, eta_latest=None,
                            reason="stalled", **common)
    if not f.speed_ms < 1e4 or eta < front.first_onset - 1800.0:
        # The fit puts the site behind where the front started (or the front does not move).
        return SiteForecast(status=NOT_EXPECTED, eta=None, eta_earliest=None, eta_latest=None,
                            reason="not_on_path", **common)
    # Overdue counts from the later of the sped-up and the constant-speed ETAs: the speed-up is an
    # assumption (a front that keeps its speed is no sign of a stall), and the stations' own
    # deadlines (track._set_deadlines) count from the constant-speed prediction too.
    if station_up and now > max(eta, eta_lin) + max(OVERDUE_MIN_S, OVERDUE_SIGMAS * sd):
        return SiteForecast(status=NOT_EXPECTED, eta=None, eta_earliest=None, eta_latest=None,
                            reason="overdue", **common)
    if day_end is not None and eta > day_end:
        # Breeze fronts are a daytime phenomenon; one due after the local day's end (the detector's
        # day_end_h) would fade first and could not be confirmed (common practice).
        return SiteForecast(status=NOT_EXPECTED, eta=None, eta_earliest=None, eta_latest=None,
                            reason="after_day_end", **common)
    span = max(eta - front.last_onset, 0.0)  # extrapolated from the latest passage
    acc = eta_lin - eta  # the speed-up assumed is itself uncertain: count it as one sd
    half = max(Z90 * math.sqrt(sd * sd + (MODEL_REL_ERR * span) ** 2 + acc * acc), MIN_HALF_WIDTH_S)
    # The interval starts no earlier than now, and never after the ETA (an ETA already past, not yet
    # confirmed at the site, keeps [eta, eta + half]). It ends by the local day's end: a front not
    # there by then fades first (as above).
    latest = eta + half if day_end is None else max(min(eta + half, day_end), eta)
    return SiteForecast(status=EXPECTED, eta=eta, eta_earliest=max(eta - half, min(now, eta)), eta_latest=latest,
                        **common)
