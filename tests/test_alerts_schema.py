"""The documented JSON schemas of forecast, alert and course outputs, checked with the jsonschema
library (a reference implementation of JSON Schema draft 2020-12), and docs/alerts.md against them."""

from __future__ import annotations

import copy
import re
from pathlib import Path
from typing import Any

import pytest

from frontwatch.alerts.lifecycle import STATES
from frontwatch.alerts.schema import ALERT_SCHEMA, COURSE_SCHEMA, FORECAST_SCHEMA, SCHEMAS
from frontwatch.config import parse_network
from frontwatch.network.synthetic import front_events, observation_stream
from frontwatch.network.watch import SiteWatch
from frontwatch.timeutil import parse_time

# jsonschema is a test-only reference (ask: add "jsonschema>=4" to the test extras of pyproject.toml).
jsonschema = pytest.importorskip("jsonschema", reason="jsonschema (test extra) is not installed")

DOC = Path(__file__).resolve().parents[1] / "docs" / "alerts.md"
T0 = parse_time("2026-01-14T01:00:00Z")


def _outputs() -> list[dict[str, Any]]:
    stations = [{"id": f"S{i}{j}", "lat": -27.3 - 0.08 * j, "lon": 153.2 - 0.061 * i, "onshore_from_deg": 90}
                for i in range(5) for j in range(3)]
    cfg = parse_network({"network": {"utc_offset_hours": 10}, "stations": stations, "sites": [
        {"id": "green", "lat": -27.3, "lon": 153.2 - 0.061 * 3, "station": "S30", "gust_limit_ms": 8.0,
         "shift_limit_deg": 45.0, "temp_drop_limit_c": 1.0},
        {"id": "course", "lat": -27.38, "lon": 153.2 - 0.061, "course_axis_deg": 90.0},
        {"id": "far", "lat": -27.38, "lon": 152.5}]})
    w = SiteWatch(cfg)
    out: list[dict[str, Any]] = []
    for stop in (None, 9000.0):
        t0 = T0 + (0 if stop is None else 86400)
        evs = front_events(cfg, t0=t0, speed_ms=2.5, heading_deg=268.0, lat0=-27.3, lon0=153.2, onset_sd_s=60.0,
                           stop_progress_m=stop)
        for obs, ev in observation_stream(cfg, evs, t0 - 3600, t0 + 8 * 3600):
            out.extend(o.to_dict() for o in w.observe(obs, ev))
    return out


@pytest.fixture(scope="module")
def outputs() -> list[dict[str, Any]]:
    return _outputs()


def test_schemas_are_valid_json_schema() -> None:
    for s in SCHEMAS.values():
        jsonschema.Draft202012Validator.check_schema(s)


def test_every_output_validates(outputs: list[dict[str, Any]]) -> None:
    kinds = {o["type"] for o in outputs}
    assert kinds == {"forecast", "alert", "course"}
    states = set()
    for o in outputs:
        jsonschema.validate(o, SCHEMAS[o["type"]], cls=jsonschema.Draft202012Validator)
        if o["type"] == "alert":
            states.add(o["state"])
    assert {"approaching", "imminent", "arrived", "clear"} <= states
    reasons = {o["reason"] for o in outputs if o["type"] == "forecast" and o["status"] == "not_expected"}
    assert reasons  # the stalled day says 'not expected'


@pytest.mark.parametrize("change", [
    {"state": "warning"},
    {"seq": 0},
    {"issued_at": "2026-01-14T02:45:00+10:00"},
    {"severity": "High"},
    {"msg_type": "Cancel", "state": "approaching", "seq": 1},
])
def test_invalid_alerts_are_rejected(outputs: list[dict[str, Any]], change: dict[str, Any]) -> None:
    a = copy.deepcopy(next(o for o in outputs if o["type"] == "alert"))
    a.update(change)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(a, ALERT_SCHEMA, cls=jsonschema.Draft202012Validator)


def test_first_message_references_nothing_later_ones_do(outputs: list[dict[str, Any]]) -> None:
    a = copy.deepcopy(next(o for o in outputs if o["type"] == "alert" and o["seq"] == 1))
    a["references"] = "fw-x-1"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(a, ALERT_SCHEMA)
    b = copy.deepcopy(next(o for o in outputs if o["type"] == "alert" and o["seq"] == 2))
    b["references"] = None
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(b, ALERT_SCHEMA)


def test_expected_forecast_needs_its_times(outputs: list[dict[str, Any]]) -> None:
    f = copy.deepcopy(next(o for o in outputs if o["type"] == "forecast" and o["status"] == "expected"))
    f["eta_latest"] = None
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(f, FORECAST_SCHEMA)


def test_docs_name_every_state_and_field() -> None:
    text = DOC.read_text(encoding="utf-8")
    for st in STATES:
        assert f"`{st}`" in text, st
    for schema in (FORECAST_SCHEMA, ALERT_SCHEMA, COURSE_SCHEMA):
        for field in schema["properties"]:
            assert re.search(rf"`{field}`", text), field
