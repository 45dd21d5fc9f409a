"""Alert webhooks from the live service: each alert for a site with webhooks is POSTed as its JSON
object, failures are retried by the sender and counted, and a slow endpoint never blocks the core."""

from __future__ import annotations

import asyncio
import json

from frontwatch.alerts.webhook import WebhookSender
from frontwatch.config import parse_network
from frontwatch.service.runner import Service
from frontwatch.service.settings import ServiceSettings, parse_broker_url


async def _server(received: list[dict]) -> tuple[asyncio.AbstractServer, int]:
    async def handle(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        head = await reader.readuntil(b"\r\n\r\n")
        length = next(int(h.split(b":")[1]) for h in head.split(b"\r\n") if h.lower().startswith(b"content-length"))
        received.append(json.loads(await reader.readexactly(length)))
        writer.write(b"HTTP/1.1 204 No Content\r\nContent-Length: 0\r\nConnection: close\r\n\r\n")
        await writer.drain()
        writer.close()

    srv = await asyncio.start_server(handle, "127.0.0.1", 0)
    return srv, srv.sockets[0].getsockname()[1]


def _metric(svc: Service, outcome: str) -> float:
    return svc.metrics.registry.get_sample_value("frontwatch_webhook_deliveries_total", {"outcome": outcome}) or 0.0


async def test_alerts_are_posted_and_failures_counted() -> None:
    received: list[dict] = []
    srv, port = await _server(received)
    closed = await asyncio.start_server(lambda r, w: None, "127.0.0.1", 0)
    dead_port = closed.sockets[0].getsockname()[1]
    closed.close()
    await closed.wait_closed()
    cfg = parse_network({
        "stations": [{"id": "A", "lat": 40.0, "lon": 0.0, "onshore_from_deg": 180}],
        "sites": [{"id": "green", "lat": 40.01, "lon": 0.0,
                   "webhooks": [f"http://127.0.0.1:{port}/hook", f"http://127.0.0.1:{dead_port}/hook"]}],
    })
    svc = Service(cfg, ServiceSettings(broker=parse_broker_url("mqtt://127.0.0.1:1"), db_path=None, http_port=None))
    svc.webhooks = WebhookSender(retries=1, backoff_s=0.01, timeout_s=2.0)
    alert = {"type": "alert", "id": "green-1", "site": "green", "state": "approaching", "seq": 1}
    svc._post_webhooks(alert)
    for _ in range(200):
        if not svc._hook_tasks:
            break
        await asyncio.sleep(0.02)
    srv.close()
    await srv.wait_closed()
    assert received == [alert]
    assert _metric(svc, "sent") == 1 and _metric(svc, "failed") == 1
    assert svc.webhooks.retries_total >= 1  # the dead endpoint was tried again before giving up
