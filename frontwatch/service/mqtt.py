"""MQTT plumbing shared by the service and the publisher: client construction (identity, session,
TLS, auth, last will), reconnect delays, and topic helpers."""

from __future__ import annotations

import asyncio
import contextlib
import random
import socket
import ssl
from dataclasses import dataclass
from typing import Any

import aiomqtt
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties

from .settings import ServiceSettings


@dataclass
class Backoff:
    """Exponential delays with full jitter between `low` and the current cap (so a fleet of
    clients does not reconnect in lock-step after a broker restart)."""

    low: float = 0.5
    high: float = 30.0
    attempt: int = 0

    def next(self) -> float:
        cap = min(self.high, self.low * (2 ** self.attempt))
        self.attempt += 1
        return random.uniform(self.low, max(self.low, cap))

    def reset(self) -> None:
        self.attempt = 0


def tls_context(settings: ServiceSettings) -> ssl.SSLContext | None:
    if not settings.broker.tls:
        return None
    t = settings.tls
    ctx = ssl.create_default_context(cafile=t.ca_file)
    if t.cert_file:
        ctx.load_cert_chain(t.cert_file, t.key_file)
    if t.insecure:
        ctx.check_hostname = False
    return ctx


def make_client(settings: ServiceSettings, *, client_id: str | None, persistent: bool,
                will: aiomqtt.Will | None = None, manual_ack: bool = False, timeout: float = 10.0) -> aiomqtt.Client:
    """A client for the configured broker. `persistent` keeps the session (and our queued QoS 1
    messages) at the broker while we are away: clean_session False, or a session expiry on MQTT 5."""
    b = settings.broker
    kwargs: dict[str, object] = {}
    if settings.mqtt5:
        kwargs["protocol"] = aiomqtt.ProtocolVersion.V5
        if persistent:
            props = Properties(PacketTypes.CONNECT)
            props.SessionExpiryInterval = settings.session_expiry_s
            kwargs["properties"] = props
            kwargs["clean_start"] = False
    else:
        kwargs["protocol"] = aiomqtt.ProtocolVersion.V311
        kwargs["clean_session"] = not persistent if client_id else None
    client = aiomqtt.Client(
        b.host, b.port, identifier=client_id, username=settings.user, password=settings.secret,
        will=will, keepalive=settings.keepalive_s, tls_context=tls_context(settings), timeout=timeout,
        # small packets (acks, events) go out at once instead of waiting on Nagle's algorithm
        socket_options=((socket.IPPROTO_TCP, socket.TCP_NODELAY, 1),),
        **kwargs,  # type: ignore[arg-type]
    )
    client.pending_calls_threshold = 2000  # outputs are published in batches; no warning per batch
    if manual_ack:
        # aiomqtt has no switch for this; paho acknowledges QoS 1 on receipt unless told not to,
        # and we only want to acknowledge once the message is safely in the store.
        client._client.manual_ack_set(True)
    return client


def ack(client: aiomqtt.Client, mid: int, qos: int) -> None:
    """Acknowledge one message received with manual acknowledgement."""
    if qos > 0:
        client._client.ack(mid, qos)


def flush_writes(client: aiomqtt.Client) -> None:
    """Write queued packets (our acks) now instead of on the next loop turn."""
    with contextlib.suppress(Exception):  # a dying connection: the broker will redeliver
        client._client.loop_write()


def station_of(topic: str, obs_prefix: str) -> str | None:
    """'frontwatch/obs/KB01' -> 'KB01' (None when the topic is not an observation topic)."""
    if not topic.startswith(obs_prefix):
        return None
    rest = topic[len(obs_prefix):]
    return rest if rest and "/" not in rest else None


def quiet_closed_socket_noise(loop: asyncio.AbstractEventLoop, ctx: dict[str, Any]) -> None:
    """Loop exception handler: aiomqtt may schedule a write registration for a socket that has just
    closed (a disconnect right after a publish); that one is harmless. Everything else as usual."""
    exc = ctx.get("exception")
    if isinstance(exc, OSError | KeyError) and "add_writer" in f"{ctx.get('message', '')} {ctx.get('handle', '')}":
        return
    loop.default_exception_handler(ctx)
