"""The per-site alert state machine, driven by hand-made forecasts: hysteresis, updates, cancel, ids."""

from __future__ import annotations

from dataclasses import replace

from frontwatch.alerts.lifecycle import (
    IMMINENT_EXIT_S,
    IMMINENT_S,
    ISSUE_LEAD_PRIOR_S,
    ISSUE_LEAD_S,
    ISSUE_MAX_PENDING,
    STALE_S,
    UPDATE_ETA_S,
    SiteAlerts,
)
from frontwatch.config import SiteConfig
from frontwatch.network.forecast import Expected, SiteForecast

NOW = 1_800_000_000.0
SITE = SiteConfig.model_validate({"id": "green", "lat": -27.4, "lon": 153.0, "gust_limit_ms": 12.0,
                                  "temp_drop_limit_c": 3.0})


def _fc(now: float, lead_min: float, *, status: str = "expected", front: str = "S01-20270101T0100Z",
        gust: float | None = 8.0, basis: str = "fit", stations: int = 4, pending: int = 0) -> SiteForecast:
    eta = None if status == "not_expected" else now + lead_min * 60.0
    return SiteForecast(site="green", issued_at=now, front=front, status=status, eta=eta,
                        eta_earliest=None if eta is None else eta - 600, eta_latest=None if eta is None else eta + 600,
                        front_speed_ms=2.5, front_heading_deg=270.0, basis=basis, stations=stations, speed_sd_ms=0.2,
                        heading_sd_deg=4.0, residual_rms_s=60.0, expected=Expected(90.0, 4.0, gust, -1.5),
                        reason="stalled" if status == "not_expected" else None, upstream_pending=pending)


def test_wobbling_eta_does_not_flap() -> None:
    """The ETA wobbles across the imminent threshold (20 min): one transition in, none back out until
    the ETA moves beyond the exit threshold (45 min)."""
    a = SiteAlerts(SITE, station="S30")
    msgs = []
    t = NOW
    eta = NOW + 70 * 60
    wobble = [0, 4, -3, 5, -5, 3, -4, 6, 0, -2]
    for i in range(60):
        m = a.step(t, _fc(t, (eta + wobble[i % len(wobble)] * 60 - t) / 60.0), last_seen=t)
        if m is not None:
            msgs.append(m)
        t += 60
    states = [m.state for m in msgs]
    assert states[0] == "approaching"
    assert states.count("imminent") >= 1
    first_imm = states.index("imminent")
    assert all(s == "imminent" for s in states[first_imm:])
    assert IMMINENT_S < IMMINENT_EXIT_S


def test_imminent_returns_to_approaching_only_past_the_exit_band() -> None:
    a = SiteAlerts(SITE, station="S30")
    first = a.step(NOW, _fc(NOW, 15), last_seen=NOW)
    assert first is not None and first.state == "imminent"
    a.step(NOW + 60, _fc(NOW + 60, 40), last_seen=NOW)  # 40 min: inside the band, stays imminent
    assert a.state == "imminent"
    m = a.step(NOW + 400, _fc(NOW + 400, IMMINENT_EXIT_S / 60 + 5), last_seen=NOW + 400)
    assert m is not None and m.state == "approaching" and m.msg_type == "Update"


def test_updates_only_for_a_real_change_and_rate_limited() -> None:
    a = SiteAlerts(SITE, station="S30")
    first = a.step(NOW, _fc(NOW, 80), last_seen=NOW)
    assert first is not None and first.state == "approaching" and first.seq == 1 and first.references is None
    eta0 = NOW + 80 * 60
    # ETA moves by 3 min: no message.
    assert a.step(NOW + 60, _fc(NOW + 60, (eta0 + 180 - NOW - 60) / 60), last_seen=NOW) is None
    # By 12 min, but only 2 min after the last message: rate-limited.
    a2 = SiteAlerts(SITE, station="S30")
    a2.step(NOW, _fc(NOW, 80), last_seen=NOW)
    assert a2.step(NOW + 120, _fc(NOW + 120, (eta0 + UPDATE_ETA_S + 120 - NOW - 120) / 60), last_seen=NOW) is None
    m = a2.step(NOW + 600, _fc(NOW + 600, (eta0 + UPDATE_ETA_S + 120 - NOW - 600) / 60), last_seen=NOW + 600)
    assert m is not None and m.msg_type == "Update" and m.state == "approaching"
    assert m.seq == 2 and m.references == f"{m.id}-1" and m.id == first.id


def test_cancel_then_a_new_alert_gets_a_new_id() -> None:
    a = SiteAlerts(SITE, station="S30")
    m1 = a.step(NOW, _fc(NOW, 60), last_seen=NOW)
    m2 = a.step(NOW + 600, _fc(NOW + 600, 0, status="not_expected"), last_seen=NOW + 600)
    assert m1 is not None and m2 is not None
    assert m2.state == "cancelled" and m2.msg_type == "Cancel" and m2.references == m1.message_id
    assert m2.certainty == "Unlikely" and m2.urgency == "Past"
    assert "stalled" in m2.headline
    # The same front moves on after all: a new episode, a new id, a fresh sequence.
    m3 = a.step(NOW + 1800, _fc(NOW + 1800, 30), last_seen=NOW + 1800)
    assert m3 is not None and m3.msg_type == "Alert" and m3.seq == 1 and m3.references is None
    assert m3.id == m1.id + "-2"


def test_first_alert_waits_for_checkpoints_and_a_fit() -> None:
    a = SiteAlerts(SITE, station="S30")
    # Two stations short of the site have not reported yet: no alert even when close.
    assert a.step(NOW, _fc(NOW, 15, pending=ISSUE_MAX_PENDING + 1), last_seen=NOW) is None
    # Prior basis (one station), 75 min out: not yet; a fitted front that far out: yes.
    assert ISSUE_LEAD_PRIOR_S < 75 * 60 <= ISSUE_LEAD_S
    assert a.step(NOW, _fc(NOW, 75, basis="prior", stations=1), last_seen=NOW) is None
    m = a.step(NOW, _fc(NOW, 75, basis="fit", stations=3), last_seen=NOW)
    assert m is not None and m.state == "approaching" and m.certainty == "Likely"
    b = SiteAlerts(SITE, station="S30")
    m2 = b.step(NOW, _fc(NOW, 50, basis="prior", stations=1), last_seen=NOW)
    assert m2 is not None and m2.certainty == "Possible"


def test_thresholds_severity_and_stale_station_warning() -> None:
    a = SiteAlerts(SITE, station="S30")
    m = a.step(NOW, _fc(NOW, 50, gust=14.0), last_seen=NOW - STALE_S - 60)
    assert m is not None
    assert [e.quantity for e in m.exceeded] == ["gust"]
    assert m.severity == "Moderate" and "limit 12" in m.headline
    assert m.data_warnings and "S30" in m.data_warnings[0]
    d = m.to_dict()
    assert d["thresholds_exceeded"][0] == {"quantity": "gust", "expected": 14.0, "limit": 12.0, "unit": "m/s"}
    assert d["cautions"] and "official warnings" in d["cautions"][0]
    # Expected gusts fall below the limit: an update says so.
    m2 = a.step(NOW + 600, _fc(NOW + 600, (NOW + 3000 - NOW - 600) / 60, gust=9.0), last_seen=NOW + 600)
    assert m2 is not None and not m2.exceeded and m2.severity == "Minor"


def test_arrived_then_clear_and_snapshot() -> None:
    a = SiteAlerts(SITE, station="S30")
    a.step(NOW, _fc(NOW, 30), last_seen=NOW)
    arr = replace(_fc(NOW + 1800, 0), status="arrived", eta=NOW + 1700, eta_earliest=None, eta_latest=None)
    m = a.step(NOW + 1800, arr, last_seen=NOW + 1800)
    assert m is not None and m.state == "arrived" and m.certainty == "Observed" and m.eta == NOW + 1700
    b = SiteAlerts(SITE, station="S30")
    b.restore(a.snapshot())
    for x in (a, b):
        assert x.step(NOW + 1900, None) is None
        c = x.step(NOW + 1700 + 46 * 60, None)
        assert c is not None and c.state == "clear" and c.urgency == "Past"


def test_a_front_past_its_eta_is_not_called_imminent() -> None:
    """The ETA passes with no passage at the site (a late front, maybe stalled short of it): the
    alert stays 'approaching' rather than turning 'imminent'; the passage still gives 'arrived'."""
    a = SiteAlerts(SITE, station="S30")
    eta = NOW + 50 * 60
    first = a.step(NOW, _fc(NOW, 50), last_seen=NOW)
    assert first is not None and first.state == "approaching"
    # Jump past the ETA without a tick inside the 20 min before it: 5 min late, interval late end near.
    late = eta + 5 * 60
    m = a.step(late, replace(_fc(late, -5), eta=eta, eta_earliest=eta, eta_latest=eta + 600), last_seen=late)
    assert m is None and a.state == "approaching"
    arr = replace(_fc(late + 600, 0), status="arrived", eta=late + 540, eta_earliest=None, eta_latest=None)
    m = a.step(late + 600, arr, last_seen=late + 600)
    assert m is not None and m.state == "arrived"


def test_an_update_after_the_eta_says_the_front_is_due_not_expected_earlier() -> None:
    # An imminent alert is updated (the expected gusts fell below the limit) after its ETA has
    # passed, with no passage reported yet: "expected about <a time already past>" would read as
    # stale; the headline says the front is due now and gives the interval.
    a = SiteAlerts(SITE, station="S30")
    m1 = a.step(NOW, _fc(NOW, 10, gust=14.0), last_seen=NOW)
    assert m1 is not None and m1.state == "imminent" and "expected about" in m1.headline
    later = NOW + 15 * 60  # 5 min past the ETA, still inside its interval
    fc = replace(_fc(NOW, 10, gust=9.0), issued_at=later)
    m2 = a.step(later, fc, last_seen=later)
    assert m2 is not None and m2.state == "imminent" and m2.msg_type == "Update"
    assert "due now, not yet reported" in m2.headline and "between" in m2.headline
