"""Benchmark of the live service on a real broker, side by side in one run:

1. sustained records/s through the whole service (decode, QC, detectors, site watch, SQLite journal
   and outbox, manual QoS 1 acks, publishing) against a bare aiomqtt receive loop on the same broker
   and the same queued messages (target: service >= 0.7 of the bare loop);
2. gateway batches (100 records a message) through the whole service (target >= 100,000 records/s),
   on the demo network and on a generated 90-station one, also counted from the first message
   taken (without the service's start-up and connect);
3. observation-to-output latency at 1,000 records/s, end to end: from handing the triggering
   record to the publisher to the subscriber receiving the event/forecast/alert (target p99 <= 50 ms).

Each figure is the median of several runs. The broker is a private Mosquitto started here
(max_queued_messages 0, so a backlog can be queued for a client that is away; other settings as
shipped, e.g. max_inflight_messages 20); the embedded amqtt broker if there is no mosquitto binary.
Messages are queued while the reader is away, then the reader connects and drains them, so the
publisher does not compete with the reader for the CPU during the throughput runs.

    .venv/bin/python bench/bench_service.py [--runs 3] [--records 20000]
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import gc
import json
import logging
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path
from typing import Any

import aiomqtt

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

from broker import Mosquitto, have_mosquitto  # noqa: E402

from frontwatch.config import NetworkConfig, load_network  # noqa: E402
from frontwatch.engine import Engine  # noqa: E402
from frontwatch.obs import Observation  # noqa: E402
from frontwatch.replay import read_observations  # noqa: E402
from frontwatch.service.broker import EmbeddedBroker  # noqa: E402
from frontwatch.service.mqtt import BurstReader, quiet_closed_socket_noise, receive_into  # noqa: E402
from frontwatch.service.publish import plan_messages, publish_messages  # noqa: E402
from frontwatch.service.runner import Service  # noqa: E402
from frontwatch.service.settings import ServiceSettings, parse_broker_url  # noqa: E402

Msg = tuple[float, str, bytes, int]
NODELAY = ((socket.IPPROTO_TCP, socket.TCP_NODELAY, 1),)  # the feed and the reader send small packets at once


def load_scenario(tmp: Path) -> tuple[NetworkConfig, list[Observation]]:
    """The demo scenario (with a gateway added to its network) or, without it, the test scenario."""
    data = ROOT / "replay_data"
    if (data / "network.toml").exists():
        text = (data / "network.toml").read_text()
        files = [data / "observations.csv"]
    else:
        import service_scenario

        _, obs = service_scenario.write(tmp, days=6)
        text, files = service_scenario.NETWORK_TOML.replace('gateways = ["gw1"]\n', ""), [obs]
    net = tmp / "network.toml"
    net.write_text(text.replace("[network]\n", '[network]\ngateways = ["gw"]\n', 1))
    cfg = load_network(net)
    return cfg, list(read_observations(files, cfg))


def wide_scenario(tmp: Path, records: int) -> tuple[NetworkConfig, list[Observation]]:
    """A larger network for the gateway figure: the generator's 'bench' preset (90 stations, two
    sites), one day, its first `records` records in time order. The network's once-a-minute work
    (site watch, race course) is then shared by ten times as many records as in the demo network."""
    from frontwatch.config import parse_network
    from frontwatch.replay import decode_frame, merge, observations
    from frontwatch.sim import generate, preset

    sc = generate(preset("bench", seed=2027, days=1))
    net = dict(sc.network)
    net["network"] = {**net["network"], "gateways": ["gw"]}
    cfg = parse_network(net)
    d = merge([decode_frame(sc.observations, cfg, "bench-preset")])
    return cfg, list(observations(d))[:records]


def settings(url: str, prefix: str, client_id: str, db: Path | None) -> ServiceSettings:
    return ServiceSettings(broker=parse_broker_url(url), prefix=prefix, client_id=client_id, db_path=db,
                           http_port=None, snapshot_every_s=30.0)


async def preload(url: str, client_id: str, prefix: str, msgs: list[Msg]) -> None:
    """Make a persistent session for `client_id`, leave, and have the broker queue `msgs` for it."""
    b = parse_broker_url(url)
    async with aiomqtt.Client(b.host, b.port, identifier=client_id, clean_session=False) as c:
        await c.subscribe(prefix + "/obs/+", qos=1)
    await publish_messages(msgs, settings(url, prefix, prefix + "-pub", None))


async def bare_loop(url: str, client_id: str, n: int) -> float:
    """Seconds for a bare aiomqtt loop (QoS 1, automatic acks) to receive `n` queued messages.

    The reference of the target: aiomqtt's own `messages` iterator, as its documentation shows.
    paho acknowledges each QoS 1 message as it is read (one PUBACK write per message)."""
    b = parse_broker_url(url)
    t0 = time.perf_counter()
    got = 0
    async with aiomqtt.Client(b.host, b.port, identifier=client_id, clean_session=False) as c:
        async for _m in c.messages:
            got += 1
            if got >= n:
                break
    return time.perf_counter() - t0


async def bare_fast_loop(url: str, client_id: str, n: int) -> float:
    """Seconds for the service's own receive path with nothing behind it: paho's message callback
    (mqtt.receive_into) and burst reads (mqtt.BurstReader), automatic QoS 1 acks. A stricter
    reference than `bare_loop`: it shows what the service's work costs beyond receiving."""
    b = parse_broker_url(url)
    t0 = time.perf_counter()
    got = 0
    done = asyncio.Event()

    def on_message(_c: object, _u: object, _m: object) -> None:
        nonlocal got
        got += 1
        if got >= n:
            done.set()

    c = aiomqtt.Client(b.host, b.port, identifier=client_id, clean_session=False)
    receive_into(c, on_message)
    async with c:
        BurstReader(c, lambda: got, lambda: False)
        await done.wait()
    return time.perf_counter() - t0


STAGES = ("decode", "core", "journal+outbox", "hub", "metrics", "ack writes", "outbox reads")


def _timed(fn: Any, acc: dict[str, float], stage: str) -> Any:
    perf = time.perf_counter

    def wrapper(*a: Any, **k: Any) -> Any:
        t0 = perf()
        try:
            return fn(*a, **k)
        finally:
            acc[stage] += perf() - t0

    return wrapper


def instrument(svc: Service) -> dict[str, float]:
    """Wrap the service's stages in timers (wall seconds per stage; about 0.2 us per call)."""
    import frontwatch.service.runner as runner

    acc = dict.fromkeys(STAGES, 0.0)
    svc._decode = _timed(svc._decode, acc, "decode")  # type: ignore[method-assign]
    svc.engine.feed = _timed(svc.engine.feed, acc, "core")  # type: ignore[method-assign]
    if hasattr(svc.engine, "feed_columns"):  # (absent before the batch path: the bench runs on older trees too)
        svc.engine.feed_columns = _timed(svc.engine.feed_columns, acc, "core")  # type: ignore[method-assign]
    svc.store.commit_batch = _timed(svc.store.commit_batch, acc, "journal+outbox")  # type: ignore[method-assign]
    svc.hub.observe_many = _timed(svc.hub.observe_many, acc, "hub")  # type: ignore[method-assign]
    svc.hub.emit = _timed(svc.hub.emit, acc, "hub")  # type: ignore[method-assign]
    svc._sync_engine_counters = _timed(svc._sync_engine_counters, acc, "metrics")  # type: ignore[method-assign]
    svc._ack = _timed(svc._ack, acc, "ack writes")  # type: ignore[method-assign]
    svc.store.unpublished = _timed(svc.store.unpublished, acc, "outbox reads")  # type: ignore[method-assign]
    svc.store.mark_published = _timed(svc.store.mark_published, acc, "outbox reads")  # type: ignore[method-assign]
    real_flush = runner.flush_writes
    runner.flush_writes = _timed(real_flush, acc, "ack writes")  # restored by the caller
    return acc


async def service_drain(cfg: NetworkConfig, url: str, client_id: str, prefix: str, n: int, db: Path,
                        stages: dict[str, float] | None = None) -> tuple[float, float]:
    """(seconds for the whole service to take `n` queued messages and publish what they caused,
    seconds of that before it took the first message: start-up, connect, subscribe).

    With `stages`, the service's stages are timed and their wall seconds added to it."""
    import frontwatch.service.runner as runner

    svc = Service(cfg, settings(url, prefix, client_id, db))
    real_flush = runner.flush_writes
    acc = instrument(svc) if stages is not None else None
    stop = asyncio.Event()
    t0 = time.perf_counter()
    run = asyncio.create_task(svc.run(stop))
    t_first = t_all = 0.0
    settled = getattr(svc, "settled", None)  # (older trees: no store thread, the outbox says it)
    while svc.taken < n or (not settled() if settled else (svc.inbox or svc.store.unpublished(1))):
        if run.done():
            run.result()
        await asyncio.sleep(0.002)
        if not t_first and svc.taken:
            t_first = time.perf_counter()
        if not t_all and svc.taken >= n:
            t_all = time.perf_counter()
    dt = time.perf_counter() - t0
    if stages is not None:
        stages["start"] = stages.get("start", 0.0) + (t_first or t0) - t0  # connect, subscribe, first message
        stages["tail"] = stages.get("tail", 0.0) + dt - ((t_all or t0) - t0)  # last message taken -> all published
    stop.set()
    await run
    runner.flush_writes = real_flush
    if stages is not None and acc is not None:
        for k in STAGES:
            stages[k] = stages.get(k, 0.0) + acc[k]
    return dt, (t_first or t0) - t0


async def latency_run(net: Path, cfg: NetworkConfig, url: str, obs: list[Observation], rate: float,
                      tmp: Path) -> tuple[list[float], list[float]]:
    """(event latencies, all-output latencies) in seconds with records published at `rate`/s.

    The service runs as its own process (`frontwatch run`), as deployed; this process publishes the
    records and reads the outputs, timing both on the system's monotonic clock."""
    prefix = "bench-" + uuid.uuid4().hex[:8]
    msgs = plan_messages(obs, prefix)
    b = parse_broker_url(url)
    proc = subprocess.Popen([sys.executable, "-m", "frontwatch.cli", "run", "--config", str(net), "--broker", url,
                             "--prefix", prefix, "--client-id", prefix + "-svc", "--db", str(tmp / f"{prefix}.sqlite"),
                             "--http-port", "-1"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    sent: dict[tuple[str, float], float] = {}
    first_at: dict[float, float] = {}
    received: list[tuple[float, dict[str, object]]] = []
    online = asyncio.Event()

    async def listen() -> None:
        async with aiomqtt.Client(b.host, b.port, socket_options=NODELAY) as c:
            await c.subscribe(f"{prefix}/status", qos=1)
            for kind in ("events", "forecasts", "alerts", "courses"):
                await c.subscribe(f"{prefix}/{kind}/+", qos=1)
            async for m in c.messages:
                if m.topic.value.endswith("/status"):
                    if m.payload == b"online":
                        online.set()
                    continue
                received.append((time.perf_counter(), json.loads(m.payload)))  # type: ignore[arg-type]

    lt = asyncio.create_task(listen())
    try:
        await asyncio.wait_for(online.wait(), 30)
        await asyncio.sleep(0.5)
        cpu0 = _cpu_seconds(proc.pid)
        async with aiomqtt.Client(b.host, b.port, socket_options=NODELAY) as client:
            t0 = time.perf_counter()
            for i, (t, topic, payload, _n) in enumerate(msgs):
                delay = t0 + i / rate - time.perf_counter()
                if delay > 0:
                    await asyncio.sleep(delay)
                now = time.perf_counter()
                sent[(topic.rsplit("/", 1)[1], t)] = now
                first_at.setdefault(t, now)
                await client.publish(topic, payload, qos=0)
        await asyncio.sleep(1.0)
        cpu = _cpu_seconds(proc.pid) - cpu0
        print(f"    service process CPU: {cpu / len(msgs) * 1e6:.0f} us per record "
              f"({cpu / (len(msgs) / rate) * 100:.0f}% of one core at this rate)", flush=True)
    finally:
        proc.send_signal(signal.SIGTERM)
        proc.wait(20)
        lt.cancel()
    from frontwatch.timeutil import parse_time

    ev, allout = [], []
    SLOWEST.clear()
    for t_recv, out in received:
        if "type" not in out:
            key = (str(out["station"]), parse_time(str(out["detected_at"])))
            if key in sent:
                ev.append(t_recv - sent[key])
                allout.append(t_recv - sent[key])
        else:
            t_data = parse_time(str(out["issued_at"]))
            if t_data in first_at:
                allout.append(t_recv - first_at[t_data])
                SLOWEST.append((t_recv - first_at[t_data], str(out["type"])))
    SLOWEST[:] = sorted(SLOWEST, reverse=True)
    del SLOWEST[5:]
    return ev, allout


SLOWEST: list[tuple[float, str]] = []  # the latency run's slowest site outputs (seconds, type), for a look


def _cpu_seconds(pid: int) -> float:
    """User + system CPU seconds of a process (Linux /proc)."""
    import os

    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _local_hour_index(obs: list[Observation], cfg: NetworkConfig, hour: float) -> int:
    from frontwatch.timeutil import LocalClock

    clock = LocalClock(cfg.tz)
    for i, o in enumerate(obs):
        if clock.hour(o.time) >= hour and o.time - obs[0].time < 86400:
            return i
    return 0


def _chunked_rate(cfg: NetworkConfig, obs: list[Observation], runs: int, chunk: int = 1000) -> float:
    """Median records/s of the core alone fed `obs` through Engine.feed_many in chunks (a fresh engine a run)."""
    rates = []
    for _ in range(runs):
        eng = Engine(cfg)
        t_all = time.perf_counter()
        for i in range(0, len(obs), chunk):
            eng.feed_many(obs[i:i + chunk])
        rates.append(len(obs) / (time.perf_counter() - t_all))
    return statistics.median(rates)


def p99(xs: list[float]) -> float:
    if not xs:
        return float("nan")
    ys = sorted(xs)
    return ys[min(len(ys) - 1, int(0.99 * len(ys)))]


async def main(runs: int, records: int, latency_records: int, rate: float = 1000.0, nodelay: bool = True,
               breakdown: bool = True) -> None:
    logging.basicConfig(level=logging.WARNING)
    asyncio.get_running_loop().set_exception_handler(quiet_closed_socket_noise)
    tmp = Path(tempfile.mkdtemp(prefix="fw-bench-"))
    cfg, all_obs = load_scenario(tmp)
    obs = all_obs[:records]
    # The latency runs start at 09:00 local on the first day, so the slice holds daytime passages.
    day0 = _local_hour_index(all_obs, cfg, 9.0)
    lat_obs = all_obs[day0:day0 + latency_records]
    wide_cfg, wide_obs = wide_scenario(tmp, records)
    # As the service does once started (Service.run): what lives for the whole run (modules, the
    # scenarios above) is kept out of the collector's full passes, for the core-alone loops too.
    gc.collect()
    gc.freeze()
    async with contextlib.AsyncExitStack() as stack:
        if have_mosquitto():
            mq = Mosquitto(tmp / "broker", extra=["max_queued_messages 0", *(["set_tcp_nodelay true"] if nodelay else [])],
                           persistence=False)
            mq.start()
            stack.callback(mq.stop)
            url, broker_name = mq.url, ("private mosquitto (max_queued_messages 0, max_inflight_messages 20, "
                                        f"set_tcp_nodelay {'true' if nodelay else 'false'})")
        else:
            emb = await stack.enter_async_context(EmbeddedBroker())
            url, broker_name = emb.url, "embedded amqtt (no mosquitto binary)"
        print(f"broker: {broker_name}; network {cfg.network.name}: {len(cfg.stations)} stations, "
              f"{len(cfg.sites)} sites; {len(obs):,} records; {runs} runs each")

        core = []
        for _ in range(runs):
            eng = Engine(cfg)
            per: list[float] = []
            per_event: list[float] = []
            t_all = time.perf_counter()
            for o in obs:
                t1 = time.perf_counter()
                outs = eng.feed(o)
                dt = time.perf_counter() - t1
                per.append(dt)
                if any("type" not in x.to_dict() for x in outs):
                    per_event.append(dt)
            core.append(len(obs) / (time.perf_counter() - t_all))
        print(f"core alone (Engine.feed, no I/O): {statistics.median(core):,.0f} records/s (median); per record "
              f"p50 {statistics.median(per) * 1e6:.0f} us, p99 {p99(per) * 1e3:.2f} ms, max {max(per) * 1e3:.1f} ms; "
              f"records that emit an event: median {statistics.median(per_event or [0.0]) * 1e3:.1f} ms, "
              f"max {max(per_event or [0.0]) * 1e3:.1f} ms")

        # The core as the service calls it, one record at a time, without the timers above: the
        # ceiling for gateway batches in one process.
        plain = []
        for _ in range(runs):
            eng = Engine(cfg)
            feed = eng.feed
            t_all = time.perf_counter()
            for o in obs:
                feed(o)
            plain.append(len(obs) / (time.perf_counter() - t_all))
        core_rate = statistics.median(plain)
        print(f"core alone, plain loop     : {core_rate:12,.0f} records/s (median; {1e6 / core_rate:.1f} us/record)")
        # The core as the service calls it for gateway traffic: a chunk of messages at a time
        # (Engine.feed_many; the same outputs and state as the loop above).
        many_rate = _chunked_rate(cfg, obs, runs)
        print(f"core alone, feed_many x1000: {many_rate:12,.0f} records/s (median; {1e6 / many_rate:.1f} us/record; "
              f"{many_rate / core_rate:.2f} x the plain loop)")
        # The same on the generated 90-station network (the gateway figure's second network)
        wide_many = _chunked_rate(wide_cfg, wide_obs, runs)
        print(f"  ... on the {len(wide_cfg.stations)}-station network: {wide_many:12,.0f} records/s (median; "
              f"{1e6 / wide_many:.1f} us/record)")

        async def drain(kind: str, stages: dict[str, float] | None = None) -> tuple[float, float, float]:
            """(records or messages per second, CPU us per record of this process, records per
            second after the first message was taken) for one drain."""
            prefix = "bench-" + uuid.uuid4().hex[:8]
            c, recs = (wide_cfg, wide_obs) if kind == "gw90" else (cfg, obs)
            m = plan_messages(recs, prefix, gateway="gw", batch=100) if kind in ("gw", "gw90") \
                else plan_messages(recs, prefix)
            await preload(url, prefix + "-" + kind, prefix, m)
            cpu0 = time.process_time()
            start = 0.0
            if kind == "bare":
                dt = await bare_loop(url, prefix + "-bare", len(m))
            elif kind == "fast":
                dt = await bare_fast_loop(url, prefix + "-fast", len(m))
            else:
                dt, start = await service_drain(c, url, prefix + "-" + kind, prefix, len(m),
                                                tmp / f"{prefix}.sqlite", stages)
            return len(recs) / dt, (time.process_time() - cpu0) / len(recs) * 1e6, len(recs) / (dt - start)

        bare: list[float] = []
        fast: list[float] = []
        full: list[float] = []
        gate: list[float] = []
        gate_sus: list[float] = []
        wide: list[float] = []
        wide_sus: list[float] = []
        cpu: dict[str, list[float]] = {"bare": [], "fast": [], "svc": [], "gw": [], "gw90": []}
        for r in range(runs):
            # One of each per run, back to back on the same broker and the same records, so the
            # ratios compare like with like on a machine whose load changes from minute to minute.
            for kind, out in (("bare", bare), ("fast", fast), ("svc", full), ("gw", gate), ("gw90", wide)):
                got, us, sustained = await drain(kind)
                out.append(got)
                cpu[kind].append(us)
                if kind == "gw":
                    gate_sus.append(sustained)
                elif kind == "gw90":
                    wide_sus.append(sustained)
            print(f"  run {r + 1}: bare loop {bare[-1]:,.0f} msg/s, fast bare loop {fast[-1]:,.0f} msg/s, "
                  f"service {full[-1]:,.0f} records/s (ratio {full[-1] / bare[-1]:.2f}; "
                  f"{full[-1] / fast[-1]:.2f} of the fast loop), gateway batches {gate[-1]:,.0f} records/s "
                  f"({gate_sus[-1]:,.0f} after the first message; {gate[-1] / core_rate:.2f} of the core alone), "
                  f"90 stations {wide[-1]:,.0f} ({wide_sus[-1]:,.0f})", flush=True)
        mb, mq_, mf, mg, mw = (statistics.median(x) for x in (bare, fast, full, gate, wide))
        ratio = statistics.median(f / b for f, b in zip(full, bare, strict=True))
        ratio_fast = statistics.median(f / b for f, b in zip(full, fast, strict=True))
        med = {k: statistics.median(v) for k, v in cpu.items()}
        print(f"bare aiomqtt receive loop  : {mb:12,.0f} messages/s (median; CPU of this process "
              f"{med['bare']:.0f} us/message)")
        print(f"fast bare loop (callback)  : {mq_:12,.0f} messages/s (median; {med['fast']:.0f} us/message)")
        print(f"whole service, 1 rec/msg   : {mf:12,.0f} records/s (median; {med['svc']:.0f} us/record)   ratio "
              f"{ratio:.2f} (median of the runs' ratios; target >= 0.70); {ratio_fast:.2f} of the fast bare loop")
        print(f"whole service, gateway x100: {mg:12,.0f} records/s (median; {med['gw']:.1f} us/record)   (target "
              f">= 100,000; the core alone does {core_rate:,.0f} record by record, {many_rate:,.0f} in chunks)")
        print(f"  ... from the first message taken to the last output published (no start-up or connect): "
              f"{statistics.median(gate_sus):,.0f} records/s (median)")
        print(f"gateway x100, {len(wide_cfg.stations)} stations  : {mw:12,.0f} records/s (median; {med['gw90']:.1f} "
              f"us/record; a generated network, preset 'bench'; after the first message "
              f"{statistics.median(wide_sus):,.0f}; the core alone does {wide_many:,.0f} in chunks)")

        if breakdown:
            print("where the service's time goes (wall us per record, one timed drain of each; the rest is MQTT "
                  "receive, the event loop, publishing and glue):")
            for kind in ("svc", "gw"):
                stages: dict[str, float] = {}
                got, _us, _sus = await drain(kind, stages)
                total = 1e6 / got
                parts = {k: v / len(obs) * 1e6 for k, v in stages.items()}
                rest = total - sum(parts.values())
                label = "1 rec/msg " if kind == "svc" else "gateway   "
                print(f"  {label}: total {total:6.1f} = " + ", ".join(f"{k} {v:.1f}" for k, v in parts.items())
                      + f", rest {rest:.1f}")

        if not latency_records:
            return
        ev_all: list[float] = []
        p99s, p99_ev = [], []
        for r in range(runs):
            ev, allout = await latency_run(tmp / "network.toml", cfg, url, lat_obs, rate, tmp)
            ev_all.extend(ev)
            p99s.append(p99(allout))
            p99_ev.append(p99(ev))
            if not allout:
                print(f"  latency run {r + 1}: no outputs in the slice")
                continue
            print(f"  latency run {r + 1}: {len(allout)} outputs, p50 {statistics.median(allout) * 1e3:.1f} ms, "
                  f"p99 {p99s[-1] * 1e3:.1f} ms; {len(ev)} events, p99 {p99_ev[-1] * 1e3:.1f} ms", flush=True)
        print(f"observation-to-output p99 at {rate:,.0f} records/s: {statistics.median(p99s or [float('nan')]) * 1e3:.1f} ms "
              f"(median of {runs} runs; target <= 50 ms)")
        print(f"observation-to-event  p99 at {rate:,.0f} records/s: {p99(ev_all) * 1e3:.1f} ms "
              f"(all {len(ev_all)} events of the runs pooled)")
        print("slowest site outputs of the last run: " + ", ".join(f"{k} {v * 1e3:.0f} ms" for v, k in SLOWEST))


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--records", type=int, default=20000)
    ap.add_argument("--latency-records", type=int, default=10000)
    ap.add_argument("--rate", type=float, default=1000.0, help="records a second in the latency runs")
    ap.add_argument("--broker-nagle", action="store_true", help="leave Mosquitto's set_tcp_nodelay off")
    ap.add_argument("--no-breakdown", action="store_true", help="skip the timed per-stage drains")
    ap.add_argument("--no-latency", action="store_true", help="skip the latency runs")
    a = ap.parse_args()
    asyncio.run(main(a.runs, a.records, 0 if a.no_latency else a.latency_records, a.rate, not a.broker_nagle,
                     not a.no_breakdown))
