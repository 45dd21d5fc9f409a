"""deploy/mosquitto: the real Mosquitto binary accepts the configuration, and the ACL does what it
says: a station publishes its own topic and no other, over TLS; anonymous logins are refused.

The test copies the configuration with only paths and ports changed (each change is asserted, so a
reshaped file fails here rather than being tested half), makes a throw-away CA and server
certificate with openssl and a password file with mosquitto_passwd, runs the broker briefly on
free ports of 127.0.0.1, then stops it.
"""

from __future__ import annotations

import getpass
import shutil
import socket
import subprocess
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.test_dashboard_support import free_port

DEPLOY = Path(__file__).resolve().parents[1] / "deploy" / "mosquitto"
MOSQUITTO = shutil.which("mosquitto") or ("/usr/sbin/mosquitto" if Path("/usr/sbin/mosquitto").exists() else None)
PASSWD = shutil.which("mosquitto_passwd")
OPENSSL = shutil.which("openssl")

pytestmark = [pytest.mark.broker,
              pytest.mark.skipif(not (MOSQUITTO and PASSWD and OPENSSL),
                                 reason="needs the mosquitto, mosquitto_passwd and openssl binaries")]

USERS = {"frontwatch": "svc-pw", "GS001": "st1-pw", "desk": "desk-pw"}


def _run(*cmd: str, cwd: Path) -> None:
    subprocess.run(cmd, cwd=cwd, check=True, capture_output=True, timeout=30)


def _certs(d: Path) -> None:
    _run(OPENSSL or "openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj", "/CN=test-ca",
         "-keyout", "ca.key", "-out", "ca.crt", cwd=d)
    _run(OPENSSL or "openssl", "req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=localhost", "-keyout", "server.key",
         "-out", "server.csr", cwd=d)
    (d / "ext.cnf").write_text("subjectAltName=DNS:localhost,IP:127.0.0.1\n")
    _run(OPENSSL or "openssl", "x509", "-req", "-in", "server.csr", "-CA", "ca.crt", "-CAkey", "ca.key",
         "-CAcreateserial", "-days", "2", "-extfile", "ext.cnf", "-out", "server.crt", cwd=d)


def _wait_port(port: int, proc: subprocess.Popen[bytes], timeout: float = 8.0) -> None:
    end = time.time() + timeout
    while time.time() < end:
        if proc.poll() is not None:
            raise AssertionError(f"mosquitto exited {proc.returncode}: {proc.stderr.read().decode() if proc.stderr else ''}")
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.2):
                return
        except OSError:
            time.sleep(0.05)
    raise AssertionError(f"mosquitto did not listen on {port}")


@pytest.fixture(scope="module")
def broker(tmp_path_factory: pytest.TempPathFactory) -> Iterator[dict[str, Any]]:
    d = tmp_path_factory.mktemp("mosq")
    (d / "certs").mkdir()
    _certs(d / "certs")
    for i, (user, pw) in enumerate(USERS.items()):
        args = [PASSWD or "mosquitto_passwd", "-b"] + (["-c"] if i == 0 else []) + [str(d / "passwords"), user, pw]
        subprocess.run(args, check=True, capture_output=True, timeout=30)
    shutil.copy(DEPLOY / "acl", d / "acl")
    plain, tls = free_port(), free_port()
    text = (DEPLOY / "mosquitto.conf").read_text()
    changes = {
        "/etc/mosquitto/frontwatch/": f"{d}/",
        "persistence_location /var/lib/mosquitto/": f"persistence_location {d}/",
        "listener 1883 127.0.0.1": f"listener {plain} 127.0.0.1",
        "listener 8883\n": f"listener {tls} 127.0.0.1\n",
    }
    for old, new in changes.items():
        assert old in text, f"deploy/mosquitto/mosquitto.conf no longer has {old!r}"
        text = text.replace(old, new)
    # Started as root, mosquitto drops to the 'mosquitto' user, which cannot read pytest's private
    # temp folder: stay as the user running the test instead (a test-only line).
    conf = d / "mosquitto.conf"
    conf.write_text(f"user {getpass.getuser()}\n" + text)
    proc = subprocess.Popen([MOSQUITTO or "mosquitto", "-c", str(conf)], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        _wait_port(plain, proc)
        _wait_port(tls, proc)
        yield {"plain": plain, "tls": tls, "ca": str(d / "certs" / "ca.crt"), "proc": proc}
    finally:
        proc.terminate()
        try:
            proc.wait(5)
        except subprocess.TimeoutExpired:
            proc.kill()


def _client(name: str, port: int, user: str | None, pw: str | None, ca: str | None = None) -> tuple[Any, int]:
    """Connect and return (client, CONNACK reason code as int; 0 = accepted)."""
    import paho.mqtt.client as mqtt

    c = mqtt.Client(mqtt.CallbackAPIVersion.VERSION2, client_id=name)
    if user is not None:
        c.username_pw_set(user, pw)
    if ca is not None:
        c.tls_set(ca_certs=ca)
    result: dict[str, int] = {}
    done = threading.Event()

    def on_connect(client: Any, userdata: Any, flags: Any, rc: Any, props: Any = None) -> None:
        result["rc"] = rc.value if hasattr(rc, "value") else int(rc)
        done.set()

    c.on_connect = on_connect
    c.connect("127.0.0.1", port, keepalive=10)
    c.loop_start()
    done.wait(5)
    return c, result.get("rc", -1)


def test_broker_accepts_the_config_and_listens(broker: dict[str, Any]) -> None:
    assert broker["proc"].poll() is None


def test_station_may_publish_only_its_own_topic_over_tls(broker: dict[str, Any]) -> None:
    got: list[str] = []
    svc, rc = _client("svc", broker["plain"], "frontwatch", USERS["frontwatch"])
    assert rc == 0
    subscribed = threading.Event()
    svc.on_message = lambda c, u, m: got.append(m.topic)
    svc.on_subscribe = lambda *a: subscribed.set()
    svc.subscribe("frontwatch/obs/#", qos=1)
    assert subscribed.wait(5)
    st, rc = _client("GS001", broker["tls"], "GS001", USERS["GS001"], ca=broker["ca"])
    assert rc == 0
    for topic in ("frontwatch/obs/GS002", "frontwatch/events/GS001", "frontwatch/obs/GS001"):
        st.publish(topic, b'{"station": "GS001", "time": "2026-01-14T00:00:00Z"}', qos=1).wait_for_publish(5)
    end = time.time() + 3
    while "frontwatch/obs/GS001" not in got and time.time() < end:
        time.sleep(0.05)
    time.sleep(0.3)  # let anything wrongly allowed arrive too
    assert got == ["frontwatch/obs/GS001"]
    st.loop_stop()
    svc.loop_stop()


def test_anonymous_and_wrong_password_are_refused(broker: dict[str, Any]) -> None:
    _, rc = _client("anon", broker["plain"], None, None)
    assert rc != 0
    _, rc = _client("bad", broker["tls"], "GS001", "wrong", ca=broker["ca"])
    assert rc != 0


def test_reader_cannot_publish_observations(broker: dict[str, Any]) -> None:
    got: list[str] = []
    svc, _ = _client("svc2", broker["plain"], "frontwatch", USERS["frontwatch"])
    subscribed = threading.Event()
    svc.on_message = lambda c, u, m: got.append(m.topic)
    svc.on_subscribe = lambda *a: subscribed.set()
    svc.subscribe("frontwatch/obs/#", qos=1)
    assert subscribed.wait(5)
    desk, rc = _client("desk", broker["tls"], "desk", USERS["desk"], ca=broker["ca"])
    assert rc == 0
    desk.publish("frontwatch/obs/GS001", b"{}", qos=1).wait_for_publish(5)
    # a marker the service itself may send, to know the broker has handled the desk's message
    svc.publish("frontwatch/status", b"online", qos=1).wait_for_publish(5)
    time.sleep(0.5)
    assert got == []
    desk.loop_stop()
    svc.loop_stop()
