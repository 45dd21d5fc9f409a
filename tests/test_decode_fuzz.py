"""Fuzzing of frontwatch.obs decoding: arbitrary JSON values and bytes never raise anything but
DecodeError, every refusal carries a reason code, and whatever is accepted is well-formed."""

from __future__ import annotations

import json
import math
import re
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from frontwatch.errors import DecodeError
from frontwatch.obs import CANONICAL, MAX_PAYLOAD_BYTES, Observation, decode_payload, decode_record

CODE = re.compile(r"^[a-z][a-z_]*$")
GOOD_TIME = "2026-01-14T02:37:00Z"

# Field names the decoder knows, with every unit suffix, plus near misses and junk.
KNOWN_KEYS = [
    "station", "time", "wind_dir_deg", "rh_pct", "rain_mm",
    *(f"{b}_{s}" for b in ("wind_speed", "wind_gust") for s in ("ms", "kt", "mph", "kmh")),
    *(f"{b}_{s}" for b in ("temp", "dewpoint") for s in ("c", "f", "k")),
    *(f"pressure_{s}" for s in ("hpa", "inhg", "pa", "kpa")),
    "temp", "wind_speed", "pressure_mmhg", "_", "",
]

json_scalars = (
    st.none()
    | st.booleans()
    | st.integers()
    | st.sampled_from([2**1024, -(10**400), 10**308])  # JSON allows integers no float can hold
    | st.floats(allow_nan=True, allow_infinity=True)
    | st.text(max_size=30)
    | st.sampled_from(["", " ", "12.5", "1e999", "nan", "-inf", "0x10", "1_000", GOOD_TIME,
                       "2026-01-14T02:37:00", "2026-13-40T99:00:00Z", "\x00"])
)
json_values = st.recursive(json_scalars, lambda inner: st.lists(inner, max_size=4)
                           | st.dictionaries(st.text(max_size=8), inner, max_size=4), max_leaves=12)
keys = st.sampled_from(KNOWN_KEYS) | st.text(max_size=12)

records = st.dictionaries(keys, json_values, max_size=12)
# Records that usually get past station and time, so the numeric paths are reached too.
plausible_records = st.builds(
    lambda extra, st_id, t: {**extra, "station": st_id, "time": t},
    st.dictionaries(st.sampled_from(KNOWN_KEYS[2:]), json_values, max_size=10),
    st.sampled_from(["KB01", " KB01 ", "", None, 7]),
    st.sampled_from([GOOD_TIME, "2026-01-14T12:37:00+10:00", "2026-01-14T02:37:00", None, 0]),
)


def _check_observation(obs: Observation) -> None:
    assert isinstance(obs.station, str) and obs.station == obs.station.strip() and obs.station
    assert isinstance(obs.time, float) and math.isfinite(obs.time)
    for name in CANONICAL:
        v = getattr(obs, name)
        assert isinstance(v, float), name
        # NaN = missing; anything else must be a finite number in canonical units.
        assert v != v or math.isfinite(v), f"{name} = {v}"
    if obs.wind_dir_deg == obs.wind_dir_deg:
        assert 0.0 <= obs.wind_dir_deg < 360.0


def _check_error(err: DecodeError) -> None:
    assert isinstance(err, DecodeError)
    # 'invalid' is the constructor's default: a refusal without a specific reason code.
    assert CODE.match(err.code) and err.code != "invalid", err.code
    assert str(err)


def _decode_or_error(rec: Any) -> None:
    try:
        obs = decode_record(rec)
    except DecodeError as err:
        _check_error(err)
    else:
        _check_observation(obs)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rec=records | json_values)
def test_decode_record_raises_only_decode_error(rec: Any) -> None:
    _decode_or_error(rec)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rec=plausible_records)
def test_decode_record_plausible_records(rec: dict[str, Any]) -> None:
    _decode_or_error(rec)


def _record_count(doc: Any) -> int:
    return len(doc) if isinstance(doc, list) else 1


@settings(max_examples=300, deadline=None)
@given(raw=st.binary(max_size=200))
def test_decode_payload_arbitrary_bytes(raw: bytes) -> None:
    good, bad = decode_payload(raw, topic_station="KB01")
    for e in bad:
        _check_error(e)
    for o in good:
        _check_observation(o)
    try:
        expected = _record_count(json.loads(raw))
    except ValueError:  # not JSON (or not text): refused as one malformed payload
        assert good == [] and [e.code for e in bad] == ["malformed_json"]
    else:
        assert len(good) + len(bad) == expected


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(doc=st.lists(plausible_records | records | json_values, max_size=6) | plausible_records)
def test_decode_payload_accounts_for_every_record(doc: Any) -> None:
    # Every record is either decoded or refused with a reason: none is lost, none raises.
    payload = json.dumps(doc).encode()
    good, bad = decode_payload(payload, topic_station="KB01")
    for e in bad:
        _check_error(e)
    for o in good:
        _check_observation(o)
        assert o.station == "KB01"  # the topic's station; others are refused as a mismatch
    assert len(good) + len(bad) == _record_count(doc)


def test_deeply_nested_json_is_refused_not_crashed() -> None:
    # Python's json recurses per nesting level: 100 000 '[' overflow the stack (RecursionError).
    good, bad = decode_payload(b"[" * 100_000, topic_station="KB01")
    assert good == [] and len(bad) == 1 and bad[0].code == "malformed_json"


def test_integer_too_large_for_a_float_is_refused() -> None:
    payload = '{"station": "KB01", "time": "' + GOOD_TIME + '", "temp_c": 1' + "0" * 400 + "}"
    good, bad = decode_payload(payload, topic_station="KB01")
    assert good == [] and [e.code for e in bad] == ["not_finite"]
    assert bad[0].field == "temp_c"


@pytest.mark.parametrize(("field", "value"), [("pressure_inhg", 1e308), ("temp_f", 1e308), ("pressure_kpa", -1e308)])
def test_unit_conversion_overflow_is_refused(field: str, value: float) -> None:
    # A finite value in a foreign unit that overflows on conversion must not reach the core as inf.
    with pytest.raises(DecodeError) as info:
        decode_record({"station": "KB01", "time": GOOD_TIME, field: value})
    assert info.value.code == "not_finite" and info.value.field == field


def test_moisture_outside_bolton_domain_does_not_crash_decoding() -> None:
    # temp -243.6 degC with RH used to overflow math.exp inside dewpoint_from_rh.
    for t in (-243.6, -243.5, -243.4):
        obs = decode_record({"station": "KB01", "time": GOOD_TIME, "temp_c": t, "rh_pct": 50})
        assert math.isnan(obs.dewpoint_c)


def test_payload_size_limit() -> None:
    good, bad = decode_payload(b" " * (MAX_PAYLOAD_BYTES + 1), topic_station="KB01")
    assert good == [] and [e.code for e in bad] == ["too_large"]


def test_station_mismatch_and_gateway() -> None:
    rec = json.dumps({"station": "KB02", "time": GOOD_TIME, "temp_c": 20}).encode()
    good, bad = decode_payload(rec, topic_station="KB01")
    assert good == [] and [e.code for e in bad] == ["station_mismatch"]
    good, bad = decode_payload(rec, topic_station="gw1", may_speak_for=lambda s: s == "KB02")
    assert [o.station for o in good] == ["KB02"] and bad == []


def test_refusal_codes_name_the_reason() -> None:
    cases = {
        "not_object": [1],
        "no_station": [{"time": GOOD_TIME}],
        "bad_time": [{"station": "KB01"}],
        "wrong_type": [{"station": "KB01", "time": GOOD_TIME, "temp_c": [1]}],
        "out_of_range": [{"station": "KB01", "time": GOOD_TIME, "wind_dir_deg": 361}],
    }
    for code, doc in cases.items():
        good, bad = decode_payload(json.dumps(doc), topic_station=None)
        assert good == [] and [e.code for e in bad] == [code], code
    good, bad = decode_payload(b"{not json", topic_station="KB01")
    assert [e.code for e in bad] == ["malformed_json"]
