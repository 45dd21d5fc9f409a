"""Webhook delivery of alerts: an HTTP POST of the alert JSON, with retries, backoff and counters.

Standard library only (asyncio streams; TLS through ssl for https URLs). Usage from the service:

    sender = WebhookSender(retries=3, backoff_s=1.0)
    ok = await sender.send(url, alert.to_dict())      # True when a 2xx answer came back
    sender.stats()                                    # {'sent_total': .., 'failed_total': .., ...}

A 2xx answer is success. 408, 429 and 5xx answers and network errors are retried after
backoff_s, 2 backoff_s, 4 backoff_s ... (capped at backoff_max_s); any other 4xx is final (the
request itself is wrong, repeating it will not help). A delivery that fails after all attempts is
counted in failed_total and logged; it never raises into the caller.
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import logging
import ssl
from typing import Any
from urllib.parse import urlsplit

log = logging.getLogger(__name__)

RETRYABLE = {408, 429}


class WebhookError(Exception):
    """One failed attempt (status or network error); `retry` says whether another try may help."""

    def __init__(self, reason: str, retry: bool) -> None:
        super().__init__(reason)
        self.retry = retry


class WebhookSender:
    """POST alert JSON to webhook URLs with retries and exponential backoff; counts the outcomes."""

    def __init__(self, retries: int = 3, backoff_s: float = 1.0, backoff_max_s: float = 30.0,
                 timeout_s: float = 10.0, user_agent: str = "frontwatch-webhook/1") -> None:
        if retries < 0 or backoff_s < 0 or timeout_s <= 0:
            raise ValueError("retries and backoff_s must be >= 0 and timeout_s > 0")
        self.retries = retries
        self.backoff_s = backoff_s
        self.backoff_max_s = backoff_max_s
        self.timeout_s = timeout_s
        self.user_agent = user_agent
        self.sent_total = 0  # deliveries that succeeded
        self.failed_total = 0  # deliveries that failed after every attempt
        self.attempts_total = 0  # HTTP attempts made
        self.retries_total = 0  # attempts after the first
        self.last_error: str | None = None

    def stats(self) -> dict[str, Any]:
        return {"sent_total": self.sent_total, "failed_total": self.failed_total,
                "attempts_total": self.attempts_total, "retries_total": self.retries_total,
                "last_error": self.last_error}

    async def send(self, url: str, alert: dict[str, Any]) -> bool:
        """Deliver one alert to one URL; True on a 2xx answer, False once every attempt failed."""
        body = json.dumps(alert, separators=(",", ":"), ensure_ascii=False).encode("utf-8")
        delay = self.backoff_s
        for attempt in range(self.retries + 1):
            if attempt:
                self.retries_total += 1
                await asyncio.sleep(delay)
                delay = min(delay * 2.0, self.backoff_max_s)
            self.attempts_total += 1
            try:
                await asyncio.wait_for(self._post(url, body), self.timeout_s)
            except WebhookError as exc:
                self.last_error = f"{url}: {exc}"
                if not exc.retry:
                    break
            except (TimeoutError, OSError, asyncio.IncompleteReadError, ValueError) as exc:
                self.last_error = f"{url}: {type(exc).__name__}: {exc}"
            else:
                self.sent_total += 1
                return True
        self.failed_total += 1
        log.warning("webhook delivery failed after %d attempt(s): %s", attempt + 1, self.last_error)
        return False

    async def send_all(self, urls: list[str], alert: dict[str, Any]) -> list[bool]:
        """Deliver one alert to several URLs concurrently."""
        return list(await asyncio.gather(*(self.send(u, alert) for u in urls)))

    async def _post(self, url: str, body: bytes) -> int:
        parts = urlsplit(url)
        if parts.scheme not in ("http", "https") or not parts.hostname:
            raise WebhookError(f"not an http(s) URL: {url!r}", retry=False)
        port = parts.port or (443 if parts.scheme == "https" else 80)
        ctx = ssl.create_default_context() if parts.scheme == "https" else None
        reader, writer = await asyncio.open_connection(parts.hostname, port, ssl=ctx)
        try:
            path = (parts.path or "/") + (f"?{parts.query}" if parts.query else "")
            host = parts.hostname if parts.port is None else f"{parts.hostname}:{parts.port}"
            head = (f"POST {path} HTTP/1.1\r\nHost: {host}\r\nUser-Agent: {self.user_agent}\r\n"
                    f"Content-Type: application/json\r\nContent-Length: {len(body)}\r\nConnection: close\r\n\r\n")
            writer.write(head.encode("latin-1") + body)
            await writer.drain()
            line = await reader.readline()
            fields = line.decode("latin-1").split(None, 2)
            if len(fields) < 2 or not fields[0].startswith("HTTP/") or not fields[1].isdigit():
                raise WebhookError(f"bad HTTP status line {line[:60]!r}", retry=True)
            status = int(fields[1])
        finally:
            writer.close()
            with contextlib.suppress(OSError, ssl.SSLError):
                await writer.wait_closed()
        if 200 <= status < 300:
            return status
        raise WebhookError(f"HTTP {status}", retry=status in RETRYABLE or status >= 500)
