"""Validation of the network file (frontwatch.config): errors name the file, the key and the station;
both time-zone forms; and fuzzed documents raise only ConfigError."""

from __future__ import annotations

import copy
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from frontwatch.config import NetworkConfig, load_network, parse_network
from frontwatch.errors import ConfigError

GOOD_TOML = """\
[network]
name = "gull-point"
utc_offset_hours = 10

[[stations]]
id = "GP01"
lat = -31.20
lon = 152.90
onshore_from_deg = 75

[[stations]]
id = "GP02"
lat = -31.25
lon = 152.80
onshore_from_deg = 80
onshore_halfwidth_deg = 60

[[sites]]
id = "harbour-green"
lat = -31.23
lon = 152.85
gust_limit_ms = 15
"""

BASE: dict[str, Any] = {
    "network": {"name": "gull-point", "utc_offset_hours": 10},
    "stations": [
        {"id": "GP01", "lat": -31.2, "lon": 152.9, "onshore_from_deg": 75},
        {"id": "GP02", "lat": -31.25, "lon": 152.8, "onshore_from_deg": 80},
    ],
    "sites": [{"id": "harbour-green", "lat": -31.23, "lon": 152.85}],
}


def _doc(**changes: Any) -> dict[str, Any]:
    d = copy.deepcopy(BASE)
    d.update(changes)
    return d


def _write(tmp_path: Path, text: str | bytes, name: str = "net.toml") -> Path:
    p = tmp_path / name
    if isinstance(text, bytes):
        p.write_bytes(text)
    else:
        p.write_text(text, encoding="utf-8")
    return p


def test_good_file_loads(tmp_path: Path) -> None:
    cfg = load_network(_write(tmp_path, GOOD_TOML))
    assert isinstance(cfg, NetworkConfig)
    assert [s.id for s in cfg.stations] == ["GP01", "GP02"]
    gp02 = cfg.station("GP02")
    assert gp02 is not None and gp02.onshore_halfwidth_deg == 60
    assert cfg.source.endswith("net.toml")
    assert cfg.southern  # derived from the station latitudes


# --- unknown keys name the key and the station ------------------------------------------------

def test_unknown_station_key_names_key_station_and_file(tmp_path: Path) -> None:
    text = GOOD_TOML.replace("onshore_halfwidth_deg = 60", "onshore_halfwith_deg = 60")
    p = _write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_network(p)
    msg = str(info.value)
    assert str(p) in msg
    assert "onshore_halfwith_deg" in msg and "'GP02'" in msg and "unknown key" in msg
    assert "stations[1]" in msg


def test_unknown_site_key_names_the_site() -> None:
    doc = _doc()
    doc["sites"][0]["gust_limt_ms"] = 12
    with pytest.raises(ConfigError, match=r"sites\[0\]\.gust_limt_ms \(site 'harbour-green'\): unknown key"):
        parse_network(doc, "mem.toml")


@pytest.mark.parametrize(
    ("doc", "key"),
    [
        (_doc(detectr={"min_score": 3}), "detectr"),
        (_doc(network={"name": "x", "utc_ofset_hours": 10}), "network.utc_ofset_hours"),
        (_doc(detector={"min_scor": 3}), "detector.min_scor"),
        (_doc(qc={"temp_max": 50}), "qc.temp_max"),
    ],
)
def test_unknown_keys_elsewhere_are_named(doc: dict[str, Any], key: str) -> None:
    with pytest.raises(ConfigError) as info:
        parse_network(doc, "mem.toml")
    assert f"{key}: unknown key" in str(info.value)
    assert str(info.value).startswith("mem.toml: ")


def test_out_of_range_value_names_station() -> None:
    doc = _doc()
    doc["stations"][0]["lat"] = 95.0
    with pytest.raises(ConfigError, match=r"stations\[0\]\.lat \(station 'GP01'\)"):
        parse_network(doc)


def test_duplicate_station_ids_are_refused() -> None:
    doc = _doc()
    doc["stations"][1]["id"] = "GP01"
    with pytest.raises(ConfigError, match="duplicate station id.*GP01"):
        parse_network(doc)


def test_unknown_column_target_is_named() -> None:
    with pytest.raises(ConfigError, match="WSPD.*wind_speed_knots"):
        parse_network(_doc(input={"columns": {"WSPD": "wind_speed_knots"}}))


# --- bad files name the file ----------------------------------------------------------------

def test_bad_toml_names_the_file_and_line(tmp_path: Path) -> None:
    p = _write(tmp_path, GOOD_TOML.replace('id = "GP02"', 'id = "GP02'), name="broken.toml")
    with pytest.raises(ConfigError) as info:
        load_network(p)
    msg = str(info.value)
    assert msg.startswith(f"{p}: not valid TOML")
    assert "line 12" in msg  # tomllib reports where: line 12 holds the unclosed string


def test_missing_file_names_the_file(tmp_path: Path) -> None:
    p = tmp_path / "nowhere.toml"
    with pytest.raises(ConfigError, match="nowhere.toml: cannot read"):
        load_network(p)


def test_non_utf8_file_names_the_file(tmp_path: Path) -> None:
    p = _write(tmp_path, GOOD_TOML.encode().replace(b"gull-point", b"gull-\xe9point"), name="latin1.toml")
    with pytest.raises(ConfigError, match="latin1.toml"):
        load_network(p)


def test_reserved_source_key_is_refused(tmp_path: Path) -> None:
    p = _write(tmp_path, 'source = "x"\n' + GOOD_TOML)
    with pytest.raises(ConfigError, match="source: unknown key"):
        load_network(p)


# --- both time-zone forms -------------------------------------------------------------------

def test_fixed_offset_zone() -> None:
    cfg = parse_network(_doc(network={"utc_offset_hours": 9.5}))
    assert cfg.tz is not None
    assert cfg.tz.utcoffset(None) == timedelta(hours=9.5)
    assert cfg.naive_tz == cfg.tz  # naive times default to the network's zone


def test_iana_zone() -> None:
    cfg = parse_network(_doc(network={"timezone": "Australia/Sydney"}))
    assert isinstance(cfg.tz, ZoneInfo)
    # IANA tz database: Sydney is UTC+11 in January (daylight saving) and UTC+10 in July.
    assert cfg.tz.utcoffset(datetime(2026, 1, 14, 12)) == timedelta(hours=11)
    assert cfg.tz.utcoffset(datetime(2026, 7, 14, 12)) == timedelta(hours=10)


def test_both_zone_forms_at_once_is_refused() -> None:
    with pytest.raises(ConfigError, match="not both"):
        parse_network(_doc(network={"utc_offset_hours": 10, "timezone": "Australia/Brisbane"}))


def test_offset_out_of_range_is_refused() -> None:
    with pytest.raises(ConfigError, match=r"network\.utc_offset_hours"):
        parse_network(_doc(network={"utc_offset_hours": 15}))


def test_naive_offset_overrides_network_zone() -> None:
    cfg = parse_network(_doc(network={"timezone": "Australia/Sydney"}, input={"naive_utc_offset_hours": 8}))
    assert cfg.naive_tz is not None and cfg.naive_tz.utcoffset(None) == timedelta(hours=8)


def test_unknown_iana_zone_is_a_config_error_at_parse() -> None:
    with pytest.raises(ConfigError, match="network.*Mars/Olympus_Mons"):
        parse_network(_doc(network={"timezone": "Mars/Olympus_Mons"}))


def test_unknown_iana_zone_is_refused_at_load(tmp_path: Path) -> None:
    p = _write(tmp_path, GOOD_TOML.replace("utc_offset_hours = 10", 'timezone = "Mars/Olympus_Mons"'))
    with pytest.raises(ConfigError, match="net.toml.*Mars/Olympus_Mons"):
        load_network(p)


# --- fuzz: whatever the document, only ConfigError --------------------------------------------

toml_values = st.recursive(
    st.none() | st.booleans() | st.integers(-1000, 1000) | st.floats(allow_nan=True) | st.text(max_size=10),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
    max_leaves=8,
)
station_keys = st.sampled_from(["id", "lat", "lon", "onshore_from_deg", "onshore_halfwidth_deg",
                                "elevation_m", "name", "wind_averaging_min", "extra"])


@settings(max_examples=150, deadline=None)
@given(key=station_keys, value=toml_values, table=st.sampled_from(["stations", "sites", "network", "detector",
                                                                   "qc", "input"]))
def test_fuzzed_documents_raise_only_config_error(key: str, value: Any, table: str) -> None:
    doc = _doc()
    if table in ("stations", "sites"):
        doc[table][0][key] = value
    else:
        doc[table] = {**doc.get(table, {}), key: value}
    try:
        cfg = parse_network(doc, "fuzz.toml")
    except ConfigError as err:
        assert str(err).startswith("fuzz.toml: ")
    else:
        assert isinstance(cfg, NetworkConfig)
