"""Writes deploy/grafana/dashboards/frontwatch.json, the Grafana dashboard on frontwatch's metrics.

The JSON is committed; edit this script and run it (`python deploy/grafana/make_dashboard.py`) rather
than editing the JSON, and tests/test_deploy_files.py checks the two agree. Colours: Okabe-Ito.
"""
import json
import sys
from pathlib import Path

OUT = Path(__file__).with_name("dashboards") / "frontwatch.json"
DS = {"type": "prometheus", "uid": "${ds}"}
SEL = '{instance=~"$instance"}'
GREEN, ORANGE, VERM, BLUE, SKY, PURPLE, YELLOW, GREY = "#009E73", "#E69F00", "#D55E00", "#0072B2", "#56B4E9", "#CC79A7", "#F0E442", "#8a8f94"
pid = [0]
def nid():
    pid[0] += 1
    return pid[0]
def tgt(expr, legend="", ref="A", instant=False):
    t = {"datasource": DS, "expr": expr, "legendFormat": legend, "refId": ref}
    if instant:
        t["instant"] = True
        t["range"] = False
    return t
def stat(title, expr, x, y, w=4, unit="short", steps=None, mappings=None, desc=""):
    return {"id": nid(), "type": "stat", "title": title, "description": desc, "datasource": DS,
            "gridPos": {"x": x, "y": y, "w": w, "h": 4}, "targets": [tgt(expr)],
            "options": {"reduceOptions": {"calcs": ["lastNotNull"], "fields": "", "values": False},
                        "colorMode": "background", "graphMode": "none", "textMode": "value_and_name", "justifyMode": "center"},
            "fieldConfig": {"defaults": {"unit": unit, "mappings": mappings or [],
                                         "thresholds": {"mode": "absolute", "steps": steps or [{"color": BLUE, "value": None}]}},
                            "overrides": []}}
def ts(title, targets, x, y, w=12, h=8, unit="short", desc="", bars=False, colors=None):
    ov = [{"matcher": {"id": "byName", "options": n}, "properties": [{"id": "color", "value": {"mode": "fixed", "fixedColor": c}}]}
          for n, c in (colors or {}).items()]
    return {"id": nid(), "type": "timeseries", "title": title, "description": desc, "datasource": DS,
            "gridPos": {"x": x, "y": y, "w": w, "h": h}, "targets": targets,
            "options": {"legend": {"displayMode": "table", "placement": "right", "calcs": ["lastNotNull", "max"]},
                        "tooltip": {"mode": "multi", "sort": "desc"}},
            "fieldConfig": {"defaults": {"unit": unit, "color": {"mode": "palette-classic-by-name"},
                                         "custom": {"drawStyle": "bars" if bars else "line", "lineWidth": 2,
                                                    "fillOpacity": 60 if bars else 8, "showPoints": "never",
                                                    "stacking": {"mode": "normal" if bars else "none", "group": "A"}}},
                            "overrides": ov}}
def row(title, y):
    return {"id": nid(), "type": "row", "title": title, "collapsed": False, "gridPos": {"x": 0, "y": y, "w": 24, "h": 1}, "panels": []}

panels = [
    row("At a glance", 0),
    stat("Broker link", f"min(frontwatch_broker_connected{SEL})", 0, 1,
         steps=[{"color": VERM, "value": None}, {"color": GREEN, "value": 1}],
         mappings=[{"type": "value", "options": {"0": {"text": "LOST"}, "1": {"text": "connected"}}}],
         desc="1 while every selected service is connected to its broker."),
    stat("Records / s", f"sum(rate(frontwatch_records_received_total{SEL}[5m]))", 4, 1, unit="reqps",
         desc="Observation records decoded and fed to the core."),
    stat("Stations silent > 15 min", f"count(frontwatch_station_last_seen_seconds{SEL} > 900) or vector(0)", 8, 1,
         steps=[{"color": GREEN, "value": None}, {"color": ORANGE, "value": 1}, {"color": VERM, "value": 5}],
         desc="Stations that reported at least once and have been silent for 15 minutes. Never-seen stations are not counted: compare with the network file."),
    stat("Messages waiting", f"sum(frontwatch_queue_depth{SEL})", 12, 1,
         steps=[{"color": GREEN, "value": None}, {"color": ORANGE, "value": 1000}, {"color": VERM, "value": 5000}]),
    stat("Dropped (1 h)", f"sum(increase(frontwatch_queue_dropped_messages_total{SEL}[1h]))", 16, 1,
         steps=[{"color": GREEN, "value": None}, {"color": VERM, "value": 1}],
         desc="Messages dropped because the core fell behind: lost to detection."),
    stat("Breeze-front passages (24 h)", 'sum(increase(frontwatch_events_total{instance=~"$instance", kind="breeze_front"}[24h]))', 20, 1,
         steps=[{"color": SKY, "value": None}]),
    row("Data in", 5),
    ts("Records in, refused by reason", [
        tgt(f"sum(rate(frontwatch_records_received_total{SEL}[5m]))", "accepted", "A"),
        tgt(f"sum by (reason) (rate(frontwatch_records_refused_total{SEL}[5m]))", "refused: {{reason}}", "B"),
        tgt(f"sum(rate(frontwatch_unknown_station_records_total{SEL}[5m]))", "unknown station", "C")],
       0, 6, unit="reqps", colors={"accepted": GREEN, "unknown station": PURPLE}),
    ts("Quality-control flags by reason", [tgt(f"sum by (reason) (rate(frontwatch_qc_flags_total{SEL}[5m]))", "{{reason}}")],
       12, 6, unit="reqps", desc="Flagged values are withheld from the detectors; the page's station health panel names the stations."),
    row("What the core found", 14),
    ts("Passages per hour by kind", [tgt(f"sum by (kind) (increase(frontwatch_events_total{SEL}[1h]))", "{{kind}}")],
       0, 15, bars=True, colors={"breeze_front": VERM, "gust_front": PURPLE, "cold_front": BLUE, "land_breeze": SKY, "wind_shift": GREY}),
    ts("Published to the broker, by type", [tgt(f"sum by (type) (rate(frontwatch_outputs_published_total{SEL}[5m]))", "{{type}}")],
       12, 15, unit="reqps"),
    row("Speed", 23),
    ts("Core time per record", [
        tgt(f"histogram_quantile(0.5, sum by (le) (rate(frontwatch_record_processing_seconds_bucket{SEL}[5m])))", "median", "A"),
        tgt(f"histogram_quantile(0.99, sum by (le) (rate(frontwatch_record_processing_seconds_bucket{SEL}[5m])))", "99th percentile", "B")],
       0, 24, w=8, unit="s", colors={"median": BLUE, "99th percentile": ORANGE}),
    ts("Arrival to publish", [
        tgt(f"histogram_quantile(0.5, sum by (le) (rate(frontwatch_observation_to_event_seconds_bucket{SEL}[10m])))", "median", "A"),
        tgt(f"histogram_quantile(0.95, sum by (le) (rate(frontwatch_observation_to_event_seconds_bucket{SEL}[10m])))", "95th percentile", "B")],
       8, 24, w=8, unit="s", colors={"median": BLUE, "95th percentile": ORANGE},
       desc="From the arrival of the message that caused an output to the broker's acknowledgement of its publish."),
    ts("Queue and broker link", [
        tgt(f"sum(frontwatch_queue_depth{SEL})", "messages waiting", "A"),
        tgt(f"sum(increase(frontwatch_broker_reconnects_total{SEL}[15m]))", "reconnects / 15 min", "B"),
        tgt(f"sum(increase(frontwatch_snapshots_total{SEL}[15m]))", "snapshots / 15 min", "C")],
       16, 24, w=8, colors={"messages waiting": BLUE, "reconnects / 15 min": VERM, "snapshots / 15 min": GREY}),
    row("Stations", 32),
    {"id": nid(), "type": "bargauge", "title": "Silence per station (worst first)", "datasource": DS,
     "description": "Seconds since each station's last accepted record arrived.",
     "gridPos": {"x": 0, "y": 33, "w": 12, "h": 10},
     "targets": [tgt(f"topk(25, max by (station) (frontwatch_station_last_seen_seconds{SEL}))", "{{station}}", instant=True)],
     "options": {"orientation": "horizontal", "displayMode": "basic", "showUnfilled": True,
                 "reduceOptions": {"calcs": ["lastNotNull"], "fields": "", "values": False}},
     "fieldConfig": {"defaults": {"unit": "s", "min": 0, "max": 1800,
                                  "thresholds": {"mode": "absolute", "steps": [{"color": GREEN, "value": None},
                                                                               {"color": ORANGE, "value": 300},
                                                                               {"color": VERM, "value": 900}]}},
                     "overrides": []}},
    {"id": nid(), "type": "table", "title": "Age of each station's newest record", "datasource": DS,
     "description": "Wall clock minus the observation time of the newest record: large while the station is fresh means a wrong clock or a backlog.",
     "gridPos": {"x": 12, "y": 33, "w": 12, "h": 10},
     "targets": [tgt(f"max by (station) (frontwatch_station_observation_age_seconds{SEL})", "{{station}}", instant=True)],
     "transformations": [{"id": "reduce", "options": {"reducers": ["lastNotNull"]}},
                         {"id": "sortBy", "options": {"sort": [{"field": "Last *", "desc": True}]}}],
     "fieldConfig": {"defaults": {"unit": "s"}, "overrides": []}},
]
dash = {
    "uid": "frontwatch-overview", "title": "frontwatch: service and data health",
    "description": "The frontwatch service's own metrics (docs/deploy.md). Watches the service and its data, not the weather; for the weather use the service's page and official warnings.",
    "tags": ["frontwatch"], "timezone": "browser", "schemaVersion": 39, "version": 1, "editable": True,
    "refresh": "30s", "time": {"from": "now-12h", "to": "now"}, "graphTooltip": 1,
    "templating": {"list": [
        {"name": "ds", "label": "data source", "type": "datasource", "query": "prometheus", "current": {}, "hide": 0},
        {"name": "instance", "label": "service", "type": "query", "datasource": DS,
         "query": {"query": "label_values(frontwatch_broker_connected, instance)", "refId": "q"},
         "definition": "label_values(frontwatch_broker_connected, instance)",
         "multi": True, "includeAll": True, "allValue": ".*", "refresh": 2, "current": {}, "hide": 0}]},
    "annotations": {"list": []}, "links": [], "panels": panels,
}


def render() -> str:
    return json.dumps(dash, indent=1) + "\n"


if __name__ == "__main__":
    if "--check" in sys.argv:
        sys.exit(0 if OUT.read_text() == render() else 1)
    OUT.write_text(render())
    print(f"wrote {OUT} ({len(panels)} panels)")
