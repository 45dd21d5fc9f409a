"""Benchmark: the live page in headless Chromium with 500 stations (and 50 as the reference in the
same run): how many observations a second the page takes in over the event stream and draws, the
frame rate while it does, and the browser's memory (JS heap, DOM nodes, resident memory of the
Chromium processes) before and after a long feed (does it stay bounded?).

Usage: .venv/bin/python bench/bench_dashboard.py [--stations 500] [--reference 50] [--seconds 8] [--trials 3]

Method: the service's web app runs under uvicorn on 127.0.0.1; the hub is fed whole data minutes
(one record per station) on the server's loop, closed-loop: a new minute goes in once the page has
caught up to within one minute's records, so the figure is what the page sustains end to end
(encode, stream, parse, draw), not what piles up. A live network sends one minute a minute: the
sustained rate divided by stations/60 is the headroom. Medians over --trials runs. Needs the
Debian chromium and chromium-driver packages and selenium.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from prometheus_client import CollectorRegistry  # noqa: E402

from frontwatch.service.hub import DashboardHub  # noqa: E402
from frontwatch.service.web import make_app  # noqa: E402
from tests.test_dashboard_support import T0, Server, chrome, have_browser, network, observation, passage  # noqa: E402


def rss_mb(pid: int) -> float:
    """Resident memory of a process and all its descendants (Linux /proc), in MB."""
    kids: dict[int, list[int]] = {}
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                ppid = int((d / "stat").read_text().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                continue
            kids.setdefault(ppid, []).append(int(d.name))
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        todo.extend(kids.get(p, []))
        try:
            for line in Path(f"/proc/{p}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    total += int(line.split()[1])
        except OSError:
            pass
    return total / 1024


def memory(drv: Any) -> dict[str, float]:
    drv.execute_cdp_cmd("HeapProfiler.collectGarbage", {})
    m = {x["name"]: x["value"] for x in drv.execute_cdp_cmd("Performance.getMetrics", {})["metrics"]}
    return {"heap_mb": m["JSHeapUsedSize"] / 2**20, "nodes": m["Nodes"],
            "rss_mb": rss_mb(drv.service.process.pid)}


def run(n_stations: int, seconds: float, trials: int) -> dict[str, Any]:
    cfg = network(n_stations)
    hub = DashboardHub(cfg)
    minute = [0]

    def feed_minute() -> None:
        t = T0 + 60 * minute[0]
        for st in cfg.stations:
            hub.observe(observation(cfg, st.id, t))
        minute[0] += 1

    out: dict[str, Any] = {"stations": n_stations}
    with Server(make_app(hub, CollectorRegistry())) as srv:
        for _ in range(10):
            srv.call(feed_minute)
        for drv in chrome(1400, 1100):
            js = drv.execute_script
            t_load = time.perf_counter()
            drv.get(srv.url)
            end = time.time() + 60
            while not js("return !!(window.frontwatch && window.frontwatch.es && window.frontwatch.es.readyState === 1)"):
                if time.time() > end:
                    raise RuntimeError("the page did not connect")
                time.sleep(0.05)
            out["load_s"] = time.perf_counter() - t_load
            drv.execute_cdp_cmd("Performance.enable", {})
            out["mem_start"] = memory(drv)
            js("window.__fps = 0; (function f(){ window.__fps++; requestAnimationFrame(f); })();")
            rates, fps = [], []
            for _ in range(trials):
                n0, f0, t0 = js("return window.frontwatch.updates"), js("return window.__fps"), time.perf_counter()
                while time.perf_counter() - t0 < seconds:
                    srv.call(feed_minute)
                    # closed loop: wait until the page is within one minute's records of the feed
                    while hub.seq - js("return window.frontwatch.lastId") > n_stations:
                        time.sleep(0.005)
                dt = time.perf_counter() - t0
                rates.append((js("return window.frontwatch.updates") - n0) / dt)
                fps.append((js("return window.__fps") - f0) / dt)
            out["obs_per_s"] = statistics.median(rates)
            out["fps"] = statistics.median(fps)
            # a passage at every 10th station, as in a busy afternoon
            for st in cfg.stations[::10]:
                srv.call(hub.emit, passage(cfg, st.id).to_dict())
            def more(minutes: int, js: Any = js) -> None:
                for _ in range(minutes):
                    srv.call(feed_minute)
                    while hub.seq - js("return window.frontwatch.lastId") > n_stations:
                        time.sleep(0.005)
                time.sleep(1.0)

            more(60)  # one data hour after the passages
            out["mem_mid"] = memory(drv)
            more(180)  # three more: a page that kept history would keep growing here
            out["mem_end"] = memory(drv)
            out["data_minutes"] = minute[0]
            out["hub_feed_items"] = len(hub.feed)
    return out


def hub_memory(n_stations: int, minutes: tuple[int, ...] = (60, 360, 720)) -> list[tuple[int, float]]:
    """Python memory held by a DashboardHub (tracemalloc) after so many data minutes of all stations."""
    import gc
    import tracemalloc

    cfg = network(n_stations)
    obs = [[observation(cfg, st.id, T0 + 60 * m) for st in cfg.stations] for m in range(max(minutes))]
    out = []
    gc.collect()
    tracemalloc.start()
    base = tracemalloc.get_traced_memory()[0]
    hub = DashboardHub(cfg)
    for m in range(max(minutes)):
        for o in obs[m]:
            hub.observe(o)
        if m + 1 in minutes:
            gc.collect()
            out.append((m + 1, (tracemalloc.get_traced_memory()[0] - base) / 2**20))
    tracemalloc.stop()
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--stations", type=int, default=500)
    ap.add_argument("--reference", type=int, default=50)
    ap.add_argument("--seconds", type=float, default=8.0)
    ap.add_argument("--trials", type=int, default=3)
    a = ap.parse_args()
    if not have_browser():
        sys.exit("needs selenium, /usr/bin/chromium and /usr/bin/chromedriver (Debian chromium, chromium-driver)")
    res = [run(n, a.seconds, a.trials) for n in (a.reference, a.stations)]
    print(f"dashboard benchmark: {a.trials} trials of {a.seconds:.0f} s, medians; closed-loop feed of whole data minutes")
    hdr = ("stations", "load s", "obs/s drawn", "x live rate", "frames/s", "heap MB start", "heap MB end",
           "DOM nodes end", "Chromium RSS MB start", "RSS MB end", "data min")
    print(" | ".join(hdr))
    for r in res:
        live = r["stations"] / 60.0
        print(" | ".join([str(r["stations"]), f"{r['load_s']:.2f}", f"{r['obs_per_s']:.0f}", f"{r['obs_per_s'] / live:.0f}",
                          f"{r['fps']:.0f}", f"{r['mem_start']['heap_mb']:.1f}", f"{r['mem_end']['heap_mb']:.1f}",
                          f"{r['mem_end']['nodes']:.0f}", f"{r['mem_start']['rss_mb']:.0f}", f"{r['mem_end']['rss_mb']:.0f}",
                          str(r["data_minutes"])]))
    ref, big = res
    print(f"ratio {big['stations']}/{ref['stations']} stations: obs/s {big['obs_per_s'] / ref['obs_per_s']:.2f}, "
          f"heap {big['mem_end']['heap_mb'] / ref['mem_end']['heap_mb']:.2f}, "
          f"DOM nodes {big['mem_end']['nodes'] / ref['mem_end']['nodes']:.2f}")
    print(f"at {big['stations']} stations, heap after 180 more data minutes vs before them: "
          f"{big['mem_end']['heap_mb'] / big['mem_mid']['heap_mb']:.2f}x, DOM nodes "
          f"{big['mem_end']['nodes'] / big['mem_mid']['nodes']:.2f}x (bounded if near 1; "
          f"start to end, with 50 passages added: {big['mem_end']['heap_mb'] / big['mem_start']['heap_mb']:.2f}x)")
    hm = hub_memory(a.stations)
    print(f"service-side hub memory at {a.stations} stations (tracemalloc): " +
          ", ".join(f"{m} data min {mb:.1f} MB" for m, mb in hm) +
          f"; {hm[-1][0]} vs {hm[1][0]} min: {hm[-1][1] / hm[1][1]:.2f}x (series rings are full at 360 min)")


if __name__ == "__main__":
    main()
