"""Real brokers for the service tests and the benchmark: the shared Mosquitto on 127.0.0.1:1883 when
it listens, a private `mosquitto` process started on a free port with a config file, or (no
binary at all) the embedded amqtt broker."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import time
from dataclasses import dataclass, field
from pathlib import Path

from frontwatch.service.broker import free_port


def listening(host: str, port: int, timeout: float = 0.3) -> bool:
    try:
        with socket.create_connection((host, port), timeout=timeout):
            return True
    except OSError:
        return False


def have_mosquitto() -> bool:
    return shutil.which("mosquitto") is not None or Path("/usr/sbin/mosquitto").exists()


def _binary() -> str:
    return shutil.which("mosquitto") or "/usr/sbin/mosquitto"


@dataclass
class Mosquitto:
    """A private mosquitto process: `start()`, `stop()` (SIGTERM, it saves its persistence file),
    `start()` again on the same port and store. Extra config lines go in `extra`."""

    workdir: Path
    port: int = field(default_factory=free_port)
    extra: list[str] = field(default_factory=list)
    listener_extra: list[str] = field(default_factory=list)
    persistence: bool = True  # keep sessions and queued messages across a restart (stop/start)
    proc: subprocess.Popen[bytes] | None = None

    @property
    def conf(self) -> Path:
        return self.workdir / "mosquitto.conf"

    def write_conf(self) -> None:
        self.workdir.mkdir(parents=True, exist_ok=True)
        lines = [
            f"listener {self.port} 127.0.0.1",
            *self.listener_extra,
            f"persistence {'true' if self.persistence else 'false'}",
            f"persistence_location {self.workdir}/",
            "autosave_interval 1",
            f"log_dest file {self.workdir}/mosquitto.log",
            *self.extra,
        ]
        if os.geteuid() == 0:
            lines.append("user root")  # as root mosquitto would switch to a user that cannot read our temp dir
        if not any(line.startswith(("allow_anonymous", "password_file")) for line in lines):
            lines.append("allow_anonymous true")
        self.conf.write_text("\n".join(lines) + "\n")

    def start(self, wait: float = 5.0) -> None:
        self.write_conf()
        self.proc = subprocess.Popen([_binary(), "-c", str(self.conf)], stdout=subprocess.DEVNULL,
                                     stderr=subprocess.PIPE)
        end = time.monotonic() + wait
        while not listening("127.0.0.1", self.port):
            if self.proc.poll() is not None:
                err = self.proc.stderr.read().decode() if self.proc.stderr else ""
                raise RuntimeError(f"mosquitto exited: {err} {self.log()}")
            if time.monotonic() > end:
                raise RuntimeError(f"mosquitto did not listen on {self.port}: {self.log()}")
            time.sleep(0.05)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(5)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(5)
        self.proc = None

    def log(self) -> str:
        p = self.workdir / "mosquitto.log"
        return p.read_text()[-2000:] if p.exists() else ""

    @property
    def url(self) -> str:
        return f"mqtt://127.0.0.1:{self.port}"


# --- helpers for tests that drive the service -------------------------------------------------

async def wait_until(cond, timeout: float = 10.0, every: float = 0.02) -> bool:  # type: ignore[no-untyped-def]
    """Poll `cond()` until true or `timeout` seconds pass; returns the last value."""
    import asyncio

    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while not cond():
        if loop.time() > end:
            return bool(cond())
        await asyncio.sleep(every)
    return True


async def feed_in_steps(svc, messages, settings, step: int = 400, timeout: float = 30.0) -> None:  # type: ignore[no-untyped-def]
    """Publish `messages` in steps, waiting for the in-process service to take each step: a broker
    drops QoS 1 messages for a subscriber that falls far behind (Mosquitto's max_queued_messages),
    and the test publisher shares the service's event loop."""
    from frontwatch.service.publish import publish_messages

    base = svc.taken
    for k in range(0, len(messages), step):
        part = messages[k:k + step]
        await publish_messages(part, settings)
        target = base + k + len(part)
        assert await wait_until(lambda t=target: svc.taken >= t, timeout), (svc.taken, target)
    assert await wait_until(svc.settled, timeout)
