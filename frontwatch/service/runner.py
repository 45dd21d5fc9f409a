"""The live service: one TaskGroup running the broker connection, the core, snapshots and the web app.

Flow: the receiver puts MQTT messages on a bounded inbox (full -> the oldest is dropped, counted
and acknowledged); the consumer takes what is waiting as one batch, decodes it, feeds the core in
arrival order, writes journal + outputs to the store in one transaction, then acknowledges the
messages (manual QoS 1 acks, so nothing acknowledged is ever lost) and wakes the publisher, which
sends stored outputs (events QoS 1; alerts and forecasts QoS 1 retained) and marks them sent.
The core is pure and synchronous; a batch is processed without awaiting, so a snapshot taken
between batches is consistent with the journal position it records.

While run() runs, the store is written from one thread of its own, in submission order: SQLite
does its work without the GIL, so a batch's transaction overlaps the core's work on the next
batch (on gateway traffic the store was a tenth of the service's time). Acknowledgements, the
dashboard and webhooks follow each commit once it is done, back on the event loop, in order.
"""

from __future__ import annotations

import asyncio
import contextlib
import gc
import itertools
import logging
import socket
import sys
import time
from bisect import bisect_right
from collections import deque
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import aiomqtt
import uvicorn

from ..alerts.webhook import WebhookSender
from ..config import NetworkConfig
from ..engine import BATCH_MIN, Engine
from ..errors import DecodeError
from ..events import PassageEvent
from ..network.race import analyse_pattern
from ..obs import CANONICAL, Observation, Records, decode_payload_records
from .hub import DashboardHub
from .metrics import ServiceMetrics
from .mqtt import (
    Backoff,
    BatchPublisher,
    BurstReader,
    ack,
    flush_writes,
    make_client,
    receive_into,
    station_of,
)
from .settings import ServiceSettings
from .store import Store, output_key, snapshot_text
from .web import make_app

log = logging.getLogger("frontwatch.service")

ACK_EVERY = 10  # commit and acknowledge at least this often: half Mosquitto's in-flight window of 20,
CHUNK = 10  # so the broker keeps sending the other half while the core works on a chunk
COMMIT_EVERY_S = 0.005  # ... or this long after the oldest unacknowledged message
WINDOW = 20  # Mosquitto's default max_inflight_messages: QoS 1 messages it sends ahead of our acks
BIG_CHUNK = 200  # messages in one batch when more than WINDOW wait
BIG_CHUNK_BYTES = 256_000  # ... or this much payload (gateway arrays: about 1,200 records)
READ_BURST = 64  # packets read from the socket per wake-up (paho reads one per call)
READ_AHEAD = 400  # messages waiting in the inbox before reading pauses
READ_AHEAD_BYTES = 8_000_000  # ... or this much payload


@dataclass(slots=True)
class _Item:
    gen: int  # connection generation: acks are only valid on the connection that delivered it
    mid: int
    qos: int
    topic: str
    payload: bytes
    received: float  # wall clock


class _QuietServer(uvicorn.Server):
    """uvicorn without its own signal handling: the service owns Ctrl-C / SIGTERM."""

    @contextlib.contextmanager
    def capture_signals(self) -> Iterator[None]:
        yield


STORE_SWITCH_S = 0.0005  # the interpreter's thread switch interval while the writer thread runs
COMMITS_IN_FLIGHT = 8  # store jobs handed to the writer thread before the consumer waits for it
WEBHOOK_INFLIGHT = 64  # alert deliveries in flight at once; beyond that they are dropped and counted


class Service:
    """The live service for one network. `run(stop)` returns once `stop` is set and all is saved."""

    def __init__(self, config: NetworkConfig, settings: ServiceSettings, *,
                 metrics: ServiceMetrics | None = None, hub: DashboardHub | None = None,
                 on_output: Callable[[dict[str, Any]], None] | None = None) -> None:
        self.config = config
        self.settings = settings
        self.metrics = metrics or ServiceMetrics()
        self.hub = hub or DashboardHub(config)
        self.on_output = on_output
        self.obs_prefix = settings.topic("obs") + "/"
        self.gateways = set(config.network.gateways)
        self.store = Store(settings.db_path if settings.db_path is not None else ":memory:")
        self.engine = Engine(config)
        self._naive_tz = config.naive_tz
        self.inbox: deque[_Item] = deque()
        self._ready = asyncio.Event()
        self._publish_wakeup = asyncio.Event()
        self._stopping = asyncio.Event()
        self._consumer_done = asyncio.Event()
        self.connected = asyncio.Event()
        self.web_port: int | None = None
        self.web_ready = asyncio.Event()
        self._client: aiomqtt.Client | None = None
        self._gen = 0
        self._unknown_n = 0  # distinct unknown stations reported so far
        self._unknown_total = 0
        self._qc_seen: dict[str, int] = {}
        self._events_seen: dict[str, int] = {}
        self._last_snapshot = 0.0
        self.taken = 0  # messages taken by the core since start (for tests and the demo)
        self._n_in = 0  # messages accepted from the broker since start
        self._reader: BurstReader | None = None
        self._outbox: BatchPublisher | None = None  # the connection's publisher of outputs
        # Reading pauses while READ_AHEAD messages or READ_AHEAD_BYTES of payload wait (the broker
        # keeps the rest: it may send far more than its in-flight window after a reconnect). A
        # queue_size below READ_AHEAD drops the oldest instead, as before.
        self._inbox_bytes = 0
        self._topics: dict[str, tuple[str | None, Callable[[str], bool] | None]] = {}  # topic -> station, gateway
        self._unjournalled: list[tuple[str, bytes]] = []  # fed to the core, not yet in the journal
        self._unacked: list[_Item] = []  # fed to the core, not yet acknowledged
        self._first_pending = 0.0
        self._qc_mirror: dict[str, int] = {}
        self._qc_total = 0
        self._core_errors = 0
        # The store's writer thread (while run() runs; None: the store is called directly).
        self._writer: ThreadPoolExecutor | None = None
        self._loop: asyncio.AbstractEventLoop | None = None
        self._store_jobs = 0  # handed to the writer, not yet done
        self._store_done = asyncio.Event()
        self._store_error: BaseException | None = None
        # Alert webhooks (DESIGN 1): posted from the loop, at most WEBHOOK_INFLIGHT at once, so a
        # slow endpoint never holds up the core; each delivery retries with backoff and is counted.
        self.webhooks = WebhookSender()
        self._site_hooks = {s.id: list(s.webhooks) for s in config.sites if s.webhooks}
        self._hook_tasks: set[asyncio.Task[bool]] = set()

    # --- start-up: restore the core and catch up on the journal ------------------------------
    def recover(self) -> int:
        """Restore the newest snapshot and re-feed the journal after it; returns records re-fed."""
        snap = self.store.latest_snapshot()
        start = 0
        if snap is not None:
            start, state = snap
            self.engine = Engine.restore(self.config, state)
            log.info("restored the core from its snapshot (journal position %d)", start)
        n = 0
        outputs: list[tuple[str, str, dict[str, Any], bool, float]] = []
        for _seq, topic, payload in self.store.journal_after(start):
            got, _errors = self._decode(topic, payload)
            for o in (got.observations() if isinstance(got, Records) else got):
                n += 1
                for out in self.engine.feed(o):
                    outputs.append(self._route(out.to_dict(), 0.0))
        if outputs:
            new = self.store.commit_batch((), outputs)
            log.info("re-fed %d journalled records: %d outputs, %d not stored before", n, len(outputs), len(new))
        self._sync_engine_counters(count=False)
        self._new_flags()  # the restored counts are the baseline for per-record flags
        for stored in self.store.outputs()[-200:]:
            self.hub.emit(stored)
        return n

    def warm_up(self) -> float:
        """Run a throwaway copy of the core over a made-up passage before taking traffic.

        The core's first change-point evaluation in a process costs a few hundred milliseconds
        (compiled loops being loaded); live, the outputs waiting behind it showed up as the p99 of
        observation-to-output latency. The copy is discarded: the real core's state, and so every
        output, is unchanged. Best effort: a failure here is logged and the service goes on.
        Returns the seconds it took."""
        t0 = time.perf_counter()
        try:
            st = self.config.stations[0]
            eng = Engine(self.config)
            t = datetime(2030, 1, 15, 12, tzinfo=self.config.tz or UTC).timestamp()  # local noon
            on = st.onshore_from_deg
            made_up = []
            for k in range(180):  # 90 min offshore and warm, then onshore, cooler, moister
                a = k >= 90
                made_up.append(Observation(st.id, t + 60.0 * k, on if a else (on + 180.0) % 360.0,
                                           5.0 if a else 3.0, 7.0 if a else 4.0, 21.0 if a else 26.0,
                                           17.0 if a else 12.0, 1012.3 if a else 1012.0, 0.0))
            for o in made_up:
                eng.feed(o)
            Engine(self.config).feed_many(made_up)  # the batch path's compiled scan too (gateway chunks)
            analyse_pattern([(o.time, o.wind_dir_deg) for o in made_up[:40]])  # the race monitor's kernel
        except Exception:  # the real core will report its own trouble, record by record
            log.debug("core warm-up failed", exc_info=True)
        dt = time.perf_counter() - t0
        log.debug("core warmed up in %.2f s", dt)
        return dt

    # --- the whole service ------------------------------------------------------------------
    async def run(self, stop: asyncio.Event | None = None) -> None:
        stop = stop or asyncio.Event()
        self.warm_up()
        self.recover()
        # What is alive now (modules, the compiled core, the restored state) lives as long as the
        # process: keep it out of the cyclic collector's full passes, which otherwise walk it all
        # (tens of ms each at gateway rates, seen as stalls of the consumer).
        gc.collect()
        gc.freeze()
        self._last_snapshot = time.monotonic()
        self._loop = asyncio.get_running_loop()
        self._writer = ThreadPoolExecutor(max_workers=1, thread_name_prefix="frontwatch-store")
        # Each SQLite call of the writer hands the GIL back and must win it again; at Python's
        # default 5 ms switch interval a commit then waited behind several of the core's batches,
        # and its acknowledgements held up the broker's in-flight window.
        switch = sys.getswitchinterval()
        sys.setswitchinterval(STORE_SWITCH_S)
        try:
            async with asyncio.TaskGroup() as tg:
                tg.create_task(self._watch_stop(stop), name="stop")
                tg.create_task(self._broker_loop(), name="broker")
                tg.create_task(self._consumer(), name="core")
                tg.create_task(self._snapshotter(), name="snapshots")
                if self.settings.http_port is not None:
                    tg.create_task(self._web(), name="web")
        finally:
            writer, self._writer = self._writer, None
            writer.shutdown(wait=True)  # what was handed to it is stored; from here the store is called directly
            sys.setswitchinterval(switch)
            self.snapshot()
            self.store.close()
            log.info("stopped; state saved")

    async def _watch_stop(self, stop: asyncio.Event) -> None:
        await stop.wait()
        self._stopping.set()
        self._ready.set()
        self._publish_wakeup.set()

    def snapshot(self) -> None:
        self.commit()  # the snapshot may only cover input that is in the journal
        # The state's text is made here, from the core as it is now; the writer stores it after
        # the commit above, so the journal position it records covers exactly what was fed.
        body, last = snapshot_text(self.engine.snapshot()), dict(self.engine.stats.last_time)
        if self._writer is None:
            self.store.save_snapshot(body, last)
            self.metrics.snapshots.inc()
        else:
            self._submit(self._snapshot_done, self.store.save_snapshot, body, last)

    def _snapshot_done(self, fut: Future[Any]) -> None:
        if self._store_job_done(fut):
            self.metrics.snapshots.inc()

    # --- the store's writer thread -----------------------------------------------------------
    def _submit(self, done: Callable[[Future[Any]], None], fn: Callable[..., Any], *args: Any) -> None:
        """Hand `fn(*args)` to the writer; `done(future)` runs on the event loop once it is done."""
        assert self._writer is not None and self._loop is not None
        self._store_jobs += 1
        fut = self._writer.submit(fn, *args)
        loop = self._loop
        fut.add_done_callback(lambda f: loop.call_soon_threadsafe(done, f))

    def _store_job_done(self, fut: Future[Any]) -> bool:
        """Book a finished store job; False if it failed (the consumer raises it: the service stops,
        and the messages it had not acknowledged come again from the broker)."""
        self._store_jobs -= 1
        self._store_done.set()
        exc = fut.exception()
        if exc is not None:
            if self._store_error is None:
                self._store_error = exc
            self._ready.set()
            return False
        return True

    async def _store_call(self, fn: Callable[..., Any], *args: Any) -> Any:
        """fn(*args) on the store, after every job handed to the writer before it."""
        if self._writer is None:
            return fn(*args)
        return await asyncio.wrap_future(self._writer.submit(fn, *args))

    async def _store_settled(self) -> None:
        """Wait until every job handed to the writer is done and followed up."""
        while self._store_jobs:
            self._store_done.clear()
            await self._store_done.wait()

    def settled(self) -> bool:
        """Nothing in hand: the inbox empty, every batch stored and acknowledged, every output sent."""
        return not self.inbox and not self._store_jobs and not self._unjournalled and not self.store.unsent

    # --- broker connection ------------------------------------------------------------------
    async def _broker_loop(self) -> None:
        s = self.settings
        status = s.topic("status")
        backoff = Backoff(s.backoff_min_s, s.backoff_max_s)
        first = True
        was_up = False
        failures = 0
        while not self._stopping.is_set():
            client = make_client(s, client_id=s.client_id, persistent=True, manual_ack=True,
                                 will=aiomqtt.Will(status, b"offline", qos=1, retain=True))
            gen = self._gen + 1
            receive_into(client, self._on_message(gen))
            try:
                async with client:
                    self._gen = gen
                    self._client = client
                    self._reader = BurstReader(client, lambda: self._n_in,
                                               self._inbox_full, READ_BURST)
                    self._outbox = BatchPublisher(client)
                    self.metrics.connected.set(1)
                    if not first:
                        self.metrics.reconnects.inc()
                    log.info("connected to %s as %r%s", s.broker.url, s.client_id,
                             "" if first else f" (after {failures} failed attempt(s))")
                    first, was_up, failures = False, True, 0
                    backoff.reset()
                    await client.publish(status, b"online", qos=1, retain=True)
                    await client.subscribe(self.obs_prefix + "+", qos=1)
                    self.connected.set()
                    await self._connected_session(client)
                    if self._stopping.is_set():
                        with contextlib.suppress(TimeoutError):
                            await asyncio.wait_for(self._flush(client), 5)  # what is left goes next start
                        await client.publish(status, b"offline", qos=1, retain=True, timeout=3)
            except aiomqtt.MqttError as exc:
                failures += 1
                if was_up:
                    log.warning("lost the broker %s (%s); reconnecting with backoff", s.broker.url, exc)
                elif failures == 1:
                    log.warning("broker %s unavailable (%s); retrying with backoff", s.broker.url, exc)
                was_up = False
            finally:
                self._client = None
                self._reader = None
                self._outbox = None
                self.connected.clear()
                self.metrics.connected.set(0)
            if self._stopping.is_set():
                return
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self._stopping.wait(), backoff.next())

    async def _connected_session(self, client: aiomqtt.Client) -> None:
        """Receive and publish until the connection drops (raises MqttError) or we stop."""
        tasks = [asyncio.create_task(self._receive(client)), asyncio.create_task(self._publisher(client)),
                 asyncio.create_task(self._stopping.wait())]
        try:
            done, _ = await asyncio.wait(tasks, return_when=asyncio.FIRST_COMPLETED)
        finally:
            for t in tasks:
                t.cancel()
            await asyncio.gather(*tasks, return_exceptions=True)
        for t in done:
            if not t.cancelled() and t.exception() is not None:
                raise t.exception()  # type: ignore[misc]
        if self._stopping.is_set():
            # Let the core finish its batch so its outputs go out before we say offline.
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self._consumer_done.wait(), 5)
                await asyncio.wait_for(self._store_settled(), 5)

    async def _receive(self, client: aiomqtt.Client) -> None:
        """Ends (MqttError) when the connection drops. Messages come through `_accept`, called by
        paho directly (see mqtt.receive_into); any that reach aiomqtt's queue are taken here."""
        gen = self._gen
        async for msg in client.messages:
            self._accept(gen, msg.mid, msg.qos, msg.topic.value, msg.payload)

    def _on_message(self, gen: int) -> Callable[[Any, Any, Any], None]:
        """paho's message callback for connection `gen` (its message ids are only valid on it)."""
        accept = self._accept

        def on_message(_client: Any, _userdata: Any, msg: Any) -> None:
            accept(gen, msg.mid, msg.qos, msg.topic, msg.payload)

        return on_message

    def _accept(self, gen: int, mid: int, qos: int, topic: str, payload: Any) -> None:
        """One message in: onto the bounded inbox (full: the oldest is dropped, counted, acknowledged)."""
        if type(payload) is not bytes:
            payload = bytes(payload) if isinstance(payload, bytes | bytearray) else str(payload).encode()
        inbox = self.inbox
        if len(inbox) >= self.settings.queue_size:
            old = inbox.popleft()
            self._inbox_bytes -= len(old.payload)
            self.metrics.dropped.inc()
            self._ack(old)
        inbox.append(_Item(gen, mid, qos, topic, payload, time.time()))
        self._inbox_bytes += len(payload)
        self._n_in += 1
        self._ready.set()

    def _ack(self, item: _Item) -> None:
        c = self._client
        if c is not None and item.gen == self._gen:
            with contextlib.suppress(Exception):  # a dying connection: the broker will redeliver
                ack(c, item.mid, item.qos)

    # --- the core -----------------------------------------------------------------------------
    async def _consumer(self) -> None:
        try:
            while True:
                if self._store_error is not None:
                    raise self._store_error
                while self._store_jobs >= COMMITS_IN_FLIGHT:  # the writer is behind: let it catch up
                    self._store_done.clear()
                    await self._store_done.wait()
                if not self.inbox:
                    if self._stopping.is_set():
                        self.commit()
                        return
                    self.metrics.queue_depth.set(0)
                    self._ready.clear()
                    if self._unjournalled:
                        # Group commit: wait a little for more, then journal and acknowledge.
                        wait = self._first_pending + COMMIT_EVERY_S - time.monotonic()
                        if wait <= 0:
                            self.commit()
                            continue
                        with contextlib.suppress(TimeoutError):
                            await asyncio.wait_for(self._ready.wait(), wait)
                    else:
                        await self._ready.wait()
                    continue
                if self._stopping.is_set():
                    self.commit()
                    return  # unacknowledged messages stay with the broker for next time
                batch = self._take()
                r = self._reader
                if r is not None and r.paused and len(self.inbox) < READ_AHEAD // 2 and \
                        self._inbox_bytes < READ_AHEAD_BYTES // 2:
                    r.resume()
                self.metrics.queue_depth.set(len(self.inbox))
                self.process_batch(batch)
                if self._snapshot_due():
                    self.snapshot()
                await asyncio.sleep(0)
        finally:
            self._consumer_done.set()

    def _take(self) -> list[_Item]:
        """The next chunk of the inbox to process (and then acknowledge) as one batch.

        Within the broker's in-flight window (WINDOW or fewer waiting) CHUNK messages, so their
        acknowledgements go out while the broker still has the rest of its window in flight to us.
        A longer inbox (a backlog the broker sends unwindowed, e.g. after a reconnect) is taken in
        larger chunks, up to BIG_CHUNK messages or BIG_CHUNK_BYTES of payload: fewer transactions,
        acknowledgement writes and dashboard updates per message, and still short loop turns."""
        inbox = self.inbox
        n = len(inbox)
        if n <= WINDOW:
            batch = [inbox.popleft() for _ in range(min(n, CHUNK))]
            self._inbox_bytes -= sum(len(i.payload) for i in batch)
            return batch
        batch = []
        size = 0
        while inbox and len(batch) < BIG_CHUNK and size < BIG_CHUNK_BYTES:
            item = inbox.popleft()
            size += len(item.payload)
            batch.append(item)
        self._inbox_bytes -= size
        return batch

    def _inbox_full(self) -> bool:
        return len(self.inbox) >= READ_AHEAD or self._inbox_bytes >= READ_AHEAD_BYTES

    def _decode(self, topic: str, payload: bytes) -> tuple[Records | list[Observation], list[Any]]:
        known = self._topics.get(topic)
        if known is None:
            st = station_of(topic, self.obs_prefix)
            gateway = st is not None and (st in self.gateways or topic in self.gateways)
            known = (st, _anyone if gateway else None)
            if len(self._topics) < 100_000:  # bounded: one entry per topic seen
                self._topics[topic] = known
        st, speaks = known
        if st is None:
            return [], []
        try:
            return decode_payload_records(payload, topic_station=st, may_speak_for=speaks, naive_tz=self._naive_tz)
        except (RecursionError, MemoryError, ValueError, TypeError) as exc:
            # The decoder refuses what it knows; a payload that trips the JSON parser itself (nesting
            # too deep) must not stop the stream either.
            return [], [DecodeError(f"undecodable payload: {type(exc).__name__}", station=st, code="undecodable")]

    def process_batch(self, batch: list[_Item]) -> None:
        """Decode, feed, store; synchronous on purpose (see the module docstring).

        The chunk's records are fed to the core in arrival order: from engine.BATCH_MIN records
        in one Engine.feed_columns call (station by station through the compiled scan; the same
        outputs, order and state as record by record), fewer one by one. Each output carries the
        arrival time of the message whose record caused it (the latency histogram's start).
        Journal rows and acks are grouped: they are committed (then acknowledged) with the outputs
        of a batch that has any, after ACK_EVERY messages, or COMMIT_EVERY_S after the oldest
        waiting one, so a quiet feed does not pay one transaction per record. Until then the
        messages stay unacknowledged, so a crash loses nothing: the broker sends them again."""
        m = self.metrics
        eng = self.engine
        known = eng.detectors
        self.taken += len(batch)
        if not self._unjournalled:
            self._first_pending = time.monotonic()
        self._unacked.extend(batch)
        journal = self._unjournalled
        outputs: list[tuple[str, str, dict[str, Any], bool, float]] = []
        # each station's newest record of the batch: (its message's records, index or -1 for an
        # Observation, arrival); an Observation is made only for the winners, at the end
        latest: dict[str, tuple[Records | Observation, int, float]] = {}
        refused: dict[str, int] = {}  # counted per batch, not per record (same totals)
        parts: list[Records | list[Observation]] = []  # each message's records, in arrival order
        starts: list[int] = []  # index (in the chunk's records) of each message's first record
        arrived: list[float] = []  # ... and that message's arrival (wall clock)
        n_rec = 0
        for item in batch:
            got, errors = self._decode(item.topic, item.payload)
            for err in errors:
                refused[err.code] = refused.get(err.code, 0) + 1
            if not got:
                continue
            received = item.received
            if isinstance(got, Records):  # a gateway's array, as columns
                if not known.keys().isdisjoint(got.station):
                    journal.append((item.topic, item.payload))
                for sid, i in dict(zip(got.station, range(len(got)), strict=True)).items():  # each station's last
                    latest[sid] = (got, i, received)
            else:
                if any(o.station in known for o in got):
                    journal.append((item.topic, item.payload))
                for o in got:
                    latest[o.station] = (o, -1, received)
            parts.append(got)
            starts.append(n_rec)
            arrived.append(received)
            n_rec += len(got)
        flags: dict[str, list[str]] = {}
        t0 = time.perf_counter()
        if n_rec >= BATCH_MIN:
            station, columns = _columns(parts)
            try:
                produced = eng.feed_columns(station, columns, flags)
            except Exception:  # a bug in the core must not stop the stream: count, report once
                self._core_error(Observation(station[0], columns["time"][0]), n_rec)
                produced = []
            for i, out in produced:
                outputs.append(self._route(out.to_dict(), arrived[bisect_right(starts, i) - 1]))
            if flags:
                self._new_flags()  # the per-record path below compares against these counts
        elif n_rec:
            records = [o for part in parts
                       for o in (part.observations() if isinstance(part, Records) else part)]
            self._feed_each(records, starts, arrived, outputs, flags)
        t_core = time.perf_counter() - t0
        # The dashboard gets each station's newest record of the batch: every record at live rates
        # (a batch is one message), a sample when catching up on a backlog.
        seen = m.station_seen
        shown = []
        for sid, (rec, i, received) in latest.items():
            if sid in known:
                o = rec.observation(i) if isinstance(rec, Records) else rec
                seen[sid] = (received, o.time)
                shown.append((o, flags.get(sid, ())))
        if shown:
            self.hub.observe_many(shown)
        m.messages.inc(len(batch))
        for code, k in refused.items():
            m.refused.labels(code).inc(k)
        if n_rec:
            m.records.inc(n_rec)
            m.processing.observe(t_core / n_rec)
        self._sync_engine_counters()
        if outputs or len(self._unacked) >= ACK_EVERY or \
                time.monotonic() - self._first_pending >= COMMIT_EVERY_S:
            self.commit(outputs)

    def _feed_each(self, records: list[Observation], starts: list[int], arrived: list[float],
                   outputs: list[tuple[str, str, dict[str, Any], bool, float]], flags: dict[str, list[str]]) -> None:
        """A small chunk record by record (Engine.feed), a failing record counted and skipped alone."""
        feed = self.engine.feed
        qc = self.engine.stats.qc
        k = 0
        for i, o in enumerate(records):
            while k + 1 < len(starts) and starts[k + 1] <= i:
                k += 1
            try:
                produced = feed(o)
            except Exception:  # a bug in the core must not stop the stream: count, report once
                self._core_error(o)
                continue
            if produced:
                for out in produced:
                    outputs.append(self._route(out.to_dict(), arrived[k]))
            if qc.total() != self._qc_total:
                flags.setdefault(o.station, []).extend(self._new_flags())

    def commit(self, outputs: list[tuple[str, str, dict[str, Any], bool, float]] | None = None) -> None:
        """Journal what was fed, store `outputs`, then acknowledge the messages to the broker."""
        journal, self._unjournalled = self._unjournalled, []
        acks, self._unacked = self._unacked, []
        outs = outputs or []
        if self._writer is None:
            self._committed(set(self.store.commit_batch(journal, outs)) if (journal or outs) else set(), acks, outs)
        elif journal or outs or self._store_jobs:  # (an ack may not overtake an earlier commit)
            self._submit(lambda f: self._commit_done(f, acks, outs), self.store.commit_batch, journal, outs)
        else:
            self._committed(set(), acks, outs)

    def _commit_done(self, fut: Future[list[str]], acks: list[_Item],
                     outputs: list[tuple[str, str, dict[str, Any], bool, float]]) -> None:
        if self._store_job_done(fut):
            self._committed(set(fut.result()), acks, outputs)

    def _committed(self, new: set[str], acks: list[_Item],
                   outputs: list[tuple[str, str, dict[str, Any], bool, float]]) -> None:
        """After a batch is stored: acknowledge its messages; show, hand on and publish its new outputs."""
        for item in acks:
            self._ack(item)
        if acks and self._client is not None:
            flush_writes(self._client)
        if not outputs:
            return
        for key, _topic, payload, _retain, _created in outputs:
            if key in new:
                self.hub.emit(payload)
                if self.on_output is not None:
                    self.on_output(payload)
                if payload.get("type") == "alert" and payload.get("site") in self._site_hooks:
                    self._post_webhooks(payload)
        if new:
            self._publish_wakeup.set()

    def _post_webhooks(self, alert: dict[str, Any]) -> None:
        for url in self._site_hooks[alert["site"]]:
            if len(self._hook_tasks) >= WEBHOOK_INFLIGHT:
                self.metrics.webhooks.labels("dropped").inc()
                continue
            task = asyncio.get_running_loop().create_task(self.webhooks.send(url, alert))
            self._hook_tasks.add(task)
            task.add_done_callback(self._webhook_done)

    def _webhook_done(self, task: asyncio.Task[bool]) -> None:
        self._hook_tasks.discard(task)
        ok = not task.cancelled() and task.exception() is None and task.result()
        self.metrics.webhooks.labels("sent" if ok else "failed").inc()

    def _core_error(self, o: Observation, n: int = 1) -> None:
        """A record (or a chunk of `n` fed at once, `o` its first) the core failed on: counted,
        reported once. A chunk's failure leaves the core part-way through it."""
        self.metrics.refused.labels("core_error").inc(n)
        if not self._core_errors:
            log.exception("the core failed on %s of station %r at %s; such records are counted "
                          "(frontwatch_records_refused_total{reason=\"core_error\"}) and skipped",
                          "a record" if n == 1 else f"a chunk of {n} records, the first", o.station, o.time)
        self._core_errors += 1

    def _new_flags(self) -> list[str]:
        """QC flags raised since the last call (the core counts them; the dashboard wants them)."""
        qc = self.engine.stats.qc
        new = [k for k, v in qc.items() if v > self._qc_mirror.get(k, 0)]
        self._qc_mirror = dict(qc)
        self._qc_total = qc.total()
        return new

    def _route(self, out: dict[str, Any], received: float) -> tuple[str, str, dict[str, Any], bool, float]:
        kind = out.get("type")
        if kind is None:
            return (out["id"], self.settings.topic("events", out["station"]), out, False, received)
        # Alerts and forecasts are retained: a newcomer sees each site's current state.
        return (output_key(out), self.settings.topic(f"{kind}s", str(out.get("site"))), out, True, received)

    def _sync_engine_counters(self, count: bool = True) -> None:
        """Carry the core's QC and event counters into the metrics (the core counts, we export)."""
        st = self.engine.stats
        for name, src, metric in (("qc", st.qc, self.metrics.qc_flags), ("ev", st.events, self.metrics.events)):
            seen = self._qc_seen if name == "qc" else self._events_seen
            for k, v in src.items():
                d = v - seen.get(k, 0)
                if d:
                    seen[k] = v
                    if count and d > 0:
                        metric.labels(k).inc(d)
        unknown = st.unknown_stations
        if len(unknown) > self._unknown_n:
            # New unknown stations are appended to the counter: log the first few, once each.
            for sid in itertools.islice(unknown, self._unknown_n, None):
                if self._unknown_n < 20:
                    log.warning("records from station %r, which is not in %s, are counted and ignored",
                                sid, self.config.source)
                elif self._unknown_n == 20:
                    log.warning("more unknown stations; frontwatch_unknown_station_records_total counts them")
                self._unknown_n += 1
        total = sum(unknown.values()) if unknown else 0
        if total > self._unknown_total:
            if count:
                self.metrics.unknown.inc(total - self._unknown_total)
            self._unknown_total = total

    def _snapshot_due(self) -> bool:
        now = time.monotonic()
        if now - self._last_snapshot >= self.settings.snapshot_every_s:
            self._last_snapshot = now
            return True
        return False

    async def _snapshotter(self) -> None:
        """Snapshots on the interval even when the feed is quiet (the consumer does it when busy)."""
        while not self._stopping.is_set():
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self._stopping.wait(), self.settings.snapshot_every_s)
            if not self._stopping.is_set() and self._snapshot_due():
                self.snapshot()

    # --- outputs ------------------------------------------------------------------------------
    async def _publisher(self, client: aiomqtt.Client) -> None:
        while True:
            await self._flush(client)
            if self._stopping.is_set():
                return
            self._publish_wakeup.clear()
            await self._publish_wakeup.wait()

    async def _flush(self, client: aiomqtt.Client) -> None:
        """Send every stored output the broker has not acknowledged yet, oldest first.

        Publishes of a batch are in flight together (the client sends them in order); each is
        marked sent once the broker acknowledged it."""
        outbox = self._outbox  # made with the connection, before any session can flush
        assert outbox is not None and outbox.client is client
        while True:
            pending = await self._store_call(self.store.unpublished)
            if not pending:
                return
            results = await outbox.publish([(p.topic, p.payload.encode(), p.retain) for p in pending],
                                           client.timeout)
            done: list[int] = []
            now = time.time()
            failure: BaseException | None = None
            for p, res in zip(pending, results, strict=True):
                if res is not None:
                    failure = failure or res
                    continue
                done.append(p.n)
                self.metrics.outputs.labels(p.type).inc()
                if p.created > 0:
                    self.metrics.latency.observe(max(0.0, now - p.created))
            await self._store_call(self.store.mark_published, done)
            if failure is not None:
                raise failure

    # --- web ---------------------------------------------------------------------------------
    async def _web(self) -> None:
        s = self.settings
        app = make_app(self.hub, self.metrics.registry, s.http_token)
        sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        sock.bind((s.http_host, s.http_port or 0))
        self.web_port = sock.getsockname()[1]
        server = _QuietServer(uvicorn.Config(app, log_level="warning", lifespan="off", access_log=False))
        task = asyncio.create_task(server.serve(sockets=[sock]))
        self.web_ready.set()
        try:
            await self._stopping.wait()
        finally:
            self.hub.close()  # open event streams end, or the graceful stop would wait for them
            server.should_exit = True
            try:
                await asyncio.wait_for(task, 10)
            except TimeoutError:
                log.warning("the web server did not stop within 10 s")
            sock.close()


def _columns(parts: list[Records | list[Observation]]) -> tuple[list[str], dict[str, list[float]]]:
    """The chunk's records as columns (Engine.feed_columns), in arrival order."""
    station: list[str] = []
    time_: list[float] = []
    values: list[list[float]] = [[] for _ in CANONICAL]
    for part in parts:
        if isinstance(part, Records):
            station.extend(part.station)
            time_.extend(part.time)
            for acc, col in zip(values, part.values, strict=True):
                acc.extend(col)
        else:
            st, t, *cols = zip(*part, strict=True)
            station.extend(st)
            time_.extend(t)
            for acc, c in zip(values, cols, strict=True):
                acc.extend(c)
    return station, {"time": time_, **dict(zip(CANONICAL, values, strict=True))}


def _anyone(_station: str) -> bool:
    """A gateway's topic may carry records of any station (unknown ones are counted by the core)."""
    return True


def is_event(out: object) -> bool:
    return isinstance(out, PassageEvent) or (isinstance(out, dict) and "type" not in out)
