"""decode_payload's shortcut for canonical records gives exactly what the general path gives.

The reference below is the general path written out: json.loads, then decode_record on each
record, then the station check. Generated payloads mix well-formed canonical records (the ones the
shortcut takes) with every near miss the shortcut must hand back: NaN, infinities, huge integers,
booleans, strings, unit suffixes, rh_pct, unknown keys, padded station ids, other time forms and
impossible dates. Observations must be equal field by field (NaN where NaN) and refusals must carry
the same reason, field and message. Time arithmetic is checked against the standard library's
datetime (the shortcut adds minutes and seconds to a cached hour).
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from typing import Any

from hypothesis import given, settings
from hypothesis import strategies as st

from frontwatch.errors import DecodeError
from frontwatch.obs import CANONICAL, Observation, _fast_time, decode_payload, decode_record
from frontwatch.timeutil import parse_time


def reference(payload: bytes, topic_station: str | None, gateway: bool) -> tuple[list[Observation], list[DecodeError]]:
    """The general path, without the shortcut."""
    try:
        doc = json.loads(payload)
    except (ValueError, UnicodeDecodeError, RecursionError):
        return [], [DecodeError("malformed", code="malformed_json")]
    good, bad = [], []
    for item in doc if isinstance(doc, list) else [doc]:
        try:
            obs = decode_record(item, station=topic_station)
        except DecodeError as err:
            bad.append(err)
            continue
        if topic_station is not None and obs.station != topic_station and not gateway:
            bad.append(DecodeError("mismatch", code="station_mismatch"))
            continue
        good.append(obs)
    return good, bad


def same_obs(a: Observation, b: Observation) -> bool:
    return all(x == y or (isinstance(x, float) and isinstance(y, float) and math.isnan(x) and math.isnan(y))
               for x, y in zip(a, b, strict=True))


def check(payload: bytes, topic_station: str | None, gateway: bool = False) -> None:
    good, bad = decode_payload(payload, topic_station=topic_station,
                               may_speak_for=(lambda _s: True) if gateway else None)
    rgood, rbad = reference(payload, topic_station, gateway)
    assert len(good) == len(rgood)
    for a, b in zip(good, rgood, strict=True):
        assert same_obs(a, b), (a, b)
        assert all(type(v) is float for v in a[1:])  # NamedTuple of floats, as decode_record makes
    assert [e.code for e in bad] == [e.code for e in rbad]
    for e, r in zip(bad, rbad, strict=True):
        if r.code not in ("station_mismatch", "malformed_json"):  # the reference words those itself
            assert (str(e), e.field, e.station) == (str(r), r.field, r.station)


numbers = (
    st.floats(allow_nan=True, allow_infinity=True)
    | st.floats(-500, 1500)
    | st.integers(-(2**60), 2**60)
    | st.sampled_from([0, 1, -1, 2**53, 2**53 + 1, -(2**53) - 1, 10**400, 360, 360.0, 361, -0.0, 1e308])
    | st.none()
    | st.booleans()
    | st.sampled_from(["", "12.5", " 3 ", "nan", "x"])
)
digits2 = st.integers(0, 99).map(lambda n: f"{n:02d}")
times = (
    st.datetimes(min_value=datetime(1900, 1, 1), max_value=datetime(2200, 1, 1)).map(
        lambda d: d.replace(microsecond=0).isoformat() + "Z")
    | st.builds(lambda y, mo, d, h, mi, s: f"{y:04d}-{mo}-{d}T{h}:{mi}:{s}Z",
                st.integers(0, 9999), digits2, digits2, digits2, digits2, digits2)
    | st.sampled_from(["2026-01-14T02:37:00Z", "2026-01-14T02:37:00z", "2026-01-14T02:37:00+00:00",
                       "2026-01-14T02:37:00.5Z", "2026-01-14 02:37:00Z", " 2026-01-14T02:37:00Z",
                       "2026-01-14T02:37:60Z", "2026-01-14T24:00:00Z", "2026-02-30T00:00:00Z",
                       "2026-01-14T02:3\u00b2:00Z", "2026-01-14T02:37:00", "", "Z" * 20])
    | st.integers()
)
stations = st.sampled_from(["KB01", "KB02", " KB01", "KB01 ", "", "\u00a0KB01"]) | st.none() | st.integers()
keys = st.sampled_from([*CANONICAL, "rh_pct", "temp_f", "wind_speed_kt", "pressure_inhg", "extra", "Temp_c"])


@st.composite
def records(draw: Any) -> dict[str, Any]:
    rec: dict[str, Any] = {}
    if draw(st.booleans()) or draw(st.booleans()):
        rec["station"] = draw(stations) if draw(st.integers(0, 4)) == 0 else "KB01"
    if draw(st.integers(0, 9)):
        rec["time"] = draw(times)
    for k in draw(st.lists(keys, max_size=9)):
        rec[k] = draw(numbers)
    return rec


canonical = st.builds(
    lambda vals, t: {"station": "KB01", "time": t, **dict(zip(CANONICAL, vals, strict=True))},
    st.lists(st.floats(0, 360) | st.floats(-40, 50) | st.none() | st.integers(0, 400), min_size=7, max_size=7),
    times,
)


@settings(max_examples=800, deadline=None)
@given(rec=records() | canonical)
def test_one_record_decodes_as_the_general_path(rec: dict[str, Any]) -> None:
    payload = json.dumps(rec).encode()
    check(payload, "KB01")
    check(payload, None)


@settings(max_examples=300, deadline=None)
@given(recs=st.lists(records() | canonical | st.integers() | st.none(), max_size=8), gateway=st.booleans())
def test_arrays_decode_as_the_general_path(recs: list[Any], gateway: bool) -> None:
    check(json.dumps(recs).encode(), "gw1" if gateway else "KB01", gateway)


def test_the_shortcut_is_taken_and_exact_for_a_live_record() -> None:
    rec = {"station": "KB01", "time": "2026-01-14T02:37:00Z", "wind_dir_deg": 360, "wind_speed_ms": 4.25,
           "wind_gust_ms": None, "temp_c": 21.7, "dewpoint_c": 16.9, "pressure_hpa": 1012.6, "rain_mm": 0}
    (obs,), bad = decode_payload(json.dumps(rec), topic_station="KB01")
    assert bad == []
    # 2026-01-14T02:37:00Z by the standard library; 360 degrees is north, written 0 (decode_record's rule)
    assert obs.time == datetime(2026, 1, 14, 2, 37, tzinfo=UTC).timestamp()
    assert obs.wind_dir_deg == 0.0 and math.isnan(obs.wind_gust_ms) and obs.rain_mm == 0.0
    assert same_obs(obs, decode_record(rec))


@settings(max_examples=500, deadline=None)
@given(d=st.datetimes(min_value=datetime(1, 1, 2), max_value=datetime(9999, 12, 30)))
def test_fast_time_equals_parse_time(d: datetime) -> None:
    text = d.replace(microsecond=0).isoformat() + "Z"
    assert _fast_time(text) == parse_time(text) == d.replace(microsecond=0, tzinfo=UTC).timestamp()


def test_fast_time_declines_what_it_does_not_know() -> None:
    for text in ("2026-01-14T02:37:00+00:00", "2026-01-14T02:37:00.5Z", "2026-01-14T02:37:60Z",
                 "2026-01-14T02:3\u00b2:00Z", "2026-13-14T02:37:00Z", "2026-01-14T02:37:0Z"):
        assert _fast_time(text) is None, text
