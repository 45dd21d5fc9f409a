"""The web app over real HTTP (uvicorn on 127.0.0.1): token, read-only, headers, series route, and
the event stream's numbering: a reconnect with Last-Event-ID gets exactly what it missed, and a
client too far behind is told to reload the state."""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import httpx
import pytest
from prometheus_client import CollectorRegistry, Counter

from frontwatch.service.hub import DashboardHub
from frontwatch.service.web import make_app
from tests.test_dashboard_support import T0, Server, network, observation, passage


@pytest.fixture()
def served() -> Iterator[tuple[DashboardHub, Server]]:
    cfg = network(4)
    hub = DashboardHub(cfg, history=50)
    reg = CollectorRegistry()
    Counter("frontwatch_test_probe", "a counter for the test", registry=reg).inc()
    with Server(make_app(hub, reg)) as srv:
        yield hub, srv


def read_sse(url: str, n: int, headers: dict[str, str] | None = None) -> list[dict[str, Any]]:
    """The first n messages that carry an id (comments and 'retry' skipped)."""
    out: list[dict[str, Any]] = []
    cur: dict[str, Any] = {}
    with httpx.stream("GET", url, headers=headers or {}, timeout=10) as r:
        assert r.status_code == 200 and r.headers["content-type"].startswith("text/event-stream")
        for line in r.iter_lines():
            if line == "":
                if "id" in cur:
                    out.append(cur)
                    if len(out) >= n:
                        break
                cur = {}
            elif not line.startswith(":"):
                k, _, v = line.partition(": ")
                cur[k] = v
    return out


def test_stream_numbers_items_and_catches_up_after_reconnect(served: tuple[DashboardHub, Server]) -> None:
    hub, srv = served
    cfg = hub.config
    for i in range(5):
        srv.call(hub.observe, observation(cfg, "GS001", T0 + 60 * i))
    first = read_sse(srv.url + "api/stream", 5)
    assert [int(m["id"]) for m in first] == [1, 2, 3, 4, 5]
    assert first[0]["event"] == "obs" and json.loads(first[0]["data"])["station"] == "GS001"
    # while "disconnected", more arrives; reconnecting with Last-Event-ID: 5 resumes at 6
    ev = passage(cfg, "GS002").to_dict()
    srv.call(hub.emit, ev)
    srv.call(hub.observe, observation(cfg, "GS002", T0 + 600))
    again = read_sse(srv.url + "api/stream", 2, {"Last-Event-ID": "5"})
    assert [(int(m["id"]), m["event"]) for m in again] == [(6, "event"), (7, "obs")]
    assert json.loads(again[0]["data"])["id"] == ev["id"]
    # ?since= works the same (the page's first connection after loading /api/state)
    assert int(read_sse(srv.url + "api/stream?since=6", 1)[0]["id"]) == 7


def test_live_items_reach_an_open_stream(served: tuple[DashboardHub, Server]) -> None:
    hub, srv = served
    import threading

    got: list[dict[str, Any]] = []
    t = threading.Thread(target=lambda: got.extend(read_sse(srv.url + "api/stream?since=0", 1)))
    t.start()
    import time

    time.sleep(0.5)  # the client is now waiting on an empty feed
    srv.call(hub.emit, {"type": "alert", "site": "dune-green", "state": "warning", "seq": 1})
    t.join(10)
    assert got and got[0]["event"] == "alert" and int(got[0]["id"]) == 1


def test_client_too_far_behind_is_told_to_resync(served: tuple[DashboardHub, Server]) -> None:
    hub, srv = served
    for i in range(80):  # history is 50: items 1..30 are gone
        srv.call(hub.observe, observation(hub.config, "GS003", T0 + 60 * i))
    msgs = read_sse(srv.url + "api/stream", 1, {"Last-Event-ID": "10"})
    assert msgs[0]["event"] == "resync" and json.loads(msgs[0]["data"])["seq"] == 80
    # an id from before a service restart (larger than anything here) also resyncs
    assert read_sse(srv.url + "api/stream", 1, {"Last-Event-ID": "9999"})[0]["event"] == "resync"


def test_pages_and_routes(served: tuple[DashboardHub, Server]) -> None:
    hub, srv = served
    srv.call(hub.observe, observation(hub.config, "GS001", T0))
    r = httpx.get(srv.url)
    assert r.status_code == 200 and "frontwatch" in r.text and "Decision support only" in r.text
    assert "script-src 'self'" in r.headers["content-security-policy"]
    assert "<script>" not in r.text  # no inline script: the policy would block it anyway
    js = httpx.get(srv.url + "static/app.js")
    assert js.status_code == 200 and "EventSource" in js.text
    assert "http://" not in js.text.replace('"http://www.w3.org/2000/svg"', "")  # nothing from elsewhere
    st = httpx.get(srv.url + "api/state").json()
    assert [s["id"] for s in st["stations"]] == ["GS001", "GS002", "GS003", "GS004"]
    assert st["seq"] == 1 and st["data_time"] == "2026-01-14T00:00:00Z" and st["tz_offset_min"] == 600
    ser = httpx.get(srv.url + "api/series/GS001").json()
    assert ser["time"] == ["2026-01-14T00:00:00Z"] and ser["temp_c"] == [24.0]
    missing = httpx.get(srv.url + "api/series/XX9")
    assert missing.status_code == 404 and "XX9" in missing.json()["error"]
    m = httpx.get(srv.url + "metrics")
    assert m.status_code == 200 and "frontwatch_test_probe_total 1.0" in m.text


def test_nothing_on_the_page_can_change_the_service(served: tuple[DashboardHub, Server]) -> None:
    hub, srv = served
    before = hub.seq
    for path in ("", "api/state", "api/stream", "api/series/GS001", "static/app.js", "api/caution"):
        for method in ("POST", "PUT", "DELETE", "PATCH"):
            r = httpx.request(method, srv.url + path, content=b"{}")
            assert r.status_code in (405, 404), (method, path, r.status_code)
    assert hub.seq == before


def test_token_guards_every_data_route() -> None:
    cfg = network(2)
    hub = DashboardHub(cfg)
    with Server(make_app(hub, CollectorRegistry(), token="s3cret-token")) as srv:
        for path in ("", "api/state", "api/stream", "api/series/GS001", "metrics", "api/caution"):
            assert httpx.get(srv.url + path).status_code == 401, path
            assert httpx.get(srv.url + path, params={"token": "wrong"}).status_code == 401, path
        assert httpx.get(srv.url + "api/state", params={"token": "s3cret-token"}).status_code == 200
        assert httpx.get(srv.url + "metrics", headers={"Authorization": "Bearer s3cret-token"}).status_code == 200
        assert httpx.get(srv.url, params={"token": "s3cret-token"}).status_code == 200


def test_close_ends_open_streams_so_the_server_can_stop() -> None:
    import threading
    import time

    hub = DashboardHub(network(2))
    srv = Server(make_app(hub, CollectorRegistry()))
    srv.server.config.timeout_graceful_shutdown = None  # as the service runs it: wait for connections
    with srv:
        got: list[dict[str, Any]] = []
        errors: list[BaseException] = []

        def reader() -> None:
            try:
                got.extend(read_sse(srv.url + "api/stream", 5))
            except BaseException as exc:
                errors.append(exc)

        t = threading.Thread(target=reader)
        t.start()
        time.sleep(0.5)
        assert hub.clients == 1
        srv.call(hub.emit, {"type": "alert", "site": "dune-green", "state": "clear", "seq": 1})
        srv.call(hub.close)
        t.join(5)
        assert not t.is_alive(), "the stream did not end on close()"
        assert not errors, errors
        assert [m["event"] for m in got] == ["alert"]  # what was sent before the close still arrived
        assert httpx.get(srv.url + "api/stream").status_code == 503
        t0 = time.perf_counter()
    assert time.perf_counter() - t0 < 3 and not srv.thread.is_alive()
