"""The alert lifecycle of one site: states, hysteresis, updates, cancellation, stable ids.

States (docs/alerts.md): approaching -> imminent -> arrived -> clear, or approaching/imminent ->
cancelled when the front will not come. One episode (one front at one site) has one alert id;
every message of it has a sequence number and references the previous message. A state is left
only for a later one, except imminent -> approaching, which needs the ETA to move well out again
(IMMINENT_EXIT_S against IMMINENT_S: the hysteresis band), so a wobbling forecast does not flap.
'Imminent' is entered only while the ETA is still ahead (a late front may have stalled).
Same-state updates go out when the ETA moves by UPDATE_ETA_S or the thresholds exceeded change,
no more often than UPDATE_MIN_GAP_S. All times are data time.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime, tzinfo
from typing import Any

from ..calc.wind import angle_diff_deg
from ..config import SiteConfig
from ..network.forecast import ARRIVED, EXPECTED, NOT_EXPECTED, SiteForecast
from ..timeutil import iso_z

APPROACHING = "approaching"
IMMINENT = "imminent"
ARRIVED_STATE = "arrived"
CLEAR = "clear"
CANCELLED = "cancelled"
STATES = (APPROACHING, IMMINENT, ARRIVED_STATE, CLEAR, CANCELLED)
ACTIVE = (APPROACHING, IMMINENT, ARRIVED_STATE)

# A first alert: when at most ISSUE_MAX_PENDING stations short of the site are still to report,
# and the ETA is within ISSUE_LEAD_S of a fitted front (>= 3 stations), within ISSUE_LEAD_PRIOR_S
# of a front seen by ISSUE_MIN_STATIONS (prior basis), or 'imminent'. Set looking at generated
# seeds 1-5 (bench/track_skill.py): fewer pending stations or more stations cost most of the lead
# time on a sparse network and saved no false alert there.
ISSUE_LEAD_S = 90 * 60.0
ISSUE_LEAD_PRIOR_S = 60 * 60.0
ISSUE_MIN_STATIONS = 1
ISSUE_MAX_PENDING = 1  # stations short of the site that may still be unreached at a first alert
IMMINENT_S = 20 * 60.0
IMMINENT_EXIT_S = 45 * 60.0
IMMINENT_MAX_LATE_S = 60 * 60.0  # 'imminent' also needs the interval's late end this close
CLEAR_AFTER_S = 45 * 60.0  # 'clear' this long after the passage at the site
UPDATE_ETA_S = 10 * 60.0
UPDATE_MIN_GAP_S = 5 * 60.0
STALE_S = 10 * 60.0  # the site's station is 'stale' after this long without data

CAUTIONS = (
    "Frontwatch is decision support. It does not replace official warnings from the national weather "
    "service, the judgement of the people responsible for the event or race, or the wind limits set by "
    "structure makers, engineers and local regulations.",
    "Alerts depend on sensors that fail; check the data warnings, and treat missing or stale data as "
    "missing information, not as calm.",
)


def _iso(t: float | None) -> str | None:
    return None if t is None else iso_z(t)


def local_hhmm(t: float, tz: tzinfo | None) -> str:
    """'13:20 UTC+10:00' style local clock time for headlines."""
    dt = datetime.fromtimestamp(int(t), UTC).astimezone(tz or UTC)
    off = dt.strftime("%z")
    label = "UTC" if off in ("+0000", "") else f"UTC{off[:3]}:{off[3:]}"
    return f"{dt:%H:%M} {label}"


@dataclass(frozen=True, slots=True)
class Exceeded:
    """A site threshold the expected post-front conditions exceed."""

    quantity: str  # 'gust', 'temp_drop', 'wind_shift'
    expected: float
    limit: float
    unit: str

    def to_dict(self) -> dict[str, Any]:
        return {"quantity": self.quantity, "expected": round(self.expected, 1), "limit": self.limit,
                "unit": self.unit}


@dataclass(frozen=True, slots=True)
class AlertMessage:
    """One alert message (DESIGN 3.6, type 'alert'); see docs/alerts.md for every field."""

    id: str
    seq: int
    references: str | None
    references_issued_at: float | None
    site: str
    site_name: str | None
    lat: float
    lon: float
    state: str
    msg_type: str
    issued_at: float
    eta: float | None
    eta_earliest: float | None
    eta_latest: float | None
    front: str
    basis: str
    headline: str
    description: str
    urgency: str
    severity: str
    certainty: str
    exceeded: tuple[Exceeded, ...]
    expected: dict[str, float | None]
    data_warnings: tuple[str, ...]
    contacts: tuple[str, ...]

    @property
    def message_id(self) -> str:
        return f"{self.id}-{self.seq}"

    def to_dict(self) -> dict[str, Any]:
        lead = None if self.eta is None or self.state not in (APPROACHING, IMMINENT) else self.eta - self.issued_at
        return {
            "type": "alert",
            "id": self.id,
            "message_id": self.message_id,
            "site": self.site,
            "site_name": self.site_name,
            "lat": self.lat,
            "lon": self.lon,
            "state": self.state,
            "msg_type": self.msg_type,
            "seq": self.seq,
            "references": self.references,
            "references_issued_at": _iso(self.references_issued_at),
            "issued_at": iso_z(self.issued_at),
            "eta": _iso(self.eta),
            "eta_earliest": _iso(self.eta_earliest),
            "eta_latest": _iso(self.eta_latest),
            "lead_time_min": None if lead is None else round(lead / 60.0, 1),
            "front": self.front,
            "basis": self.basis,
            "headline": self.headline,
            "description": self.description,
            "urgency": self.urgency,
            "severity": self.severity,
            "certainty": self.certainty,
            "thresholds_exceeded": [e.to_dict() for e in self.exceeded],
            "expected": dict(self.expected),
            "data_warnings": list(self.data_warnings),
            "cautions": list(CAUTIONS),
            "contacts": list(self.contacts),
        }


def thresholds_exceeded(site: SiteConfig, fc: SiteForecast, current_dir_deg: float | None) -> tuple[Exceeded, ...]:
    """The site's limits that the expected post-front conditions reach or exceed."""
    out = []
    e = fc.expected
    if site.gust_limit_ms is not None and e.wind_gust_ms is not None and e.wind_gust_ms >= site.gust_limit_ms:
        out.append(Exceeded("gust", e.wind_gust_ms, site.gust_limit_ms, "m/s"))
    if (site.temp_drop_limit_c is not None and e.temp_change_c is not None
            and -e.temp_change_c >= site.temp_drop_limit_c):
        out.append(Exceeded("temp_drop", -e.temp_change_c, site.temp_drop_limit_c, "degC"))
    if (site.shift_limit_deg is not None and e.wind_dir_deg is not None and current_dir_deg is not None
            and current_dir_deg == current_dir_deg):
        shift = abs(angle_diff_deg(e.wind_dir_deg, current_dir_deg))
        if shift >= site.shift_limit_deg:
            out.append(Exceeded("wind_shift", shift, site.shift_limit_deg, "deg"))
    return tuple(out)


class SiteAlerts:
    """The alert state machine of one site. step() takes each new forecast (or None on a clock tick)."""

    def __init__(self, site: SiteConfig, tz: tzinfo | None = None, station: str | None = None) -> None:
        self.site = site
        self.tz = tz
        self.station = station  # the station that confirms arrivals here (None: estimated)
        self.state: str | None = None
        self.alert_id: str | None = None
        self.seq = 0
        self.front: str | None = None
        self.episodes: dict[str, int] = {}  # front -> alerts opened for it (for unique ids), bounded below
        self.last_eta: float | None = None
        self.last_sent = -1e18
        self.last_exceeded: tuple[str, ...] = ()
        self.arrived_at: float | None = None
        self.fc: SiteForecast | None = None  # the latest forecast seen

    def _urgency(self, state: str, lead: float | None) -> str:
        if state in (IMMINENT, ARRIVED_STATE):
            return "Immediate"
        if state in (CLEAR, CANCELLED):
            return "Past"
        if lead is not None and lead <= 3600.0:
            return "Expected"
        return "Future"

    def _wanted(self, now: float, fc: SiteForecast | None) -> str | None:
        """The state the forecast calls for, with the hysteresis rules."""
        st = self.state
        if st == ARRIVED_STATE and self.arrived_at is not None and now >= self.arrived_at + CLEAR_AFTER_S:
            return CLEAR
        if fc is None:
            return st
        if fc.status == ARRIVED:
            return st if st in (ARRIVED_STATE, CLEAR) else ARRIVED_STATE
        if fc.status == NOT_EXPECTED:
            return CANCELLED if st in (APPROACHING, IMMINENT) else st
        if fc.status != EXPECTED or fc.eta is None:
            return st
        lead = fc.eta - now
        # 'Imminent' needs the interval too: even its late end within IMMINENT_MAX_LATE_S; and the
        # ETA still ahead: a front past its ETA and not yet seen here is late, which is no sign that
        # it is about to come (it may have stalled short of the site). The alert then stays as it
        # is until the passage ('arrived') or the 'overdue' verdict ('cancelled'; a front that
        # comes after all opens a new alert, so no real arrival is lost).
        soon = 0.0 <= lead <= IMMINENT_S and (fc.eta_latest is None or fc.eta_latest - now <= IMMINENT_MAX_LATE_S)
        if st in (None, CLEAR, CANCELLED):
            # A first alert waits while stations short of the site are still to report (a stall
            # short of the site shows there first), and for the ETA to be close enough.
            if fc.upstream_pending > ISSUE_MAX_PENDING:
                return st
            if soon:
                return IMMINENT
            if lead <= ISSUE_LEAD_S and (fc.basis == "fit" or (fc.stations >= ISSUE_MIN_STATIONS
                                                               and lead <= ISSUE_LEAD_PRIOR_S)):
                return APPROACHING
            return st
        if st == APPROACHING and soon:
            return IMMINENT
        if st == IMMINENT and lead > IMMINENT_EXIT_S:
            return APPROACHING
        return st

    def step(self, now: float, fc: SiteForecast | None, current_dir_deg: float | None = None,
             last_seen: float | None = None) -> AlertMessage | None:
        """Advance the state at data time `now`; returns the message to send, if any."""
        if fc is not None:
            if fc.front != self.front and self.state in (CLEAR, CANCELLED):
                self.state = None  # a new front: a new episode may start
            self.fc = fc
        fc_now = fc if fc is not None else self.fc
        if self.state == CLEAR:
            return None  # this front has been and gone here
        wanted = self._wanted(now, fc)
        if wanted is None:
            return None
        if fc_now is None:
            return None
        exceeded = thresholds_exceeded(self.site, fc_now, current_dir_deg) if wanted in (APPROACHING, IMMINENT) else ()
        names = tuple(e.quantity for e in exceeded)
        new_episode = self.state in (None, CLEAR, CANCELLED) and wanted in ACTIVE
        if wanted == self.state:
            eta_moved = (fc_now.eta is not None and self.last_eta is not None
                         and abs(fc_now.eta - self.last_eta) >= UPDATE_ETA_S)
            if not (wanted in (APPROACHING, IMMINENT) and (eta_moved or names != self.last_exceeded)
                    and now - self.last_sent >= UPDATE_MIN_GAP_S):
                return None
        if new_episode:
            k = self.episodes.get(fc_now.front, 0) + 1
            self.episodes[fc_now.front] = k
            if len(self.episodes) > 8:
                self.episodes.pop(next(iter(self.episodes)))
            self.alert_id = f"fw-{self.site.id}-{fc_now.front}" + (f"-{k}" if k > 1 else "")
            self.seq = 0
            self.front = fc_now.front
            self.arrived_at = None
        self.front = fc_now.front  # an open alert follows the site's front if it is re-identified
        if wanted == ARRIVED_STATE and fc_now.status == ARRIVED:
            self.arrived_at = fc_now.eta
        prev = None if new_episode or self.alert_id is None else f"{self.alert_id}-{self.seq}"
        prev_at = None if prev is None else self.last_sent
        self.seq += 1
        self.state = wanted
        self.last_sent = now
        self.last_eta = fc_now.eta if fc_now.status == EXPECTED else self.last_eta
        self.last_exceeded = names
        msg_type = "Alert" if new_episode else ("Cancel" if wanted == CANCELLED else "Update")
        warnings = []
        station = self.station
        if station is None or self.site.station is None:
            # (the nearest station within 5 km stands in for arrivals: frontwatch/network/watch.py)
            stand_in = "" if station is None else f" (the nearest, {station}, stands in)"
            warnings.append(f"no station at the site{stand_in}: its arrival time is estimated from the front's track")
        elif last_seen is None or now - last_seen > STALE_S:
            since = "ever" if last_seen is None else iso_z(last_seen)
            warnings.append(f"no data from the site's station {station} since {since}: "
                            "the passage at the site cannot be confirmed")
        assert self.alert_id is not None
        return self._message(now, fc_now, wanted, msg_type, prev, prev_at, exceeded, tuple(warnings))

    def _message(self, now: float, fc: SiteForecast, state: str, msg_type: str, prev: str | None,
                 prev_at: float | None, exceeded: tuple[Exceeded, ...], warnings: tuple[str, ...]) -> AlertMessage:
        site = self.site
        name = site.name or site.id
        lead = None if fc.eta is None else fc.eta - now
        eta = fc.eta if state in (APPROACHING, IMMINENT, ARRIVED_STATE, CLEAR) else None
        if state in (APPROACHING, IMMINENT):
            assert fc.eta is not None and fc.eta_earliest is not None and fc.eta_latest is not None
            span = f"between {local_hhmm(fc.eta_earliest, self.tz)[:5]} and {local_hhmm(fc.eta_latest, self.tz)[:5]}"
            if fc.eta < now:  # the expected time has passed with no passage reported yet
                when = f"due now, not yet reported (expected about {local_hhmm(fc.eta, self.tz)}, {span})"
            else:
                when = f"expected about {local_hhmm(fc.eta, self.tz)} ({span})"
            word = "approaching" if state == APPROACHING else "imminent at"
            headline = f"Sea-breeze front {word} {name}: {when}"
        elif state == ARRIVED_STATE:
            headline = f"Sea-breeze front arrived at {name} at {local_hhmm(self.arrived_at or now, self.tz)}"
        elif state == CLEAR:
            headline = f"Sea-breeze front has passed {name}; alert ended"
        else:
            reason = {"stalled": "the front has stalled short of it", "overdue": "it has not arrived as forecast",
                      "not_on_path": "it is no longer on the front's path",
                      "expired": "no station has seen the front for hours",
                      "after_day_end": "it would arrive only after the breeze usually fades"}.get(fc.reason or "", "forecast withdrawn")
            headline = f"Sea-breeze front no longer expected at {name}: {reason}"
        for e in exceeded:
            label = {"gust": "gusts", "temp_drop": "temperature drop", "wind_shift": "wind shift"}[e.quantity]
            digits = 0 if e.quantity == "wind_shift" else 1  # a bearing to the degree; speeds, drops to 0.1
            headline += f"; {label} {e.expected:.{digits}f} {e.unit} expected (limit {e.limit:g} {e.unit})"
        ex = fc.expected
        parts = [f"Front moving toward {fc.front_heading_deg:.0f} deg at {fc.front_speed_ms:.1f} m/s, "
                 f"seen at {fc.stations} station(s), basis {fc.basis}."] if fc.front_speed_ms is not None and \
            fc.front_heading_deg is not None else []
        behind = []
        if ex.wind_dir_deg is not None:
            behind.append(f"wind from {ex.wind_dir_deg:.0f} deg")
        if ex.wind_speed_ms is not None:
            behind.append(f"mean {ex.wind_speed_ms:.1f} m/s")
        if ex.wind_gust_ms is not None:
            behind.append(f"gusts {ex.wind_gust_ms:.1f} m/s")
        if ex.temp_change_c is not None:
            behind.append(f"temperature change {ex.temp_change_c:+.1f} degC")
        if behind:
            parts.append("Behind the front upstream: " + ", ".join(behind) + ".")
        if exceeded and lead is not None and lead > 0:
            parts.append(f"Lead time {lead / 60.0:.0f} min.")
        if state in (ARRIVED_STATE, CLEAR):
            certainty = "Observed"
        elif state == CANCELLED:
            certainty = "Unlikely"
        else:
            certainty = "Likely" if fc.basis == "fit" else "Possible"
        return AlertMessage(
            id=self.alert_id or "", seq=self.seq, references=prev, references_issued_at=prev_at, site=site.id, site_name=site.name,
            lat=site.lat, lon=site.lon, state=state, msg_type=msg_type, issued_at=now, eta=eta,
            eta_earliest=fc.eta_earliest if state in (APPROACHING, IMMINENT) else None,
            eta_latest=fc.eta_latest if state in (APPROACHING, IMMINENT) else None,
            front=fc.front, basis=fc.basis, headline=headline, description=" ".join(parts),
            urgency=self._urgency(state, lead), severity="Moderate" if exceeded else "Minor",
            certainty=certainty, exceeded=exceeded, expected=ex.to_dict(), data_warnings=warnings,
            contacts=tuple(site.contacts),
        )

    def snapshot(self) -> dict[str, Any]:
        return {"state": self.state, "alert_id": self.alert_id, "seq": self.seq, "front": self.front,
                "episodes": dict(self.episodes), "last_eta": self.last_eta, "last_sent": self.last_sent,
                "last_exceeded": list(self.last_exceeded), "arrived_at": self.arrived_at,
                "fc": None if self.fc is None else self.fc.to_state()}

    def restore(self, s: dict[str, Any]) -> None:
        self.state = s["state"]
        self.alert_id = s["alert_id"]
        self.seq = int(s["seq"])
        self.front = s["front"]
        self.episodes = {k: int(v) for k, v in s["episodes"].items()}
        self.last_eta = s["last_eta"]
        self.last_sent = float(s["last_sent"])
        self.last_exceeded = tuple(s["last_exceeded"])
        self.arrived_at = s["arrived_at"]
        self.fc = None if s["fc"] is None else SiteForecast.from_state(s["fc"])
