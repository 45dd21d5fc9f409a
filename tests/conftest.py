"""Shared fixtures. Broker tests (marked `broker`) use a real Mosquitto: the one on 127.0.0.1:1883
when it listens, else one started here on a free port, else the embedded amqtt broker."""

from __future__ import annotations

import asyncio
import sys
import threading
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from broker import Mosquitto, have_mosquitto, listening  # noqa: E402


@pytest.fixture(scope="session")
def broker_url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    if listening("127.0.0.1", 1883):
        yield "mqtt://127.0.0.1:1883"
        return
    if have_mosquitto():
        m = Mosquitto(tmp_path_factory.mktemp("mosquitto"))
        m.start()
        try:
            yield m.url
        finally:
            m.stop()
        return
    # No Mosquitto at all: the embedded broker, in a thread with its own event loop.
    from frontwatch.service.broker import EmbeddedBroker

    emb = EmbeddedBroker()
    loop = asyncio.new_event_loop()
    ready = threading.Event()

    def serve() -> None:
        asyncio.set_event_loop(loop)
        loop.run_until_complete(emb.start())
        ready.set()
        loop.run_forever()

    th = threading.Thread(target=serve, daemon=True)
    th.start()
    ready.wait(10)
    try:
        yield emb.url
    finally:
        asyncio.run_coroutine_threadsafe(emb.stop(), loop).result(10)
        loop.call_soon_threadsafe(loop.stop)


@pytest.fixture
def prefix(request: pytest.FixtureRequest) -> Iterator[str]:
    """A topic prefix of this test alone, so tests on the shared broker do not see each other.
    Afterwards the retained messages left under it (status, alerts ...) and the persistent
    sessions of its client ids are cleared."""
    p = "fwtest-" + uuid.uuid4().hex[:10]
    yield p
    if "broker_url" in request.fixturenames:
        _clear_retained(request.getfixturevalue("broker_url"), p)


def _clear_retained(url: str, prefix: str) -> None:
    import time

    import paho.mqtt.client as mqtt

    from frontwatch.service.settings import parse_broker_url

    b = parse_broker_url(url)
    topics: set[str] = set()
    c = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2)
    c.on_message = lambda _c, _u, m: topics.add(m.topic) if m.retain and m.payload else None
    try:
        c.connect(b.host, b.port)
    except OSError:
        return
    c.loop_start()
    c.subscribe(prefix + "/#")
    time.sleep(0.3)
    for t in topics:
        c.publish(t, b"", qos=1, retain=True).wait_for_publish(2)
    c.loop_stop()
    c.disconnect()
    # Persistent sessions the test made (service, readers) are dropped by a clean connect.
    for suffix in ("-svc", "-reader", "-st", "-pub"):
        k = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id=prefix + suffix, clean_session=True)
        try:
            k.connect(b.host, b.port)
            k.loop(0.05)
            k.disconnect()
        except OSError:
            pass


@pytest.fixture(scope="session")
def svc_scenario(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    """(network file, observations CSV): three stations, two days with one passage each a day."""
    import service_scenario

    return service_scenario.write(tmp_path_factory.mktemp("scenario"), days=2)
