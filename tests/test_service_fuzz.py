"""Fuzz: >= 10,000 generated bad payloads through a real broker into the service. None may stop
it, and every one must be counted as refused (each payload is built to hold exactly one bad record)."""

from __future__ import annotations

import asyncio
import json
import random

import aiomqtt
import pytest
from broker import wait_until

from frontwatch.config import load_network
from frontwatch.service.metrics import ServiceMetrics
from frontwatch.service.publish import publish_messages
from frontwatch.service.runner import Service
from frontwatch.service.settings import ServiceSettings, parse_broker_url

pytestmark = pytest.mark.broker

N = 10_000
NUMERIC = ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm")


def _good(rng: random.Random, station: str) -> dict[str, object]:
    return {"station": station, "time": f"2026-01-0{rng.randint(1, 9)}T0{rng.randint(0, 9)}:{rng.randint(10, 59)}:00Z",
            "wind_dir_deg": rng.uniform(0, 360), "wind_speed_ms": rng.uniform(0, 15), "temp_c": rng.uniform(5, 35),
            "dewpoint_c": rng.uniform(-5, 20), "pressure_hpa": rng.uniform(990, 1030)}


def bad_payload(rng: random.Random) -> tuple[str, bytes]:
    """(topic station, payload) with exactly one refusable record (or an unparseable payload)."""
    kind = rng.randrange(10)
    rec = _good(rng, "GR01")
    if kind == 0:  # truncated JSON: an object cut before its closing brace never parses
        text = json.dumps(rec)
        return "GR01", text[: rng.randrange(1, len(text) - 1)].encode()
    if kind == 1:  # binary junk that is not UTF-8
        return "GR01", b"\xff" + rng.randbytes(rng.randrange(0, 300))
    if kind == 2:  # a wrong type in a numeric field
        rec[rng.choice(NUMERIC)] = rng.choice(["warm", "", [1, 2], {"v": 1}, True, "1e999x"])
        if rec.get("wind_dir_deg") == "":  # an empty string is 'missing', not wrong: keep it wrong
            rec["wind_dir_deg"] = "north"
        for k in NUMERIC:
            if rec.get(k) == "":
                rec[k] = "n/a"
        return "GR01", json.dumps(rec).encode()
    if kind == 3:  # NaN / Infinity literals
        rec[rng.choice(NUMERIC)] = rng.choice([float("nan"), float("inf"), float("-inf")])
        return "GR01", json.dumps(rec).encode()
    if kind == 4:  # names another station on a station topic
        rec["station"] = rng.choice(["GR02", "GR03", "XX", "gr01"])
        return "GR01", json.dumps(rec).encode()
    if kind == 5:  # a bad time
        rec["time"] = rng.choice(["yesterday", 12345, None, "2026-13-01T00:00:00Z", "2026-01-01T25:00Z",
                                  "2026-01-01T10:00:00+25:00", [2026]])
        if rec["time"] is None:
            del rec["time"]
        return "GR01", json.dumps(rec).encode()
    if kind == 6:  # wind direction outside 0-360
        rec["wind_dir_deg"] = rng.choice([-1.0, 360.5, 720.0, -400.0, 1e6])
        return "GR01", json.dumps(rec).encode()
    if kind == 7:  # JSON that is not an object (alone or as the single item of an array)
        item = rng.choice([1, "x", None, True, [1], 2.5])
        return "GR01", json.dumps(rng.choice([item, [item]])).encode()
    if kind == 8:  # nesting deep enough to trip the JSON parser
        return "GR01", b"[" * rng.randrange(10_000, 200_000)
    # kind 9: bigger than the payload limit (rarely: they are a megabyte each)
    if rng.random() < 0.01:
        return "GR01", b'{"pad": "' + b"x" * 1_000_100 + b'"}'
    return "GR01", b"{" + rng.randbytes(rng.randrange(1, 50)).replace(b"}", b"") + b"\x00"


def test_generator_makes_one_refusal_each(svc_scenario) -> None:  # type: ignore[no-untyped-def]
    """The generator itself, checked against the decoder (with the network's zone for naive times, as
    the service decodes) so the count below means something."""
    from frontwatch.obs import decode_payload

    tz = load_network(svc_scenario[0]).naive_tz
    rng = random.Random(1)
    for _ in range(3000):
        st, p = bad_payload(rng)
        good, bad = decode_payload(p, topic_station=st, naive_tz=tz)
        assert not good and len(bad) == 1, p[:80]


async def test_fuzz_ten_thousand_bad_payloads(broker_url: str, prefix: str, svc_scenario) -> None:  # type: ignore[no-untyped-def]
    net, _ = svc_scenario
    cfg = load_network(net)
    st = ServiceSettings(broker=parse_broker_url(broker_url), prefix=prefix, client_id=prefix + "-svc",
                         db_path=None, http_port=None)
    metrics = ServiceMetrics()
    svc = Service(cfg, st, metrics=metrics)
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    rng = random.Random(20260101)
    payloads = [bad_payload(rng) for _ in range(N)]
    msgs = [(0.0, f"{prefix}/obs/{sid}", p, 1) for sid, p in payloads]
    for k in range(0, N, 500):  # in steps, so the broker never holds more than it queues per client
        await publish_messages(msgs[k:k + 500], st)
        assert await wait_until(lambda k=k: svc.taken >= k + min(500, N - k), 30), (svc.taken, k)
    assert not run.done()  # nothing stopped the service
    refused = sum(s.value for s in list(metrics.refused.collect())[0].samples if s.name.endswith("_total"))
    assert refused == N
    assert svc.engine.stats.records == 0  # none reached the core
    # and the stream goes on
    b = parse_broker_url(broker_url)
    async with aiomqtt.Client(b.host, b.port) as c:
        await c.publish(f"{prefix}/obs/GR01", json.dumps(_good(rng, "GR01")).encode(), qos=1)
    assert await wait_until(lambda: svc.engine.stats.used == 1, 10)
    stop.set()
    await run
