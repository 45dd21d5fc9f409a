"""The live service against a real broker: the same events as an offline replay, refused payloads
counted by reason while the stream goes on, status topic with last will, metrics page."""

from __future__ import annotations

import asyncio
import contextlib
import json
import math
import socket
from pathlib import Path

import aiomqtt
import httpx
import pytest
from broker import feed_in_steps, wait_until

from frontwatch.config import load_network
from frontwatch.replay import read_observations, run_replay
from frontwatch.service.metrics import ServiceMetrics
from frontwatch.service.publish import plan_messages, publish_messages
from frontwatch.service.runner import Service
from frontwatch.service.settings import ServiceSettings, parse_broker_url

pytestmark = pytest.mark.broker


def _settings(url: str, prefix: str, **kw: object) -> ServiceSettings:
    base: dict[str, object] = {"broker": parse_broker_url(url), "prefix": prefix, "client_id": prefix + "-svc",
                               "db_path": None, "http_port": None, "backoff_min_s": 0.1, "backoff_max_s": 1.0}
    base.update(kw)
    return ServiceSettings(**base)  # type: ignore[arg-type]


async def _collect(url: str, topic: str, into: list[tuple[str, bytes, bool]], ready: asyncio.Event) -> None:
    b = parse_broker_url(url)
    async with aiomqtt.Client(b.host, b.port) as c:
        await c.subscribe(topic, qos=1)
        ready.set()
        async for m in c.messages:
            into.append((m.topic.value, bytes(m.payload), m.retain))  # type: ignore[arg-type]


async def test_live_events_equal_replay(broker_url: str, prefix: str, svc_scenario, tmp_path) -> None:  # type: ignore[no-untyped-def]
    net, obs = svc_scenario
    cfg = load_network(net)
    reference = run_replay([obs], cfg)
    ref_events = [e.to_dict() for e in reference.events]
    ref_other = [o.to_dict() for o in reference.outputs if "type" in o.to_dict()]
    assert len(ref_events) == 6  # the scenario has one passage per station a day

    st = _settings(broker_url, prefix, db_path=tmp_path / "state.sqlite")
    svc = Service(cfg, st)
    stop = asyncio.Event()
    got: list[tuple[str, bytes, bool]] = []
    ready = asyncio.Event()
    sub = asyncio.create_task(_collect(broker_url, prefix + "/#", got, ready))
    await ready.wait()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    await feed_in_steps(svc, plan_messages(read_observations([obs], cfg), prefix), st)
    assert await wait_until(lambda: sum(1 for t, _, _ in got if "/events/" in t) >= len(ref_events), 10)
    await asyncio.sleep(0.3)  # would a duplicate follow?
    stop.set()
    await run
    await asyncio.sleep(0.2)
    sub.cancel()

    live = [json.loads(p) for t, p, _ in got if "/events/" in t]
    assert sorted(live, key=lambda d: d["id"]) == sorted(ref_events, key=lambda d: d["id"])
    assert len({d["id"] for d in live}) == len(live)  # none twice
    for t, p, _ in got:
        if "/events/" in t:
            assert t == f"{prefix}/events/{json.loads(p)['station']}"
    other = [json.loads(p) for t, p, _ in got if "/forecasts/" in t or "/alerts/" in t]
    assert sorted(map(json.dumps, other)) == sorted(map(json.dumps, ref_other))
    status = [p for t, p, _ in got if t == f"{prefix}/status"]
    assert status[0] == b"online" and status[-1] == b"offline"
    assert svc.engine.stats.records == reference.stats.records


async def test_refused_payloads_counted_by_reason(broker_url: str, prefix: str, svc_scenario) -> None:  # type: ignore[no-untyped-def]
    net, obs = svc_scenario
    cfg = load_network(net)
    st = _settings(broker_url, prefix, http_port=0)
    metrics = ServiceMetrics()
    svc = Service(cfg, st, metrics=metrics)
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    good = {"station": "GR01", "time": "2026-01-01T00:00:00Z", "wind_dir_deg": 270, "wind_speed_ms": 3.0,
            "temp_c": 25.0, "dewpoint_c": 14.0}
    bad: list[tuple[str, bytes]] = [
        ("GR02", json.dumps(good).encode()),                                 # names another station
        ("GR01", b'{"station": "GR01", "time": '),                            # malformed JSON
        ("GR01", json.dumps({**good, "temp_c": "warm"}).encode()),            # wrong type
        ("GR01", json.dumps({**good, "wind_speed_ms": [1]}).encode()),        # wrong type
        ("GR01", json.dumps({**good, "temp_c": math.nan}).encode()),          # NaN literal
        ("GR01", json.dumps({**good, "time": "yesterday"}).encode()),         # bad time
        ("GR01", b'{"station": "GR01", "x": "' + b"y" * 1_100_000 + b'"}'),  # huge payload
        ("GR01", b"\xff\xfe\x00garbage"),                                      # not text
        ("GR01", b"[1, 2]"),                                                   # not objects (2 records)
    ]
    t_pub = f"{prefix}/obs/"
    b = parse_broker_url(broker_url)
    async with aiomqtt.Client(b.host, b.port) as c:
        for sid, payload in bad:
            await c.publish(t_pub + sid, payload, qos=1)
        for k in range(3):  # the stream goes on after them
            rec = {**good, "time": f"2026-01-01T00:0{k + 1}:00Z"}
            await c.publish(t_pub + "GR01", json.dumps(rec).encode(), qos=1)
        await c.publish(t_pub + "XX99", json.dumps({**good, "station": "XX99"}).encode(), qos=1)
        gw = [{**good, "station": "GR02"}, {**good, "station": "GR03"}, {**good, "station": "ZZ", "time": 5}]
        await c.publish(t_pub + "gw1", json.dumps(gw).encode(), qos=1)
    assert await wait_until(lambda: svc.taken >= len(bad) + 5, 10)
    refused = {s.labels["reason"]: s.value for s in list(metrics.refused.collect())[0].samples
               if s.name.endswith("_total")}
    assert refused == {"station_mismatch": 1, "malformed_json": 2, "wrong_type": 2, "not_finite": 1,
                       "bad_time": 2, "too_large": 1, "not_object": 2}
    assert svc.engine.stats.used == 3 + 2  # three GR01 minutes, two gateway records
    assert svc.engine.stats.unknown_stations == {"XX99": 1}
    async with httpx.AsyncClient(follow_redirects=True) as h:
        text = (await h.get(f"http://127.0.0.1:{svc.web_port}/metrics")).text
    assert 'frontwatch_records_refused_total{reason="too_large"} 1.0' in text
    assert "frontwatch_unknown_station_records_total 1.0" in text
    assert 'frontwatch_station_last_seen_seconds{station="GR01"}' in text
    assert "frontwatch_broker_connected 1.0" in text
    stop.set()
    await run


async def test_last_will_says_offline_when_the_service_dies(broker_url: str, prefix: str, svc_scenario) -> None:  # type: ignore[no-untyped-def]
    """A crash (connection dropped without DISCONNECT) leaves the retained status 'offline'."""
    net, _ = svc_scenario
    cfg = load_network(net)
    st = _settings(broker_url, prefix)
    svc = Service(cfg, st)
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    b = parse_broker_url(broker_url)
    async with aiomqtt.Client(b.host, b.port) as c:
        await c.subscribe(prefix + "/status", qos=1)
        async with asyncio.timeout(5):
            async for m in c.messages:
                assert m.payload == b"online" and m.retain
                break
        client = svc._client
        assert client is not None
        sock = client._client.socket()
        assert isinstance(sock, socket.socket)
        sock.shutdown(socket.SHUT_RDWR)  # the connection dies as in a crash
        async with asyncio.timeout(10):
            async for m in c.messages:
                if m.payload == b"offline":
                    break
    assert await wait_until(lambda: svc._gen >= 2 and svc.connected.is_set(), 10)  # it came back
    stop.set()
    await run


async def test_publisher_speed_follows_data_time(broker_url: str, prefix: str) -> None:
    """At N times real time, one data minute takes 60/N seconds of wall time."""
    st = _settings(broker_url, prefix)
    msgs = [(1000.0 + 60 * k, f"{prefix}/obs/A", b"{}", 1) for k in range(6)]
    loop = asyncio.get_running_loop()
    t0 = loop.time()
    stats = await publish_messages(msgs, st, speed=600.0)  # 5 minutes of data -> 0.5 s
    dt = loop.time() - t0
    assert stats.messages == 6
    assert 0.45 <= dt < 2.0


async def test_batch_publisher_delivers_in_order_and_leaves_aiomqtt_its_own_publishes(broker_url: str,
                                                                                      prefix: str) -> None:
    """The outputs' publisher (mqtt.BatchPublisher): a batch arrives whole, in order, with its retain
    flags, and is confirmed; a publish through aiomqtt meanwhile still completes (the publisher took
    over paho's acknowledgement callback and hands on what is not its own); once disconnected, each
    item says why it was not sent instead of raising."""
    from frontwatch.service.mqtt import BatchPublisher, make_client

    got: list[tuple[str, bytes, bool]] = []
    ready = asyncio.Event()
    sub = asyncio.create_task(_collect(broker_url, prefix + "/out/#", got, ready))
    await ready.wait()
    items = [(f"{prefix}/out/{k % 3}", f"payload {k}".encode(), k % 2 == 0) for k in range(60)]
    client = make_client(_settings(broker_url, prefix), client_id=None, persistent=False)
    async with client:
        outbox = BatchPublisher(client)
        res, _ = await asyncio.gather(outbox.publish(items, 5.0),
                                      client.publish(f"{prefix}/out/status", b"own", qos=1, timeout=5))
        assert res == [None] * len(items)
        assert not outbox._waiting
    assert await wait_until(lambda: len(got) >= len(items) + 1, 5)
    sub.cancel()
    mine = [(t, p) for t, p, _ in got if not t.endswith("/status")]
    assert mine == [(t, p) for t, p, _ in items]  # the subscriber's copies: live, so never flagged retained
    assert [p for t, p, _ in got if t.endswith("/status")] == [b"own"]
    # The retained ones: a newcomer gets each topic's last publish that had retain set.
    late: list[tuple[str, bytes, bool]] = []
    ready.clear()
    sub = asyncio.create_task(_collect(broker_url, prefix + "/out/+", late, ready))
    await ready.wait()
    want = {t: (t, p, True) for t, p, r in items if r}
    assert await wait_until(lambda: len(late) >= len(want), 5)
    sub.cancel()
    assert sorted(late) == sorted(want.values())
    after = await outbox.publish(items[:3], 1.0)  # the connection is closed now
    assert all(isinstance(e, aiomqtt.MqttError) for e in after)


REPLAY_DATA = Path(__file__).resolve().parent.parent / "replay_data"


@pytest.mark.skipif(not (REPLAY_DATA / "network.toml").exists(), reason="demo scenario not in this checkout")
async def test_demo_scenario_through_a_gateway_gives_every_replay_output(broker_url: str, prefix: str,  # type: ignore[no-untyped-def]
                                                                        tmp_path) -> None:
    """The shipped scenario (sites, so forecasts and alerts too) sent as gateway batches: the service
    stores exactly the outputs an offline replay gives, in the same order, and publishes each."""
    net = tmp_path / "network.toml"
    net.write_text((REPLAY_DATA / "network.toml").read_text().replace("[network]\n", '[network]\ngateways = ["gw"]\n', 1))
    cfg = load_network(net)
    files = [REPLAY_DATA / "observations.csv"]
    reference = [o.to_dict() for o in run_replay(files, cfg).outputs]
    st = _settings(broker_url, prefix)
    svc = Service(cfg, st)
    stop = asyncio.Event()
    got: list[tuple[str, bytes, bool]] = []
    ready = asyncio.Event()
    sub = asyncio.create_task(_collect(broker_url, prefix + "/+/+", got, ready))
    await ready.wait()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    msgs = plan_messages(read_observations(files, cfg), prefix, gateway="gw", batch=100)
    await feed_in_steps(svc, msgs, st, step=200, timeout=60)
    assert await wait_until(lambda: sum(1 for t, _, _ in got if "/obs/" not in t) >= len(reference), 20)
    stored = svc.store.outputs()
    stop.set()
    await run
    sub.cancel()
    assert stored == reference
    published = [json.loads(p) for t, p, _ in got if "/obs/" not in t]
    assert sorted(map(json.dumps, published)) == sorted(map(json.dumps, reference))
    kinds = {t.split("/")[1] for t, _, _ in got if "/obs/" not in t}
    assert {"events", "forecasts", "alerts"} <= kinds
    # Alerts are retained: a newcomer gets each site's current state at once.
    last_alert = {}
    for o in reference:
        if o.get("type") == "alert":
            last_alert[o["site"]] = o
    b = parse_broker_url(broker_url)
    late: dict[str, dict[str, object]] = {}
    async with aiomqtt.Client(b.host, b.port) as c:
        await c.subscribe(prefix + "/alerts/+", qos=1)
        with contextlib.suppress(TimeoutError):
            async with asyncio.timeout(1.0):
                async for m in c.messages:
                    assert m.retain
                    late[m.topic.value.rsplit("/", 1)[1]] = json.loads(m.payload)  # type: ignore[arg-type]
    assert late == last_alert


@pytest.mark.parametrize("mqtt5", [False, True], ids=["mqtt311", "mqtt5"])
async def test_messages_sent_while_away_arrive_after_a_restart(broker_url: str, prefix: str, svc_scenario,  # type: ignore[no-untyped-def]
                                                               tmp_path, mqtt5: bool) -> None:
    """The session persists at the broker (clean_session false / MQTT 5 session expiry), so what is
    published while the service is stopped is delivered when it comes back."""
    cfg = load_network(svc_scenario[0])
    st = _settings(broker_url, prefix, mqtt5=mqtt5, db_path=tmp_path / "s.sqlite")
    for phase in range(2):
        svc = Service(cfg, st)
        stop = asyncio.Event()
        run = asyncio.create_task(svc.run(stop))
        assert await wait_until(svc.connected.is_set, 10)
        if phase == 1:
            assert await wait_until(lambda s=svc: s.taken >= 5, 10)  # the restarted one
            assert svc.engine.stats.used == 5
        stop.set()
        await run
        if phase == 0:
            recs = [{"station": "GR02", "time": f"2026-01-01T00:0{k}:00Z", "temp_c": 20.0 + k,
                     "wind_speed_ms": 2.0, "wind_dir_deg": 200} for k in range(5)]
            await publish_messages([(0.0, f"{prefix}/obs/GR02", json.dumps(r).encode(), 1) for r in recs],
                                   st.but(client_id=prefix + "-pub"))


async def test_stops_promptly_with_a_browser_following_the_event_stream(broker_url: str, prefix: str,  # type: ignore[no-untyped-def]
                                                                        svc_scenario) -> None:
    cfg = load_network(svc_scenario[0])
    svc = Service(cfg, _settings(broker_url, prefix, http_port=0))
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(lambda: svc.connected.is_set() and svc.web_ready.is_set(), 10)
    await asyncio.sleep(0.2)
    opened = asyncio.Event()

    async def follow() -> None:
        async with httpx.AsyncClient(timeout=None) as h, \
                h.stream("GET", f"http://127.0.0.1:{svc.web_port}/api/stream") as r:
            opened.set()
            async for _ in r.aiter_lines():
                pass

    reader = asyncio.create_task(follow())
    await asyncio.wait_for(opened.wait(), 5)
    loop = asyncio.get_running_loop()
    t0 = loop.time()
    stop.set()
    await asyncio.wait_for(run, 8)
    assert loop.time() - t0 < 5
    reader.cancel()
    with contextlib.suppress(asyncio.CancelledError, httpx.HTTPError):
        await reader
