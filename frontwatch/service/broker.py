"""An embedded MQTT broker (amqtt) on 127.0.0.1, for the demo and for machines without Mosquitto.

Real deployments use a real broker; this one keeps everything in the process's memory.
"""

from __future__ import annotations

import logging
import socket
from types import TracebackType


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port nobody listens on right now (the OS picks it)."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


class EmbeddedBroker:
    """`async with EmbeddedBroker() as b:` serves MQTT on b.host:b.port until the block ends."""

    def __init__(self, host: str = "127.0.0.1", port: int | None = None) -> None:
        self.host = host
        self.port = port or free_port(host)
        self._broker: object | None = None

    @property
    def url(self) -> str:
        return f"mqtt://{self.host}:{self.port}"

    async def start(self) -> None:
        from amqtt.broker import Broker

        # amqtt logs every connection at INFO; the demo prints its own story.
        for name in ("amqtt", "transitions"):
            logging.getLogger(name).setLevel(logging.WARNING)
        config = {
            "listeners": {"default": {"type": "tcp", "bind": f"{self.host}:{self.port}", "max_connections": 200}},
            "plugins": {"amqtt.plugins.authentication.AnonymousAuthPlugin": {"allow_anonymous": True}},
        }
        broker = Broker(config)
        await broker.start()  # returns once the listener is bound
        self._broker = broker

    async def stop(self) -> None:
        if self._broker is not None:
            await self._broker.shutdown()  # type: ignore[attr-defined]
            self._broker = None

    async def __aenter__(self) -> EmbeddedBroker:
        await self.start()
        return self

    async def __aexit__(self, et: type[BaseException] | None, e: BaseException | None,
                        tb: TracebackType | None) -> None:
        await self.stop()
