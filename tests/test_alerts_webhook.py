"""Webhook delivery against a real HTTP server on 127.0.0.1 (asyncio), with scripted failures."""

from __future__ import annotations

import asyncio
import json
import socket
from typing import Any

from frontwatch.alerts.webhook import WebhookSender


class _Server:
    """A tiny HTTP/1.1 server answering with scripted status codes (then 200), recording bodies."""

    def __init__(self, statuses: list[int]) -> None:
        self.statuses = list(statuses)
        self.bodies: list[dict[str, Any]] = []
        self.heads: list[str] = []
        self.server: asyncio.Server | None = None

    async def handle(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        head = (await reader.readuntil(b"\r\n\r\n")).decode("latin-1")
        length = next(int(h.split(":", 1)[1]) for h in head.split("\r\n") if h.lower().startswith("content-length"))
        body = await reader.readexactly(length)
        self.heads.append(head)
        self.bodies.append(json.loads(body))
        status = self.statuses.pop(0) if self.statuses else 200
        writer.write(f"HTTP/1.1 {status} X\r\nContent-Length: 0\r\nConnection: close\r\n\r\n".encode())
        await writer.drain()
        writer.close()

    async def __aenter__(self) -> str:
        self.server = await asyncio.start_server(self.handle, "127.0.0.1", 0)
        port = self.server.sockets[0].getsockname()[1]
        return f"http://127.0.0.1:{port}/hook?x=1"

    async def __aexit__(self, *exc: object) -> None:
        assert self.server is not None
        self.server.close()
        await self.server.wait_closed()


ALERT = {"type": "alert", "id": "fw-green-S01-20270101T0100Z", "seq": 1, "headline": "Sea-breeze front approaching"}


async def test_retries_after_server_errors_then_succeeds() -> None:
    srv = _Server([503, 500])
    async with srv as url:
        s = WebhookSender(retries=3, backoff_s=0.01)
        assert await s.send(url, ALERT) is True
    assert len(srv.bodies) == 3 and all(b == ALERT for b in srv.bodies)
    assert srv.heads[0].startswith("POST /hook?x=1 HTTP/1.1") and "application/json" in srv.heads[0]
    assert s.stats() | {"last_error": None} == {"sent_total": 1, "failed_total": 0, "attempts_total": 3,
                                                 "retries_total": 2, "last_error": None}


async def test_gives_up_after_all_retries_and_counts_it() -> None:
    srv = _Server([503] * 10)
    async with srv as url:
        s = WebhookSender(retries=2, backoff_s=0.01)
        assert await s.send(url, ALERT) is False
    assert len(srv.bodies) == 3
    assert s.failed_total == 1 and s.sent_total == 0 and "HTTP 503" in (s.last_error or "")


async def test_client_error_is_not_retried() -> None:
    srv = _Server([400])
    async with srv as url:
        s = WebhookSender(retries=3, backoff_s=0.01)
        assert await s.send(url, ALERT) is False
    assert len(srv.bodies) == 1 and s.attempts_total == 1 and s.failed_total == 1


async def test_connection_refused_is_retried_and_counted() -> None:
    sock = socket.socket()
    sock.bind(("127.0.0.1", 0))
    port = sock.getsockname()[1]
    sock.close()  # nothing listens there now
    s = WebhookSender(retries=2, backoff_s=0.01, timeout_s=2.0)
    assert await s.send(f"http://127.0.0.1:{port}/", ALERT) is False
    assert s.attempts_total == 3 and s.failed_total == 1


async def test_send_all_and_bad_url() -> None:
    a, b = _Server([]), _Server([404])
    async with a as ua, b as ub:
        s = WebhookSender(retries=1, backoff_s=0.01)
        assert await s.send_all([ua, ub], ALERT) == [True, False]
    s2 = WebhookSender(retries=3, backoff_s=0.01)
    assert await s2.send("ftp://127.0.0.1/x", ALERT) is False and s2.attempts_total == 1
