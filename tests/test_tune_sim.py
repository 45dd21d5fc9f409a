"""The search on a small generated scenario (frontwatch.sim): TOML round trip and a day-wise split."""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np

from frontwatch import sim
from frontwatch.config import DetectorSettings, load_network
from frontwatch.labels import read_labels
from frontwatch.tune import cached_store, detector_toml, local_day_numbers, parse_space, tune


def test_tune_on_generated_scenario(tmp_path: Path) -> None:
    spec = sim.ScenarioSpec(seed=101, days=4, stations=3, plan=("breeze", "cold_front", "breeze", "breeze"))
    paths = sim.generate(spec).write(tmp_path)
    cfg = load_network(paths["network.toml"])
    labels = read_labels(paths["labels.jsonl"])
    store, _, _ = cached_store([paths["observations.csv"]], cfg, None)
    sp = parse_space({"search": {"method": "grid", "holdout_fraction": 0.25, "seed": 4},
                      "params": {"min_score": {"values": [4.0, 6.0]}, "confirm_min": {"values": [2, 4]}}})
    res = tune(store, cfg, labels, sp, workers=1)
    assert len(res.trials) == 5  # the current settings and the 4 grid points not equal to them
    assert len(res.test_days) == 1 and not set(res.train_days) & set(res.test_days)
    # each label is scored in the half of its own local day, never in both
    days = local_day_numbers(np.array([lb.time for lb in labels]), cfg.tz).tolist()
    n_test = sum(1 for d in days if d in set(res.test_days))
    assert res.best.test is not None and res.best.test.n_labels == n_test
    assert res.best.train is not None and res.best.train.n_labels == len(labels) - n_test
    table = tomllib.loads(detector_toml(res.best.settings, sp.params))["detector"]
    assert DetectorSettings.model_validate(table) == res.best.settings
    assert res.best.train_value >= res.current.train_value


def test_search_paths_give_replays_events(tmp_path: Path) -> None:
    # A generated network with inland stations, where the Engine corroborates breeze fronts across
    # stations: the search's paths (QC once; station groups put together) must equal replay's events.
    from frontwatch.engine import Engine
    from frontwatch.replay import run_replay
    from frontwatch.tune import finish_events, run_detector

    # seed 206: one inland breeze-like call is turned into a wind shift by the network step
    spec = sim.ScenarioSpec(seed=206, days=3, stations=6, plan=("breeze", "breeze", "breeze_stall"))
    paths = sim.generate(spec).write(tmp_path)
    cfg = load_network(paths["network.toml"])
    eng = Engine(cfg)
    assert not all(eng.corroborate.coastal.values())  # some stations are inland
    ref = [e.to_dict() for e in run_replay([paths["observations.csv"]], cfg).events]
    assert sum(1 for e in ref if e["kind"] == "breeze_front") >= 6
    store, _, _ = cached_store([paths["observations.csv"]], cfg, None)
    assert [e.to_dict() for e in run_detector(store, cfg)] == ref
    raw = [e for part in store.station_parts(2) for e in run_detector(store, cfg, stations=part, finish=False)]
    assert [e.to_dict() for e in finish_events(store, cfg, raw)] == ref
    # without the network step the kinds differ, so the comparison above exercises it
    unfinished = sorted(raw, key=lambda e: (e.detected_at, e.station))
    assert sorted(e.kind for e in unfinished) != sorted(e["kind"] for e in ref)


def test_search_paths_report_weak_calls_confirmed_later(tmp_path: Path) -> None:
    # Generated 'ordinary' seed 71: a weak call at the shore station is confirmed when the front
    # stands inland 41 min later (corroborate.py); the search's paths report it as replay does.
    from frontwatch.replay import run_replay
    from frontwatch.tune import finish_events, run_detector

    paths = sim.generate(sim.preset("ordinary", seed=71, days=2)).write(tmp_path)
    cfg = load_network(paths["network.toml"])
    ref = [e.to_dict() for e in run_replay([paths["observations.csv"]], cfg).events]
    assert any("confirmed later" in e.get("note", "") for e in ref)
    store, _, _ = cached_store([paths["observations.csv"]], cfg, None)
    assert [e.to_dict() for e in run_detector(store, cfg)] == ref
    raw = [e for part in store.station_parts(3) for e in run_detector(store, cfg, stations=part, finish=False)]
    assert [e.to_dict() for e in finish_events(store, cfg, raw)] == ref
