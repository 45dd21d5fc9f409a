"""Shared pieces for the dashboard tests and bench/bench_dashboard.py: an invented network with a
sea-breeze front crossing it (demo data, not a check value), a uvicorn server in a thread, and a
headless Chromium driver. The few tests at the bottom check the generator itself."""

from __future__ import annotations

import asyncio
import math
import os
import shutil
import socket
import tempfile
import threading
import time
from collections.abc import Callable, Iterator
from typing import Any

import pytest

from frontwatch.config import NetworkConfig, parse_network
from frontwatch.events import PassageEvent
from frontwatch.obs import Observation
from frontwatch.timeutil import parse_time

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
T0 = parse_time("2026-01-14T00:00:00Z")  # 10:00 local at UTC+10
FRONT_START = T0 + 30 * 60  # the front leaves the coast at 10:30 local
FRONT_SPEED = 3.0  # m/s westward (invented)
COAST_LON = 153.20


def network(n_stations: int = 9, n_sites: int = 2) -> NetworkConfig:
    """An invented bay: stations on a grid west of a north-south coast, water to the east."""
    side = max(1, math.ceil(math.sqrt(n_stations)))
    stations = []
    for i in range(n_stations):
        r, c = divmod(i, side)
        stations.append({"id": f"GS{i + 1:03d}", "lat": -27.30 - 0.3 * r / side, "lon": COAST_LON - 0.02 - 0.3 * c / side,
                         "onshore_from_deg": 85 + (i % 3) * 5, "name": f"Gannet {i + 1}"})
    sites = [{"id": "dune-green", "lat": -27.36, "lon": 153.05, "name": "Dune Green", "gust_limit_ms": 9.0},
             {"id": "shoal-course", "lat": -27.42, "lon": 153.16, "name": "Shoal Course", "course_axis_deg": 90}][:n_sites]
    return parse_network({"network": {"name": "gannet-shoal", "utc_offset_hours": 10},
                          "stations": stations, "sites": sites}, "<dashboard test>")


def passage_time(cfg: NetworkConfig, sid: str) -> float:
    st = cfg.station(sid)
    assert st is not None
    dist_m = (COAST_LON - st.lon) * 111_200 * math.cos(math.radians(-27.4))  # the front runs north-south
    return FRONT_START + dist_m / FRONT_SPEED


def observation(cfg: NetworkConfig, sid: str, t: float) -> Observation:
    """A smooth morning with a front passage: wind backs from west to east, cooler and moister."""
    after = t >= passage_time(cfg, sid)
    warm = 24.0 + 2.0 * (t - T0) / 3600
    return Observation(sid, t, wind_dir_deg=82.0 if after else 268.0, wind_speed_ms=5.2 if after else 2.8,
                       wind_gust_ms=7.5 if after else 4.0, temp_c=warm - (2.0 if after else 0.0),
                       dewpoint_c=17.0 + (2.2 if after else 0.0), pressure_hpa=1012.0 + (0.4 if after else 0.0))


def passage(cfg: NetworkConfig, sid: str) -> PassageEvent:
    on = passage_time(cfg, sid)
    return PassageEvent(sid, "breeze_front", on - on % 60, on - on % 60 + 240, 0.9, 268.0, 82.0, 2.4, -2.0, 2.2, 0.4,
                        speed_after_ms=5.2, gust_after_ms=7.5, temp_after_c=24.0)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class Server:
    """uvicorn serving an app on 127.0.0.1 in a daemon thread; call() runs a function on its loop."""

    def __init__(self, app: Any, port: int | None = None) -> None:
        import uvicorn

        self.port = port or free_port()
        self.server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=self.port, log_level="warning",
                                                    lifespan="off", timeout_graceful_shutdown=1))
        self.loop: asyncio.AbstractEventLoop | None = None
        self.thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        self.loop = asyncio.new_event_loop()
        asyncio.set_event_loop(self.loop)
        self.loop.run_until_complete(self.server.serve())
        # uvicorn leaves a cancelled stream's socket open (a real process would exit): drop it, as a
        # dying service would, so clients see the connection go.
        for conn in list(self.server.server_state.connections):
            transport = getattr(conn, "transport", None)
            if transport is not None:
                transport.abort()
        self.loop.run_until_complete(asyncio.sleep(0.05))
        self.loop.close()

    def __enter__(self) -> Server:
        self.thread.start()
        deadline = time.time() + 10
        while not self.server.started:
            if time.time() > deadline:
                raise RuntimeError("uvicorn did not start")
            time.sleep(0.02)
        return self

    def call(self, fn: Callable[..., Any], *args: Any) -> None:
        """Run fn(*args) on the server's loop (as the service does) and wait for it."""
        assert self.loop is not None
        done = threading.Event()

        def run() -> None:
            try:
                fn(*args)
            finally:
                done.set()

        self.loop.call_soon_threadsafe(run)
        done.wait(10)

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}/"

    def __exit__(self, *exc: Any) -> None:
        self.server.should_exit = True
        self.thread.join(10)


def have_browser() -> bool:
    try:
        import selenium  # noqa: F401
    except ImportError:
        return False
    return os.path.exists(CHROMIUM) and os.path.exists(CHROMEDRIVER)


def chrome(width: int = 1400, height: int = 1100) -> Iterator[Any]:
    """A headless Chromium (system package) with a fresh profile; quits and cleans up afterwards."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="fw-chrome-")
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for a in ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
              "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-dev-shm-usage",
              f"--user-data-dir={profile}", f"--window-size={width},{height}", "--enable-precise-memory-info"):
        opts.add_argument(a)
    drv = webdriver.Chrome(service=Service(CHROMEDRIVER), options=opts)
    try:
        yield drv
    finally:
        drv.quit()
        shutil.rmtree(profile, ignore_errors=True)


# --- checks of the generator itself ------------------------------------------------------------

def test_front_moves_inland_in_order() -> None:
    cfg = network(9)
    times = {s.id: passage_time(cfg, s.id) for s in cfg.stations}
    by_lon = sorted(cfg.stations, key=lambda s: -s.lon)  # east (coast) first
    assert [times[s.id] for s in by_lon] == sorted(times[s.id] for s in by_lon)
    # 0.3 deg of longitude at 27.4 S is about 29.6 km: about 2.7 h at 3 m/s
    span = max(times.values()) - min(times.values())
    assert 1.5 * 3600 < span < 3.2 * 3600


def test_observation_changes_at_passage() -> None:
    cfg = network(4)
    sid = cfg.stations[0].id
    tp = passage_time(cfg, sid)
    before, after = observation(cfg, sid, tp - 60), observation(cfg, sid, tp + 60)
    assert before.wind_dir_deg == 268.0 and after.wind_dir_deg == 82.0
    assert after.dewpoint_c - before.dewpoint_c == pytest.approx(2.2)
    assert passage(cfg, sid).to_dict()["kind"] == "breeze_front"
