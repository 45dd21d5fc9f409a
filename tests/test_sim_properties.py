"""Any small spec generates a consistent scenario (hypothesis draws the specs; few, small examples)."""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from frontwatch.config import parse_network
from frontwatch.obs import decode_record
from frontwatch.sim import LABEL_KINDS, ScenarioSpec, generate
from frontwatch.sim_plan import EXTRAS, KINDS
from frontwatch.timeutil import parse_time

day = st.builds(lambda k, e: "+".join([k, *e]), st.sampled_from(KINDS),
                st.lists(st.sampled_from(EXTRAS), max_size=2, unique=True))
specs = st.builds(
    ScenarioSpec,
    seed=st.integers(0, 2**32 - 1),
    days=st.integers(1, 2),
    stations=st.integers(1, 6),
    hemisphere=st.sampled_from(["north", "south"]),
    shore=st.sampled_from(["straight", "bay"]),
    noise_scale=st.sampled_from([0.0, 1.0, 2.0]),
    weak_inland=st.booleans(),
    smeared_fraction=st.sampled_from([0.0, 0.5]),
    declare_averaging=st.booleans(),
    plan=st.one_of(st.none(), st.lists(day, min_size=1, max_size=2).map(tuple)),
    fault_rate=st.sampled_from([0.0, 1.0, 5.0]),
)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(specs)
def test_generated_scenario_is_consistent(spec):
    sc = generate(spec)
    cfg = parse_network(sc.network)
    ids = {s.id for s in cfg.stations}
    assert len(ids) == spec.stations
    assert all(((s.lat < 0) == (spec.hemisphere == "south")) for s in cfg.stations)
    obs = sc.observations
    assert set(obs["station"]) <= ids
    times = [parse_time(t) for t in obs["time"].iloc[:: max(1, len(obs) // 500)]]
    start, end = min(times), max(times)
    assert end - start <= spec.days * 86400
    for rec in obs.sample(min(200, len(obs)), random_state=0).to_dict("records"):
        row = {k: ("" if v is None or v != v else v) for k, v in rec.items()}
        row["wind_dir_deg"] = "" if rec["wind_dir_deg"] is None or str(rec["wind_dir_deg"]) == "<NA>" else \
            int(rec["wind_dir_deg"])
        decode_record(row)
    keys = [(lab["time"], lab["station"]) for lab in sc.labels]
    assert keys == sorted(keys)
    for lab in sc.labels:
        assert lab["station"] in ids and lab["kind"] in LABEL_KINDS
        t = parse_time(lab["time"])
        assert start - 86400 <= t <= start + spec.days * 86400 + 3600
    front_ids = {f["id"] for f in sc.fronts}
    assert {lab["front"] for lab in sc.labels if lab["kind"] == "breeze_front"} <= front_ids
    for f in sc.fronts:
        assert 1.0 - 1e-9 <= f["speed_model"]["late_ms"] <= 6.0 + 1e-9
    averaged = {s.id for s in cfg.stations if s.wind_averaging_min == 10}
    assert not averaged or (spec.declare_averaging and spec.smeared_fraction > 0)
