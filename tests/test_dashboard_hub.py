"""DashboardHub: bounded memory, what it keeps of each output type, catch-up numbering, staleness,
JSON safety, and the shoreline file reader."""

from __future__ import annotations

import json
import math
import time

import pytest

from frontwatch.errors import ConfigError
from frontwatch.obs import Observation
from frontwatch.service.hub import DashboardHub, load_shoreline
from tests.test_dashboard_support import T0, network, observation, passage


def test_memory_is_bounded_by_stations_not_time() -> None:
    cfg = network(4)
    hub = DashboardHub(cfg, history=100, series_len=50)
    for i in range(3000):
        for st in cfg.stations:
            hub.observe(observation(cfg, st.id, T0 + 60 * i), ("step",) if i % 7 == 0 else ())
        hub.emit({"type": "forecast", "site": "dune-green", "issued_at": "2026-01-14T00:00:00Z", "eta": None})
    assert len(hub.feed) == 100
    assert hub.seq == 3000 * 5
    assert all(r.n == 50 for r in hub.series.values())
    assert all(len(q) <= 10 for q in hub.qc_recent.values())
    assert len(hub.recent) <= 300 and len(hub.forecasts) == 1
    ser = hub.station_series("GS001")
    assert ser is not None and len(ser["time"]) == 50
    # the ring keeps the newest rows, oldest first
    assert ser["time"][-1] == "2026-01-16T01:59:00Z" and ser["time"][0] == "2026-01-16T01:10:00Z"


def test_unknown_station_and_site_are_counted_not_kept() -> None:
    hub = DashboardHub(network(2))
    hub.observe(Observation("NOPE", T0, 10.0, 2.0))
    hub.emit({"id": "x", "station": "NOPE", "kind": "breeze_front", "onset": "2026-01-14T00:00:00Z"})
    hub.emit({"type": "alert", "site": "elsewhere", "state": "watch"})
    assert hub.ignored == 3
    assert hub.seq == 0 and "NOPE" not in hub.latest and not hub.site_state


def test_outputs_by_type_and_missing_type_is_event() -> None:
    cfg = network(4)
    hub = DashboardHub(cfg)
    ev = passage(cfg, "GS001").to_dict()
    assert "type" not in ev
    hub.emit(ev)
    hub.emit({"type": "forecast", "site": "dune-green", "eta": "2026-01-14T02:00:00Z",
              "front": {"line": [[-27.3, 153.0], [-27.5, 153.0]], "speed_ms": 3.0}})
    hub.emit({"type": "alert", "site": "dune-green", "state": "warning", "seq": 1, "headline": "h"})
    kinds = [k for _, k, _ in hub.since(0)]
    assert kinds == ["event", "forecast", "alert"]
    st = hub.state()
    assert st["events"][0]["id"] == ev["id"] and st["events"][0]["type"] == "event"
    gs1 = next(s for s in st["stations"] if s["id"] == "GS001")
    assert gs1["passages"][0]["kind"] == "breeze_front"
    site = next(s for s in st["sites"] if s["id"] == "dune-green")
    assert site["alert"]["state"] == "warning" and site["forecast"]["eta"] == "2026-01-14T02:00:00Z"
    assert st["front"]["speed_ms"] == 3.0 and st["alerts"][0]["headline"] == "h"
    ser = hub.station_series("GS001")
    assert ser is not None and ser["passages"][0]["id"] == ev["id"]
    assert hub.station_series("nope") is None


def test_since_returns_exactly_what_was_missed() -> None:
    cfg = network(2)
    hub = DashboardHub(cfg, history=10)
    for i in range(25):
        hub.observe(observation(cfg, "GS001", T0 + 60 * i))
    assert hub.oldest_seq() == 16
    assert [s for s, _, _ in hub.since(20)] == [21, 22, 23, 24, 25]
    assert [s for s, _, _ in hub.since(16, limit=2)] == [17, 18]
    assert hub.since(25) == [] and hub.since(99) == []
    assert [s for s, _, _ in hub.since(0)] == list(range(16, 26))  # as far as history reaches


def test_json_is_strict_even_with_nan_in_an_output() -> None:
    hub = DashboardHub(network(2))
    hub.emit({"type": "forecast", "site": "dune-green", "front_speed_ms": math.nan, "eta": None})
    hub.observe(Observation("GS001", T0))  # every value missing
    for _, _, data in hub.since(0):
        json.loads(data, parse_constant=lambda c: pytest.fail(f"non-JSON constant {c}"))
    text = json.dumps(hub.state(), allow_nan=False)
    assert '"front_speed_ms": null' in text


def test_staleness_by_wall_clock_and_by_data_time() -> None:
    cfg = network(3)
    hub = DashboardHub(cfg, stale_after_s=600)
    hub.observe(observation(cfg, "GS001", T0 + 3600))
    hub.observe(observation(cfg, "GS002", T0))  # an hour behind the network's newest record
    hub.observe(observation(cfg, "GS003", T0 + 3600))
    hub.received_wall["GS003"] = time.time() - 900  # nothing for 15 min by the clock
    st = {s["id"]: s for s in hub.state()["stations"]}
    assert st["GS001"]["stale"] is False
    assert st["GS002"]["stale"] is True and st["GS002"]["data_lag_s"] == 3600
    assert st["GS003"]["stale"] is True and st["GS003"]["age_s"] >= 899
    fresh = DashboardHub(cfg)
    assert all(s["stale"] and s["latest"] is None for s in fresh.state()["stations"])


def test_qc_flags_are_kept_with_reasons() -> None:
    cfg = network(2)
    hub = DashboardHub(cfg)
    hub.observe(observation(cfg, "GS001", T0), ["step_temp_c", "range_dewpoint_c"])
    s = next(s for s in hub.state()["stations"] if s["id"] == "GS001")
    assert s["qc_flags"] == 2 and [q["reason"] for q in s["qc_recent"]] == ["step_temp_c", "range_dewpoint_c"]
    assert json.loads(hub.since(0)[0][2])["qc"] == ["step_temp_c", "range_dewpoint_c"]


def test_shoreline_geojson_and_text(tmp_path) -> None:  # type: ignore[no-untyped-def]
    gj = tmp_path / "coast.geojson"
    gj.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[153.2, -27.3], [153.21, -27.6]]}},
        {"type": "Feature", "geometry": {"type": "Polygon", "coordinates": [[[153.3, -27.4], [153.31, -27.41],
                                                                            [153.3, -27.4]]]}}]}))
    assert load_shoreline(gj) == [[[-27.3, 153.2], [-27.6, 153.21]], [[-27.4, 153.3], [-27.41, 153.31], [-27.4, 153.3]]]
    txt = tmp_path / "coast.txt"
    txt.write_text("# outline\n-27.3 153.2\n-27.6,153.21\n\n-27.4 153.3\n-27.5 153.3\n")
    assert load_shoreline(txt) == [[[-27.3, 153.2], [-27.6, 153.21]], [[-27.4, 153.3], [-27.5, 153.3]]]
    bad = tmp_path / "bad.txt"
    bad.write_text("-27.3 153.2\n-27.4 east\n")
    with pytest.raises(ConfigError, match=r"bad\.txt, line 2"):
        load_shoreline(bad)
    with pytest.raises(ConfigError, match="cannot read"):
        load_shoreline(tmp_path / "missing.txt")


def test_wait_returns_at_once_for_what_came_before_it_was_registered() -> None:
    # A stream checks for items and for close(), then awaits the client's disconnect state, then
    # waits: whatever happened during that await must not be waited out (it made a close() hang
    # for the whole 5 s keepalive interval).
    import asyncio

    async def timed(hub: DashboardHub, after: int | None) -> float:
        t0 = time.perf_counter()
        await hub.wait(0.5, after=after)
        return time.perf_counter() - t0

    hub = DashboardHub(network(2))
    hub.observe(observation(hub.config, "GS001", T0))
    assert asyncio.run(timed(hub, after=0)) < 0.1  # an item past the stream's cursor
    assert asyncio.run(timed(hub, after=hub.seq)) >= 0.45  # nothing new: the full wait
    hub.close()
    assert asyncio.run(timed(hub, after=hub.seq)) < 0.1  # closed meanwhile
