"""Offline replay: file decoding, bad records, broken files, naive times, the real record's mapping."""

from __future__ import annotations

import gzip
import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from frontwatch.config import load_network, parse_network
from frontwatch.errors import InputFileError
from frontwatch.replay import read_file, run_replay

ROOT = Path(__file__).resolve().parents[1]
HEADER = "station,time,wind_dir_deg,wind_speed_ms,temp_c,dewpoint_c,pressure_hpa\n"
NET = parse_network({"network": {"utc_offset_hours": 10},
                     "stations": [{"id": "A", "lat": -27, "lon": 153, "onshore_from_deg": 75},
                                  {"id": "B", "lat": -27.1, "lon": 153, "onshore_from_deg": 75}]})


def write(tmp_path, text, name="obs.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_bad_record_is_counted_and_skipped_with_its_line(tmp_path):
    p = write(tmp_path, HEADER + "A,2026-01-14T00:00:00Z,80,3.0,25.0,18.0,1010\n"
              "A,2026-01-14T00:01:00Z,80,fast,25.0,18.0,1010\n"
              "A,2026-01-14T00:02:00Z,400,3.0,25.0,18.0,1010\n"
              "A,2026-01-14T00:03:00Z,80,3.0,25.1,18.0,1010\n")
    d = read_file(p, NET)
    assert len(d) == 2
    assert [(b.line, b.field) for b in d.bad] == [(3, "wind_speed_ms"), (4, "wind_dir_deg")]
    assert str(d.bad[0]).startswith(f"{p}, line 3, field 'wind_speed_ms'")


def test_broken_file_names_file_and_line(tmp_path):
    p = write(tmp_path, HEADER + "A,2026-01-14T00:00:00Z,80,3.0,25.0,18.0,1010\nA,1,2,3,4,5,6,7,8,9\n")
    with pytest.raises(InputFileError, match=r"obs.csv: malformed table: .*line 3"):
        read_file(p, NET)


def test_missing_time_column_is_an_error(tmp_path):
    p = write(tmp_path, "station,when,temp_c\nA,x,1\n")
    with pytest.raises(InputFileError, match="no 'time' column"):
        read_file(p, NET)


def test_naive_times_need_a_zone(tmp_path):
    p = write(tmp_path, HEADER + "A,2026-01-14 10:00:00,80,3.0,25.0,18.0,1010\n")
    no_zone = parse_network({"stations": [{"id": "A", "lat": 0, "lon": 0, "onshore_from_deg": 0}]})
    with pytest.raises(InputFileError, match="line 2, field 'time'.*no UTC offset"):
        read_file(p, no_zone)
    d = read_file(p, NET)  # the network's UTC+10 applies to naive times
    assert d.columns["time"][0] == pytest.approx(1768348800.0)  # 2026-01-14T00:00:00Z


def test_units_by_suffix_and_column_mapping(tmp_path):
    p = write(tmp_path, "stn,ts,wspd_kt,t_f,rh\nA,2026-01-14T00:00:00+10:00,10,68,50\n")
    d = read_file(p, NET, columns={"stn": "station", "ts": "time", "wspd_kt": "wind_speed_kt", "t_f": "temp_f",
                                   "rh": "rh_pct"})
    c = d.columns
    assert c["wind_speed_ms"][0] == pytest.approx(5.14444, abs=1e-4)  # 1 kt = 1852/3600 m/s
    assert c["temp_c"][0] == pytest.approx(20.0)
    # Dewpoint from RH 50 % at 20 degC, Bolton (1980): about 9.3 degC (MetPy gives 9.27 degC)
    assert c["dewpoint_c"][0] == pytest.approx(9.27, abs=0.02)


ROWS = ["A,2026-01-14T00:00:00Z,80,3.5,25.25,18.0,1010.5", "A,2026-01-14T00:01:00Z,,0,25.0,,1010"]


@pytest.mark.parametrize("sep", [";", "\t", "|"])
def test_other_field_separators_are_found_from_the_header(tmp_path, sep):
    # European archives often write ';' (common practice); the header line says which is used
    text = "".join(line.replace(",", sep) + "\n" for line in [HEADER.strip(), *ROWS])
    for name, write_to in (("obs.csv", Path.write_text), ("obs.csv.gz", None)):
        p = tmp_path / name
        if write_to is None:
            with gzip.open(p, "wt") as fh:
                fh.write(text)
        else:
            p.write_text(text)
        d = read_file(p, NET)
        assert len(d) == 2 and not d.bad
        assert d.columns["temp_c"].tolist() == [25.25, 25.0]
        assert d.columns["pressure_hpa"][0] == 1010.5 and math.isnan(d.columns["dewpoint_c"][1])


def test_decimal_comma_with_a_configured_separator(tmp_path):
    p = write(tmp_path, "".join(line.replace(",", ";") + "\n" for line in [HEADER.strip(), *ROWS])
              .replace("3.5", "3,5").replace("25.25", "25,25").replace("1010.5", "1010,5").replace("18.0", "18,0"))
    net = parse_network({**NET.model_dump(exclude={"source"}), "input": {"delimiter": ";", "decimal": ","}})
    d = read_file(p, net)
    assert d.columns["wind_speed_ms"][0] == 3.5 and d.columns["temp_c"][0] == 25.25
    assert d.columns["pressure_hpa"][0] == 1010.5 and d.columns["dewpoint_c"][0] == 18.0 and not d.bad
    assert d.columns["temp_c"][1] == 25.0  # a stray decimal point in the same column is read too
    # a decimal comma with the separator left to the header would be ambiguous: refused
    from frontwatch.errors import ConfigError
    with pytest.raises(ConfigError, match="decimal"):
        parse_network({**NET.model_dump(exclude={"source"}), "input": {"decimal": ","}})
    with pytest.raises(ConfigError, match="delimiter and decimal"):
        parse_network({**NET.model_dump(exclude={"source"}), "input": {"delimiter": ",", "decimal": ","}})


def test_multiple_files_merge_in_time_order(tmp_path):
    a = write(tmp_path, HEADER + "A,2026-01-14T00:01:00Z,80,3,25,18,1010\n", "a.csv")
    b = write(tmp_path, HEADER + "B,2026-01-14T00:00:00Z,80,3,25,18,1010\n", "b.csv")
    r = run_replay([a, b], NET)
    assert r.records == 2 and set(r.stats.last_time) == {"A", "B"}


def test_parquet_is_read(tmp_path):
    pd = pytest.importorskip("pandas")
    p = tmp_path / "obs.parquet"
    pd.DataFrame({"station": ["A"], "time": ["2026-01-14T00:00:00Z"], "temp_c": [25.0]}).to_parquet(p)
    d = read_file(p, NET)
    assert d.columns["temp_c"][0] == 25.0 and math.isnan(d.columns.get("dewpoint_c", [math.nan])[0])


REAL = Path("/work/shared/data/real-coastal-1min/station-S116-2016-12_2017-06.csv.gz")
REAL_ALT = ROOT.parent / "shared/data/real-coastal-1min/station-S116-2016-12_2017-06.csv.gz"


def test_real_record_reads_through_a_mapping_alone(tmp_path):
    """The shared real record (data.gov.sg via github.com/grandey/access-data-gov-sg, Singapore Open
    Data Licence 1.0): local time UTC+8, knots, its own column names, read unchanged."""
    src = REAL if REAL.exists() else REAL_ALT
    if not src.exists():
        pytest.skip("shared real record not present on this machine")
    head = tmp_path / "head.csv"
    with gzip.open(src, "rt") as fh:
        head.write_text("".join(next(fh) for _ in range(3000)))
    cfg = load_network(ROOT / "examples/real-coastal-s116.toml")
    d = read_file(head, cfg)
    assert len(d) == 2999 and not d.bad
    # first row 2016-12-01 00:00:59 local (UTC+8) = 2016-11-30T16:00:59Z
    assert d.columns["time"][0] == pytest.approx(1480521659.0)
    assert 20 < d.columns["temp_c"][0] < 35 and 15 < d.columns["dewpoint_c"][0] < 30


def test_cli_replay_writes_events_and_fails_cleanly(tmp_path):
    net = tmp_path / "net.toml"
    net.write_text('[network]\nutc_offset_hours = 0\n[[stations]]\nid = "A"\nlat = 40\nlon = 0\n'
                   'onshore_from_deg = 180\n')
    from tests.synth import passage

    obs, _ = passage("breeze", seed=3)
    rows = [HEADER.strip()]
    for o in obs:
        rec = o.to_record()
        rows.append(",".join("" if rec[k] is None else str(rec[k]) for k in
                             ("station", "time", "wind_dir_deg", "wind_speed_ms", "temp_c", "dewpoint_c",
                              "pressure_hpa")))
    csv = write(tmp_path, "\n".join(rows) + "\n")
    out = tmp_path / "ev.jsonl"
    r = subprocess.run([sys.executable, "-m", "frontwatch.cli", "replay", str(csv), "--config", str(net),
                        "--events", str(out), "-q"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    evs = [json.loads(x) for x in out.read_text().splitlines()]
    assert [e["kind"] for e in evs] == ["breeze_front"]
    r = subprocess.run([sys.executable, "-m", "frontwatch.cli", "replay", str(tmp_path / "missing.csv"),
                        "--config", str(net)], capture_output=True, text=True)
    assert r.returncode != 0 and r.stderr.strip().count("\n") == 0 and "missing.csv" in r.stderr


def test_replay_writes_alerts_and_cap_files(tmp_path):
    """The demo scenario's site outputs offline: every JSONL line has a type, and each alert also
    becomes one CAP 1.2 document (its required elements are checked in tests/test_alerts_cap.py)."""
    import xml.etree.ElementTree as ET

    out = tmp_path / "alerts.jsonl"
    cap = tmp_path / "cap"
    r = subprocess.run([sys.executable, "-m", "frontwatch.cli", "replay", str(ROOT / "replay_data/observations.csv"),
                        "--config", str(ROOT / "replay_data/network.toml"), "--alerts", str(out), "--cap", str(cap),
                        "--cap-status", "Exercise", "-q"], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    rows = [json.loads(x) for x in out.read_text().splitlines()]
    assert rows and all(row["type"] in ("forecast", "alert", "course") for row in rows)
    alerts = [row for row in rows if row["type"] == "alert"]
    files = sorted(cap.glob("*.xml"))
    assert len(files) == len(alerts) > 0
    ns = {"c": "urn:oasis:names:tc:emergency:cap:1.2"}
    doc = ET.parse(files[0]).getroot()
    assert doc.find("c:status", ns).text == "Exercise" and doc.find("c:info/c:category", ns).text == "Met"
