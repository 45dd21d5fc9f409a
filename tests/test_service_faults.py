"""Faults: the broker stopped and started again mid-stream, and the service killed with SIGKILL and
restarted from its snapshot. Either way every passage is reported once, as in an offline replay."""

from __future__ import annotations

import asyncio
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import aiomqtt
import httpx
import pytest
from broker import Mosquitto, feed_in_steps, have_mosquitto, wait_until

from frontwatch.config import load_network
from frontwatch.replay import read_observations, run_replay
from frontwatch.service.broker import free_port
from frontwatch.service.publish import plan_messages, publish_messages
from frontwatch.service.runner import Service
from frontwatch.service.settings import ServiceSettings, parse_broker_url

pytestmark = pytest.mark.broker


async def _collect_persistent(url: str, client_id: str, topic: str, into: list[bytes],
                              stop: asyncio.Event) -> None:
    """A reader with a persistent session that reconnects, as a real consumer of events would."""
    b = parse_broker_url(url)
    while not stop.is_set():
        try:
            async with aiomqtt.Client(b.host, b.port, identifier=client_id, clean_session=False) as c:
                await c.subscribe(topic, qos=1)
                async for m in c.messages:
                    into.append(bytes(m.payload))  # type: ignore[arg-type]
        except aiomqtt.MqttError:
            await asyncio.sleep(0.2)


def _by_id(events: list[dict[str, object]]) -> list[dict[str, object]]:
    return sorted(events, key=lambda d: str(d["id"]))


@pytest.mark.skipif(not have_mosquitto(), reason="needs the mosquitto binary to stop and restart a broker")
async def test_broker_restart_mid_stream_loses_and_repeats_nothing(prefix: str, svc_scenario, tmp_path) -> None:  # type: ignore[no-untyped-def]
    net, obs = svc_scenario
    cfg = load_network(net)
    ref = [e.to_dict() for e in run_replay([obs], cfg).events]
    mq = Mosquitto(tmp_path / "broker")
    mq.start()
    try:
        st = ServiceSettings(broker=parse_broker_url(mq.url), prefix=prefix, client_id=prefix + "-svc",
                             db_path=tmp_path / "state.sqlite", http_port=None, backoff_min_s=0.1, backoff_max_s=0.5)
        svc = Service(cfg, st)
        stop = asyncio.Event()
        got: list[bytes] = []
        reader = asyncio.create_task(_collect_persistent(mq.url, prefix + "-reader", prefix + "/events/+", got, stop))
        run = asyncio.create_task(svc.run(stop))
        assert await wait_until(svc.connected.is_set, 10)
        msgs = plan_messages(read_observations([obs], cfg), prefix)
        a, b = len(msgs) // 3, 2 * len(msgs) // 3
        await feed_in_steps(svc, msgs[:a], st)
        # The middle third is being published when the broker goes down and comes back.
        pub = asyncio.create_task(publish_messages(msgs[a:b], st.but(client_id=prefix + "-pub"), rate=600))
        await asyncio.sleep(0.5)
        await asyncio.to_thread(mq.stop)
        assert await wait_until(lambda: not svc.connected.is_set(), 5)
        await asyncio.sleep(0.5)
        await asyncio.to_thread(mq.start)
        await asyncio.wait_for(pub, 60)
        assert await wait_until(svc.connected.is_set, 10)
        assert await wait_until(lambda: svc.engine.stats.last_time.get("GR03", 0) >= msgs[b - 1][0], 20)
        await feed_in_steps(svc, msgs[b:], st)
        await asyncio.sleep(0.5)
        assert await wait_until(lambda: len(got) >= len(ref), 10)
        await asyncio.sleep(0.3)
        stop.set()
        await run
        reader.cancel()
        assert svc.metrics.reconnects._value.get() >= 1
        stored = svc.store.__class__(tmp_path / "state.sqlite").outputs("event")
        assert _by_id(stored) == _by_id(ref)  # nothing lost, fields as in replay
        live = [json.loads(p) for p in got]
        assert _by_id(live) == _by_id(ref)  # and none delivered twice
    finally:
        mq.stop()


def _metric(port: int, name: str) -> float:
    try:
        text = httpx.get(f"http://127.0.0.1:{port}/metrics/", timeout=2).text
    except httpx.HTTPError:
        return -1.0
    for line in text.splitlines():
        if line.startswith(name + " "):
            return float(line.split()[1])
    return 0.0


def _start(net: Path, url: str, prefix: str, db: Path, port: int, log: Path) -> subprocess.Popen[bytes]:
    cmd = [sys.executable, "-m", "frontwatch.cli", "run", "--config", str(net), "--broker", url, "--prefix", prefix,
           "--client-id", prefix + "-svc", "--db", str(db), "--snapshot-every", "0.5", "--http-port", str(port)]
    return subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=log.open("ab"),
                            env={**os.environ, "PYTHONUNBUFFERED": "1"})


async def _wait_metric(port: int, name: str, at_least: float, timeout: float = 30.0) -> float:
    end = time.monotonic() + timeout
    v = -1.0
    while time.monotonic() < end:
        v = await asyncio.to_thread(_metric, port, name)
        if v >= at_least:
            return v
        await asyncio.sleep(0.1)
    raise AssertionError(f"{name} = {v}, wanted {at_least}")


async def _publish_paced(msgs: list[tuple[float, str, bytes, int]], st: ServiceSettings, port: int | None,
                         base: float = 0.0, step: int = 300) -> None:
    """Publish in steps; with `port`, wait for the service process to have taken each step."""
    for k in range(0, len(msgs), step):
        part = msgs[k:k + step]
        await publish_messages(part, st)
        if port is not None:
            await _wait_metric(port, "frontwatch_messages_received_total", base + k + len(part))


async def test_sigkill_and_restart_from_snapshot_reports_each_passage_once(broker_url: str, prefix: str,  # type: ignore[no-untyped-def]
                                                                           svc_scenario, tmp_path) -> None:
    net, obs = svc_scenario
    cfg = load_network(net)
    ref = [e.to_dict() for e in run_replay([obs], cfg).events]
    msgs = plan_messages(read_observations([obs], cfg), prefix)
    # Kill in the middle of the first passage: after its onset, before the detector has decided.
    first = min(ref, key=lambda e: str(e["detected_at"]))
    onset = first["onset"]
    k = next(i for i, m in enumerate(msgs) if m[0] >= _epoch(str(onset)) + 120)
    assert _epoch(str(first["detected_at"])) > msgs[k][0]
    down = 450  # published while the service is dead (queued by the broker for its session)
    st = ServiceSettings(broker=parse_broker_url(broker_url), prefix=prefix, client_id=prefix + "-pub",
                         db_path=None, http_port=None)
    db, log = tmp_path / "state.sqlite", tmp_path / "service.log"
    stop = asyncio.Event()
    got: list[bytes] = []
    reader = asyncio.create_task(_collect_persistent(broker_url, prefix + "-reader", prefix + "/events/+", got, stop))
    status: list[bytes] = []
    status_reader = asyncio.create_task(_collect_persistent(broker_url, prefix + "-st", prefix + "/status", status, stop))
    port = free_port()
    proc = _start(net, broker_url, prefix, db, port, log)
    try:
        await _wait_metric(port, "frontwatch_broker_connected", 1)
        await _publish_paced(msgs[:k], st, port)
        await asyncio.sleep(0.7)  # at least one snapshot on the interval
        proc.send_signal(signal.SIGKILL)
        proc.wait(10)
        assert await wait_until(lambda: status[-1:] == [b"offline"], 10), status  # the last will
        assert not any(json.loads(p)["id"] == first["id"] for p in got)  # it died before deciding
        await _publish_paced(msgs[k:k + down], st, None)
        proc = _start(net, broker_url, prefix, db, port, log)
        await _wait_metric(port, "frontwatch_broker_connected", 1)
        await _wait_metric(port, "frontwatch_messages_received_total", down)
        await _publish_paced(msgs[k + down:], st, port, base=down)
        assert await wait_until(lambda: len(got) >= len(ref), 15)
        await asyncio.sleep(0.5)
        n_status = len(status)
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(15) == 0
        # a clean stop says so itself (not the will: the service publishes it before disconnecting)
        assert await wait_until(lambda: status[n_status:] == [b"offline"], 5), status
    finally:
        if proc.poll() is None:
            proc.kill()
        stop.set()
        reader.cancel()
        status_reader.cancel()
    with sqlite3.connect(db) as conn:
        stored = [json.loads(p) for (p,) in conn.execute("SELECT payload FROM outputs WHERE type='event' ORDER BY n")]
    text = log.read_text()
    assert "restored the core from its snapshot" in text, text[-3000:]
    assert _by_id(stored) == _by_id(ref), text[-3000:]
    assert _by_id([json.loads(p) for p in got]) == _by_id(ref)  # each passage once on the broker too


def _epoch(iso: str) -> float:
    from frontwatch.timeutil import parse_time

    return parse_time(iso)
