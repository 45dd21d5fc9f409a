"""deploy/: the files parse (JSON, YAML with PyYAML, TOML with frontwatch's own loader), every metric
name the Grafana dashboard, the alert rules and docs/deploy.md use is one the service exports, the
commands in the compose file and the systemd unit use options `frontwatch run` has, and, where the
tools are installed, promtool and systemd-analyze accept the files (promtool also runs the rules'
own unit tests in deploy/prometheus/frontwatch-rules.test.yml). Mosquitto: test_deploy_mosquitto.py.
"""

from __future__ import annotations

import configparser
import json
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from prometheus_client import generate_latest

from frontwatch.config import load_network
from frontwatch.service.metrics import ServiceMetrics

yaml = pytest.importorskip("yaml", reason="PyYAML (installed with amqtt) parses the YAML files")

ROOT = Path(__file__).resolve().parents[1]
DEPLOY = ROOT / "deploy"
DASHBOARD = DEPLOY / "grafana" / "dashboards" / "frontwatch.json"
RULES = DEPLOY / "prometheus" / "frontwatch-rules.yml"
PROM = DEPLOY / "prometheus" / "prometheus.yml"
COMPOSE = DEPLOY / "compose.yaml"
UNIT = DEPLOY / "systemd" / "frontwatch.service"
NAME = re.compile(r"\bfrontwatch_[a-z0-9_]+\b")


def exported_names() -> set[str]:
    """Sample names on a live ServiceMetrics' /metrics once every labelled metric has a child."""
    m = ServiceMetrics()
    m.refused.labels("malformed_json").inc()
    m.qc_flags.labels("step").inc()
    m.events.labels("breeze_front").inc()
    m.outputs.labels("alert").inc()
    m.station_seen["S1"] = (0.0, 0.0)
    text = generate_latest(m.registry).decode()
    names = {line.split("{")[0].split(" ")[0] for line in text.splitlines() if line and not line.startswith("#")}
    # a histogram is also named by its base name (in prose and in the HELP line)
    return names | {n.removesuffix("_bucket") for n in names if n.endswith("_bucket")}


def dashboard_exprs() -> list[str]:
    doc = json.loads(DASHBOARD.read_text())
    out = [t["expr"] for p in doc["panels"] for t in p.get("targets", [])]
    for v in doc["templating"]["list"]:
        q = v.get("query")
        out.append(q["query"] if isinstance(q, dict) else str(q))
    return out


def rule_texts() -> list[str]:
    doc = yaml.safe_load(RULES.read_text())
    out = []
    for g in doc["groups"]:
        for r in g["rules"]:
            out.append(str(r["expr"]))
            out.extend(str(v) for v in r.get("annotations", {}).values())
    return out


def test_every_metric_name_used_is_exported() -> None:
    exported = exported_names()
    assert "frontwatch_records_received_total" in exported  # the reading works at all
    places = {"grafana dashboard": dashboard_exprs(), "alert rules": rule_texts(),
              "docs/deploy.md": [(ROOT / "docs" / "deploy.md").read_text()],
              "docs/dashboard.md": [(ROOT / "docs" / "dashboard.md").read_text()]}
    for where, texts in places.items():
        used = {n for t in texts for n in NAME.findall(t)}
        assert used, f"{where} uses no frontwatch metric"
        missing = sorted(used - exported)
        assert not missing, f"{where} uses names the service does not export: {missing}"


def test_dashboard_and_rules_cover_the_important_metrics() -> None:
    used = {n for t in dashboard_exprs() + rule_texts() for n in NAME.findall(t)}
    for name in ("frontwatch_broker_connected", "frontwatch_records_refused_total", "frontwatch_queue_dropped_messages_total",
                 "frontwatch_station_last_seen_seconds", "frontwatch_events_total", "frontwatch_qc_flags_total",
                 "frontwatch_observation_to_event_seconds_bucket", "frontwatch_record_processing_seconds_bucket"):
        assert name in used, name


def test_dashboard_json_is_the_generated_one_and_well_formed() -> None:
    doc = json.loads(DASHBOARD.read_text())
    gen = subprocess.run([sys.executable, str(DEPLOY / "grafana" / "make_dashboard.py"), "--check"], timeout=30)
    assert gen.returncode == 0, "frontwatch.json differs from make_dashboard.py's output: re-run the script"
    ids = [p["id"] for p in doc["panels"]]
    assert len(ids) == len(set(ids))
    cells: set[tuple[int, int]] = set()
    for p in doc["panels"]:
        g = p["gridPos"]
        assert g["x"] >= 0 and g["x"] + g["w"] <= 24, p["title"]
        mine = {(x, y) for x in range(g["x"], g["x"] + g["w"]) for y in range(g["y"], g["y"] + g["h"])}
        assert not mine & cells, f"panel {p['title']!r} overlaps another"
        cells |= mine
        if p["type"] != "row":
            assert p["datasource"]["uid"] == "${ds}" and p["targets"], p["title"]
            assert all('instance=~"$instance"' in t["expr"] for t in p["targets"]), p["title"]


def test_yaml_files_parse() -> None:
    files = sorted(DEPLOY.rglob("*.yml")) + sorted(DEPLOY.rglob("*.yaml"))
    assert len(files) >= 6
    for f in files:
        assert isinstance(yaml.safe_load(f.read_text()), dict), f
    prom = yaml.safe_load(PROM.read_text())
    job = next(j for j in prom["scrape_configs"] if j["job_name"] == "frontwatch")
    assert job["metrics_path"] == "/metrics" and job["authorization"]["type"] == "Bearer"
    ds = yaml.safe_load((DEPLOY / "grafana" / "provisioning" / "datasources" / "frontwatch.yml").read_text())
    assert ds["datasources"][0]["type"] == "prometheus"


def run_options() -> set[str]:
    import typer

    from frontwatch.cli import app

    cmd: Any = typer.main.get_command(app)
    return {o for p in cmd.commands["run"].params for o in p.opts}


def frontwatch_args(command: str) -> list[str]:
    words = shlex.split(command)
    i = next(k for k, w in enumerate(words) if Path(w).name == "frontwatch")
    assert words[i + 1] == "run"
    return words[i + 2:]


def check_run_args(args: list[str]) -> dict[str, str]:
    known = run_options()
    opts = {}
    for a, b in zip(args[::2], args[1::2], strict=True):
        assert a in known, f"`frontwatch run` has no option {a}"
        opts[a] = b
    return opts


def test_compose_file() -> None:
    doc = yaml.safe_load(COMPOSE.read_text())
    assert set(doc["services"]) == {"broker", "frontwatch", "prometheus", "grafana"}
    for name, svc in doc["services"].items():
        for vol in svc.get("volumes", []):
            src = vol.split(":")[0]
            if src.startswith("./") and not src.startswith("./secrets/"):
                assert (DEPLOY / src).exists(), f"{name}: volume source {src} does not exist in deploy/"
        for port in svc.get("ports", []):
            assert port.startswith("127.0.0.1:") or (name == "broker" and port == "8883:8883"), f"{name}: {port}"
    assert (DEPLOY / doc["services"]["frontwatch"]["build"]["dockerfile"].removeprefix("deploy/")).exists()
    cmd = doc["services"]["frontwatch"]["command"]
    inner = shlex.split(cmd)[2]  # sh -c '...'
    opts = check_run_args(frontwatch_args(inner.replace("exec ", "")))
    assert opts["--http-host"] == "0.0.0.0" and "FRONTWATCH_TOKEN" in inner  # wide bind only with a token
    prom = yaml.safe_load(PROM.read_text())
    target = next(j for j in prom["scrape_configs"] if j["job_name"] == "frontwatch")["static_configs"][0]["targets"][0]
    assert target == f"frontwatch:{opts['--http-port']}"
    broker_url = opts["--broker"]
    assert broker_url.startswith("mqtts://broker:")


def test_systemd_unit() -> None:
    cp = configparser.ConfigParser(strict=False, interpolation=None)
    cp.optionxform = str  # type: ignore[assignment,method-assign]
    cp.read_string(UNIT.read_text())
    svc = cp["Service"]
    opts = check_run_args(frontwatch_args(svc["ExecStart"]))
    assert opts["--http-host"] == "127.0.0.1"  # local by default
    assert svc["User"] == "frontwatch" and svc["NoNewPrivileges"] == "yes"
    assert cp["Install"]["WantedBy"] == "multi-user.target"


@pytest.mark.skipif(not shutil.which("systemd-analyze"), reason="systemd-analyze not installed")
def test_systemd_analyze_accepts_the_unit(tmp_path: Path) -> None:
    # Point the unit at this checkout's binary and an empty env file; keep everything else.
    exe = Path(sys.executable).with_name("frontwatch")
    if not exe.exists():
        pytest.skip("frontwatch console script not installed in this venv")
    env = tmp_path / "env"
    env.write_text("")
    text = UNIT.read_text().replace("/opt/frontwatch/venv/bin/frontwatch", str(exe))
    text = text.replace("/etc/frontwatch/frontwatch.env", str(env))
    text = text.replace("User=frontwatch", "User=root").replace("Group=frontwatch", "Group=root")
    unit = tmp_path / "frontwatch.service"
    unit.write_text(text)
    r = subprocess.run(["systemd-analyze", "verify", str(unit)], capture_output=True, text=True, timeout=60)
    ours = [line for line in (r.stdout + r.stderr).splitlines() if "frontwatch.service" in line]
    assert r.returncode == 0 and not ours, ours


@pytest.mark.skipif(not shutil.which("promtool"), reason="promtool not installed (Debian package prometheus)")
def test_promtool_checks_and_rule_unit_tests(tmp_path: Path) -> None:
    r = subprocess.run(["promtool", "check", "rules", str(RULES)], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stdout + r.stderr
    token = tmp_path / "token"
    token.write_text("t")
    conf = tmp_path / "prometheus.yml"
    conf.write_text(PROM.read_text().replace("/etc/prometheus/frontwatch-rules.yml", str(RULES))
                    .replace("/etc/prometheus/frontwatch.token", str(token)))
    r = subprocess.run(["promtool", "check", "config", str(conf)], capture_output=True, text=True, timeout=60)
    assert r.returncode == 0, r.stdout + r.stderr
    r = subprocess.run(["promtool", "test", "rules", "frontwatch-rules.test.yml"], cwd=RULES.parent,
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0 and "SUCCESS" in r.stdout, r.stdout + r.stderr


def test_example_network_and_acl_agree() -> None:
    cfg = load_network(DEPLOY / "frontwatch" / "network.toml")
    assert cfg.stations and cfg.sites
    acl = (DEPLOY / "mosquitto" / "acl").read_text()
    assert re.search(r"^pattern write frontwatch/obs/%u$", acl, re.M)  # a station writes only its own topic
    users = set(re.findall(r"^user (\S+)$", acl, re.M))
    assert "frontwatch" in users
    for gw in cfg.network.gateways:
        assert gw in users and f"topic write frontwatch/obs/{gw}" in acl
    # the systemd env example names the variables `frontwatch run` reads
    env = (DEPLOY / "frontwatch" / "frontwatch.env.example").read_text()
    for var in ("FRONTWATCH_MQTT_USER", "FRONTWATCH_MQTT_PASSWORD", "FRONTWATCH_TOKEN"):
        assert var in env
