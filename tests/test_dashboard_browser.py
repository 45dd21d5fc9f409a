"""The live page in real headless Chromium (Debian's chromium + chromium-driver, driven by Selenium).

A running app is fed a short replay of the invented scenario (directly into the hub, as the service
does); the page must draw every station and site, mark a silent station NO DATA (never calm), show a
passage that arrives over the event stream on the site card and in the passage list, count down in
data time, and catch up on what it missed after the service goes away and comes back. A screenshot
is saved to out/dashboard.png (gitignored) for a person to judge the layout.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from prometheus_client import CollectorRegistry

from frontwatch.service.hub import DashboardHub
from frontwatch.service.web import make_app
from frontwatch.timeutil import iso_z
from tests.test_dashboard_support import T0, Server, chrome, have_browser, network, observation, passage

pytestmark = [pytest.mark.browser,
              pytest.mark.skipif(not have_browser(), reason="needs selenium, /usr/bin/chromium and /usr/bin/chromedriver")]

SCREENSHOT = Path(__file__).resolve().parents[1] / "out" / "dashboard.png"
SILENT = "GS009"  # never reports
LAGGING = "GS008"  # stops reporting 15 data-minutes before the others


def wait_for(cond: Callable[[], Any], what: str, timeout: float = 15.0) -> Any:
    end = time.time() + timeout
    last: Any = None
    while time.time() < end:
        try:
            last = cond()
        except Exception as exc:  # the element may not exist yet
            last = exc
        if last and not isinstance(last, Exception):
            return last
        time.sleep(0.1)
    raise AssertionError(f"timed out waiting for {what}; last value {last!r}")


def feed(hub: DashboardHub, t_from: float, t_to: float) -> None:
    t = t_from
    while t < t_to:
        for st in hub.config.stations:
            if st.id != SILENT and not (st.id == LAGGING and t > T0 + 10 * 60):
                hub.observe(observation(hub.config, st.id, t), ("step_temp_c",) if st.id == "GS003" and t == t_from else ())
        t += 60


@pytest.fixture()
def browser() -> Iterator[Any]:
    yield from chrome()


def test_page_draws_network_and_follows_the_stream(browser: Any) -> None:
    cfg = network(9)
    hub = DashboardHub(cfg, stale_after_s=600)
    app = make_app(hub, CollectorRegistry())
    feed(hub, T0, T0 + 25 * 60)  # a quiet start: no passage yet
    js = browser.execute_script
    srv = Server(app).__enter__()
    try:
        browser.get(srv.url)
        wait_for(lambda: js("return window.frontwatch && window.frontwatch.es && window.frontwatch.es.readyState === 1"),
                 "the event stream to open")
        # every station and site is drawn, at distinct places
        drawn = js("return [...document.querySelectorAll('#map [data-station]')].map(g => g.dataset.station)")
        assert sorted(drawn) == sorted(s.id for s in cfg.stations)
        pos = js("return [...document.querySelectorAll('#map [data-station] circle.dot')].map(c => c.getAttribute('cx') + ',' + c.getAttribute('cy'))")
        assert len(set(pos)) == len(cfg.stations)
        assert sorted(js("return [...document.querySelectorAll('#map [data-site]')].map(g => g.dataset.site)")) == \
            ["dune-green", "shoal-course"]
        assert len(browser.find_elements("css selector", "#sites article[data-site]")) == 2
        # the silent station is NO DATA with no wind drawn; a reporting one has its arrow
        assert js(f"return document.querySelector('[data-station={SILENT}]').dataset.status") == "nodata"
        assert js(f"return document.querySelector('[data-station={SILENT}] .arrow').getAttribute('visibility')") == "hidden"
        assert js("return document.querySelector('#map [data-station=GS001] .arrow').getAttribute('visibility')") == "visible"
        # the lagging station's last record is 15 data-minutes old: STALE, its old wind not drawn
        assert js(f"return document.querySelector('[data-station={LAGGING}]').dataset.status") == "stale"
        assert js(f"return document.querySelector('[data-station={LAGGING}] .arrow').getAttribute('visibility')") == "hidden"
        assert js(f"return document.querySelector('[data-station={LAGGING}] .flag').textContent") == "STALE"
        assert "Decision support only" in browser.find_element("id", "caution").text
        assert "official warnings" in browser.find_element("id", "caution").text
        health = browser.find_element("id", "health-rows").text
        assert SILENT in health and "NO DATA" in health and "GS003" in health  # QC flag listed
        assert LAGGING in health and "STALE" in health

        # a passage at the site's station arrives over the stream and reaches card and list
        site_station = next(s["station"] for s in hub.state()["sites"] if s["id"] == "shoal-course")
        ev = passage(cfg, site_station).to_dict()
        srv.call(feed, hub, T0 + 25 * 60, T0 + 50 * 60)
        srv.call(hub.emit, ev)
        card_sel = f"#sites article[data-site=shoal-course] [data-last-passage='{ev['id']}']"
        wait_for(lambda: browser.find_elements("css selector", card_sel), "the site card to show the passage")
        wait_for(lambda: browser.find_elements("css selector", f"#passages li[data-event='{ev['id']}']"),
                 "the passage list entry")
        assert "breeze front" in browser.find_element("css selector", card_sel).text

        # a forecast 30 data-minutes ahead counts down in data time, not by this machine's clock
        data_time = T0 + 49 * 60
        srv.call(hub.emit, {"type": "forecast", "site": "dune-green", "issued_at": iso_z(data_time),
                            "eta": iso_z(data_time + 30 * 60), "eta_earliest": iso_z(data_time + 20 * 60),
                            "eta_latest": iso_z(data_time + 45 * 60), "front_speed_ms": 3.0,
                            "front_heading_deg": 268, "basis": "fit"})
        srv.call(hub.emit, {"type": "alert", "id": "dune-green-1", "site": "dune-green", "state": "warning", "seq": 1,
                            "references": "", "issued_at": iso_z(data_time), "eta": iso_z(data_time + 30 * 60),
                            "headline": "Breeze front expected at Dune Green"})
        eta_el = "#sites article[data-site=dune-green] .eta"
        wait_for(lambda: "in 30 min" in browser.find_element("css selector", eta_el).text, "the countdown")
        assert "warning" in browser.find_element("css selector", "#sites article[data-site=dune-green] .state").text
        assert "Breeze front expected at Dune Green" in browser.find_element("id", "alerts").text

        # the service goes away; what happens meanwhile is caught up after it comes back
        port = srv.port
        srv.__exit__(None, None, None)
        wait_for(lambda: "connection lost" in browser.find_element("id", "link").text, "the page to notice")
        missed = passage(cfg, "GS002").to_dict()
        hub.emit(missed)
        srv = Server(app, port=port).__enter__()
        wait_for(lambda: browser.find_elements("css selector", f"#passages li[data-event='{missed['id']}']"),
                 "the missed passage after reconnecting", timeout=20)
        assert browser.find_element("id", "link").text == "live"
        # the page now holds exactly what the hub sent: nothing lost, nothing twice
        assert js("return window.frontwatch.events.map(e => e.id)") == [ev["id"], missed["id"]]

        browser.set_window_size(1400, js("return document.documentElement.scrollHeight") + 160)
        time.sleep(0.5)
        SCREENSHOT.parent.mkdir(exist_ok=True)
        browser.save_screenshot(str(SCREENSHOT))
        assert SCREENSHOT.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        severe = [e for e in browser.get_log("browser") if e["level"] == "SEVERE"
                  and "api/stream" not in e["message"]]  # the stream's own refusals while the service was down
        assert severe == []
    finally:
        srv.__exit__(None, None, None)


DEMO = Path(__file__).resolve().parents[1] / "replay_data"


@pytest.mark.skipif(not (DEMO / "observations.csv").exists(), reason="demo scenario replay_data/ not present")
def test_page_follows_the_core_over_a_replay(browser: Any) -> None:
    """The real core's outputs (frontwatch.engine over the demo file) reach the page over the stream:
    every passage the core found is listed, each site card shows the core's latest alert state."""
    from collections import Counter

    from frontwatch.config import load_network
    from frontwatch.engine import Engine
    from frontwatch.replay import read_observations

    cfg = load_network(DEMO / "network.toml")
    eng = Engine(cfg)
    hub = DashboardHub(cfg)
    records = read_observations([DEMO / "observations.csv"], cfg)
    js = browser.execute_script

    def step(n: int) -> list[dict[str, Any]]:
        """Feed n records as the service does; return the outputs."""
        outs = []
        for o in records:
            before = Counter(eng.stats.qc)
            produced = eng.feed(o)
            hub.observe(o, list((eng.stats.qc - before).elements()))
            for out in produced:
                d = out.to_dict()
                hub.emit(d)
                outs.append(d)
            n -= 1
            if n == 0:
                break
        return outs

    with Server(make_app(hub, CollectorRegistry())) as srv:
        browser.get(srv.url)
        wait_for(lambda: js("return window.frontwatch && window.frontwatch.es && window.frontwatch.es.readyState === 1"),
                 "the event stream to open")
        seen: list[dict[str, Any]] = []
        while not (any(d.get("type") is None and d["kind"] == "breeze_front" for d in seen)
                   and any(d.get("type") == "alert" for d in seen)):
            got: list[dict[str, Any]] = []
            srv.call(lambda g=got: g.extend(step(900)))  # 100 data minutes of 9 stations
            seen += got
            assert hub.seq < 20_000, "the replay's first day went by without a breeze front and an alert"
        events = [d["id"] for d in seen if "type" not in d]
        wait_for(lambda: js("return window.frontwatch.events.map(e => e.id)") == events, "every passage on the page")
        for d in events:
            assert browser.find_elements("css selector", f"#passages li[data-event='{d}']")
        for site in cfg.sites:
            alert = hub.site_state.get(site.id)
            if alert is None:
                continue
            state_el = f"#sites article[data-site='{site.id}'] .state"
            want = str(alert["state"]).replace("_", " ")

            def shows(el: str = state_el, w: str = want) -> bool:
                return bool(browser.find_element("css selector", el).text == w)

            wait_for(shows, f"the {site.id} card state")
        assert "official warnings" in browser.find_element("id", "caution").text


def test_page_with_an_access_token(browser: Any) -> None:
    cfg = network(4)
    hub = DashboardHub(cfg)
    feed(hub, T0, T0 + 5 * 60)
    with Server(make_app(hub, CollectorRegistry(), token="tok-123")) as srv:
        browser.get(srv.url)
        assert "token required" in browser.page_source  # no token: nothing but the refusal
        browser.get(srv.url + "?token=tok-123")
        wait_for(lambda: browser.execute_script(
            "return window.frontwatch && window.frontwatch.es && window.frontwatch.es.readyState === 1"), "the stream")
        srv.call(hub.emit, passage(cfg, "GS002").to_dict())
        wait_for(lambda: browser.find_elements("css selector", "#passages li[data-event]"), "the passage over the stream")
        assert len(browser.find_elements("css selector", "#map [data-station]")) == 4
