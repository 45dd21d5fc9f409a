"""A gateway's array decodes column by column (obs._fast_array, read by orjson) exactly as the general
path decodes it record by record (json.loads, then decode_record, then the station check).

Generated arrays are mostly uniform canonical records, the shape the column path takes, each with
at most one near miss that must send the whole array back to the record loop or must be taken the
same way by both: nulls, integers (small, beyond 2**53, beyond 64 bits), booleans, strings, NaN
and Infinity tokens, -0.0 and 360 degrees, directions out of range, padded or non-text station
ids and times (a list or an object among them, which does not even hash), a missing or an extra
key, another time form, stations the topic may not speak for. Observations must be equal field
by field (NaN where NaN), with the same refusals by reason and message. The reference is the
standard library's JSON reader and the project's general decoder.
"""

from __future__ import annotations

import json
import math
import random
from typing import Any

import pytest

from frontwatch import obs as obsmod
from frontwatch.errors import DecodeError
from frontwatch.obs import CANONICAL, Observation, decode_payload, decode_record

STATIONS = ("KB01", "KB02", "KB03")


def reference(payload: bytes, topic: str, may: set[str] | None) -> tuple[list[Observation], list[DecodeError]]:
    doc = json.loads(payload)
    good, bad = [], []
    for item in doc if isinstance(doc, list) else [doc]:
        try:
            o = decode_record(item, station=topic)
        except DecodeError as err:
            bad.append(err)
            continue
        if o.station != topic and (may is None or o.station not in may):
            bad.append(DecodeError("mismatch", code="station_mismatch"))
            continue
        good.append(o)
    return good, bad


def same(a: Observation, b: Observation) -> bool:
    """Field by field: equal (the sign of a zero too) or both NaN."""
    for x, y in zip(a, b, strict=True):
        if isinstance(x, float) and isinstance(y, float):
            if not (x == y and math.copysign(1, x) == math.copysign(1, y) or math.isnan(x) and math.isnan(y)):
                return False
        elif x != y:
            return False
    return True


def _why(e: DecodeError) -> tuple[str, str | None]:
    """A refusal's reason and message (the reference words a station mismatch in short)."""
    return e.code, None if e.code == "station_mismatch" else str(e)


def record(rng: random.Random, minute: int, stations: tuple[str, ...] = STATIONS) -> dict[str, Any]:
    r: dict[str, Any] = {"station": rng.choice(stations), "time": f"2026-01-14T02:{minute % 60:02d}:00Z"}
    for f in CANONICAL:
        r[f] = round(rng.uniform(0, 360), 1) if f == "wind_dir_deg" else round(rng.uniform(-5, 1020), 2)
    return r


NEAR_MISSES: list[tuple[str, Any]] = [
    ("temp_c", None), ("wind_gust_ms", 7), ("pressure_hpa", 2**53 + 1), ("rain_mm", 10**25),
    ("temp_c", True), ("dewpoint_c", "12.5"), ("wind_dir_deg", -0.0), ("wind_dir_deg", 360.0),
    ("wind_dir_deg", 0), ("wind_dir_deg", 360), ("wind_dir_deg", 360.5), ("wind_dir_deg", -1.0),
    ("station", " KB01"), ("station", ""), ("station", 7), ("station", "ZZ99"), ("time", "2026-01-14T02:00:00+00:00"),
    ("time", "2026-01-14T02:61:00Z"), ("time", 5), ("temp_c", 1e300), ("temp_c", 9.3e18), ("temp_c", -9.3e18),
    ("speed_extra", 1.0), ("rh_pct", 50.0), ("temp_f", 70.0), ("__missing__", "temp_c"), ("__missing__", "time"),
    ("__not_dict__", 5), ("__not_dict__", 10**30), ("temp_c", [1.0]), ("station", ["KB01"]), ("time", {"t": 1}),
]
TOKENS = (b"NaN", b"Infinity", b"-Infinity", b"1e400")


def payload(rng: random.Random, n: int, stations: tuple[str, ...]) -> bytes:
    recs: list[Any] = [record(rng, k, stations) for k in range(n)]
    k = rng.randrange(n)
    field, value = rng.choice(NEAR_MISSES) if rng.random() < 0.8 else ("", None)
    token = None
    if field == "__missing__":
        del recs[k][value]
    elif field == "__not_dict__":
        recs[k] = value
    elif field:
        recs[k][field] = value
    elif rng.random() < 0.5:
        token = rng.choice(TOKENS)
        recs[k]["temp_c"] = "@@TOKEN@@"
    text = json.dumps(recs).encode()
    if token is not None:
        text = text.replace(b'"@@TOKEN@@"', token)
    return text


@pytest.mark.parametrize("gateway", [True, False])
def test_gateway_arrays_decode_as_the_general_path(gateway: bool) -> None:
    rng = random.Random(31 if gateway else 32)
    may = set(STATIONS) if gateway else None
    topic = "gw1" if gateway else "KB01"
    taken = 0  # arrays the column path took (decoded without a refusal)
    for _ in range(1500):
        p = payload(rng, rng.choice([8, 9, 30, 100, 150]), STATIONS if gateway else (topic,))
        good, bad = decode_payload(p, topic_station=topic, may_speak_for=(may.__contains__) if may else None)
        rgood, rbad = reference(p, topic, may)
        assert len(good) == len(rgood), p[:200]
        for a, b in zip(good, rgood, strict=True):
            assert same(a, b), (a, b)
            assert all(type(v) is float for v in a[1:])
        assert [_why(e) for e in bad] == [_why(e) for e in rbad]
        taken += not bad
    assert taken > 300  # the column path was exercised, not only the record loop


def test_column_path_is_the_one_taking_uniform_arrays(monkeypatch: pytest.MonkeyPatch) -> None:
    rng = random.Random(33)
    p = json.dumps([record(rng, k) for k in range(50)]).encode()
    calls = []
    real = obsmod._fast_array

    def spy(*a: Any) -> Any:
        out = real(*a)
        calls.append(out is not None)
        return out

    monkeypatch.setattr(obsmod, "_fast_array", spy)
    good, bad = decode_payload(p, topic_station="gw1", may_speak_for=lambda s: True)
    assert calls == [True] and len(good) == 50 and not bad


def test_orjson_reads_what_json_reads_where_the_shortcuts_use_it() -> None:
    if obsmod._orjson is None:
        pytest.skip("orjson is not installed: json.loads reads every payload")
    rng = random.Random(34)
    for _ in range(20000):
        x = rng.uniform(-1e3, 1e3) if rng.random() < 0.5 else rng.random() * 10.0 ** rng.randint(-320, 18)
        s = repr(x) if rng.random() < 0.5 else f"{x:.{rng.randint(1, 25)}g}"
        assert obsmod._orjson.loads(s) == json.loads(s), s
    # integers beyond 64 bits become floats in orjson: the shortcuts leave such magnitudes alone
    assert isinstance(obsmod._orjson.loads(str(2**64)), float) and obsmod._BIG <= 2.0**64
