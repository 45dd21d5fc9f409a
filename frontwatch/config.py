"""The network file (TOML) -> one typed, validated config, read once and passed down.

Every table forbids unknown keys, so a typo is an error naming the key rather than a silently
ignored setting. Errors name the file and the key path.
"""

from __future__ import annotations

import tomllib
from datetime import tzinfo
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from .errors import ConfigError
from .timeutil import make_tz


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class NetworkInfo(_Strict):
    name: str = "unnamed"
    utc_offset_hours: float | None = Field(None, ge=-14, le=14)
    timezone: str | None = None
    hemisphere: str | None = None  # "north"/"south"; derived from station latitudes when absent
    gateways: list[str] = Field(default_factory=list)  # MQTT topic names that may speak for several stations

    @model_validator(mode="after")
    def _one_zone(self) -> NetworkInfo:
        if self.utc_offset_hours is not None and self.timezone:
            raise ValueError("give utc_offset_hours or timezone, not both")
        if self.hemisphere not in (None, "north", "south"):
            raise ValueError("hemisphere must be 'north' or 'south'")
        if self.timezone:
            try:
                make_tz(None, self.timezone)  # an unknown zone is an error here, naming the key
            except ConfigError as exc:
                raise ValueError(f"timezone: {exc}") from None
        return self


class StationConfig(_Strict):
    id: str = Field(min_length=1)
    lat: float = Field(ge=-90, le=90)
    lon: float = Field(ge=-180, le=180)
    onshore_from_deg: float = Field(ge=0, le=360)
    onshore_halfwidth_deg: float = Field(70.0, gt=0, le=120)  # DOMAIN.md: 45-90 deg in use (from memory)
    elevation_m: float | None = None
    name: str | None = None
    # Minutes of the running mean the station reports as its wind (10 for a 10-minute running mean
    # updated each minute). 1 means ordinary per-minute means. Used to un-smear the post-change wind.
    wind_averaging_min: int = Field(1, ge=1, le=20)


class SiteConfig(_Strict):
    id: str = Field(min_length=1)
    lat: float = Field(ge=-90, le=90)
    lon: float = Field(ge=-180, le=180)
    name: str | None = None
    station: str | None = None  # the site's own station; default: the nearest one
    gust_limit_ms: float | None = Field(None, gt=0)
    shift_limit_deg: float | None = Field(None, gt=0, le=180)
    temp_drop_limit_c: float | None = Field(None, gt=0)
    course_axis_deg: float | None = Field(None, ge=0, le=360)
    contacts: list[str] = Field(default_factory=list)
    webhooks: list[str] = Field(default_factory=list)


class QCSettings(_Strict):
    """Station QC limits. Range/step/persistence after Zahumensky (2004, WMO QC guidelines); the
    numbers themselves are from memory (DOMAIN.md) and are defaults to tune per network."""

    temp_min_c: float = -60.0
    temp_max_c: float = 60.0
    dewpoint_min_c: float = -70.0
    speed_max_ms: float = 75.0
    pressure_min_hpa: float = 500.0
    pressure_max_hpa: float = 1090.0
    temp_step_c: float = 4.0  # max change between consecutive minutes (from memory; WMO suggests ~3 K/min)
    dewpoint_step_c: float = 5.0
    speed_step_ms: float = 20.0
    pressure_step_hpa: float = 3.0
    dewpoint_excess_c: float = 0.5  # dewpoint may exceed temperature by this much (sensor tolerance)
    persist_min: int = 120  # minutes a value may stay exactly constant before it is held stuck
    vane_persist_min: int = 60  # minutes the wind direction may stay exactly fixed at speed
    late_s: float = 600.0  # records older than this behind the station's newest are 'late'
    gap_s: float = 300.0  # a silence longer than this is a gap: detector windows restart


class DetectorSettings(_Strict):
    """Station detector settings (see frontwatch/detect/ for what each one does)."""

    baseline_min: int = Field(30, ge=10, le=90)  # minutes of 'before' used against each candidate onset
    confirm_min: int = Field(3, ge=1, le=15)  # minutes after onset needed before deciding
    max_wait_min: int = Field(14, ge=3, le=40)  # how long a candidate may stay undecided
    refractory_min: int = Field(45, ge=5, le=240)  # no second event this soon after one
    repeat_min: int = Field(180, ge=0, le=720)  # a second breeze front / land breeze this soon is the same regime
    min_score: float = Field(5.0, gt=0)  # combined change strength (in noise units) to consider a candidate
    calm_ms: float = Field(0.8, ge=0)  # below this mean speed the direction is not trusted (ICAO ~1.5 m/s)
    min_shift_deg: float = Field(35.0, ge=5, le=180)  # wind turn that counts as a shift for breeze fronts
    breeze_min_temp_drop_c: float = Field(0.3, ge=0)  # temperature drop vs the trend (or with moisture rise)
    breeze_min_moisture_rise_c: float = Field(0.3, ge=0)
    # -dT + dTd (degC) of a breeze front: marine air is cooler and moister (Miller et al. 2003 report
    # drops to -2.5 degC and mixing ratio +1-2 g/kg; 0.8 is a weak inland front, from memory)
    breeze_min_marine_index_c: float = Field(0.8, ge=0)
    # Summed significance (noise units, each channel capped at 6) of the cooling, moistening and
    # onshore shifts needed to call a breeze front; a weak change waits until it has persisted.
    breeze_min_evidence: float = Field(10.0, ge=0)
    # Mean wind (m/s) behind a breeze front no stronger than this: the breeze blows at a few m/s,
    # at its strongest coasts about 10 (from memory); a wind swinging onshore at more, with the air
    # changing, is a squall's outflow, the more so where no gust is measured. As strong as a gust
    # front's gust (gust_front_gust_ms) by default
    breeze_max_speed_ms: float = Field(12.0, gt=0)
    # Minutes within which T, Td and the onshore wind must each change for one front (common practice)
    coherence_min: float = Field(6.0, ge=1, le=30)
    # An inland breeze front needs another station's within this many hours (0 = off); see
    # frontwatch/detect/corroborate.py
    corroborate_hours: float = Field(4.0, ge=0, le=24)
    day_start_h: float = Field(8.0, ge=0, le=24)  # local hours when a breeze front may start
    day_end_h: float = Field(20.0, ge=0, le=24)
    gust_front_pressure_jump_hpa: float = Field(1.2, gt=0)  # Engerer et al. 2008: 2-4.5 hPa jumps
    gust_front_temp_drop_c: float = Field(3.5, gt=0)  # Engerer et al. 2008: 5-11 K drops
    gust_front_gust_ms: float = Field(12.0, gt=0)
    cold_front_dewpoint_fall_c: float = Field(1.0, gt=0)  # Ahrens: dewpoint falls behind a cold front
    # ... and, unless the pressure jumps, the air behind it is colder against the day's trend (Ahrens,
    # from memory): a drier wind that is not cooler is the morning's mixing-out or a dry downdraft
    cold_front_temp_drop_c: float = Field(0.5, ge=0)
    land_breeze_max_ms: float = Field(6.0, gt=0)


class InputSettings(_Strict):
    """How foreign files are read: a column mapping (foreign name -> canonical name with unit
    suffix, e.g. wind_speed_kt) and the zone for naive times."""

    columns: dict[str, str] = Field(default_factory=dict)
    naive_utc_offset_hours: float | None = Field(None, ge=-14, le=14)
    station: str | None = None  # a file with no station column holds this station
    # CSV field separator; None: the one of ',', ';', tab, '|' the header line uses most (European
    # archives often write ';' with a decimal comma)
    delimiter: str | None = Field(None, min_length=1, max_length=1)
    decimal: str = Field(".", pattern=r"^[.,]$")  # the decimal mark of numbers in CSV files

    @model_validator(mode="after")
    def _marks_differ(self) -> InputSettings:
        if self.delimiter is not None and self.delimiter == self.decimal:
            raise ValueError(f"delimiter and decimal are both {self.decimal!r}")
        if self.delimiter is None and self.decimal == ",":
            raise ValueError("decimal = ',' needs an explicit delimiter (e.g. ';')")
        return self

    @field_validator("columns")
    @classmethod
    def _known_targets(cls, v: dict[str, str]) -> dict[str, str]:
        from .obs import split_unit

        for src, dst in v.items():
            if dst not in ("station", "time") and split_unit(dst) is None:
                raise ValueError(f"column {src!r} maps to unknown field {dst!r}")
        return v


class NetworkConfig(_Strict):
    network: NetworkInfo = Field(default_factory=lambda: NetworkInfo.model_validate({}))
    stations: list[StationConfig]
    sites: list[SiteConfig] = Field(default_factory=list)
    detector: DetectorSettings = Field(default_factory=lambda: DetectorSettings.model_validate({}))
    qc: QCSettings = Field(default_factory=lambda: QCSettings.model_validate({}))
    input: InputSettings = Field(default_factory=lambda: InputSettings.model_validate({}))
    source: str = "<memory>"  # where it was read from (set by load_network)

    @model_validator(mode="after")
    def _unique(self) -> NetworkConfig:
        ids = [s.id for s in self.stations]
        dup = {i for i in ids if ids.count(i) > 1}
        if dup:
            raise ValueError(f"duplicate station id(s): {sorted(dup)}")
        sids = [s.id for s in self.sites]
        if len(set(sids)) != len(sids):
            raise ValueError("duplicate site ids")
        known = set(ids)
        for s in self.sites:
            if s.station is not None and s.station not in known:
                raise ValueError(f"site {s.id!r} names unknown station {s.station!r}")
        return self

    @property
    def tz(self) -> tzinfo | None:
        return make_tz(self.network.utc_offset_hours, self.network.timezone)

    @property
    def naive_tz(self) -> tzinfo | None:
        if self.input.naive_utc_offset_hours is not None:
            return make_tz(self.input.naive_utc_offset_hours, None)
        return self.tz

    @property
    def southern(self) -> bool:
        if self.network.hemisphere:
            return self.network.hemisphere == "south"
        lats = [s.lat for s in self.stations]
        return bool(lats) and sum(lats) / len(lats) < 0

    def station(self, sid: str) -> StationConfig | None:
        return self._by_id().get(sid)

    def _by_id(self) -> dict[str, StationConfig]:
        cache = self.__dict__.get("_station_index")
        if cache is None:
            cache = {s.id: s for s in self.stations}
            object.__setattr__(self, "_station_index", cache)  # frozen model: cache outside fields
        return cache

    def with_detector(self, **changes: Any) -> NetworkConfig:
        """A copy with some detector settings changed (used by tuning)."""
        det = self.detector.model_copy(update=changes)
        DetectorSettings.model_validate(det.model_dump())
        return self.model_copy(update={"detector": det})


def _format_errors(source: str, err: ValidationError, doc: dict[str, Any]) -> str:
    parts = []
    for e in err.errors():
        loc = e["loc"]
        # Turn ('stations', 2, 'lat') into stations[2].lat, and name the station when we can.
        path = ""
        for p in loc:
            path += f"[{p}]" if isinstance(p, int) else (f".{p}" if path else str(p))
        hint = ""
        if len(loc) >= 2 and loc[0] in ("stations", "sites") and isinstance(loc[1], int):
            try:
                hint = f" ({loc[0][:-1]} {doc[loc[0]][loc[1]].get('id')!r})"
            except (KeyError, IndexError, AttributeError, TypeError):
                hint = ""
        msg = "unknown key" if e["type"] == "extra_forbidden" else e["msg"]
        parts.append(f"{path}{hint}: {msg}" if path else msg)
    return f"{source}: " + "; ".join(parts)


def parse_network(doc: dict[str, Any], source: str = "<memory>") -> NetworkConfig:
    try:
        return NetworkConfig.model_validate({**doc, "source": source})
    except ValidationError as exc:
        raise ConfigError(_format_errors(source, exc, doc)) from None


def load_network(path: str | Path) -> NetworkConfig:
    """Read and validate a network TOML file; ConfigError names the file and the key."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read network file: {exc.strerror or exc}") from None
    except UnicodeDecodeError as exc:
        raise ConfigError(f"{p}: not UTF-8 text (byte {exc.start}): a network file is TOML in UTF-8") from None
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{p}: not valid TOML: {exc}") from None
    if "source" in doc:
        raise ConfigError(f"{p}: source: unknown key")
    return parse_network(doc, str(p))
