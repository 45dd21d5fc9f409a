"""Generated files follow the contracts (DESIGN 3.1 records, 3.2 network file) and read back through
frontwatch's own readers; generation is deterministic; the committed demo data is reproducible."""

from __future__ import annotations

import csv
import json
import shlex
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import typer
from typer.testing import CliRunner

from frontwatch.commands import simulate
from frontwatch.config import load_network, parse_network
from frontwatch.labels import label_from_dict
from frontwatch.obs import decode_record
from frontwatch.replay import read_observations
from frontwatch.sim import ScenarioSpec, generate, preset
from frontwatch.timeutil import parse_time

ROOT = Path(__file__).resolve().parents[1]
SMALL = {"seed": 3, "days": 2, "stations": 5, "plan": ("overcast+land_breeze", "breeze")}


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    sc = generate(ScenarioSpec(**SMALL))
    out = tmp_path_factory.mktemp("scenario")
    sc.write(out)
    return sc, out


def test_same_seed_same_scenario_other_seed_other():
    a, b = generate(ScenarioSpec(**SMALL)), generate(ScenarioSpec(**SMALL))
    pd.testing.assert_frame_equal(a.observations, b.observations)
    assert a.labels == b.labels and a.fronts == b.fronts and a.faults == b.faults
    assert a.network_toml == b.network_toml
    c = generate(ScenarioSpec(**{**SMALL, "seed": 4}))
    assert not a.observations["temp_c"].equals(c.observations["temp_c"])


def test_noise_and_faults_do_not_move_the_truth():
    """Each part draws from its own generator: more noise or no faults leave events unchanged."""
    a = generate(ScenarioSpec(**SMALL))
    b = generate(ScenarioSpec(**SMALL, noise_scale=2.0, fault_rate=0.0))
    strip = [{k: v for k, v in lab.items() if k != "note"} for lab in a.labels]
    assert strip == [{k: v for k, v in lab.items() if k != "note"} for lab in b.labels]
    assert a.fronts == b.fronts


def test_network_file_parses_and_names_every_station(written):
    sc, out = written
    cfg = load_network(out / "network.toml")
    assert [s.id for s in cfg.stations] == [s.id for s in sc.setting.stations]
    assert parse_network(sc.network).network.utc_offset_hours == cfg.network.utc_offset_hours
    assert {s.id for s in cfg.sites} == {"lanternfield-green", "tollmere-water"}
    festival = next(s for s in cfg.sites if s.id == "lanternfield-green")
    race = next(s for s in cfg.sites if s.id == "tollmere-water")
    assert festival.gust_limit_ms and race.course_axis_deg is not None
    assert 0 <= min(s.shore_km for s in sc.setting.stations) < 1.0
    assert max(s.shore_km for s in sc.setting.stations) <= 40.0


def test_csv_rows_decode_with_the_canonical_decoder(written):
    sc, out = written
    with open(out / "observations.csv", newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        assert reader.fieldnames == ["station", "time", "wind_dir_deg", "wind_speed_ms", "wind_gust_ms",
                                     "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm"]
        rows = list(reader)
    obs = [decode_record(r) for r in rows]  # raises DecodeError on any bad row
    assert len(obs) == len(sc.observations)
    assert all(r["time"].endswith("Z") for r in rows)
    nodir = [r for r in rows if r["wind_dir_deg"] == "" and r["wind_speed_ms"] != ""]
    assert all(float(r["wind_speed_ms"]) == 0.0 for r in nodir)  # calm: no direction, speed 0
    assert all(float(r["wind_gust_ms"]) >= float(r["wind_speed_ms"]) for r in rows
               if r["wind_gust_ms"] and r["wind_speed_ms"])
    spikes = {(f["station"], f["start"]) for f in sc.faults if f["kind"].startswith("spike_")}
    wet = {(r["station"], r["time"]) for r in rows
           if r["dewpoint_c"] and r["temp_c"] and float(r["dewpoint_c"]) > float(r["temp_c"])}
    assert wet <= spikes  # dewpoint above temperature only where a spike was injected


def test_calm_is_speed_zero_with_no_direction():
    df = generate(ScenarioSpec(seed=4, days=4, stations=9)).observations  # light nights in this draw
    calm = df[df["wind_speed_ms"] == 0.0]
    assert len(calm) > 50
    assert calm["wind_dir_deg"].isna().all()
    assert df.loc[df["wind_speed_ms"] > 0, "wind_dir_deg"].notna().mean() > 0.99


def test_csv_replays_through_frontwatch_replay(written):
    sc, out = written
    cfg = load_network(out / "network.toml")
    obs = list(read_observations([out / "observations.csv"], cfg))
    assert len(obs) >= len(sc.observations) - sum(f["kind"] == "repeated_row" for f in sc.faults)
    assert {o.station for o in obs} == {s.id for s in sc.setting.stations}


def test_faults_are_present_in_the_records():
    sc = generate(ScenarioSpec(seed=3, days=1, stations=4, plan=("breeze",), fault_rate=10.0))
    df = sc.observations
    kinds = {f["kind"] for f in sc.faults}
    assert {"gap", "repeated_row", "late_row", "stuck_vane", "dropout"} <= kinds
    assert any(k.startswith("spike_") for k in kinds)
    assert df.duplicated().sum() == sum(f["kind"] == "repeated_row" for f in sc.faults)
    st = df["station"].to_numpy()
    t = np.array([parse_time(x) for x in df["time"]])
    back = sum(int((np.diff(t[st == s]) < 0).sum()) for s in np.unique(st))
    assert back >= 1  # a late row breaks its station's time order
    for g in (f for f in sc.faults if f["kind"] == "gap"):
        sub = df[(df["station"] == g["station"]) & (df["time"] >= g["start"]) & (df["time"] < g["end"])]
        assert sub.empty, g
    for v in (f for f in sc.faults if f["kind"] == "stuck_vane"):
        sub = df[(df["station"] == v["station"]) & (df["time"] >= v["start"]) & (df["time"] < v["end"])]
        assert set(sub["wind_dir_deg"].dropna().astype(float)) <= {v["held_deg"]}


def test_labels_and_fronts_files(written):
    sc, out = written
    lines = (out / "labels.jsonl").read_text().splitlines()
    labels = [label_from_dict(json.loads(x)) for x in lines]
    assert len(labels) == len(sc.labels) and {lab.kind for lab in labels} <= {
        "breeze_front", "land_breeze", "gust_front", "cold_front"}
    fronts = [json.loads(x) for x in (out / "fronts.jsonl").read_text().splitlines()]
    assert len(fronts) == 1
    f = fronts[0]
    for key in ("id", "date", "origin_time", "heading_deg", "speed_model", "track", "stall_km", "site_arrivals"):
        assert key in f
    assert set(f["site_arrivals"]) == {"lanternfield-green", "tollmere-water"}
    breeze_ids = {json.loads(x).get("front") for x in lines if json.loads(x)["kind"] == "breeze_front"}
    assert breeze_ids == {f["id"]}


def test_bad_spec_is_refused_with_a_reason():
    with pytest.raises(ValueError, match="unknown day kind"):
        generate(ScenarioSpec(plan=("sunny",)))
    with pytest.raises(ValueError, match="unknown preset"):
        preset("windy")
    with pytest.raises(ValueError, match="hemisphere"):
        generate(ScenarioSpec(hemisphere="east"))
    with pytest.raises(ValueError, match="start_date '2027-13-01'"):
        generate(ScenarioSpec(start_date="2027-13-01"))


def _app() -> typer.Typer:
    app = typer.Typer()
    simulate.register(app)

    @app.callback()
    def _root() -> None:  # keep `simulate` a subcommand
        return None

    return app


def test_simulate_command_writes_the_files(tmp_path):
    res = CliRunner().invoke(_app(), ["simulate", "--out", str(tmp_path), "--days", "1", "--stations", "3",
                                      "--plan", "breeze", "--seed", "5"])
    assert res.exit_code == 0, res.output
    assert "labels: breeze_front" in res.output
    for name in ("network.toml", "observations.csv", "labels.jsonl", "fronts.jsonl"):
        assert (tmp_path / name).stat().st_size > 0
    res = CliRunner().invoke(_app(), ["simulate", "--out", str(tmp_path), "--plan", "breeze+snow"])
    assert res.exit_code == 2 and "unknown day extra 'snow'" in res.output


def test_committed_demo_data_is_what_its_readme_command_makes(tmp_path):
    readme = (ROOT / "replay_data" / "README.md").read_text()
    cmd = next(block for block in readme.split("```") if "frontwatch simulate" in block)
    args = shlex.split(cmd.replace("\\\n", " "))
    assert args[:2] == ["frontwatch", "simulate"]
    args[args.index("--out") + 1] = str(tmp_path)
    res = CliRunner().invoke(_app(), args[1:])
    assert res.exit_code == 0, res.output
    for name in ("network.toml", "observations.csv", "labels.jsonl", "fronts.jsonl"):
        assert (tmp_path / name).read_bytes() == (ROOT / "replay_data" / name).read_bytes(), name
    kinds = {json.loads(x)["kind"] for x in (tmp_path / "labels.jsonl").read_text().splitlines()}
    assert kinds == {"breeze_front", "land_breeze", "gust_front", "cold_front"}
    fronts = [json.loads(x) for x in (tmp_path / "fronts.jsonl").read_text().splitlines()]
    assert len(fronts) >= 2 and any(f["stall_km"] is not None for f in fronts)
