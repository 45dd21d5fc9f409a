"""Engine.feed_many (chunks through the station-major batch path) against Engine.feed record by
record: the same outputs in the same order, each tied to the same record, the same statistics and
the same engine state after every chunk, on an engine whose state carries across chunks.

The input is a generated scenario made messy the way a live feed is: records arriving late and out
of order (random delivery delays), redelivered duplicates, unknown stations (more than the engine
counts by name), absurd and missing values, calm spells and a station silent long enough for its
detector to restart. The reference is the project's own record-by-record path, so these are
consistency checks, not skill checks (the detector's skill is checked elsewhere).
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np
import pytest

from frontwatch import batch, engine
from frontwatch.config import parse_network
from frontwatch.engine import Engine
from frontwatch.obs import CANONICAL, Observation
from frontwatch.replay import decode_frame, merge, observations
from frontwatch.sim import generate, preset

pytestmark = pytest.mark.skipif(not batch.available(), reason="numba is not installed: feed_many runs record by record")


def _scenario(name: str, seed: int, days: int = 2, sites: bool = True) -> tuple[Any, list[Observation]]:
    sc = generate(preset(name, seed=seed, days=days))
    net = dict(sc.network)
    if not sites:
        net.pop("sites", None)
    cfg = parse_network(net)
    d = merge([decode_frame(sc.observations.copy(), cfg, f"{name}-{seed}")])
    return cfg, list(observations(d))


def _messy(obs: list[Observation], seed: int) -> list[Observation]:
    """Delivery as a live feed may do it (see the module docstring)."""
    rng = np.random.default_rng(seed)
    recs = list(obs)
    n = len(recs)
    first = recs[0].station
    t0 = recs[0].time
    t1 = recs[-1].time
    # silences past the detector's restart gap: two hours at one station, 70-90 min at others
    quiet = {first: [(t0 + 20 * 3600, t0 + 22 * 3600)]}
    for sid in sorted({o.station for o in recs}):
        for _ in range(3):
            start = float(rng.uniform(t0, t1))
            quiet.setdefault(sid, []).append((start, start + float(rng.uniform(70, 90)) * 60))
    out: list[Observation] = []
    for i, o in enumerate(recs):
        if any(a < o.time < b for a, b in quiet.get(o.station, ())):
            continue
        r = rng.random()
        if r < 0.01:
            o = o._replace(temp_c=99.0)
        elif r < 0.02:
            o = o._replace(wind_gust_ms=-3.0)
        elif r < 0.05:
            o = o._replace(wind_speed_ms=0.0, wind_dir_deg=math.nan)
        elif r < 0.08:
            vals = list(o[1:])
            vals[int(rng.choice([1, 4, 5, 6]))] = math.nan  # wind direction, temperature, dewpoint, pressure
            o = Observation(o.station, *vals)
        elif r < 0.1:
            o = o._replace(station=f"X{int(rng.integers(0, 2000))}")  # > MAX_UNKNOWN distinct ids
        out.append(o)
        if rng.random() < 0.01:
            out.append(o)  # redelivered at once
        if rng.random() < 0.01 and i + 1 < n:
            out.append(recs[max(0, i - int(rng.integers(1, 40)))])  # an old one again (late or duplicate)
    # random delivery delays: mostly none, some minutes (out of order), a few over late_s (late)
    delay = np.where(rng.random(len(out)) < 0.9, 0.0, rng.exponential(240.0, len(out)))
    delay[rng.random(len(out)) < 0.003] = 1500.0
    arrival = np.array([o.time for o in out]) + delay
    return [out[k] for k in np.argsort(arrival, kind="stable")]


def _pending_after(cfg: Any, recs: list[Observation]) -> list[int]:
    """Indices of the records after which some detector has a candidate pending (record by record)."""
    e = Engine(cfg)
    out = []
    for i, r in enumerate(recs):
        e.feed(r)
        if any(d.pending for d in e.detectors.values()):
            out.append(i)
    return out


def _chunks(n: int, seed: int, cut_after: list[int]) -> list[tuple[int, int]]:
    """Chunks of varied sizes (under and over BATCH_MIN), also cut right after each of `cut_after`."""
    rng = np.random.default_rng(seed)
    sizes = [1, 3, 20, engine.BATCH_MIN - 1, engine.BATCH_MIN, 100, 333, 1000, 2500]
    cuts = {0, n}
    i = 0
    while i < n:
        i += int(rng.choice(sizes))
        cuts.add(min(i, n))
    cuts.update(c + 1 for c in cut_after)
    b = sorted(cuts)
    return list(zip(b[:-1], b[1:], strict=True))


def _snap(e: Engine) -> str:
    return json.dumps(e.snapshot(), sort_keys=True)


def _as_columns(chunk: list[Observation]) -> tuple[list[str], dict[str, list[float]]]:
    """The records as Engine.feed_columns takes them (what the service builds from gateway arrays)."""
    if not chunk:
        return [], {}
    st, t, *vals = (list(c) for c in zip(*chunk, strict=True))
    return st, {"time": t, **dict(zip(CANONICAL, vals, strict=True))}


def _compare(cfg: Any, recs: list[Observation], seed: int, restore_every: int = 0,
             columns: bool = False) -> dict[str, int]:
    ref = Engine(cfg)
    eng = Engine(cfg)
    seen = {"events": 0, "site_outputs": 0, "pending_at_boundary": 0, "batched": 0, "drop_at_boundary": 0,
            "late": 0}
    pending = _pending_after(cfg, recs)
    cut_after = [pending[j] for j in np.random.default_rng(seed).choice(len(pending), min(12, len(pending)),
                                                                        replace=False)]
    for k, (a, b) in enumerate(_chunks(len(recs), seed, cut_after)):
        chunk = recs[a:b]
        want = [(i, o.to_dict()) for i, r in enumerate(chunk) for o in ref.feed(r)]
        produced = eng.feed_columns(*_as_columns(chunk)) if columns else eng.feed_indexed(chunk)
        got = [(i, o.to_dict()) for i, o in produced]
        assert got == want, f"chunk {k} (records {a}-{b})"
        if restore_every and k % restore_every == restore_every - 1:
            eng = Engine.restore(cfg, json.loads(json.dumps(eng.snapshot())))  # as the service's store does
        if k % 7 == 0 or b == len(recs):
            assert _snap(eng) == _snap(ref), f"state after chunk {k}"
        seen["events"] += sum("type" not in o for _, o in want)
        seen["site_outputs"] += sum("type" in o for _, o in want)
        # weak calls the network confirmed after the fact (reported before the event that did it)
        seen["late"] += sum("confirmed later" in o.get("note", "") for _, o in want if "type" not in o)
        seen["pending_at_boundary"] += sum(d.pending for d in ref.detectors.values())
        seen["batched"] += len(chunk) >= engine.BATCH_MIN
        # a passage's temperature drop still being measured when the chunk ends (batch masks the
        # records the watch takes for it by the drop window)
        seen["drop_at_boundary"] += len(ref.watch.refining) if ref.watch is not None else 0
    assert _snap(eng) == _snap(ref)
    return seen


@pytest.mark.parametrize(("name", "seed", "sites"), [("ordinary", 71, True), ("south", 72, True),
                                                     ("smeared", 73, False)])
def test_feed_many_equals_feed_on_messy_live_delivery(name, seed, sites):
    cfg, obs = _scenario(name, seed, sites=sites)
    recs = _messy(obs, seed)
    seen = _compare(cfg, recs, seed, restore_every=5)
    ref = Engine(cfg)
    for r in recs:
        ref.feed(r)
    st = ref.stats
    # the input did what it was made to do
    for flag in ("duplicate", "late", "out_of_order", "temp_range", "gust_range", "gap"):
        assert st.qc[flag] > 0, flag
    assert "(others)" in st.unknown_stations
    assert seen["events"] > 0 and seen["batched"] > 10
    assert seen["pending_at_boundary"] > 0, "a candidate pending across a chunk boundary"
    if sites:
        assert seen["site_outputs"] > 0
        assert seen["drop_at_boundary"] > 0, "a drop being measured across a chunk boundary"
    if name == "ordinary":
        assert seen["late"] > 0, "a weak call confirmed by a later front inland"


def test_feed_columns_equals_feed_on_messy_live_delivery():
    cfg, obs = _scenario("curved", 77, days=1)
    seen = _compare(cfg, _messy(obs, 77), 77, columns=True)
    assert seen["events"] > 0 and seen["batched"] > 5


def test_feed_many_on_ordered_input_and_whole_days_in_one_chunk():
    cfg, obs = _scenario("noisy", 74, days=2)
    ref = Engine(cfg)
    want = [o.to_dict() for r in obs for o in ref.feed(r)]
    eng = Engine(cfg)
    half = len(obs) // 2
    got = [o.to_dict() for o in eng.feed_many(obs[:half]) + eng.feed_many(obs[half:])]
    assert want and got == want
    assert _snap(eng) == _snap(ref)


def test_qc_flag_names_per_station_agree_between_the_two_paths(monkeypatch):
    cfg, obs = _scenario("ordinary", 75, days=1)
    recs = _messy(obs, 75)
    fast: dict[str, list[str]] = {}
    Engine(cfg).feed_indexed(recs, qc_flags=fast)
    monkeypatch.setattr(engine, "BATCH_MIN", 10**9)  # record by record
    slow: dict[str, list[str]] = {}
    Engine(cfg).feed_indexed(recs, qc_flags=slow)
    assert sum(map(len, slow.values())) > 100
    assert {k: sorted(v) for k, v in fast.items()} == {k: sorted(v) for k, v in slow.items()}
    assert not any(k.startswith("X") for k in fast)  # unknown stations are counted, not QC'd


def test_feed_many_of_nothing_and_of_unknown_stations_only():
    cfg, obs = _scenario("ordinary", 76, days=1)
    eng = Engine(cfg)
    assert eng.feed_many([]) == []
    junk = [o._replace(station=f"NOPE{i % 3}") for i, o in enumerate(obs[:200])]
    assert eng.feed_many(junk) == []
    assert eng.stats.records == 200 and eng.stats.used == 0
    assert dict(eng.stats.unknown_stations) == {"NOPE0": 67, "NOPE1": 67, "NOPE2": 66}
