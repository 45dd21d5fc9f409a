"""`frontwatch demo` end to end in a subprocess: embedded broker, replay, service, running log."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import httpx
import pytest
import service_scenario

from frontwatch.service.demo import demo_data_dirs, find_demo_data


def test_demo_reports_passages_from_a_scenario_folder(tmp_path: Path) -> None:
    service_scenario.write(tmp_path, days=1)
    proc = subprocess.run(
        [sys.executable, "-m", "frontwatch.cli", "demo", "--data", str(tmp_path), "--speed", "6000",
         "--http-port", "0", "--exit-when-done"],
        capture_output=True, text=True, timeout=90)
    out = proc.stdout
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "embedded" in out and "dashboard  http://127.0.0.1:" in out and "/metrics" in out
    passages = [line for line in out.splitlines() if line.startswith("PASSAGE")]
    assert len(passages) == 3 and all("breeze_front" in p for p in passages)
    assert "replay done: 1,440 records, 3 passages" in out


def test_demo_data_is_looked_for_in_the_package_and_the_checkout() -> None:
    dirs = demo_data_dirs()
    assert dirs[0].name == "demo" and dirs[0].parent.name == "frontwatch"
    assert dirs[1].name == "replay_data"


@pytest.mark.skipif(not any((d / "network.toml").exists() for d in demo_data_dirs()),
                    reason="the demo scenario (replay_data/) is not in this checkout yet")
def test_the_shipped_scenario_is_found() -> None:
    net, files = find_demo_data()
    assert net.exists() and files


def test_demo_page_serves_state(tmp_path: Path) -> None:
    """The dashboard address it prints answers while the demo runs."""
    service_scenario.write(tmp_path, days=1)
    proc = subprocess.Popen(
        [sys.executable, "-m", "frontwatch.cli", "demo", "--data", str(tmp_path), "--speed", "6000",
         "--http-port", "0"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert proc.stdout is not None
        url = None
        for line in proc.stdout:
            if line.startswith("dashboard"):
                url = line.split()[1]
            if line.startswith("replay done"):
                break
        assert url is not None
        state = httpx.get(url + "api/state", timeout=5).json()
        assert {s["id"] for s in state["stations"]} == {"GR01", "GR02", "GR03"}
        assert sum(1 for r in state["recent"] if r["type"] == "event") == 3
        metrics = httpx.get(url + "metrics", timeout=5, follow_redirects=True).text
        assert "frontwatch_events_total" in metrics
    finally:
        proc.terminate()  # SIGTERM: a clean stop
        assert proc.wait(15) == 0


def test_running_log_says_how_rough_a_forecast_is() -> None:
    """The log's forecast lines: the interval and what the time rests on (a fit to 3+ stations, or
    the rough physical estimate from 1-2), 'arrived', and why a front is no longer expected."""
    from frontwatch.config import load_network
    from frontwatch.service.demo import describe

    cfg = load_network(Path(__file__).resolve().parents[1] / "frontwatch/demo/network.toml")  # UTC-3
    base = {"type": "forecast", "site": "s", "issued_at": "2027-07-12T15:10:00Z", "stations": 1}
    one = describe({**base, "status": "expected", "basis": "prior", "eta": "2027-07-12T17:52:00Z",
                    "eta_earliest": "2027-07-12T15:10:00Z", "eta_latest": "2027-07-12T19:40:00Z"}, cfg)
    assert one == ("FORECAST  12 Jul 12:10  site s: front expected 14:52 (between 12:10 and 16:40; "
                   "from 1 station: rough)")
    fit = describe({**base, "status": "expected", "basis": "fit", "stations": 3, "eta": "2027-07-12T15:52:00Z",
                    "eta_earliest": "2027-07-12T15:40:00Z", "eta_latest": "2027-07-12T16:00:00Z"}, cfg)
    assert fit is not None and fit.endswith("12:52 (between 12:40 and 13:00; fitted to 3 stations)")
    assert describe({**base, "status": "arrived", "basis": "fit", "eta": "2027-07-12T15:02:00Z"}, cfg) \
        == "FORECAST  12 Jul 12:10  site s: front arrived 12:02"
    stalled = describe({**base, "status": "not_expected", "reason": "stalled", "basis": "fit", "eta": None}, cfg)
    assert stalled is not None and stalled.endswith("front not expected (the front has stalled)")
