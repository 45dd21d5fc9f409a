"""`frontwatch demo`: the whole job on one machine. An embedded broker (unless one is given), the
demo scenario replayed into it at a brisk speed, the live service, the web page and /metrics, and
a running log of what the service finds."""

from __future__ import annotations

import asyncio
import contextlib
import logging
import os
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from ..config import NetworkConfig, load_network
from ..errors import ConfigError
from .broker import EmbeddedBroker, free_port
from .publish import plan_messages, publish_messages
from .runner import Service
from .settings import ServiceSettings, parse_broker_url

_OBS_PATTERNS = ("observations*.csv", "observations*.parquet", "*.csv", "*.parquet")


def demo_data_dirs() -> list[Path]:
    """Where the demo scenario may be: inside the installed package, then a source checkout."""
    pkg = Path(__file__).resolve().parent.parent
    return [pkg / "demo", pkg.parent / "replay_data"]


def find_demo_data(explicit: Path | None = None) -> tuple[Path, list[Path]]:
    """(network file, observation files) of the demo scenario; ConfigError saying where it looked."""
    dirs = [explicit] if explicit is not None else demo_data_dirs()
    for d in dirs:
        net = d / "network.toml"
        if not net.is_file():
            continue
        for pat in _OBS_PATTERNS:
            files = sorted(p for p in d.glob(pat) if p.is_file())
            if files:
                return net, files
    raise ConfigError("demo scenario not found (a network.toml and observations CSV) in: "
                      + ", ".join(str(d) for d in dirs))


def describe(out: dict[str, Any], config: NetworkConfig) -> str | None:
    """One line for the running log (None for outputs too frequent to list, e.g. course summaries)."""
    tz = config.tz or UTC

    def hm(iso: str | None) -> str:
        if not iso:
            return "--:--"
        t = datetime.fromisoformat(iso.replace("Z", "+00:00")).astimezone(tz)
        return t.strftime("%d %b %H:%M")

    def clock(iso: str | None) -> str:  # the time of day alone
        return hm(iso)[-5:]

    kind = out.get("type")
    if kind is None:
        parts = [f"{hm(out['onset'])}  {out['station']:<8} {out['kind']:<13}",
                 f"found at {clock(out['detected_at'])}"]
        if out.get("wind_dir_before_deg") is not None and out.get("wind_dir_after_deg") is not None:
            parts.append(f"wind {out['wind_dir_before_deg']:.0f}->{out['wind_dir_after_deg']:.0f} deg")
        if out.get("temp_change_c") is not None:
            parts.append(f"T {out['temp_change_c']:+.1f} C")
        if out.get("dewpoint_change_c") is not None:
            parts.append(f"Td {out['dewpoint_change_c']:+.1f} C")
        parts.append(f"confidence {out['confidence']:.2f}")
        return "PASSAGE   " + "  ".join(parts)
    if kind == "forecast":
        head = f"FORECAST  {hm(out.get('issued_at'))}  site {out.get('site')}: "
        status = out.get("status")
        if status == "arrived":
            return head + f"front arrived {clock(out.get('eta'))}"
        if status != "expected" or not out.get("eta"):
            why = {"stalled": "the front has stalled", "overdue": "the front is overdue",
                   "not_on_path": "not on the front's path", "expired": "the front is no longer seen",
                   "after_day_end": "the breeze ends first"}.get(out.get("reason") or "", "")
            return head + "front not expected" + (f" ({why})" if why else "")
        n = int(out.get("stations") or 0)
        # One or two stations give only a physical estimate of the speed: say how rough the time is.
        src = f"fitted to {n} stations" if out.get("basis") == "fit" else \
            f"from {n} station{'s' if n != 1 else ''}: rough"
        return head + (f"front expected {clock(out.get('eta'))} (between {clock(out.get('eta_earliest'))}"
                       f" and {clock(out.get('eta_latest'))}; {src})")
    if kind == "alert":
        return f"ALERT     {hm(out.get('issued_at'))}  site {out.get('site')}: {out.get('headline') or out.get('state')}"
    return None


# Local hour from which the demo's first day is paced (`speed`); before it the records go flat out.
# Breeze fronts form late in the morning: from 10:00 at 600 x the demo's first passage (12:08) shows
# some 20 s after the start. Anything before it is still processed, only faster.
PACED_FROM_H = 10.0


def _fast_until(messages: list[tuple[float, str, bytes, int]], config: NetworkConfig, hour: float) -> float:
    """Data time of the first `hour` o'clock (local) in the data: the quiet hours before it are sent
    flat out, so passages appear within a minute of starting."""
    if not messages:
        return 0.0
    tz = config.tz or UTC
    t0 = messages[0][0]
    d = datetime.fromtimestamp(t0, UTC).astimezone(tz)
    start = d.replace(hour=int(hour), minute=0, second=0, microsecond=0)
    if start.timestamp() < t0:
        return t0
    return start.timestamp()


async def run_demo(*, data: Path | None = None, broker: str | None = None, speed: float = 600.0,
                   http_port: int = 8750, exit_when_done: bool = False, skip_night: bool = True,
                   stop: asyncio.Event | None = None, say: Callable[[str], None] = print) -> Service:
    net, files = find_demo_data(data)
    config = load_network(net)
    from ..replay import read_observations

    observations = list(read_observations(files, config))
    stop = stop or asyncio.Event()
    async with contextlib.AsyncExitStack() as stack:
        if broker is None:
            emb = await stack.enter_async_context(EmbeddedBroker())
            broker = emb.url
            say(f"broker     {broker} (embedded, in this process)")
        else:
            say(f"broker     {parse_broker_url(broker).url}")
        port = http_port
        if port and not _port_free(port):
            port = free_port()
        settings = ServiceSettings(broker=parse_broker_url(broker), prefix="frontwatch",
                                   client_id=f"frontwatch-demo-{os.getpid()}", db_path=None, http_port=port,
                                   backoff_min_s=0.2, backoff_max_s=5.0)
        def show(out: dict[str, Any]) -> None:
            line = describe(out, config)
            if line is not None:
                say(line)

        svc = Service(config, settings, on_output=show)
        task = asyncio.create_task(svc.run(stop))
        try:
            await asyncio.wait_for(svc.connected.wait(), 15)
            await asyncio.wait_for(svc.web_ready.wait(), 5)
        except TimeoutError:
            stop.set()
            await task
            raise ConfigError(f"could not connect to the broker at {settings.broker.url}") from None
        base = f"http://{settings.http_host}:{svc.web_port}"
        say(f"dashboard  {base}/")
        say(f"metrics    {base}/metrics")
        say(f"scenario   {config.network.name}: {len(config.stations)} stations, {len(observations):,} records "
            f"from {net.parent}, replayed at {speed:g}x real time")
        say("decision support only: official warnings and the people in charge of a venue come first")
        msgs = plan_messages(observations, settings.prefix)
        fast = _fast_until(msgs, config, PACED_FROM_H) if skip_night else msgs[0][0] if msgs else 0.0
        night = [m for m in msgs if m[0] < fast]
        day = [m for m in msgs if m[0] >= fast]
        pub_settings = settings.but(client_id="frontwatch-demo-feed")

        async def feed() -> None:
            if night:
                await publish_messages(night, pub_settings, rate=3000, stop=stop)
            await publish_messages(day, pub_settings, speed=speed, stop=stop)
            if not stop.is_set():
                await _drained(svc, len(msgs))
                st = svc.engine.stats
                say(f"replay done: {st.records:,} records, {sum(st.events.values())} passages "
                    f"({', '.join(f'{k} {v}' for k, v in sorted(st.events.items())) or 'none'})")
                if exit_when_done:
                    stop.set()
                else:
                    say("the service keeps running; Ctrl-C to stop")

        feeder = asyncio.create_task(feed())
        try:
            await task
        finally:
            feeder.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await feeder
    return svc


async def _drained(svc: Service, n: int, timeout: float = 30.0) -> None:
    """Wait until the service has taken `n` messages and sent what they caused."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while loop.time() < end:
        if svc.taken >= n and svc.settled():
            return
        await asyncio.sleep(0.1)


def _port_free(port: int) -> bool:
    import socket

    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        try:
            s.bind(("127.0.0.1", port))
        except OSError:
            return False
    return True


def quiet_logs() -> None:
    logging.getLogger("amqtt").setLevel(logging.ERROR)
    logging.getLogger("transitions").setLevel(logging.ERROR)
