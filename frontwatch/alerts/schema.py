"""JSON Schemas (draft 2020-12) of the site outputs: forecast, alert and course (docs/alerts.md).

These are the documented contract of the `--alerts` JSONL lines and of the MQTT alert payloads;
tests validate every output against them with the jsonschema library.
"""

from __future__ import annotations

from typing import Any

from .lifecycle import STATES

_TIME = {"type": "string", "pattern": r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ$"}
_TIME_OR_NULL = {"anyOf": [_TIME, {"type": "null"}]}
_NUM_OR_NULL = {"type": ["number", "null"]}

EXPECTED_SCHEMA: dict[str, Any] = {
    "type": "object",
    "required": ["wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_change_c"],
    "properties": {
        "wind_dir_deg": {"anyOf": [{"type": "number", "minimum": 0, "maximum": 360}, {"type": "null"}]},
        "wind_speed_ms": _NUM_OR_NULL,
        "wind_gust_ms": _NUM_OR_NULL,
        "temp_change_c": _NUM_OR_NULL,
    },
    "additionalProperties": False,
}

FORECAST_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "frontwatch site forecast",
    "type": "object",
    "required": ["type", "site", "issued_at", "eta", "eta_earliest", "eta_latest", "front_speed_ms",
                 "front_heading_deg", "basis", "status", "front", "stations", "expected"],
    "properties": {
        "type": {"const": "forecast"},
        "site": {"type": "string", "minLength": 1},
        "issued_at": _TIME,
        "eta": _TIME_OR_NULL,
        "eta_earliest": _TIME_OR_NULL,
        "eta_latest": _TIME_OR_NULL,
        "front_speed_ms": {"anyOf": [{"type": "number", "minimum": 0}, {"type": "null"}]},
        "front_heading_deg": {"anyOf": [{"type": "number", "minimum": 0, "maximum": 360}, {"type": "null"}]},
        "basis": {"enum": ["fit", "prior"]},
        "status": {"enum": ["expected", "arrived", "not_expected"]},
        "reason": {"enum": [None, "stalled", "overdue", "not_on_path", "expired", "after_day_end"]},
        "front": {"type": "string"},
        "stations": {"type": "integer", "minimum": 1},
        "lead_time_min": _NUM_OR_NULL,
        "front_speed_sd_ms": _NUM_OR_NULL,
        "front_heading_sd_deg": _NUM_OR_NULL,
        "residual_rms_s": _NUM_OR_NULL,
        "upstream_pending": {"type": "integer", "minimum": 0},
        "expected": EXPECTED_SCHEMA,
    },
    "additionalProperties": False,
    # 'not expected' has no ETA; an expected forecast has all three times.
    "allOf": [
        {"if": {"properties": {"status": {"const": "not_expected"}}},
         "then": {"properties": {"eta": {"type": "null"}}}},
        {"if": {"properties": {"status": {"const": "expected"}}},
         "then": {"properties": {"eta": _TIME, "eta_earliest": _TIME, "eta_latest": _TIME}}},
    ],
}

ALERT_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "frontwatch site alert",
    "type": "object",
    "required": ["type", "id", "message_id", "site", "state", "msg_type", "seq", "references", "issued_at", "eta",
                 "headline", "urgency", "severity", "certainty", "thresholds_exceeded", "cautions",
                 "data_warnings", "lat", "lon", "front", "basis"],
    "properties": {
        "type": {"const": "alert"},
        "id": {"type": "string", "pattern": r"^fw-"},
        "message_id": {"type": "string"},
        "site": {"type": "string", "minLength": 1},
        "site_name": {"type": ["string", "null"]},
        "lat": {"type": "number", "minimum": -90, "maximum": 90},
        "lon": {"type": "number", "minimum": -180, "maximum": 180},
        "state": {"enum": list(STATES)},
        "msg_type": {"enum": ["Alert", "Update", "Cancel"]},
        "seq": {"type": "integer", "minimum": 1},
        "references": {"type": ["string", "null"]},
        "references_issued_at": _TIME_OR_NULL,
        "issued_at": _TIME,
        "eta": _TIME_OR_NULL,
        "eta_earliest": _TIME_OR_NULL,
        "eta_latest": _TIME_OR_NULL,
        "lead_time_min": _NUM_OR_NULL,
        "front": {"type": "string"},
        "basis": {"enum": ["fit", "prior"]},
        "headline": {"type": "string", "minLength": 1},
        "description": {"type": "string"},
        "urgency": {"enum": ["Immediate", "Expected", "Future", "Past", "Unknown"]},
        "severity": {"enum": ["Extreme", "Severe", "Moderate", "Minor", "Unknown"]},
        "certainty": {"enum": ["Observed", "Likely", "Possible", "Unlikely", "Unknown"]},
        "thresholds_exceeded": {"type": "array", "items": {
            "type": "object", "required": ["quantity", "expected", "limit", "unit"],
            "properties": {"quantity": {"enum": ["gust", "temp_drop", "wind_shift"]},
                           "expected": {"type": "number"}, "limit": {"type": "number"},
                           "unit": {"enum": ["m/s", "degC", "deg"]}},
            "additionalProperties": False}},
        "expected": EXPECTED_SCHEMA,
        "data_warnings": {"type": "array", "items": {"type": "string"}},
        "cautions": {"type": "array", "items": {"type": "string"}, "minItems": 1},
        "contacts": {"type": "array", "items": {"type": "string"}},
    },
    "additionalProperties": False,
    "allOf": [
        # The first message of an alert references nothing and is an 'Alert'; later ones reference one.
        {"if": {"properties": {"seq": {"const": 1}}},
         "then": {"properties": {"references": {"type": "null"}, "msg_type": {"const": "Alert"}}},
         "else": {"properties": {"references": {"type": "string"}, "msg_type": {"enum": ["Update", "Cancel"]}}}},
        {"if": {"properties": {"state": {"const": "cancelled"}}},
         "then": {"properties": {"msg_type": {"const": "Cancel"}}}},
    ],
}

_WINDOW = {
    "type": "object", "required": ["minutes", "dir_deg", "spread_deg", "speed_ms", "n"],
    "properties": {"minutes": {"enum": [2, 5, 10]}, "dir_deg": _NUM_OR_NULL,
                   "spread_deg": {"anyOf": [{"type": "number", "minimum": 0, "maximum": 104}, {"type": "null"}]},
                   "speed_ms": _NUM_OR_NULL, "n": {"type": "integer", "minimum": 0}},
    "additionalProperties": False,
}

COURSE_SCHEMA: dict[str, Any] = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "frontwatch race-course summary",
    "type": "object",
    "required": ["type", "site", "issued_at", "axis_deg", "windows", "shift_deg", "pattern", "trend_deg",
                 "oscillation_period_min", "oscillation_amplitude_deg", "new_breeze", "new_breeze_since"],
    "properties": {
        "type": {"const": "course"},
        "site": {"type": "string"},
        "issued_at": _TIME,
        "axis_deg": {"type": "number"},
        "windows": {"type": "array", "items": _WINDOW, "minItems": 3, "maxItems": 3},
        "shift_deg": {"anyOf": [{"type": "number", "minimum": -180, "maximum": 180}, {"type": "null"}]},
        "pattern": {"enum": ["steady", "oscillating", "persistent", "unsettled", "unknown"]},
        "trend_deg": _NUM_OR_NULL,
        "oscillation_period_min": _NUM_OR_NULL,
        "oscillation_amplitude_deg": _NUM_OR_NULL,
        "new_breeze": {"type": "boolean"},
        "new_breeze_since": _TIME_OR_NULL,
    },
    "additionalProperties": False,
}

SCHEMAS = {"forecast": FORECAST_SCHEMA, "alert": ALERT_SCHEMA, "course": COURSE_SCHEMA}
