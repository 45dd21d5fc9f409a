"""The station detector on hand-made signals: finds a passage, times it, tells look-alikes apart."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest

from frontwatch.engine import Engine
from frontwatch.events import PassageEvent
from tests.synth import config, passage


def run(obs, cfg=None):
    eng = Engine(cfg or config())
    return [o for o in eng.feed_many(obs) if isinstance(o, PassageEvent)]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_breeze_front_found_and_timed(seed):
    obs, onset = passage("breeze", seed=seed)
    evs = run(obs)
    fronts = [e for e in evs if e.kind == "breeze_front"]
    assert len(fronts) == 1, [e.to_dict() for e in evs]
    e = fronts[0]
    assert abs(e.onset - onset) <= 120  # onset within 2 minutes of the true change
    assert 0 < e.detected_at - onset <= 6 * 60  # decided within a few minutes
    assert e.temp_change_c is not None and e.temp_change_c < -0.5  # measured so far, mid-change
    assert e.dewpoint_change_c is not None and e.dewpoint_change_c > 0.3  # measured so far, mid-change
    # decided early, possibly mid-turn: the wind has turned well towards the onshore bearing (180)
    assert e.wind_dir_after_deg is not None and e.wind_dir_before_deg is not None
    off = lambda d: abs((d - 180 + 180) % 360 - 180)  # noqa: E731
    assert off(e.wind_dir_after_deg) <= off(e.wind_dir_before_deg) - 60


def test_cold_front_is_not_a_breeze_front():
    obs, onset = passage("cold", seed=4)
    evs = run(obs)
    assert not [e for e in evs if e.kind == "breeze_front"]
    assert [e for e in evs if e.kind == "cold_front" and abs(e.onset - onset) <= 300]


def test_cloud_shadow_gives_no_event():
    obs, _ = passage("shadow", seed=5)
    assert run(obs) == []


def test_quiet_day_gives_no_event():
    obs, _ = passage("none", seed=6)
    assert run(obs) == []


def test_event_contract_fields():
    obs, _ = passage("breeze", seed=7)
    d = run(obs)[0].to_dict()
    for k in ("id", "station", "kind", "onset", "detected_at", "confidence", "wind_dir_before_deg",
              "wind_dir_after_deg", "speed_change_ms", "temp_change_c", "dewpoint_change_c", "pressure_change_hpa"):
        assert k in d
    assert d["onset"].endswith("Z") and d["id"] == f"A-breeze_front-{d['onset'][:16].replace('-', '').replace(':', '')}Z"
    assert PassageEvent.from_dict(json.loads(json.dumps(d))).id == d["id"]


@pytest.mark.parametrize("cut", [300, 722, 725, 800])
def test_snapshot_restore_mid_stream_gives_same_events(cut):
    obs, _ = passage("breeze", seed=8)
    cfg = config()
    whole = [e.to_dict() for e in run(obs, cfg)]
    eng = Engine(cfg)
    first = eng.feed_many(obs[:cut])
    snap = json.loads(json.dumps(eng.snapshot()))  # the snapshot survives JSON
    eng2 = Engine.restore(cfg, snap)
    second = eng2.feed_many(obs[cut:])
    got = [o.to_dict() for o in first + second if isinstance(o, PassageEvent)]
    assert got == whole


def test_state_is_bounded():
    obs, _ = passage("none", seed=9, n_min=1440)
    eng = Engine(config())
    eng.feed_many(obs)
    det = eng.detectors["A"]
    assert len(det.ring) <= det.maxlen
    size_a = len(json.dumps(det.snapshot()))
    eng.feed_many([o._replace(time=o.time + 86400) for o in obs])
    assert len(json.dumps(det.snapshot())) <= size_a * 1.1


def test_clone_is_independent():
    cfg = config()
    eng = Engine(cfg)
    proto = eng.detectors["A"]
    other = proto.clone(cfg.stations[0])
    obs, _ = passage("breeze", seed=10)
    for o in obs[:400]:
        proto.update(o)
    assert len(other.ring) == 0


# ---------------------------------------------------------------- weak calls and the network
# A weak breeze-front call (classify.py: the air alone where the vane is missing or frozen, or a
# halted offshore wind with little onshore flow yet) waits to persist and then needs a front seen
# nearer the water at a speed a density current could have (corroborate.py).

from frontwatch.config import parse_network  # noqa: E402
from frontwatch.detect.classify import WEAK_PERSIST_MIN, Signature, classify  # noqa: E402
from frontwatch.detect.corroborate import Corroborator  # noqa: E402

NAN = float("nan")


def _sig(**kw):
    """A daytime signature with clear marine air (T -1.5, Td +1.2 beyond the noise), no convection."""
    base = dict(strength=12.0, minutes_after=12.0, local_hour=14.0, dir_before=NAN, dir_after=NAN,
                speed_before=NAN, speed_after=NAN, spread_after=180.0, turn_deg=NAN, onshore_before=NAN,
                onshore_after=NAN, after_offset_deg=NAN, change_offset_deg=180.0, change_speed=0.0,
                before_offset_deg=180.0, z_temp=-12.0, z_dewpoint=8.0, z_onshore=0.0, temp_change=-1.5,
                temp_rate=-0.05, dewpoint_change=1.2, pressure_change=0.1, pressure_jump=0.2,
                gust_after=NAN, rain_after=0.0, depression_after=8.0, change_times_min=(0.0, 1.0, 0.0))
    base.update(kw)
    return Signature(**base)


def test_missing_wind_marine_air_is_a_weak_call_after_persisting():
    s = config().detector
    early = classify(_sig(minutes_after=WEAK_PERSIST_MIN - 4), s, 70.0, can_wait=True)
    assert early.kind is None and early.wait  # not yet: it must persist
    late = classify(_sig(), s, 70.0, can_wait=True)
    assert late.kind == "breeze_front" and late.note.startswith("weak")


def test_missing_wind_cooling_alone_is_no_breeze_front():
    # A cloud shadow cools without moistening (DOMAIN.md section 3): with no wind to read, no call.
    s = config().detector
    d = classify(_sig(dewpoint_change=0.05, z_dewpoint=0.3), s, 70.0, can_wait=False)
    assert d.kind != "breeze_front"


def test_halted_offshore_wind_is_weak_and_slackening_is_not():
    s = config().detector
    # Offshore 3 m/s (from the land, 180 deg off the onshore bearing) turned alongshore at 2.5 m/s:
    # the onshore component rose from -3 to +0.4 m/s.
    halted = _sig(dir_before=0.0, dir_after=99.0, speed_before=3.0, speed_after=2.5, spread_after=15.0,
                  turn_deg=99.0, onshore_before=-3.0, onshore_after=0.4, before_offset_deg=180.0,
                  after_offset_deg=81.0, change_offset_deg=40.0, change_speed=4.0, z_onshore=9.0)
    d = classify(halted, s, 70.0, can_wait=False)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    # The same offshore wind merely slackening (same bearing, 0.5 m/s) adds 'onshore' flow too: no call.
    slack = _sig(dir_before=0.0, dir_after=0.0, speed_before=3.0, speed_after=0.5, spread_after=15.0,
                 turn_deg=0.0, onshore_before=-3.0, onshore_after=-0.5, before_offset_deg=180.0,
                 after_offset_deg=180.0, change_offset_deg=0.0, change_speed=2.5, z_onshore=9.0)
    assert classify(slack, s, 70.0, can_wait=False).kind != "breeze_front"


def _network(name, *stations):
    """A network of stations (id, lat, lon) on a shore with the sea to the south (onshore wind from
    180 deg), local time UTC."""
    return parse_network({"network": {"name": name, "utc_offset_hours": 0},
                          "stations": [{"id": k, "lat": lat, "lon": lon, "onshore_from_deg": 180.0}
                                       for k, lat, lon in stations]})


def _two_stations():
    # B lies 14 km inland (north) of A; the sea is to the south (onshore wind from 180 deg).
    # 14 km = 0.12590 deg of latitude (1 deg = 111.195 km on the mean-radius sphere).
    return _network("pair", ("A", 40.0, 0.0), ("B", 40.12590, 0.0))


def _shore_pair():
    # As _two_stations, with a second station A2 at the shore 8.5 km east of A (0.1 deg of
    # longitude at 40 N): A is then not the network's only coastal station, and its weak call
    # needs another station's front (_two_stations' A is: see test_the_only_station_at_the_shore_*).
    return _network("trio", ("A", 40.0, 0.0), ("A2", 40.0, 0.1), ("B", 40.12590, 0.0))


def _front(station, onset, weak):
    # weak: no wind after (an air-only call); strong: 3 m/s from the onshore bearing after a turn
    return PassageEvent(station=station, kind="breeze_front", onset=onset, detected_at=onset + 300,
                        confidence=0.8, wind_dir_before_deg=0.0, wind_dir_after_deg=None if weak else 180.0,
                        speed_change_ms=None, temp_change_c=-1.5, dewpoint_change_c=1.2, pressure_change_hpa=None,
                        speed_after_ms=None if weak else 3.0)


@pytest.mark.parametrize(("minutes", "kept"), [
    (14000 / 7.0 / 60, True),  # at DOMAIN.md's density-current check value, sqrt(g'h) = 7.00 m/s
    (14000 / 1.4 / 60, True),  # at the mean lake-breeze front speed, 1.4 m/s (Keeler & Kristovich 2012)
    (10.0, False),  # 23 m/s: no density current moves so fast
    (-5.0, False),  # before the front reached the shore station
])
def test_weak_inland_call_needs_a_front_travelling_from_the_water(minutes, kept):
    cor = Corroborator(_two_stations())
    assert cor.coastal == {"A": True, "B": False}
    t0 = 1767268800.0
    cor.check(_front("A", t0, weak=False))
    out = cor.check(_front("B", t0 + minutes * 60.0, weak=True))
    assert (out.kind == "breeze_front") == kept, out.note
    if not kept:
        assert out.kind == "wind_shift" and out.note and "weak" in out.note


def test_unconfirmed_weak_call_marks_nothing_seen():
    cor = Corroborator(_shore_pair())
    t0 = 1767268800.0
    assert cor.check(_front("A", t0, weak=True)).kind == "wind_shift"  # nobody else saw one
    # A's demoted weak call does not vouch for B's strong one 5 minutes later (14 km in 5 min is
    # 47 m/s, no density current), nor for B's weak one at any time.
    assert cor.check(_front("B", t0 + 300, weak=False)).kind == "wind_shift"
    cor = Corroborator(_shore_pair())
    cor.check(_front("A", t0, weak=True))
    assert cor.check(_front("B", t0 + 1800, weak=True)).kind == "wind_shift"


def test_stations_at_a_curved_shore_are_both_coastal():
    # A round bay of radius 22 km centred at 40 N 0 E, the water inside: stations at its shore
    # face its centre (onshore wind from the bay). P and Q sit at the water 25 deg apart round it
    # (onshore from 10 and 35 deg); along either one's own bearing the other lies 22 (1 - cos 25)
    # = 2.06 km towards the water, beyond COAST_MARGIN_KM, which made neither coastal. Along the
    # pair's shore normal (the bisector) they are level. R lies 6 km behind the shore between them.
    def at(bearing: float, r_km: float) -> tuple[float, float]:
        b = math.radians(bearing)
        return 40.0 + r_km * math.cos(b) / 111.195, r_km * math.sin(b) / (111.195 * math.cos(math.radians(40.0)))

    pts = {"P": (190.0, 22.0), "Q": (215.0, 22.0), "R": (202.5, 28.0)}
    net = parse_network({"network": {"name": "bay", "utc_offset_hours": 0}, "stations": [
        {"id": k, "lat": at(b, r)[0], "lon": at(b, r)[1], "onshore_from_deg": (b + 180.0) % 360.0}
        for k, (b, r) in pts.items()]})
    cor = Corroborator(net)
    assert cor.coastal == {"P": True, "Q": True, "R": False}
    assert sorted(k for k, _ in cor.seaward["R"]) == ["P", "Q"]


@pytest.mark.parametrize(("minutes", "kept"), [
    (14000 / 7.0 / 60, True),  # at DOMAIN.md's density-current check value, sqrt(g'h) = 7.00 m/s
    (14000 / 1.4 / 60, True),  # at the mean lake-breeze front speed, 1.4 m/s (Keeler & Kristovich 2012)
    (10.0, False),  # 23 m/s: no density current moves so fast
])
def test_clear_inland_call_after_a_weak_one_nearer_the_water(minutes, kept):
    # The first station to see a front may show it only weakly (a stuck vane); the clear call
    # inland that follows at a density current's pace confirms the front (and the weak call,
    # reported as a wind shift then, is reported again as a breeze front: see the next test).
    cor = Corroborator(_shore_pair())
    t0 = 1767268800.0
    assert cor.check(_front("A", t0, weak=True)).kind == "wind_shift"
    out = cor.check(_front("B", t0 + minutes * 60.0, weak=False))
    assert (out.kind == "breeze_front") == kept, out.note


def test_a_weak_first_sighting_is_confirmed_by_the_front_inland_after_it():
    # A weak call at the shore with nobody else to confirm it yet is reported as a wind shift; the
    # front standing 14 km inland 2 h later (1.9 m/s from it: a density current's pace) shows it
    # was the front's passage, and it is reported again, as a breeze front decided then.
    t0 = 1767268800.0 + 11 * 3600  # 11:00 local
    for net in (_two_stations(), _shore_pair()):  # A the only station at the shore, or not
        first = Corroborator(net)
        weak = _front("A", t0, weak=True)
        assert first.check(weak).kind == "wind_shift" and not first.late
        cor = Corroborator(net)  # the rest through a snapshot, as after a restart
        cor.restore(json.loads(json.dumps(first.snapshot())))
        b = _front("B", t0 + 14000 / 1.9, weak=False)
        assert cor.check(b).kind == "breeze_front"
        assert [(e.station, e.kind, e.onset, e.detected_at) for e in cor.late] == \
            [("A", "breeze_front", t0, b.detected_at)]
        assert cor.late[0].note and "confirmed later by the front at B" in cor.late[0].note
        assert cor.late[0].temp_change_c == weak.temp_change_c  # the weak call's own measurements
        cor.late.clear()
        cor.check(_front("B", b.onset + 3 * 3600, weak=False))  # a second front inland: confirmed once
        assert not cor.late
    # Not when B's call came too soon for a front from A (14 km in 10 min: 23 m/s) ...
    cor = Corroborator(_two_stations())
    cor.check(_front("A", t0, weak=True))
    cor.check(_front("B", t0 + 600, weak=False))
    assert not cor.late
    # ... nor when A had its own front earlier that day (a wobble behind the front, not a passage)
    cor = Corroborator(_shore_pair())
    cor.check(_front("A", t0 - 2 * 3600, weak=False))
    cor.check(_front("A", t0, weak=True))
    assert cor.check(_front("B", t0 + 14000 / 1.9, weak=False)).kind == "breeze_front"
    assert not cor.late


def _far_pair():
    # B lies 38 km inland (north) of A: 38 km = 0.34174 deg of latitude (1 deg = 111.195 km).
    return _network("far-pair", ("A", 40.0, 0.0), ("B", 40.34174, 0.0))


@pytest.mark.parametrize(("hours", "kept"), [
    (38000 / 1.4 / 3600, True),  # 7.5 h at the mean lake-breeze front speed (Keeler & Kristovich 2012)
    (38000 / 3.0 / 3600, True),  # 3.5 h: within corroborate_hours (4) anyway
    (12.5, False),  # longer than the daytime window (08-20 local): not the same breeze day
    (26.0, False),  # 13:00 the next day: the shore station's front was the day before's
])
def test_clear_inland_call_far_from_the_shore_station(hours, kept):
    # Two stations far apart: the front seen at the shore took longer than corroborate_hours to
    # come 38 km. A clear inland call that day, at a density current's pace from the shore
    # station's front, stands; one more than the daytime window after it does not.
    cor = Corroborator(_far_pair())
    t0 = 1767268800.0 + 11 * 3600  # 11:00 local
    assert cor.check(_front("A", t0, weak=False)).kind == "breeze_front"
    out = cor.check(_front("B", t0 + hours * 3600.0, weak=False))
    assert (out.kind == "breeze_front") == kept, out.note


def test_weak_channel_change_time_gets_a_wider_allowance():
    # Onshore turn and cooling at the onset; the dewpoint's own best split 9 minutes earlier. A
    # moisture rise barely beyond the noise (z = 3) cannot be timed that closely (the change-point
    # scatter grows as 1/z^2, Hinkley 1970): coherent. A clear one (z = 8) 9 minutes off is not.
    s = config().detector
    turn = dict(dir_before=0.0, dir_after=180.0, speed_before=3.0, speed_after=3.0, spread_after=10.0,
                turn_deg=180.0, onshore_before=-3.0, onshore_after=3.0, before_offset_deg=180.0,
                after_offset_deg=0.0, change_offset_deg=0.0, change_speed=6.0, z_onshore=10.0)
    weak_td = classify(_sig(z_dewpoint=3.0, change_times_min=(0.0, -9.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert weak_td.kind == "breeze_front"
    clear_td = classify(_sig(z_dewpoint=8.0, change_times_min=(0.0, -9.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert clear_td.kind == "wind_shift"  # a clear turn of a sustained wind, but not one front


def test_an_untimed_change_inland_is_a_weak_call_timed_by_its_latest_channel():
    # The clear moisture rise 9 minutes before the turn and the cooling (above: not one front). At
    # an inland station (a station nearer the water could have seen the front first), once the
    # candidate can wait no longer, it is a weak call the network must confirm, timed at the
    # latest of its significant channels (here the onset itself: the dewpoint came first).
    s = config().detector
    turn = dict(dir_before=0.0, dir_after=180.0, speed_before=3.0, speed_after=3.0, spread_after=10.0,
                turn_deg=180.0, onshore_before=-3.0, onshore_after=3.0, before_offset_deg=180.0,
                after_offset_deg=0.0, change_offset_deg=0.0, change_speed=6.0, z_onshore=10.0)
    sig = _sig(z_dewpoint=8.0, change_times_min=(0.0, -9.0, 0.0), **turn)
    d = classify(sig, s, 70.0, can_wait=False, untimed_ok=True)
    assert d.kind == "breeze_front" and d.untimed and d.onset_shift_min == 0.0
    # the wind and the cooling 12 minutes after the moisture rise, which set the onset: timed by them
    later = classify(_sig(z_dewpoint=8.0, change_times_min=(12.0, 0.0, 12.0), z_temp=-8.0, **turn), s, 70.0,
                     can_wait=False, untimed_ok=True)
    assert later.kind == "breeze_front" and later.untimed and later.onset_shift_min == 12.0
    # not while it may wait (a clear signature may yet form), nor at the shore or a lone station
    assert classify(sig, s, 70.0, can_wait=True, untimed_ok=True).kind != "breeze_front"
    assert classify(sig, s, 70.0, can_wait=False, untimed_ok=False).kind == "wind_shift"
    assert classify(sig, s, 70.0, can_wait=False, weak_ok=False, untimed_ok=True).kind != "breeze_front"
    # the engine tells each station's detector whether it is inland
    from frontwatch.engine import Engine
    assert {k: d.inland for k, d in Engine(_two_stations()).detectors.items()} == {"A": False, "B": True}
    # the network treats it as any weak call: inland it needs a front nearer the water before it
    cor = Corroborator(_two_stations())
    ev = replace(_front("B", 1767268800.0, weak=False), untimed=True)
    assert cor.check(ev).kind == "wind_shift"
    cor.check(_front("A", 1767268800.0 - 7200, weak=False))
    assert cor.check(replace(ev, onset=ev.onset + 60)).kind == "breeze_front"


def test_wind_may_lead_the_air_but_not_trail_it():
    # Clear changes (z = 8 to 10: allowance coherence_min = 6 min). The wind turning 8 minutes before
    # the cooling and moistening is the front's order (the head's convergence ahead of the marine air,
    # sensor lag; common practice): coherent. The same gap with the air first is what a cloud's
    # cooling followed by an unrelated wobble of the wind looks like: not one front.
    s = config().detector
    turn = dict(dir_before=0.0, dir_after=180.0, speed_before=3.0, speed_after=3.0, spread_after=10.0,
                turn_deg=180.0, onshore_before=-3.0, onshore_after=3.0, before_offset_deg=180.0,
                after_offset_deg=0.0, change_offset_deg=0.0, change_speed=6.0, z_onshore=10.0, z_dewpoint=8.0)
    leads = classify(_sig(change_times_min=(0.0, 0.0, -8.0), **turn), s, 70.0, can_wait=False)
    assert leads.kind == "breeze_front"
    trails = classify(_sig(change_times_min=(-8.0, -8.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert trails.kind != "breeze_front"
    far_ahead = classify(_sig(change_times_min=(0.0, 0.0, -12.0), **turn), s, 70.0, can_wait=False)
    assert far_ahead.kind != "breeze_front"  # 1.5 x 6 = 9 minutes is the most the wind may lead


def test_temperature_may_lead_marine_air_that_came_with_the_wind():
    # The temperature's own change time is measured against the drift extrapolated from before the
    # change, so warming that levels off before the front puts it early. Cooling 8 minutes before a
    # moisture rise and an onshore turn that came together is that (coherent, as the wind may lead
    # the air by 1.5 x 6 = 9 minutes); 12 minutes is too far ahead.
    s = config().detector
    turn = dict(dir_before=0.0, dir_after=180.0, speed_before=3.0, speed_after=3.0, spread_after=10.0,
                turn_deg=180.0, onshore_before=-3.0, onshore_after=3.0, before_offset_deg=180.0,
                after_offset_deg=0.0, change_offset_deg=0.0, change_speed=6.0, z_onshore=10.0, z_dewpoint=8.0)
    early_t = classify(_sig(change_times_min=(-8.0, 0.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert early_t.kind == "breeze_front"
    # A moisture rise within the noise (z = 1) cannot vouch for the cooling: timed with the turn the
    # same signature is a front, with the cooling 8 minutes ahead it is not.
    faint = {**turn, "z_dewpoint": 1.0, "dewpoint_change": 0.4}
    assert classify(_sig(change_times_min=(0.0, 0.0, 0.0), **faint), s, 70.0, can_wait=False).kind == "breeze_front"
    assert classify(_sig(change_times_min=(-8.0, 0.0, 0.0), **faint), s, 70.0, can_wait=False).kind != "breeze_front"
    too_early = classify(_sig(change_times_min=(-12.0, 0.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert too_early.kind != "breeze_front"
    # the moisture itself 7 minutes ahead of the turn (the air first, beyond its 6-minute allowance)
    # does not vouch for the cooling
    apart = classify(_sig(change_times_min=(-8.0, -7.0, 0.0), **turn), s, 70.0, can_wait=False)
    assert apart.kind != "breeze_front"


def test_marine_air_under_an_onshore_wind_that_slackened_is_a_weak_call():
    # A large-scale wind already onshore (5 m/s from 40 deg off the onshore bearing) slackens behind
    # the change to 0.8 m/s, still from the water's side, while the air turns clearly marine
    # (T -3.0, Td +2.0): a light wind's bearing says little, so the air alone calls it, weakly (the
    # network must confirm). Not with marine air under twice the usual index, nor when the light
    # wind after blows from the land's half.
    s = config().detector
    base = dict(dir_before=140.0, dir_after=165.0, speed_before=5.0, speed_after=0.8, spread_after=40.0,
                turn_deg=25.0, onshore_before=3.8, onshore_after=0.77, before_offset_deg=40.0,
                after_offset_deg=15.0, change_offset_deg=20.0, change_speed=4.2, z_onshore=-6.0,
                z_temp=-40.0, z_dewpoint=30.0, temp_change=-3.0, dewpoint_change=2.0, early_dir=140.0,
                early_offset_deg=40.0)  # onshore for the half hour before too
    d = classify(_sig(**base), s, 70.0, can_wait=False)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    mild = {**base, "temp_change": -0.6, "dewpoint_change": 0.6}
    assert classify(_sig(**mild), s, 70.0, can_wait=False).kind != "breeze_front"
    landward = {**base, "dir_after": 300.0, "after_offset_deg": 120.0, "onshore_after": -0.4}
    assert classify(_sig(**landward), s, 70.0, can_wait=False).kind != "breeze_front"


# ---------------------------------------------------------------- reporting interval
def _subsampled(every_min: int, seed: int):
    from frontwatch.labels import label_from_dict
    from frontwatch.replay import decode_frame, merge, run_decoded
    from frontwatch.score import score
    from frontwatch.sim import generate, preset

    sc = generate(preset("ordinary", seed=seed, days=3))
    cfg = parse_network(sc.network)
    df = sc.observations
    minute = df["time"].astype(str).str.slice(14, 16).astype(int)
    d = merge([decode_frame(df[minute % every_min == 0].copy(), cfg, f"every-{every_min}")])
    res = run_decoded(d, cfg)
    rep = score(res.events, [label_from_dict(x) for x in sc.labels])
    lookalike_bf = sum(1 for _, lb in rep.false_alarms if lb is not None and lb.kind != "breeze_front")
    return rep, lookalike_bf


@pytest.mark.parametrize("every_min", [5, 10])
def test_stations_reporting_every_5_or_10_minutes_still_show_their_fronts(every_min):
    # Many networks publish 10-minute records (WMO-No. 8's 10-minute means). The detector's windows
    # are set in minutes for per-minute records and widen to hold enough of a sparser station's
    # records; the same generated days thinned to one record in 5 or 10 minutes keep most fronts,
    # and no look-alike becomes a breeze front. (Timing is coarser: onsets fall on whole intervals.)
    rep, lookalike_bf = _subsampled(every_min, seed=71)
    assert rep.overall.a >= 10
    assert (rep.overall.csi or 0.0) >= 0.8
    assert lookalike_bf == 0


def test_light_turn_into_the_sector_is_weak_and_a_lone_station_makes_it_only_once_it_persisted():
    s = config().detector
    # Offshore 2.3 m/s (121 deg off the onshore bearing) turned into the sector (36 deg off) at
    # 1.1 m/s: 0.89 m/s of onshore flow, under what stands on its own (corroborate.WEAK_ONSHORE_MS).
    on = 1.1 * math.cos(math.radians(36.0))
    light = _sig(dir_before=301.0, dir_after=216.0, speed_before=2.3, speed_after=1.1, spread_after=40.0,
                 turn_deg=85.0, onshore_before=2.3 * math.cos(math.radians(121.0)), onshore_after=on,
                 before_offset_deg=121.0, after_offset_deg=36.0, change_offset_deg=20.0, change_speed=2.4,
                 z_onshore=6.0)
    d = classify(light, s, 70.0, can_wait=False)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    # the same with the air barely marine (index under 1.5 times the minimum): no call
    faint = replace(light, temp_change=-0.5, dewpoint_change=0.3)
    assert classify(faint, s, 70.0, can_wait=False).kind != "breeze_front"
    # a lone station: no network can confirm a weak call, so none is made and it keeps waiting
    alone = classify(light, s, 70.0, can_wait=True, weak_ok=False)
    assert alone.kind is None and alone.wait and "confirmable" in alone.note
    # ... until it has held through the whole decision window: then it has persisted and is made
    assert alone.weak_held
    assert classify(light, s, 70.0, can_wait=False, weak_ok=False).kind != "breeze_front"  # never held
    d = classify(light, s, 70.0, can_wait=False, weak_ok=False, held_weak=True)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    # not on the air alone (no wind measured), nor with the wind gone back into the offshore half
    assert classify(replace(light, speed_before=NAN, speed_after=NAN, dir_after=NAN, after_offset_deg=NAN),
                    s, 70.0, can_wait=False, weak_ok=False, held_weak=True).kind != "breeze_front"
    assert classify(replace(light, after_offset_deg=120.0, onshore_after=-0.5), s, 70.0, can_wait=False,
                    weak_ok=False, held_weak=True).kind != "breeze_front"
    # while a clear call (the same turn at 3 m/s onshore, settled) stands alone as before
    clear = replace(light, speed_after=3.0, onshore_after=3.0 * math.cos(math.radians(36.0)), spread_after=20.0)
    d = classify(clear, s, 70.0, can_wait=False, weak_ok=False)
    assert d.kind == "breeze_front" and not d.note.startswith("weak")


def _onshore_sig(before_off: float, after_off: float, early_off: float | None = None, **kw):
    """Marine air (T -1.5, Td +1.2, both far beyond the noise) under a settled 4 m/s wind after,
    `after_off` deg off the onshore bearing (0 deg here), `before_off` before (3 m/s) and
    `early_off` 30-15 min before the onset (default: as before)."""
    early_off = before_off if early_off is None else early_off
    on_b = 3.0 * math.cos(math.radians(before_off))
    on_a = 4.0 * math.cos(math.radians(after_off))
    return _sig(dir_before=before_off, dir_after=after_off, speed_before=3.0, speed_after=4.0, spread_after=15.0,
                turn_deg=abs(before_off - after_off), onshore_before=on_b, onshore_after=on_a,
                before_offset_deg=before_off, after_offset_deg=after_off, change_offset_deg=40.0, change_speed=1.5,
                z_onshore=1.0, early_dir=early_off, early_offset_deg=early_off, **kw)


def test_marine_air_under_a_wind_already_onshore_is_weak_unless_the_wind_turned_in():
    """An onshore large-scale wind leaves no distinct front (Arritt 1993, from memory): marine air
    arriving under it is a weak call everywhere (a lone station makes none), unless the wind swung
    from the sector's edge towards its middle, or turned onshore in the half hour before."""
    from frontwatch.detect.classify import EDGE_TURN_DEG, edge_turn, recent_turn

    s = config().detector
    steady = _onshore_sig(20.0, 10.0)  # onshore all along
    d = classify(steady, s, 70.0, can_wait=False)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    alone = classify(steady, s, 70.0, can_wait=False, weak_ok=False)
    assert alone.kind != "breeze_front"
    # from the sector's outer half (60 deg off, halfwidth 70) to 10 deg off: turned in
    assert edge_turn(60.0, 10.0, 70.0) and not edge_turn(60.0, 60.0 - EDGE_TURN_DEG + 1, 70.0)
    d = classify(_onshore_sig(60.0, 10.0), s, 70.0, can_wait=False, weak_ok=False)
    assert d.kind == "breeze_front" and not d.note.startswith("weak")
    # onshore for the last 15 minutes, but from the land (150 deg off) the quarter hour before
    recent = _onshore_sig(20.0, 10.0, early_off=150.0)
    assert recent_turn(recent, 70.0) and not recent_turn(steady, 70.0)
    d = classify(recent, s, 70.0, can_wait=False, weak_ok=False)
    assert d.kind == "breeze_front" and not d.note.startswith("weak")


def test_saturated_marine_air_counts_as_moist_under_a_wind_that_turned_in():
    """Marine air that arrives saturated cannot show its moisture as a dewpoint rise beyond the
    noise (the dewpoint is capped by the falling temperature; common practice): its vanishing
    depression stands for it. Cooling under a wind swung in from the sector's edge is then a front;
    the same cooling in air far from saturation with no moisture rise stays no front (a cloud
    shadow cools without moistening, DOMAIN.md section 3)."""
    s = config().detector
    fog = _onshore_sig(60.0, 10.0, depression_after=0.2, z_dewpoint=0.5, dewpoint_change=0.1, temp_change=-2.5,
                       z_temp=-40.0)
    d = classify(fog, s, 70.0, can_wait=False, weak_ok=False)
    assert d.kind == "breeze_front" and not d.note.startswith("weak"), d.note
    shadow = replace(fog, depression_after=8.0)
    assert classify(shadow, s, 70.0, can_wait=False).kind != "breeze_front"


def _strong(station, onset):
    return replace(_front(station, onset, weak=False), wind_dir_before_deg=90.0)


def test_repeat_after_a_call_the_network_refused_is_a_passage_of_its_own():
    """Inland station B calls a look-alike at 11:00 that the network does not confirm (no front
    nearer the water yet); the day's real front reaches the shore at 12:40 and B at 13:10. B's
    detector marks its second call a repeat (within repeat_min of the first, no stronger): the
    network checks it as a passage of its own, since the call before did not stand."""
    cor = Corroborator(_two_stations())
    t0 = 1767268800.0  # 12:00 UTC
    assert cor.check(_strong("B", t0 - 3600)).kind == "wind_shift"  # nothing seen nearer the coast
    assert cor.check(_strong("A", t0 + 2400)).kind == "breeze_front"
    again = cor.check(replace(_strong("B", t0 + 4200), repeat=True))
    assert again is not None and again.kind == "breeze_front" and not again.repeat
    # A repeat after a call that stood is the same regime going on: dropped.
    assert cor.check(replace(_strong("B", t0 + 6000), repeat=True)) is None
    assert cor.check(replace(_strong("A", t0 + 3 * 3600), repeat=True)) is None
    # ... and once repeat_min has passed since the call that stood, it is a passage again.
    late = t0 + 2400 + config().detector.repeat_min * 60.0 + 60.0
    assert cor.check(replace(_strong("A", late), repeat=True)) is not None
    # The state survives a snapshot.
    other = Corroborator(_two_stations())
    other.restore(cor.snapshot())
    assert other.last_front == cor.last_front and other.last_seen == cor.last_seen


def test_bare_detector_drops_repeats_and_the_engine_lets_the_network_decide():
    from frontwatch.detect.station import StationDetector

    cfg = config()
    eng = Engine(cfg)
    assert all(d.emit_repeats for d in eng.detectors.values())
    assert not StationDetector(cfg.detector).emit_repeats
    assert StationDetector(cfg.detector, emit_repeats=True).clone(cfg.stations[0]).emit_repeats


def test_a_front_after_the_wind_went_back_offshore_is_no_repeat():
    """A look-alike at 10:00 (the wind turns onshore with cooler, moister air, and 40 minutes later
    all of it goes back) and the day's front at 12:00. The second call comes within repeat_min of
    the first and is no stronger, but for the half hour before it the wind blew from the land: the
    onshore regime of the first had ended, so it is a passage of its own, not a wobble of that
    regime (a bare detector would otherwise drop it: frontwatch.detect.station)."""
    from frontwatch.detect.station import StationDetector

    obs, onset = passage("breeze", onset_min=720, seed=3)
    day0 = obs[0].time
    shaped = []
    for o in obs:
        m = int((o.time - day0) // 60)
        if 600 <= m < 640:
            f = min(1.0, (m - 599) / 4) * min(1.0, (640 - m) / 4)
            o = o._replace(wind_dir_deg=(o.wind_dir_deg + 180.0 * f) % 360, temp_c=round(o.temp_c - 1.5 * f, 1),
                           dewpoint_c=round(o.dewpoint_c + 1.5 * f, 1))
        shaped.append(o)
    cfg = config()
    det = StationDetector(cfg.detector, station=cfg.stations[0])
    fronts = [e for e in map(det.update, shaped) if e is not None and e.kind == "breeze_front"]
    assert [round((e.onset - day0) / 60) for e in fronts] == [601, 721]
    assert not fronts[1].repeat and abs(fronts[1].onset - onset) <= 120


def test_event_reports_the_wind_from_before_a_turn_that_led_the_air():
    """A station whose wind turns onshore 10 minutes before the marine air arrives: the event's
    wind before is the offshore wind, not the already-turned one (frontwatch.detect.station)."""
    from frontwatch.detect.station import StationDetector
    from frontwatch.obs import Observation

    cfg = _network("one", ("A", 40.0, 0.0))
    det = StationDetector(cfg.detector, tz=cfg.tz, station=cfg.stations[0], alone=True)
    rng = np.random.default_rng(5)
    t0 = 1815436800.0  # 2027-07-13T00:00Z (utc_offset 0: local midnight)
    evs = []
    for m in range(10 * 60, 16 * 60):
        warm = 22.0 + 0.004 * (m - 600)
        turned, air = m >= 13 * 60, m >= 13 * 60 + 10
        wd = (180.0 if turned else 20.0) + rng.normal(0, 8)
        ws = (4.0 if turned else 3.0) + rng.normal(0, 0.3)
        T = warm - (1.5 if air else 0.0) + rng.normal(0, 0.05)
        Td = 14.0 + (1.5 if air else 0.0) + rng.normal(0, 0.05)
        ev = det.update(Observation("A", t0 + 60 * m, wd % 360, ws, ws + 2, T, Td, float("nan"), 0.0))
        if ev is not None:
            evs.append(ev)
    bf = [e for e in evs if e.kind == "breeze_front"]
    assert len(bf) == 1, [(e.kind, e.note) for e in evs]
    assert abs((bf[0].wind_dir_before_deg - 20.0 + 180) % 360 - 180) < 30, bf[0]
    assert abs((bf[0].wind_dir_after_deg - 180.0 + 180) % 360 - 180) < 30


def test_front_after_a_refused_look_alike_is_found_end_to_end():
    """Regression, on a generated scenario (preset 'ordinary', seed 501): an inland station's
    look-alike call at 14:25 that the network refused (reported as a wind shift) no longer hides the
    day's front there two hours later (labelled 16:37:32)."""
    from frontwatch.replay import decode_frame, run_decoded
    from frontwatch.sim import generate, preset
    from frontwatch.timeutil import parse_time

    sc = generate(preset("ordinary", seed=501, days=6))
    cfg = parse_network(sc.network)
    res = run_decoded(decode_frame(sc.observations, cfg, "ordinary-501"), cfg)
    t = parse_time("2027-07-13T16:37:32Z")
    day = [e for e in res.events if e.station == "SM05" and abs(e.onset - t) < 4 * 3600]
    assert any(e.kind == "wind_shift" and e.note and "no breeze front seen" in e.note for e in day)
    assert any(e.kind == "breeze_front" and abs(e.onset - t) <= 300 for e in day), [e.to_dict() for e in day]


def _turn_sig(**kw):
    """A daytime clear turn of a sustained wind from offshore (150 deg off) into the onshore sector
    (10 deg off), 3 -> 5 m/s, with no change of the air yet."""
    base = dict(dir_before=150.0, dir_after=10.0, speed_before=3.0, speed_after=5.0, spread_after=15.0,
                turn_deg=140.0, onshore_before=-2.6, onshore_after=4.9, before_offset_deg=150.0,
                after_offset_deg=10.0, change_offset_deg=5.0, change_speed=7.5, z_onshore=12.0, z_temp=0.2,
                z_dewpoint=0.1, temp_change=0.0, dewpoint_change=0.0, temp_rate=0.0, minutes_after=8.0,
                early_dir=150.0, early_offset_deg=150.0)
    base.update(kw)
    return _sig(**base)


def test_onshore_turn_waits_for_the_air_before_it_is_called_a_wind_shift():
    """At a front the wind often turns first and the marine air follows minutes later (common
    practice): a daytime turn into the onshore sector with the air unchanged is not yet called a
    wind shift while it may wait (whose quiet time would hold off the breeze front); once it cannot,
    it is one. A turn out of the sector is a wind shift after the usual minutes."""
    from frontwatch.detect.classify import WIND_SHIFT_MIN

    s = config().detector
    d = classify(_turn_sig(), s, 70.0, can_wait=True)
    assert d.kind is None and d.wait
    assert classify(_turn_sig(), s, 70.0, can_wait=False).kind == "wind_shift"
    # the same turn at night: no breeze front to wait for
    night = _turn_sig(local_hour=23.0)
    assert classify(night, s, 70.0, can_wait=True).kind == "wind_shift"
    # the air arriving later under the turned wind: a breeze front
    air = _turn_sig(minutes_after=12.0, z_temp=-9.0, z_dewpoint=7.0, temp_change=-1.2, dewpoint_change=1.0,
                    change_times_min=(8.0, 9.0, 0.0))
    assert classify(air, s, 70.0, can_wait=True).kind == "breeze_front"
    assert s.max_wait_min > WIND_SHIFT_MIN


def test_a_squall_strength_wind_is_no_breeze_front():
    """A breeze blows at a few m/s (from memory): a wind swinging onshore at 14 m/s with the air
    changing is a squall's outflow (a rain-cooled one in the tropics: the shared real record's
    2017-06-29 at 11:51 local, 29 kt), even where no gust is measured and the latest wind has eased."""
    s = config().detector
    front = _turn_sig(minutes_after=10.0, z_temp=-12.0, z_dewpoint=8.0, temp_change=-1.5, dewpoint_change=1.2,
                      change_times_min=(0.0, 1.0, 0.0))
    assert classify(front, s, 70.0, can_wait=False).kind == "breeze_front"
    squall = replace(front, peak_speed_after=14.0)
    d = classify(squall, s, 70.0, can_wait=False)
    assert d.kind != "breeze_front"
    assert classify(replace(front, peak_speed_after=s.breeze_max_speed_ms - 1.0), s, 70.0,
                    can_wait=False).kind == "breeze_front"


def test_a_wind_shift_is_timed_by_the_wind_own_change():
    """A turn whose own change point (beyond the noise) came 2 minutes ago is not yet a wind shift,
    though the candidate's onset (set by an earlier drift of the air) is 9 minutes old: the turn may
    still be in progress and bring the air. Once the wind has held WIND_SHIFT_MIN, it is one."""
    from frontwatch.detect.classify import WIND_SHIFT_MIN

    s = config().detector
    night = dict(local_hour=23.0, minutes_after=9.0)  # (at night no breeze front is waited for)
    d = classify(_turn_sig(change_times_min=(0.0, 0.0, 7.0), **night), s, 70.0, can_wait=True)
    assert d.kind is None and d.wait
    held = _turn_sig(change_times_min=(0.0, 0.0, 9.0 - WIND_SHIFT_MIN), **night)
    assert classify(held, s, 70.0, can_wait=True).kind == "wind_shift"
    # a wind change not beyond the noise is not timed: the onset's minutes count
    untimed = _turn_sig(change_times_min=(0.0, 0.0, 7.0), z_onshore=1.5, **night)
    assert classify(untimed, s, 70.0, can_wait=True).kind == "wind_shift"
    # and once the candidate can wait no longer, the turn is a wind shift whatever its age
    assert classify(_turn_sig(change_times_min=(0.0, 0.0, 7.0), **night), s, 70.0,
                    can_wait=False).kind == "wind_shift"


def test_a_held_weak_call_whose_wind_dies_to_calm_persists():
    """Against an opposing offshore wind the front may first turn the wind into the sector lightly
    (a weak call, waiting to persist), then still it to calm. A calm wind has not turned back
    offshore: with the marine air still there the weak call has persisted. Without having held
    before, or with the air gone, a calm wind is no front."""
    s = config().detector
    on = 0.9 * math.cos(math.radians(36.0))
    light = _sig(dir_before=301.0, dir_after=216.0, speed_before=2.3, speed_after=0.9, spread_after=40.0,
                 turn_deg=85.0, onshore_before=2.3 * math.cos(math.radians(121.0)), onshore_after=on,
                 before_offset_deg=121.0, after_offset_deg=36.0, change_offset_deg=20.0, change_speed=2.4,
                 z_onshore=6.0, minutes_after=5.0)
    d = classify(light, s, 70.0, can_wait=True)
    assert d.kind is None and d.wait and d.weak_held
    calm = replace(light, minutes_after=WEAK_PERSIST_MIN + 1.0, speed_after=0.4, dir_after=NAN,
                   after_offset_deg=NAN, onshore_after=0.2, turn_deg=NAN, spread_after=70.0)
    assert classify(calm, s, 70.0, can_wait=True).kind is None  # never held: no call
    d = classify(calm, s, 70.0, can_wait=True, held_weak=True)
    assert d.kind == "breeze_front" and d.note.startswith("weak")
    gone = replace(calm, temp_change=-0.2, z_temp=-1.0)
    assert classify(gone, s, 70.0, can_wait=True, held_weak=True).kind != "breeze_front"


def _without(obs, lo_min, hi_min):
    from tests.synth import T0
    return [o for o in obs if not lo_min <= (o.time - T0) / 60.0 < hi_min]


@pytest.mark.parametrize("gap", [(705, 750), (716, 756)])
def test_a_front_that_passed_while_the_station_was_silent_is_found_after(gap):
    """A station silent for 40-45 minutes across the passage (a logger outage) reports again in the
    marine air: the change across the gap is a breeze front, its onset the gap's middle, with a
    note; the same record by record and in chunks."""
    from tests.synth import T0

    obs, onset = passage("breeze", seed=5)
    holed = _without(obs, *gap)
    fronts = [e for e in run(holed) if e.kind == "breeze_front"]
    assert len(fronts) == 1, [e.to_dict() for e in run(holed)]
    e = fronts[0]
    last_before = max(o.time for o in holed if o.time < T0 + 60 * gap[0])
    first_after = T0 + 60 * gap[1]
    assert e.onset == 0.5 * (last_before + first_after)
    assert e.note and "silent" in e.note
    assert first_after < e.detected_at <= first_after + 15 * 60
    eng = Engine(config())
    one_by_one = [o for ob in holed for o in eng.feed(ob) if isinstance(o, PassageEvent)]
    assert [x.to_dict() for x in one_by_one] == [x.to_dict() for x in run(holed)]


@pytest.mark.parametrize(("kind", "gap"), [("none", (500, 545)), ("none", (690, 735)), ("shadow", (715, 760)),
                                           ("cold", (705, 750))])
def test_no_breeze_front_across_a_silence_without_one(kind, gap):
    """A morning's warming, a quiet midday, a cloud shadow or a cold front across a gap of the same
    length is no breeze front."""
    obs, _ = passage(kind, seed=6)
    assert not [e for e in run(_without(obs, *gap)) if e.kind == "breeze_front"]


def test_a_drier_wind_that_is_not_colder_is_no_cold_front():
    """Behind a cold front the air is drier and colder (Ahrens, from memory), or the pressure jumps
    (DOMAIN.md section 3). A turn with the dewpoint 1.5 degC lower but the temperature up (the
    morning's mixing-out of moisture) waits while it may for the cooling, then is a wind shift; the
    same with 1 degC of cooling, or with a 1.5 hPa pressure jump, is a cold front."""
    s = config().detector
    drier = _sig(dir_before=270.0, dir_after=330.0, speed_before=4.0, speed_after=5.0, spread_after=15.0,
                 turn_deg=60.0, onshore_before=0.0, onshore_after=-2.5, before_offset_deg=90.0,
                 after_offset_deg=150.0, change_offset_deg=170.0, change_speed=3.0, z_onshore=-4.0,
                 temp_change=0.4, z_temp=3.0, dewpoint_change=-1.5, z_dewpoint=-10.0, pressure_jump=0.1,
                 local_hour=10.0)
    d = classify(drier, s, 70.0, can_wait=True)
    assert d.kind is None and d.wait
    assert classify(drier, s, 70.0, can_wait=False).kind == "wind_shift"
    colder = replace(drier, temp_change=-1.0, z_temp=-8.0)
    assert classify(colder, s, 70.0, can_wait=False).kind == "cold_front"
    jump = replace(drier, pressure_jump=1.5)
    assert classify(jump, s, 70.0, can_wait=False).kind == "cold_front"


def _cold_then_breeze(cf_min: int, bf_min: int, seed: int = 3):
    """Station A's day: a cold front at `cf_min` (the wind veers 300 -> 340 deg, 1.2 degC colder,
    2.5 degC drier) and a breeze front at `bf_min` (the wind swings onshore to 180 deg, 1.5 degC
    colder, 3 degC moister), no pressure sensor."""
    from frontwatch.obs import Observation
    from tests.synth import T0

    rng = np.random.default_rng(seed)
    out = []
    for m in range(900):
        c = min(1.0, max(0.0, (m - cf_min + 1) / 4))
        b = min(1.0, max(0.0, (m - bf_min + 1) / 4))
        temp = (18.0 + 8.0 * math.sin(math.pi * (m - 360) / 720) if 360 <= m <= 1080 else 18.0) - 1.2 * c - 1.5 * b
        td = 14.0 - 2.5 * c + 3.0 * b
        wd = (300.0 + 40.0 * c) % 360 if b == 0 else (340.0 + 200.0 * b) % 360
        out.append(Observation("A", T0 + 60.0 * m, round((wd + 8 * rng.standard_normal()) % 360, 0),
                               round(max(0.0, 4.0 + c + 0.3 * rng.standard_normal()), 1), NAN,
                               round(temp + 0.08 * rng.standard_normal(), 1), round(td + 0.1 * rng.standard_normal(), 1),
                               NAN, 0.0))
    return out


@pytest.mark.parametrize("gap_min", [22, 30])
def test_a_breeze_front_soon_after_a_cold_front_is_called(gap_min):
    """A cold front's drier air is no breeze front's moister air going on: the breeze front 22-30
    minutes later (within the refractory time) is called, and nothing else in between."""
    from tests.synth import T0

    evs = run(_cold_then_breeze(690, 690 + gap_min))
    assert [(e.kind, round((e.onset - T0) / 60)) for e in evs] == \
        [("cold_front", 691), ("breeze_front", 691 + gap_min)]


def test_a_lone_station_weak_call_stands_in_the_network_step():
    """A one-station network's detector makes a weak call only once it has persisted through the
    whole decision window; the network step has no one to ask and lets it stand."""
    cor = Corroborator(_network("one", ("A", 40.0, 0.0)))
    assert cor.check(_front("A", 1767268800.0, weak=True)).kind == "breeze_front"
    # two stations at the shore: the same weak call with nobody else's front is not confirmed
    assert Corroborator(_shore_pair()).check(_front("A", 1767268800.0, weak=True)).kind == "wind_shift"


def test_the_only_station_at_the_shore_cannot_have_its_weak_call_confirmed():
    """A front forms at the shore, so at the network's only coastal station no other station can
    have seen it first: another station's call before its weak one is a look-alike, and does not
    confirm it. The demoted call still tells the network a front may have started (a clear call
    inland after it, at a density current's pace, stands)."""
    cor = Corroborator(_two_stations())
    assert cor.unconfirmable == {"A"}
    t0 = 1767268800.0
    assert cor.check(_strong("B", t0 - 3600)).kind == "wind_shift"  # inland, nothing seen nearer the coast
    out = cor.check(_front("A", t0, weak=True))  # B's call an hour before does not vouch for it
    assert out.kind == "wind_shift" and out.note and "weak" in out.note
    assert cor.check(_strong("B", t0 + 14000 / 2.0)).kind == "breeze_front"  # 2 m/s from A's weak call
    # With a second station at the shore, the same sequence confirms A's weak call (B's call is
    # 'recent'; the other shore station could have seen the front first).
    cor = Corroborator(_shore_pair())
    assert cor.unconfirmable == set()
    cor.check(_strong("B", t0 - 3600))
    assert cor.check(_front("A", t0, weak=True)).kind == "breeze_front"
