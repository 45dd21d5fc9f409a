"""TLS and password authentication against a Mosquitto started here with such a config: a throwaway
CA and server certificate made with the openssl command line, a password file made with
mosquitto_passwd."""

from __future__ import annotations

import asyncio
import json
import shutil
import subprocess
from pathlib import Path

import pytest
from broker import Mosquitto, have_mosquitto, wait_until

from frontwatch.config import load_network
from frontwatch.service.publish import publish_messages
from frontwatch.service.runner import Service
from frontwatch.service.settings import ServiceSettings, TLSFiles, parse_broker_url

pytestmark = [
    pytest.mark.broker,
    pytest.mark.skipif(not (have_mosquitto() and shutil.which("openssl") and shutil.which("mosquitto_passwd")),
                       reason="needs mosquitto, openssl and mosquitto_passwd"),
]


def _certs(d: Path) -> tuple[Path, Path, Path]:
    """(CA certificate, server certificate, server key) for 127.0.0.1."""
    d.mkdir(parents=True, exist_ok=True)

    def run(*args: str) -> None:
        subprocess.run(["openssl", *args], cwd=d, check=True, capture_output=True)

    run("req", "-x509", "-newkey", "rsa:2048", "-nodes", "-keyout", "ca.key", "-out", "ca.crt", "-days", "1",
        "-subj", "/CN=frontwatch test CA")
    run("req", "-newkey", "rsa:2048", "-nodes", "-keyout", "server.key", "-out", "server.csr",
        "-subj", "/CN=127.0.0.1")
    (d / "san.cnf").write_text("subjectAltName=IP:127.0.0.1,DNS:localhost\n")
    run("x509", "-req", "-in", "server.csr", "-CA", "ca.crt", "-CAkey", "ca.key", "-CAcreateserial",
        "-out", "server.crt", "-days", "1", "-extfile", "san.cnf")
    for f in ("server.key", "ca.crt", "server.crt"):
        (d / f).chmod(0o644)
    return d / "ca.crt", d / "server.crt", d / "server.key"


@pytest.fixture(scope="module")
def secure_broker(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("secure")
    ca, crt, key = _certs(d / "tls")
    pw = d / "passwd"
    subprocess.run(["mosquitto_passwd", "-b", "-c", str(pw), "station-feed", "s3cret-Gannet"], check=True,
                   capture_output=True)
    pw.chmod(0o644)
    m = Mosquitto(d / "broker", listener_extra=[f"cafile {ca}", f"certfile {crt}", f"keyfile {key}"],
                  extra=["allow_anonymous false", f"password_file {pw}"])
    m.start()
    yield m, ca
    m.stop()


def _settings(port: int, prefix: str, ca: Path | None, user: str | None, pw: str | None) -> ServiceSettings:
    return ServiceSettings(broker=parse_broker_url(f"mqtts://127.0.0.1:{port}"), prefix=prefix,
                           client_id=prefix + "-svc", username=user, password=pw,
                           tls=TLSFiles(ca_file=str(ca) if ca else None), db_path=None, http_port=None,
                           backoff_min_s=0.1, backoff_max_s=0.5)


async def test_tls_with_password_delivers(secure_broker, prefix: str, svc_scenario) -> None:  # type: ignore[no-untyped-def]
    m, ca = secure_broker
    cfg = load_network(svc_scenario[0])
    st = _settings(m.port, prefix, ca, "station-feed", "s3cret-Gannet")
    svc = Service(cfg, st)
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    assert await wait_until(svc.connected.is_set, 10)
    rec = {"station": "GR01", "time": "2026-01-01T00:00:00Z", "temp_c": 20.0, "wind_speed_ms": 2.0}
    await publish_messages([(0.0, f"{prefix}/obs/GR01", json.dumps(rec).encode(), 1)],
                           st.but(client_id=prefix + "-pub"))
    assert await wait_until(lambda: svc.engine.stats.used == 1, 10)
    stop.set()
    await run


@pytest.mark.parametrize("user,pw,ca", [("station-feed", "wrong", True), (None, None, True),
                                        ("station-feed", "s3cret-Gannet", False)],
                         ids=["bad-password", "anonymous", "untrusted-certificate"])
async def test_refused_without_the_right_credentials(secure_broker, prefix: str, svc_scenario, user, pw, ca,  # type: ignore[no-untyped-def]
                                                     caplog) -> None:
    m, ca_file = secure_broker
    cfg = load_network(svc_scenario[0])
    svc = Service(cfg, _settings(m.port, prefix, ca_file if ca else None, user, pw))
    stop = asyncio.Event()
    run = asyncio.create_task(svc.run(stop))
    await asyncio.sleep(1.5)
    assert not svc.connected.is_set()
    assert not run.done()  # it keeps retrying (with backoff) rather than dying
    assert any("unavailable" in r.getMessage() for r in caplog.records)
    stop.set()
    await asyncio.wait_for(run, 5)
