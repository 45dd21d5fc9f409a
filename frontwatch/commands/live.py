"""Live commands: `run` (the service on a broker), `demo` (everything on one machine) and `publish`
(a file into a broker in time order). Heavy imports happen inside the commands."""

from __future__ import annotations

import asyncio
import contextlib
import logging
import signal
import sys
from pathlib import Path
from typing import Annotated, Any

import typer

from ..errors import FrontwatchError


def _fail(msg: str) -> None:
    typer.echo(f"frontwatch: {msg}", err=True)
    raise typer.Exit(2)


def _logging(verbose: bool) -> None:
    logging.basicConfig(level=logging.DEBUG if verbose else logging.INFO, stream=sys.stderr,
                        format="%(asctime)s %(levelname)-7s %(name)s: %(message)s", datefmt="%H:%M:%S")
    for name in ("amqtt", "transitions", "uvicorn", "uvicorn.error", "mqtt"):
        logging.getLogger(name).setLevel(logging.WARNING if not verbose else logging.INFO)


async def _until_signalled(main: object, stop: asyncio.Event) -> None:
    """Run `main` (a coroutine) with Ctrl-C and SIGTERM setting `stop` for a clean shutdown."""
    from ..service.mqtt import quiet_closed_socket_noise

    loop = asyncio.get_running_loop()
    loop.set_exception_handler(quiet_closed_socket_noise)
    for sig in (signal.SIGINT, signal.SIGTERM):
        with contextlib.suppress(NotImplementedError, RuntimeError):  # not on this platform
            loop.add_signal_handler(sig, stop.set)
    await main  # type: ignore[misc]


def run(
    config: Annotated[Path, typer.Option("--config", "-c", help="network TOML file")],
    broker: Annotated[str, typer.Option("--broker", help="mqtt://host:port or mqtts://host:port")] = "mqtt://127.0.0.1:1883",
    prefix: Annotated[str, typer.Option("--prefix", help="topic prefix")] = "frontwatch",
    client_id: Annotated[str | None, typer.Option("--client-id", help="stable MQTT client id (default: frontwatch-HOST)")] = None,
    username: Annotated[str | None, typer.Option("--username", envvar="FRONTWATCH_MQTT_USER")] = None,
    password: Annotated[str | None, typer.Option("--password", envvar="FRONTWATCH_MQTT_PASSWORD")] = None,
    ca_file: Annotated[Path | None, typer.Option("--ca-file", help="CA certificate to trust (mqtts)")] = None,
    cert_file: Annotated[Path | None, typer.Option("--cert-file", help="client certificate (mqtts)")] = None,
    key_file: Annotated[Path | None, typer.Option("--key-file", help="client key (mqtts)")] = None,
    tls_insecure: Annotated[bool, typer.Option("--tls-insecure", help="skip the broker host name check")] = False,
    mqtt5: Annotated[bool, typer.Option("--mqtt5", help="MQTT 5 with a session expiry instead of 3.1.1")] = False,
    db: Annotated[Path, typer.Option("--db", help="SQLite state file (events, alerts, snapshots)")] = Path("frontwatch-state.sqlite"),
    snapshot_every: Annotated[float, typer.Option("--snapshot-every", help="seconds between core snapshots")] = 30.0,
    queue_size: Annotated[int, typer.Option("--queue-size", help="messages waiting for the core before the oldest is dropped")] = 10_000,
    http_host: Annotated[str, typer.Option("--http-host", help="address of the web page and /metrics")] = "127.0.0.1",
    http_port: Annotated[int, typer.Option("--http-port", help="port of the web page and /metrics (0 = any, -1 = none)")] = 8750,
    token: Annotated[str | None, typer.Option("--token", envvar="FRONTWATCH_TOKEN", help="require this token on the web page")] = None,
    shoreline: Annotated[Path | None, typer.Option("--shoreline", help="shoreline outline to draw on the page (see docs/dashboard.md)")] = None,
    stale_after: Annotated[float, typer.Option("--stale-after", help="seconds of silence before a station shows as stale")] = 600.0,
    verbose: Annotated[bool, typer.Option("--verbose", "-v")] = False,
) -> None:
    """Run the live service: observations in over MQTT, events, forecasts and alerts out."""
    from ..config import load_network
    from ..service.hub import DashboardHub, load_shoreline
    from ..service.runner import Service
    from ..service.settings import ServiceSettings, TLSFiles, parse_broker_url

    _logging(verbose)
    try:
        cfg = load_network(config)
        kw: dict[str, object] = {}
        if client_id:
            kw["client_id"] = client_id
        settings = ServiceSettings(
            broker=parse_broker_url(broker), prefix=prefix, username=username, password=password,
            tls=TLSFiles(str(ca_file) if ca_file else None, str(cert_file) if cert_file else None,
                         str(key_file) if key_file else None, tls_insecure),
            mqtt5=mqtt5, db_path=db, snapshot_every_s=snapshot_every, queue_size=queue_size,
            http_host=http_host, http_port=None if http_port < 0 else http_port, http_token=token,
            stale_after_s=stale_after, **kw)  # type: ignore[arg-type]
        hub = DashboardHub(cfg, stale_after_s=stale_after,
                           shoreline=load_shoreline(shoreline) if shoreline is not None else None)
        service = Service(cfg, settings, hub=hub)
    except FrontwatchError as exc:
        _fail(str(exc))
        return
    log = logging.getLogger("frontwatch")

    async def main() -> None:
        stop = asyncio.Event()

        async def announce() -> None:
            if settings.http_port is None:
                return
            await service.web_ready.wait()
            log.info("web page and metrics on http://%s:%s/ (/metrics)", settings.http_host, service.web_port)

        t = asyncio.create_task(announce())
        await _until_signalled(service.run(stop), stop)
        t.cancel()

    _run_async(main())


def _run_async(coro: Any) -> None:
    """Run the service's event loop; a bad setting or a port that cannot be bound ends with one line."""
    try:
        asyncio.run(coro)
    except FrontwatchError as exc:
        _fail(str(exc))
    except OSError as exc:
        _fail(f"cannot start: {exc}")


def demo(
    data: Annotated[Path | None, typer.Option("--data", help="scenario folder (network.toml + observations CSV)")] = None,
    broker: Annotated[str | None, typer.Option("--broker", help="use this broker instead of the embedded one")] = None,
    speed: Annotated[float, typer.Option("--speed", help="times real time for the daytime part")] = 600.0,
    http_port: Annotated[int, typer.Option("--http-port", help="web page port (another free one if taken)")] = 8750,
    exit_when_done: Annotated[bool, typer.Option("--exit-when-done", help="stop once the scenario is replayed")] = False,
    verbose: Annotated[bool, typer.Option("--verbose", "-v")] = False,
) -> None:
    """The whole job on this machine: embedded broker, demo scenario replayed live, service, web page."""
    from ..service.demo import run_demo

    _logging(verbose)
    if not verbose:
        logging.getLogger("frontwatch.service").setLevel(logging.WARNING)

    def say(line: str) -> None:
        print(line, flush=True)

    async def main() -> None:
        stop = asyncio.Event()
        await _until_signalled(run_demo(data=data, broker=broker, speed=speed, http_port=http_port,
                                        exit_when_done=exit_when_done, stop=stop, say=say), stop)

    _run_async(main())
    say("stopped")


def publish(
    files: Annotated[list[Path], typer.Argument(help="CSV or Parquet observation files")],
    config: Annotated[Path, typer.Option("--config", "-c", help="network TOML file")],
    to: Annotated[str, typer.Option("--to", help="broker: mqtt://host:port")] = "mqtt://127.0.0.1:1883",
    speed: Annotated[float, typer.Option("--speed", help="times real time (0 = as fast as possible)")] = 0.0,
    rate: Annotated[float, typer.Option("--rate", help="at most this many messages a second (0 = no cap)")] = 0.0,
    prefix: Annotated[str, typer.Option("--prefix", help="topic prefix")] = "frontwatch",
    gateway: Annotated[str | None, typer.Option("--gateway", help="send JSON arrays on this gateway's topic")] = None,
    batch: Annotated[int, typer.Option("--batch", help="records per gateway message")] = 100,
    username: Annotated[str | None, typer.Option("--username", envvar="FRONTWATCH_MQTT_USER")] = None,
    password: Annotated[str | None, typer.Option("--password", envvar="FRONTWATCH_MQTT_PASSWORD")] = None,
) -> None:
    """Publish observation files to a broker in time order (QoS 1, one topic per station)."""
    from ..config import load_network
    from ..service.publish import publish_files

    try:
        cfg = load_network(config)
        publish_files(files, cfg, to, speed=speed or None, prefix=prefix, gateway=gateway, batch=batch,
                      username=username, password=password, rate=rate or None)
    except FrontwatchError as exc:
        _fail(str(exc))
    except OSError as exc:
        _fail(f"cannot publish: {exc}")
    except KeyboardInterrupt:
        _fail("interrupted")


def register(app: typer.Typer) -> None:
    app.command("run")(run)
    app.command("demo")(demo)
    app.command("publish")(publish)
