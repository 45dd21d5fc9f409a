"""The service's web app: the live page, JSON state and series, server-sent event stream, /metrics.

Read-only by construction: every route answers GET (and HEAD) only; nothing the page can send
reaches the core. With a token, every data route needs ?token=... or 'Authorization: Bearer ...'
(the page passes on the token it was opened with). The page itself is static files with a strict
Content-Security-Policy: no inline script, nothing loaded from another origin.
"""

from __future__ import annotations

import asyncio
import hmac
from collections.abc import AsyncIterator, Awaitable, Callable
from pathlib import Path
from typing import Any

from prometheus_client import CollectorRegistry, make_asgi_app
from prometheus_client.exposition import choose_encoder
from starlette.applications import Starlette
from starlette.requests import Request
from starlette.responses import FileResponse, JSONResponse, Response, StreamingResponse
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles
from starlette.types import ASGIApp, Receive, Scope, Send

from .hub import DashboardHub, dumps

STATIC = Path(__file__).with_name("static")

CAUTION = ("frontwatch is decision support. It does not replace official warnings from the national weather "
           "service, the judgement of the people responsible for an event or race, or the wind limits set by "
           "structure makers, engineers and local regulations. Alerts depend on sensors that fail.")

_HEADERS = {
    "Content-Security-Policy": ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
                                "connect-src 'self'; object-src 'none'; base-uri 'none'; form-action 'none'; "
                                "frame-ancestors 'none'"),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
}

CATCHUP_BATCH = 500  # feed items per write while a client catches up


def make_app(hub: DashboardHub, registry: CollectorRegistry, token: str | None = None) -> Starlette:
    """Read-only app. With `token`, every request needs ?token=... or 'Authorization: Bearer ...'."""

    def allowed(request: Request) -> bool:
        if token is None:
            return True
        given = request.query_params.get("token", "")
        auth = request.headers.get("authorization", "")
        if auth.startswith("Bearer "):
            given = given or auth[7:]
        return hmac.compare_digest(given.encode(), token.encode())

    def guarded(fn: Callable[[Request], Awaitable[Response]]) -> Callable[[Request], Awaitable[Response]]:
        async def inner(request: Request) -> Response:
            if not allowed(request):
                return Response("token required", status_code=401, headers=_HEADERS)
            resp = await fn(request)
            resp.headers.update(_HEADERS)
            return resp
        return inner

    async def index(request: Request) -> Response:
        return FileResponse(STATIC / "index.html", media_type="text/html")

    async def state(request: Request) -> Response:
        return JSONResponse(hub.state())

    async def caution(request: Request) -> Response:
        return JSONResponse({"caution": CAUTION})

    async def series(request: Request) -> Response:
        doc = hub.station_series(request.path_params["station"])
        if doc is None:
            return JSONResponse({"error": f"unknown station {request.path_params['station']!r}"}, status_code=404)
        return Response(dumps(doc), media_type="application/json")

    async def stream(request: Request) -> Response:
        if hub.closed:
            return Response("shutting down", status_code=503, headers={"Retry-After": "2"})
        # Resume after Last-Event-ID (a reconnect) or ?since= (the seq of the page's /api/state load);
        # with neither, send everything still held.
        last = request.headers.get("last-event-id") or request.query_params.get("since") or "0"
        try:
            cursor = max(0, int(last))
        except ValueError:
            cursor = 0

        async def gen() -> AsyncIterator[str]:
            nonlocal cursor
            hub.clients += 1
            try:
                yield "retry: 2000\n\n"
                if cursor + 1 < hub.oldest_seq() or cursor > hub.seq:
                    # What it missed is no longer held (or the service restarted and numbers anew):
                    # tell it to reload the whole state.
                    cursor = hub.seq
                    yield f"id: {cursor}\nevent: resync\ndata: {{\"seq\": {cursor}}}\n\n"
                while True:
                    items = hub.since(cursor, CATCHUP_BATCH)
                    if items:
                        cursor = items[-1][0]
                        yield "".join(f"id: {seq}\nevent: {kind}\ndata: {data}\n\n" for seq, kind, data in items)
                        await asyncio.sleep(0)
                        continue
                    if hub.closed or await request.is_disconnected():
                        return  # closed: what was sent before close() has gone out first
                    # `after`: a close() or an item that came while is_disconnected() awaited
                    # would otherwise wait out the whole timeout
                    await hub.wait(5.0, after=cursor)
                    if not hub.since(cursor, 1):
                        yield ": keepalive\n\n"
            finally:
                hub.clients -= 1

        return StreamingResponse(gen(), media_type="text/event-stream",
                                 headers={"Cache-Control": "no-cache", "X-Accel-Buffering": "no"})

    async def metrics_plain(request: Request) -> Response:
        encoder, content_type = choose_encoder(request.headers.get("accept", ""))
        return Response(encoder(registry), media_type=content_type)

    metrics_app: Any = make_asgi_app(registry=registry)

    async def metrics(scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and not allowed(Request(scope)):
            await Response("token required", status_code=401)(scope, receive, send)
            return
        await metrics_app(scope, receive, send)

    static_app: ASGIApp = StaticFiles(directory=STATIC)

    async def static(scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http" and scope["method"] not in ("GET", "HEAD"):
            await Response("read-only", status_code=405)(scope, receive, send)
            return

        async def send_with_headers(message: Any) -> None:
            if message["type"] == "http.response.start":
                hdrs = list(message.get("headers", []))
                hdrs += [(k.lower().encode(), v.encode()) for k, v in _HEADERS.items() if k != "Cache-Control"]
                message = {**message, "headers": hdrs}
            await send(message)

        await static_app(scope, receive, send_with_headers)

    routes = [Route("/", guarded(index)), Route("/api/state", guarded(state)), Route("/api/stream", guarded(stream)),
              Route("/api/caution", guarded(caution)), Route("/api/series/{station}", guarded(series)),
              Route("/metrics", guarded(metrics_plain)),
              Mount("/static", app=static), Mount("/metrics", app=metrics)]
    return Starlette(routes=routes)
