"""The station detector on hand-made signals: finds a passage, times it, tells look-alikes apart."""

from __future__ import annotations

import json

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
