"""Publish observations to a broker in time order, N times real time or as fast as possible.

Used by `frontwatch publish` / `frontwatch replay --to`, by the demo, the tests and the benchmark.
Records go at QoS 1 on `<prefix>/obs/<station>` (or as JSON arrays on a gateway's topic). Values
are written with full float precision so the live service sees exactly what an offline replay
reads from the file. If the broker goes away the publisher reconnects with backoff and resends
from the oldest record it has no acknowledgement for (a few may arrive twice; the core's QC drops
duplicates).
"""

from __future__ import annotations

import asyncio
import json
import logging
import math
import time
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import aiomqtt

from ..config import NetworkConfig
from ..obs import CANONICAL, Observation
from ..timeutil import iso_z
from .mqtt import Backoff, make_client
from .settings import ServiceSettings, parse_broker_url

log = logging.getLogger("frontwatch.publish")

WINDOW = 200  # QoS 1 publishes in flight at once


def record_json(o: Observation) -> dict[str, Any]:
    """The canonical record with exact floats (repr round-trips) and null for missing values."""
    t = o.time
    ts = iso_z(t) if t == math.floor(t) else datetime.fromtimestamp(t, UTC).isoformat().replace("+00:00", "Z")
    rec: dict[str, Any] = {"station": o.station, "time": ts}
    for f in CANONICAL:
        v = getattr(o, f)
        rec[f] = None if v != v else v
    return rec


@dataclass
class PublishStats:
    messages: int = 0
    records: int = 0
    resent: int = 0
    reconnects: int = 0
    seconds: float = 0.0


def plan_messages(observations: Iterable[Observation], prefix: str, *, gateway: str | None = None,
                  batch: int = 1) -> list[tuple[float, str, bytes, int]]:
    """(data time, topic, payload, records) in time order; a gateway packs up to `batch` records."""
    out: list[tuple[float, str, bytes, int]] = []
    if gateway is None:
        for o in observations:
            out.append((o.time, f"{prefix}/obs/{o.station}", json.dumps(record_json(o)).encode(), 1))
        return out
    chunk: list[Observation] = []
    topic = f"{prefix}/obs/{gateway}"

    def flush() -> None:
        if chunk:
            out.append((chunk[0].time, topic, json.dumps([record_json(o) for o in chunk]).encode(), len(chunk)))
            chunk.clear()

    for o in observations:
        if chunk and len(chunk) >= batch:
            flush()
        chunk.append(o)
    flush()
    return out


async def publish_messages(messages: Sequence[tuple[float, str, bytes, int]], settings: ServiceSettings, *,
                           speed: float | None = None, stop: asyncio.Event | None = None,
                           progress: Callable[[int, float], None] | None = None,
                           client_id: str | None = None, rate: float | None = None) -> PublishStats:
    """Send planned messages at QoS 1; `speed` N = N times real time by data time, None = flat out.

    `rate` caps messages per second (a broker drops QoS 1 messages for a subscriber that falls
    too far behind: Mosquitto's max_queued_messages, 1000 by default).
    """
    stats = PublishStats()
    n = len(messages)
    acked = bytearray(n)
    pos = 0
    backoff = Backoff(settings.backoff_min_s, settings.backoff_max_s)
    t0 = messages[0][0] if messages else 0.0
    wall0: float | None = None
    rate_wall: float | None = None
    paused = 0.0  # wall time lost to reconnects is not made up by rushing
    started = time.perf_counter()
    first = True
    while pos < n and not (stop is not None and stop.is_set()):
        client = make_client(settings, client_id=client_id, persistent=client_id is not None, timeout=5.0)
        down_at = time.monotonic()
        try:
            async with client:
                if not first:
                    stats.reconnects += 1
                    paused += time.monotonic() - down_at
                first = False
                rate_wall = None
                backoff.reset()
                sem = asyncio.Semaphore(WINDOW)
                failed: list[BaseException] = []

                async def send(i: int, topic: str, payload: bytes, client: aiomqtt.Client = client,
                               sem: asyncio.Semaphore = sem, failed: list[BaseException] = failed) -> None:
                    try:
                        await client.publish(topic, payload, qos=1)
                        acked[i] = 1
                    except aiomqtt.MqttError as exc:
                        failed.append(exc)
                    finally:
                        sem.release()

                tasks: set[asyncio.Task[None]] = set()
                i = pos
                while i < n and not failed and not (stop is not None and stop.is_set()):
                    t, topic, payload, nrec = messages[i]
                    if speed:
                        if wall0 is None:
                            wall0 = time.monotonic()
                        due = wall0 + paused + (t - t0) / speed
                        delay = due - time.monotonic()
                        if delay > 0:
                            await asyncio.sleep(delay)
                    if rate:
                        if rate_wall is None:
                            rate_wall = time.monotonic() - i / rate
                        delay = rate_wall + i / rate - time.monotonic()
                        if delay > 0.002:
                            await asyncio.sleep(delay)
                    await sem.acquire()
                    task = asyncio.create_task(send(i, topic, payload))
                    tasks.add(task)
                    task.add_done_callback(tasks.discard)
                    stats.messages += 1
                    stats.records += nrec
                    if progress is not None and i % 500 == 0:
                        progress(i, t)
                    i += 1
                if tasks:
                    await asyncio.gather(*tasks, return_exceptions=True)
                while pos < n and acked[pos]:
                    pos += 1
                if failed:
                    raise failed[0]
                if i >= n and pos < n:
                    continue  # something unacknowledged without an error: send again
        except aiomqtt.MqttError as exc:
            while pos < n and acked[pos]:
                pos += 1
            stats.resent += sum(1 for j in range(pos, min(n, pos + 10 * WINDOW)) if acked[j])
            log.warning("publishing to %s interrupted (%s); resuming at message %d", settings.broker.url, exc, pos)
            await asyncio.sleep(backoff.next())
        if stop is not None and stop.is_set():
            break
    stats.seconds = time.perf_counter() - started
    return stats


def publish_files(paths: Sequence[str | Path], config: NetworkConfig, to: str, *, speed: float | None = None,
                  columns: dict[str, str] | None = None, prefix: str = "frontwatch", gateway: str | None = None,
                  batch: int = 100, username: str | None = None, password: str | None = None,
                  rate: float | None = None, report: bool = True) -> PublishStats:
    """Blocking entry point for `replay --to URL` / `publish`: read files in time order and publish
    them (speed 0 or None = as fast as possible). Prints a one-line summary to stderr."""
    import sys

    from ..replay import read_observations

    settings = ServiceSettings(broker=parse_broker_url(to), prefix=prefix, username=username, password=password,
                               db_path=None, http_port=None)
    msgs = plan_messages(read_observations(paths, config, columns or None), prefix, gateway=gateway, batch=batch)
    stats = asyncio.run(publish_messages(msgs, settings, speed=speed or None, rate=rate))
    if report:
        print(f"published {stats.records:,} records in {stats.messages:,} messages to {settings.broker.url} "
              f"in {stats.seconds:.1f} s ({stats.reconnects} reconnects)", file=sys.stderr)
    return stats
