"""MQTT plumbing shared by the service and the publisher: client construction (identity, session,
TLS, auth, last will), reconnect delays, topic helpers, and the service's fast paths through paho
(message callback, burst reads, corked acknowledgements, batch publishes)."""

from __future__ import annotations

import asyncio
import contextlib
import random
import socket
import ssl
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import aiomqtt
import paho.mqtt.client as paho
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


def receive_into(client: aiomqtt.Client, on_message: Callable[[Any, Any, Any], None]) -> None:
    """Hand each incoming message to `on_message(paho_client, userdata, paho_message)` directly.

    aiomqtt's `messages` iterator wraps every message in its own object, a queue entry and an
    awaited task, which costs about as much as everything else the receive path does; the service
    takes messages straight from paho's callback instead (on the event loop's thread, inside
    paho's socket read). The iterator then only serves to notice a lost connection."""
    client._client.on_message = on_message


class BurstReader:
    """Reads up to `burst` packets per socket wake-up instead of paho's one, and can pause reading.

    Install once connected (it replaces aiomqtt's one-packet reader on the socket). `arrived()`
    counts messages taken so far: a wake-up stops reading as soon as a read brought none (the socket
    is drained, or it was another kind of packet). `full()` true pauses reading (the broker then
    holds what we have not read, as TCP backpressure) until `resume()`; keep pauses short (the
    keep-alive answer is read by the same reader)."""

    def __init__(self, client: aiomqtt.Client, arrived: Callable[[], int], full: Callable[[], bool],
                 burst: int = 64) -> None:
        self.client = client
        self.arrived = arrived
        self.full = full
        self.burst = burst
        self.paused = False
        self.pauses = 0
        pc = client._client
        sock = pc.socket()
        self.fd = sock.fileno() if sock is not None else -1
        self._pending = getattr(sock, "pending", None)  # TLS: bytes decrypted but not read yet
        if self.fd >= 0:
            client._loop.add_reader(self.fd, self._read)
            # aiomqtt registers the socket for writing through call_soon_threadsafe (paho may ask
            # from its connect thread). Once connected every request comes from the loop's own
            # thread, and a deferred registration goes wrong after a direct write (flush_writes):
            # paho has written everything and unregistered, then the late registration arrives
            # and the loop wakes for a writable socket on every turn, for ever (a busy loop).
            pc.on_socket_register_write = self._register_write

    def _register_write(self, _client: Any, _userdata: Any, sock: Any) -> None:
        self.client._loop.add_writer(sock.fileno(), self._write)

    def _write(self) -> None:
        try:
            self.client._client.loop_write()
        except Exception as exc:  # as aiomqtt's own writer: a broken socket ends the connection
            fut = self.client._disconnected
            if not fut.done():
                fut.set_exception(exc)

    def _read(self) -> None:
        pc = self.client._client
        arrived, pending = self.arrived, self._pending
        try:
            for _ in range(self.burst):
                if self.full():
                    self.paused = True
                    self.pauses += 1
                    self.client._loop.remove_reader(self.fd)
                    return
                n = arrived()
                if pc.loop_read() != paho.MQTT_ERR_SUCCESS:
                    return
                if arrived() == n and not (pending is not None and pending() > 0):
                    return
        except Exception as exc:  # as aiomqtt's own reader: a broken socket ends the connection
            fut = self.client._disconnected
            if not fut.done():
                fut.set_exception(exc)

    def resume(self) -> None:
        if self.paused and pc_open(self.client):
            self.paused = False
            self.client._loop.add_reader(self.fd, self._read)


def pc_open(client: aiomqtt.Client) -> bool:
    """True while paho still has the socket (after a disconnect the reader must not come back)."""
    sock = client._client.socket()
    return sock is not None and sock.fileno() >= 0


def ack(client: aiomqtt.Client, mid: int, qos: int) -> None:
    """Acknowledge one message received with manual acknowledgement."""
    if qos > 0:
        client._client.ack(mid, qos)


_CORK = getattr(socket, "TCP_CORK", None)  # Linux
_PUBACK = 0x40  # MQTT control packet type 4 (PUBACK) in the high nibble


def coalesce_acks(pc: paho.Client) -> None:
    """Join runs of queued, unstarted PUBACK packets in paho's write queue into one packet each, so
    a chunk's acknowledgements take one send() instead of one each. paho does nothing with a
    written PUBACK but drop it, and the bytes and their order are unchanged, so this is invisible
    to the broker. Anything unexpected in the queue (another paho version) leaves it as it is."""
    try:
        q = pc._out_packet
        if len(q) < 2:
            return
        out: list[Any] = []
        run: list[Any] = []

        def close_run() -> None:
            if len(run) > 1:
                data = bytearray().join(run_p["packet"] for run_p in run)
                out.append({**run[-1], "pos": 0, "to_process": len(data), "packet": data})
            else:
                out.extend(run)
            run.clear()

        for p in q:
            if (p["command"] & 0xF0) == _PUBACK and p["pos"] == 0 and p.get("info") is None:
                run.append(p)
            else:
                close_run()
                out.append(p)
        close_run()
        if len(out) < len(q):
            q.clear()
            q.extend(out)
    except (AttributeError, KeyError, TypeError):
        return


def flush_writes(client: aiomqtt.Client) -> None:
    """Write queued packets (our acks) now instead of on the next loop turn, as few TCP segments.

    paho writes each packet with its own send(); with TCP_NODELAY each would be its own segment,
    and on loopback the broker's side of every segment is processed inside our send(). Corking
    the socket for the loop makes a chunk's acknowledgements one segment (sent at the uncork)."""
    pc = client._client
    sock = pc.socket()
    coalesce_acks(pc)
    cork = _CORK is not None and sock is not None and len(pc._out_packet) > 1
    with contextlib.suppress(Exception):  # a dying connection: the broker will redeliver
        if cork:
            sock.setsockopt(socket.IPPROTO_TCP, _CORK, 1)  # type: ignore[union-attr, arg-type]
        try:
            pc.loop_write()
        finally:
            if cork:
                sock.setsockopt(socket.IPPROTO_TCP, _CORK, 0)  # type: ignore[union-attr, arg-type]


class _Confirmations:
    """The publishes of one batch still waiting for the broker's acknowledgement (mid -> index)."""

    __slots__ = ("done", "index")

    def __init__(self, done: asyncio.Future[None]) -> None:
        self.done = done
        self.index: dict[int, int] = {}

    def confirm(self, mid: int) -> None:
        self.index.pop(mid, None)
        if not self.index and not self.done.done():
            self.done.set_result(None)


class BatchPublisher:
    """QoS 1 publishes of a batch handed to paho at once, written as one corked send, and confirmed
    together.

    aiomqtt's publish() makes an event, a task and a timeout for every message and walks its list
    of pending calls on each: about twice the rest of what a publish costs here (bench numbers in
    the commit). Acknowledgements arrive through paho's on_publish callback, taken over from
    aiomqtt while this publisher lives; those of publishes not made here (aiomqtt's own, e.g. the
    status) are handed on to aiomqtt's handler as before. One per connection."""

    def __init__(self, client: aiomqtt.Client) -> None:
        self.client = client
        self._waiting: dict[int, _Confirmations] = {}
        pc = client._client
        self._theirs = pc.on_publish
        pc.on_publish = self._on_publish

    def _on_publish(self, *args: Any) -> None:
        # paho (callback API version 2) calls (client, userdata, mid, reason_code, properties)
        c = self._waiting.pop(args[2], None)
        if c is not None:
            c.confirm(args[2])
        elif self._theirs is not None:
            self._theirs(*args)

    async def publish(self, items: Sequence[tuple[str, bytes, bool]], timeout: float) -> list[BaseException | None]:
        """Publish each (topic, payload, retain) at QoS 1, in order. For each: None once the broker
        acknowledged it, else why not (refused by paho, or no acknowledgement within `timeout` s)."""
        pc = self.client._client
        out: list[BaseException | None] = [None] * len(items)
        conf = _Confirmations(asyncio.get_running_loop().create_future())
        for i, (topic, payload, retain) in enumerate(items):
            info = pc.publish(topic, payload, 1, retain)
            if info.rc != paho.MQTT_ERR_SUCCESS:
                out[i] = aiomqtt.MqttCodeError(info.rc, "Could not publish message")
                continue
            conf.index[info.mid] = i
            self._waiting[info.mid] = conf
        if not conf.index:
            return out
        flush_writes(self.client)
        try:
            await asyncio.wait_for(conf.done, timeout)
        except TimeoutError:
            for mid, i in conf.index.items():
                self._waiting.pop(mid, None)
                out[i] = aiomqtt.MqttError("Operation timed out")
        return out


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
