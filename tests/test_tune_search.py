"""The settings search on a tiny hand-made scenario: split by local day, TOML output, CLI end to end.

The scenario is invented for the test (two stations, six days at UTC+10): on four days a breeze
front passes each station around midday local time (wind turns from 250 to the onshore 75 deg,
temperature drops 2 degC, dewpoint rises 2.5 degC over ten minutes); on the other two days nothing
passes. The labels say when each front passed.
"""

from __future__ import annotations

import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from frontwatch.cli import app
from frontwatch.config import DetectorSettings, load_network
from frontwatch.labels import Label, read_labels, write_labels
from frontwatch.timeutil import LocalClock, iso_z
from frontwatch.tune import (
    ObsStore,
    build_store,
    cached_store,
    candidates,
    detector_toml,
    finish_events,
    local_day_numbers,
    parse_space,
    result_header,
    run_detector,
    split_days,
    tune,
)

NET = """
[network]
name = "test-cove"
utc_offset_hours = 10
[[stations]]
id = "TC1"
lat = -27.40
lon = 153.10
onshore_from_deg = 75
[[stations]]
id = "TC2"
lat = -27.45
lon = 153.02
onshore_from_deg = 75
"""
LOCAL_MIDNIGHT = 1_767_225_600.0 - 10 * 3600  # 2026-01-01 00:00 at UTC+10
BREEZE_DAYS = (0, 1, 3, 4)


def passage(day: int, station: int) -> float:
    return LOCAL_MIDNIGHT + day * 86400 + (12.5 + 0.3 * day + 0.5 * station) * 3600


def write_scenario(folder: Path, days: int = 6) -> tuple[Path, Path, Path]:
    rng = np.random.default_rng(7)
    rows = []
    labels = []
    for si, sid in enumerate(("TC1", "TC2")):
        for day in range(days):
            tp = passage(day, si)
            breeze = day in BREEZE_DAYS
            if breeze:
                labels.append(Label(sid, "breeze_front", tp))
            for m in range(1440):
                t = LOCAL_MIDNIGHT + day * 86400 + m * 60
                h = m / 60
                temp = 24 + 5 * math.sin((h - 9) / 24 * 2 * math.pi) + rng.normal(0, 0.1)
                td = 14 + rng.normal(0, 0.1)
                wd, ws = 250 + rng.normal(0, 8), 3 + rng.normal(0, 0.3)
                if breeze and tp <= t < tp + 6 * 3600:
                    k = min(1.0, (t - tp) / 600)
                    temp -= 2.0 * k
                    td += 2.5 * k
                    wd = 250 + 185 * k + rng.normal(0, 8)
                    ws += 1.5 * k
                rows.append({"station": sid, "time": iso_z(t), "wind_dir_deg": round(wd % 360, 1),
                             "wind_speed_ms": round(max(ws, 0.0), 2), "temp_c": round(temp, 2),
                             "dewpoint_c": round(td, 2), "pressure_hpa": round(1012 + rng.normal(0, 0.05), 2)})
    obs = folder / "obs.csv"
    pd.DataFrame(rows).to_csv(obs, index=False)
    net = folder / "net.toml"
    net.write_text(NET)
    lab = folder / "labels.jsonl"
    write_labels(lab, labels)
    return obs, net, lab


@pytest.fixture(scope="module")
def scenario(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path, Path]:
    return write_scenario(tmp_path_factory.mktemp("scn"))


def test_local_days_and_split_never_share_a_day() -> None:
    tz = load_network_from_text().tz
    clock = LocalClock(tz)
    times = np.arange(LOCAL_MIDNIGHT - 7200, LOCAL_MIDNIGHT + 9 * 86400, 1800.0)
    nums = local_day_numbers(times, tz)
    # Reference: the shared LocalClock.day_key (datetime arithmetic), record by record.
    from frontwatch.tune import day_name

    assert [day_name(n) for n in nums.tolist()] == [clock.day_key(t) for t in times.tolist()]
    for seed in range(20):
        train, test = split_days(nums.tolist(), 0.3, seed)
        assert not set(train) & set(test)
        assert set(train) | set(test) == set(nums.tolist())
        assert len(test) == 3  # round(10 days * 0.3)
    assert split_days(nums.tolist(), 0.3, 1) == split_days(nums.tolist(), 0.3, 1)  # seeded


def load_network_from_text():  # type: ignore[no-untyped-def]
    from frontwatch.config import parse_network

    return parse_network(tomllib.loads(NET))


def test_store_round_trip_gives_the_same_events(scenario: tuple[Path, Path, Path], tmp_path: Path) -> None:
    obs, net, _ = scenario
    cfg = load_network(net)
    store, bad, hit = cached_store([obs], cfg, tmp_path / "cache")
    assert (bad, hit) == (0, False)
    again, _, hit2 = cached_store([obs], cfg, tmp_path / "cache")
    assert hit2 and len(again) == len(store) == 2 * 6 * 1440
    # every local day is one slice, and the store re-runs exactly what replay finds
    assert len(store.days) == 6
    from frontwatch.replay import run_replay

    ref = [e.to_dict() for e in run_replay([obs], cfg).events]
    loaded = ObsStore.load(tmp_path / "cache")
    assert loaded.qc_done  # the search path: QC once, detectors fed directly
    assert [e.to_dict() for e in run_detector(loaded, cfg)] == ref
    # the station detectors are independent: a run split by station groups, put together and then
    # through the engine's network step once, gives the same events
    parts = loaded.station_parts(2)
    assert sorted(sum(parts, [])) == [0, 1]
    raw = [e for p in parts for e in run_detector(loaded, cfg, stations=p, finish=False)]
    assert [e.to_dict() for e in finish_events(loaded, cfg, raw)] == ref
    raw, _ = build_store([obs], cfg)  # the Engine.feed path
    assert not raw.qc_done and [e.to_dict() for e in run_detector(raw, cfg)] == ref
    assert sum(1 for e in ref if e["kind"] == "breeze_front") >= 6


def test_space_file_errors() -> None:
    with pytest.raises(Exception, match="unknown detector setting"):
        parse_space({"params": {"min_scroe": {"values": [1]}}}, "space.toml")
    with pytest.raises(Exception, match=r"space.toml: search.mehtod: unknown key"):
        parse_space({"search": {"mehtod": "grid"}, "params": {"min_score": {"values": [1]}}}, "space.toml")
    with pytest.raises(Exception, match="give values, or both low and high"):
        parse_space({"params": {"min_score": {"low": 1}}}, "space.toml")


def test_candidates_grid_and_random() -> None:
    base = DetectorSettings.model_validate({})
    sp = parse_space({"search": {"method": "grid"},
                      "params": {"confirm_min": {"low": 2, "high": 4}, "min_score": {"values": [4.0, 6.0]}}})
    grid = candidates(sp, base)
    assert len(grid) == 6 and {c["confirm_min"] for c in grid} == {2, 3, 4}
    assert all(isinstance(c["confirm_min"], int) for c in grid)
    sp2 = parse_space({"search": {"method": "random", "samples": 10, "seed": 3},
                       "params": {"min_score": {"low": 2.0, "high": 9.0, "log": True}, "confirm_min": {"low": 1, "high": 8}}})
    r1, r2 = candidates(sp2, base), candidates(sp2, base)
    assert r1 == r2 and len(r1) == 10
    assert all(2.0 <= c["min_score"] <= 9.0 and 1 <= c["confirm_min"] <= 8 for c in r1)


@pytest.mark.parametrize(("method", "workers"), [("grid", 1), ("halving", 2)])
def test_tune_finds_the_day_window_and_writes_toml(scenario: tuple[Path, Path, Path], method: str,
                                                    workers: int) -> None:
    obs, net, lab = scenario
    cfg = load_network(net).with_detector(day_start_h=14.0)  # start from settings that miss midday fronts
    store, _, _ = cached_store([obs], cfg, None)
    sp = parse_space({"search": {"method": method, "samples": 9, "holdout_fraction": 0.34, "seed": 2,
                                 "min_rung_labels": 1},
                      "params": {"day_start_h": {"values": [8.0, 10.0, 14.0]}, "min_score": {"values": [4.0, 5.0, 6.0]}}})
    res = tune(store, cfg, read_labels(lab), sp, workers=workers)
    assert not set(res.train_days) & set(res.test_days) and len(res.test_days) == 2
    # every label is scored in exactly one half, the half of its own local day
    assert res.best.train.n_labels + res.best.test.n_labels == 8  # type: ignore[union-attr]
    day0 = int(local_day_numbers(np.array([LOCAL_MIDNIGHT + 3600.0]), cfg.tz)[0])
    assert res.best.test.n_labels == 2 * sum(1 for d in BREEZE_DAYS if day0 + d in res.test_days)  # type: ignore[union-attr]
    assert res.current.changes == {} and res.current.settings.day_start_h == 14.0
    assert res.best.settings.day_start_h <= 10.0  # the fronts pass 12:30-14:45 local
    assert res.best.test is not None and res.current.test is not None
    assert (res.best.test.overall.csi or 0) >= (res.current.test.overall.csi or 0)
    assert (res.best.train.overall.csi or 0) > (res.current.train.overall.csi or 0)  # type: ignore[union-attr]
    text = detector_toml(res.best.settings, sp.params, "a header")
    back = DetectorSettings.model_validate(tomllib.loads(text)["detector"])
    assert back == res.best.settings
    if method == "grid":
        # one-standard-error rule with a stated margin no setting can beat: the current ones are kept
        sp_keep = sp.model_copy(update={"search": sp.search.model_copy(update={"min_gain": 2.0})})
        kept = tune(store, cfg, read_labels(lab), sp_keep, workers=1)
        assert kept.best is kept.current and kept.top is not None and kept.top is not kept.current
        assert "kept the current settings" in result_header(kept)
    if method == "halving":
        assert any(t.test is None for t in res.trials)  # some settings stopped at an early rung
        # too few labels for a small rung (6 train labels < 20): one rung, every setting on all days
        sp20 = sp.model_copy(update={"search": sp.search.model_copy(update={"min_rung_labels": 20})})
        res20 = tune(store, cfg, read_labels(lab), sp20, workers=1)
        assert all(t.test is not None for t in res20.trials)


def test_cli_label_score_tune_end_to_end(scenario: tuple[Path, Path, Path], tmp_path: Path) -> None:
    obs, net, lab = scenario
    runner = CliRunner()
    cand = tmp_path / "cand.jsonl"
    r = runner.invoke(app, ["label", str(obs), "--config", str(net), "--out", str(cand), "--plots",
                            str(tmp_path / "plots")])
    assert r.exit_code == 0, r.output
    proposed = read_labels(cand)
    assert proposed and all(lb.status == "unreviewed" for lb in proposed)
    pngs = list((tmp_path / "plots").glob("*.png"))
    assert len(pngs) == len(proposed) and pngs[0].read_bytes()[:4] == b"\x89PNG"
    r = runner.invoke(app, ["label", str(obs), "--config", str(net), "--out", str(cand)])
    assert r.exit_code != 0 and "exists" in r.output
    r = runner.invoke(app, ["label", str(obs), "--config", str(net), "--out", str(cand), "--force",
                            "--kind", "breeze_front"])
    assert r.exit_code == 0, r.output
    only = read_labels(cand)
    assert {lb.kind for lb in only} == {"breeze_front"} and len(only) < len(proposed)

    events = tmp_path / "events.jsonl"
    r = runner.invoke(app, ["replay", str(obs), "--config", str(net), "--events", str(events)])
    assert r.exit_code == 0, r.output
    rep_json = tmp_path / "score.json"
    html_out = tmp_path / "score.html"
    r = runner.invoke(app, ["score", str(events), str(lab), "--json", str(rep_json), "--report", str(html_out),
                            "--data", str(obs), "--config", str(net)])
    assert r.exit_code == 0, r.output
    d = json.loads(rep_json.read_text())
    assert d["overall"]["a"] == 8 and d["labels"] == 8
    assert "http" not in html_out.read_text().split("Written by frontwatch")[0].replace("http://", "")

    space = tmp_path / "space.toml"
    space.write_text('[search]\nmethod = "random"\nsamples = 4\nholdout_fraction = 0.34\n'
                     '[params.min_score]\nlow = 4.0\nhigh = 7.0\n')
    best = tmp_path / "best.toml"
    report = tmp_path / "tune.html"
    r = runner.invoke(app, ["tune", str(obs), "--config", str(net), "--labels", str(lab), "--space", str(space),
                            "--out", str(best), "--report", str(report), "--workers", "1"])
    assert r.exit_code == 0, r.output
    DetectorSettings.model_validate(tomllib.loads(best.read_text())["detector"])
    page = report.read_text()
    assert page.count("data:image/png;base64,") >= 1 and "<script" not in page and 'src="http' not in page

    r = runner.invoke(app, ["score", str(events), str(tmp_path / "missing.jsonl")])
    assert r.exit_code == 2 and "missing.jsonl" in r.output
