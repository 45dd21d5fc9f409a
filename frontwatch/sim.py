"""Labelled scenario generator: per-minute station records of an invented coast with known events.

`generate(ScenarioSpec(...))` returns a Scenario: the network (dict for config.parse_network and TOML
text), the observations (pandas DataFrame with the canonical columns of DESIGN 3.1; `time` holds ISO
8601 text with Z, missing values are NaN/NA, a calm wind has no direction and speed 0), the labels
(true passage or onset time per station and kind), the breeze fronts (speed, heading, arrival at
sites) and the injected faults. `Scenario.write(dir)` writes them as files.

The physics is in sim_weather (background), sim_events (breeze front, land breeze), sim_lookalikes
(cold and gust fronts, nuisances) and sim_observe (noise, faults, records); see docs/scenarios.md.
Deterministic for a seed: every part draws from its own numpy Generator spawned from the seed.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass, field, replace
from datetime import date, datetime, timedelta, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .sim_events import breeze_front, land_breeze
from .sim_lookalikes import (
    apply_cold_front,
    cloud_shadows,
    gust_front,
    is_light,
    light_variable,
    plan_cold_front,
)
from .sim_observe import add_faults, observe, to_table
from .sim_plan import BREEZE_KINDS, make_plan, parse_day
from .sim_setting import Setting, make_setting, network_doc, network_toml
from .sim_weather import MIN_PER_DAY, Clock, build_background
from .timeutil import parse_time

LABEL_KINDS = ("breeze_front", "land_breeze", "gust_front", "cold_front")


@dataclass(frozen=True)
class ScenarioSpec:
    seed: int = 7
    days: int = 4
    stations: int = 9
    hemisphere: str = "north"  # "south": latitudes < 0, onshore wind backs through the afternoon
    shore: str = "straight"  # "bay": a curved shore, each station facing its own way
    start_date: str | None = None  # local date of day 0; default a midsummer date of the hemisphere
    noise_scale: float = 1.0  # 1 = ordinary sensors (and turbulence, unless set apart below), 2 = doubled
    turbulence_scale: float | None = None  # the air's turbulence and wander apart; None = noise_scale
    weak_inland: bool = False  # breeze signatures fade within ~10 km instead of ~35 km
    smeared_fraction: float = 0.0  # share of stations reporting a 10-minute running-mean wind
    declare_averaging: bool = True  # write wind_averaging_min = 10 for those (False: test blind)
    plan: tuple[str, ...] | None = None  # day kinds, e.g. ("breeze", "cold_front+land_breeze")
    fault_rate: float = 1.0  # 0 = no sensor faults
    max_inland_km: float = 40.0

    def validate(self) -> None:
        if self.days < 1 or self.stations < 1:
            raise ValueError("days and stations must be at least 1")
        if not 0.0 <= self.smeared_fraction <= 1.0:
            raise ValueError("smeared_fraction must be within 0..1")
        if self.noise_scale < 0 or self.fault_rate < 0 or (self.turbulence_scale or 0.0) < 0:
            raise ValueError("noise_scale, turbulence_scale and fault_rate must not be negative")
        for d in self.plan or ():
            parse_day(d)
        if self.start_date is not None:
            try:
                date.fromisoformat(self.start_date)
            except ValueError as exc:
                raise ValueError(f"start_date {self.start_date!r} is not a date YYYY-MM-DD: {exc}") from None


PRESETS: dict[str, dict[str, Any]] = {
    "ordinary": {},
    "noisy": {"noise_scale": 2.0, "weak_inland": True},
    "noisy_sensors": {"noise_scale": 2.0, "turbulence_scale": 1.0, "weak_inland": True},
    "smeared": {"smeared_fraction": 0.3},
    "south": {"hemisphere": "south"},
    "curved": {"shore": "bay"},
    "bench": {"stations": 90, "days": 19},
}


def preset(name: str, **overrides: Any) -> ScenarioSpec:
    """A named preset with some fields changed; ValueError lists the presets on a bad name."""
    if name not in PRESETS:
        raise ValueError(f"unknown preset {name!r}: choose from {', '.join(PRESETS)}")
    return replace(ScenarioSpec(**PRESETS[name]), **{k: v for k, v in overrides.items() if v is not None})


@dataclass
class Scenario:
    spec: ScenarioSpec
    setting: Setting
    network: dict[str, Any]
    network_toml: str
    observations: pd.DataFrame
    labels: list[dict[str, Any]]
    fronts: list[dict[str, Any]]
    faults: list[dict[str, Any]] = field(default_factory=list)
    nuisances: list[dict[str, Any]] = field(default_factory=list)
    days: list[dict[str, Any]] = field(default_factory=list)

    def write(self, out: str | Path) -> dict[str, Path]:
        """Write network.toml, observations.csv, labels.jsonl, fronts.jsonl, faults.jsonl,
        nuisances.jsonl and scenario.json (the spec and the day plan) into `out`."""
        d = Path(out)
        d.mkdir(parents=True, exist_ok=True)
        paths = {name: d / name for name in ("network.toml", "observations.csv", "labels.jsonl", "fronts.jsonl",
                                              "faults.jsonl", "nuisances.jsonl", "scenario.json")}
        paths["network.toml"].write_text(self.network_toml, encoding="utf-8")
        write_csv(self.observations, paths["observations.csv"])
        for name, items in (("labels.jsonl", self.labels), ("fronts.jsonl", self.fronts),
                            ("faults.jsonl", self.faults), ("nuisances.jsonl", self.nuisances)):
            paths[name].write_text("".join(json.dumps(x) + "\n" for x in items), encoding="utf-8")
        meta = {"spec": asdict(self.spec), "days": self.days, "records": len(self.observations),
                "stations": len(self.setting.stations), "note": "invented setting, generated data"}
        paths["scenario.json"].write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")
        return paths


def write_csv(df: pd.DataFrame, path: Path) -> None:
    """The records as CSV: empty cell = missing, numbers in their shortest form (22.0 -> 22).

    pyarrow's writer, about ten times faster than pandas' for the benchmark file. No value holds
    a comma or a quote (generated ids and ISO times), so nothing is quoted.
    """
    import pyarrow as pa
    import pyarrow.csv as pacsv

    table = pa.Table.from_pandas(df, preserve_index=False)
    with open(path, "wb") as fh:  # the header written here: pyarrow would quote it
        fh.write((",".join(df.columns) + "\n").encode())
        pacsv.write_csv(table, fh, write_options=pacsv.WriteOptions(include_header=False, quoting_style="none"))


def _clock(spec: ScenarioSpec, offset_h: float) -> Clock:
    default = "2027-07-12" if spec.hemisphere == "north" else "2027-01-18"
    day0 = date.fromisoformat(spec.start_date or default)
    tz = timezone(timedelta(hours=offset_h))
    start = int(datetime(day0.year, day0.month, day0.day, tzinfo=tz).timestamp())
    return Clock(start, spec.days * MIN_PER_DAY, (day0 - date(1970, 1, 1)).days)


def _note_faults(labels: list[dict[str, Any]], faults: list[dict[str, Any]]) -> None:
    """Say on a label when a fault hides part of its passage (+-15 min), so scorers can tell."""
    from .timeutil import parse_time

    by_station: dict[str, list[tuple[float, float, str]]] = {}
    for f in faults:
        if f["kind"] in ("gap", "stuck_vane", "dropout"):
            by_station.setdefault(f["station"], []).append(
                (parse_time(f["start"]), parse_time(f["end"]), f["kind"] + (f" {f['field']}" if "field" in f else "")))
    for lab in labels:
        t = parse_time(lab["time"])
        hits = sorted({k for a, b, k in by_station.get(lab["station"], []) if a < t + 900 and b > t - 900})
        if hits:
            extra = "sensor fault near passage: " + ", ".join(hits)
            lab["note"] = f"{lab['note']}; {extra}" if "note" in lab else extra


def generate(spec: ScenarioSpec | None = None) -> Scenario:
    """Generate a labelled scenario (deterministic for spec.seed)."""
    spec = spec or ScenarioSpec()
    spec.validate()
    r_set, r_plan, r_bg, r_ev, r_noise, r_fault = (np.random.default_rng(s)
                                                   for s in np.random.SeedSequence(spec.seed).spawn(6))
    setting = make_setting(r_set, spec.stations, spec.hemisphere, spec.shore, spec.max_inland_km)
    south = spec.hemisphere == "south"
    plans = make_plan(r_plan, spec.days, setting.inland_bearing_deg, south, spec.plan)
    clock = _clock(spec, setting.utc_offset_hours)
    colds = {p.index: plan_cold_front(setting, p, r_ev) for p in plans if p.kind == "cold_front"}
    fields = build_background(setting, plans, clock, r_bg, {d: cf.switch() for d, cf in colds.items()})

    labels: list[dict[str, Any]] = []
    fronts: list[dict[str, Any]] = []
    nuisances: list[dict[str, Any]] = []
    for p in plans:
        day_breeze: list[dict[str, Any]] = []
        if is_light(p):
            nuisances += light_variable(fields, setting, p, clock, r_ev)
        if p.kind in BREEZE_KINDS:
            day = (date(1970, 1, 1) + timedelta(days=clock.start_local_days + p.index)).strftime("%Y%m%d")
            day_breeze, front, ends = breeze_front(fields, setting, p, clock, r_ev, spec.weak_inland,
                                                   f"front-{day}")
            labels += day_breeze
            fronts.append(front)
            nuisances += ends
        if p.kind == "cold_front":
            labels += apply_cold_front(fields, setting, colds[p.index], clock, r_ev)
        if p.kind == "storm" or "gust_front" in p.extras:
            breeze_min = np.full(len(setting.stations), np.nan)
            if day_breeze:
                index = {s.id: i for i, s in enumerate(setting.stations)}
                for b in day_breeze:
                    breeze_min[index[b["station"]]] = (parse_time(b["time"]) - clock.start_epoch) / 60.0
            labels += gust_front(fields, setting, p, clock, r_ev, breeze_min)
        if "shadows" in p.extras:
            nuisances += cloud_shadows(fields, setting, p, clock, r_ev)
        if "land_breeze" in p.extras:
            nxt = colds.get(p.index + 1)
            labels += land_breeze(fields, setting, p, clock, r_ev,
                                  None if nxt is None else float(nxt.passage_min.min()))

    n = len(setting.stations)
    smeared = np.zeros(n, dtype=bool)
    if spec.smeared_fraction > 0:
        k = max(1, round(spec.smeared_fraction * n))
        smeared[r_set.choice(n, size=min(k, n), replace=False)] = True
    no_pres = r_set.random(n) < 0.15
    no_rain = r_set.random(n) < 0.2
    no_pres[0] = no_rain[0] = False
    exposure = r_set.uniform(0.65, 1.15, n)  # sheltered to open masts (from memory)
    rep = observe(fields, r_noise, spec.noise_scale, smeared, no_pres, no_rain, exposure, spec.turbulence_scale)
    ids = [s.id for s in setting.stations]
    faults = add_faults(rep, r_fault, clock, ids, spec.fault_rate) if spec.fault_rate > 0 else []
    table = to_table(rep, clock, ids, r_fault, spec.fault_rate, faults)
    labels.sort(key=lambda x: (x["time"], x["station"]))
    nuisances.sort(key=lambda x: (x["time"], x["station"]))
    _note_faults(labels, faults)

    smeared_ids = {ids[i] for i in np.flatnonzero(smeared)}
    doc = network_doc(setting, smeared_ids, spec.declare_averaging)
    header = (f"Sallowmere coast: an INVENTED setting (generated by frontwatch simulate, seed {spec.seed}).\n"
              "Not a real place; the coordinates lie in open ocean on purpose.")
    if smeared_ids and not spec.declare_averaging:
        header += "\nSome stations report a 10-minute running-mean wind; this file does not say which."
    days = [{"day": p.index, "kind": p.label, "synoptic_from_deg": round(p.syn_from_deg, 1),
             "synoptic_speed_ms": round(p.syn_speed_ms, 2)} for p in plans]
    return Scenario(spec, setting, doc, network_toml(doc, header), table, labels, fronts, faults,
                    nuisances, days)
