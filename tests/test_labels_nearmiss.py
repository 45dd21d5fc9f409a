"""`frontwatch label` proposes the detector's events plus near-misses: breeze-front candidates
that failed exactly one condition, away from any event, each with a plot."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_label_proposes_events_and_near_misses(tmp_path):
    out = tmp_path / "labels.jsonl"
    plots = tmp_path / "plots"
    r = subprocess.run([sys.executable, "-m", "frontwatch.cli", "label", str(ROOT / "replay_data/observations.csv"),
                        "--config", str(ROOT / "replay_data/network.toml"), "--out", str(out), "--plots", str(plots)],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    rows = [json.loads(x) for x in out.read_text().splitlines()]
    near = [x for x in rows if x["note"].startswith("near-miss")]
    events = [x for x in rows if not x["note"].startswith("near-miss")]
    assert events and near, r.stdout
    assert all(x["status"] == "unreviewed" for x in rows)
    for x in near:
        assert x["kind"] == "breeze_front" and x["note"].split(";")[0].count(",") == 0  # one failed condition
        assert not any(e["station"] == x["station"] and abs(_t(e["time"]) - _t(x["time"])) < 3600 for e in events)
    assert len(list(plots.glob("*near_miss*.png"))) == len(near)


def _t(s: str) -> float:
    from frontwatch.timeutil import parse_time

    return parse_time(s)
