"""Searching the detector's settings against labels: grid, random or successive halving, in parallel.

The observations are decoded once into a column store (one .npy file per field, memory-mapped by
every worker process), because decoding costs more than detecting; each trial re-runs the pure
Engine over the store with one DetectorSettings. A trial runs over every day once and is scored on
two halves split by local day (train, held-out); settings are chosen on train skill only, and the
held-out skill is reported beside it. The best settings are written as a TOML [detector] table.
"""

from __future__ import annotations

import itertools
import json
import math
import multiprocessing
import os
import random
import tomllib
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import Future, ProcessPoolExecutor
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta, tzinfo
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from .config import DetectorSettings, NetworkConfig
from .errors import ConfigError
from .events import PassageEvent
from .labels import Label
from .obs import Observation
from .score import Objective, ScoreReport, score

FIELDS = ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm")


# --------------------------------------------------------------------------------------------
# Local days


def local_day_numbers(times: np.ndarray, tz: tzinfo | None) -> np.ndarray:
    """Local calendar day (days since 1970-01-01 in the network's zone) of each epoch time.

    The zone's offset is looked up once per distinct UTC hour, so this stays fast on millions of
    records and is right across daylight-saving changes (which fall on whole hours).
    """
    t = np.asarray(times, dtype=np.float64)
    if t.size == 0:
        return np.zeros(0, dtype=np.int64)
    zone = tz if tz is not None else UTC
    hours = np.floor(t / 3600.0).astype(np.int64)
    uniq, inv = np.unique(hours, return_inverse=True)
    offs = np.array([(datetime.fromtimestamp(int(h) * 3600, UTC).astimezone(zone).utcoffset() or timedelta(0)).total_seconds()
                     for h in uniq.tolist()], dtype=np.float64)
    return np.floor((t + offs[inv]) / 86400.0).astype(np.int64)


def day_name(n: int) -> str:
    return (date(1970, 1, 1) + timedelta(days=int(n))).isoformat()


def split_days(days: Iterable[int], holdout_fraction: float, seed: int) -> tuple[list[int], list[int]]:
    """Split local days into (train, held-out): a seeded shuffle, whole days only.

    At least one day goes to each side when there are two or more days and the fraction is above 0.
    """
    ds = sorted(set(int(d) for d in days))
    if not 0.0 <= holdout_fraction < 1.0:
        raise ValueError("holdout_fraction must be in [0, 1)")
    n_test = round(len(ds) * holdout_fraction)
    if holdout_fraction > 0 and len(ds) >= 2:
        n_test = min(max(n_test, 1), len(ds) - 1)
    order = ds[:]
    random.Random(seed).shuffle(order)
    test = sorted(order[:n_test])
    train = sorted(order[n_test:])
    return train, test


# --------------------------------------------------------------------------------------------
# Column store: observations decoded once


class ObsStore:
    """Time-ordered observations as columns (times, station index, one float column per field).

    `day` holds each record's local day number, and because the records are in time order every
    local day is one contiguous slice (`day_slices`).
    """

    def __init__(self, stations: list[str], cols: dict[str, np.ndarray], time: np.ndarray,
                 station_idx: np.ndarray, day: np.ndarray, qc_done: bool = False) -> None:
        self.stations = stations
        self.qc_done = qc_done  # True: the records are QC's output (flagged values NaN, refused records gone)
        self.cols = cols
        self.time = time
        self.station_idx = station_idx
        self.day = day
        self._slices: dict[int, tuple[int, int]] | None = None

    def __len__(self) -> int:
        return int(self.time.shape[0])

    @property
    def day_slices(self) -> dict[int, tuple[int, int]]:
        if self._slices is None:
            d = np.asarray(self.day)
            if d.size == 0:
                self._slices = {}
            else:
                cuts = np.flatnonzero(np.diff(d)) + 1
                starts = np.concatenate(([0], cuts))
                ends = np.concatenate((cuts, [d.size]))
                self._slices = {int(d[s]): (int(s), int(e)) for s, e in zip(starts, ends, strict=True)}
        return self._slices

    @property
    def days(self) -> list[int]:
        return sorted(self.day_slices)

    @classmethod
    def from_observations(cls, observations: Iterable[Observation], tz: tzinfo | None) -> ObsStore:
        import array

        index: dict[str, int] = {}
        names: list[str] = []
        tcol = array.array("d")
        scol = array.array("i")
        fcols = {f: array.array("d") for f in FIELDS}
        apps = [fcols[f].append for f in FIELDS]
        for o in observations:
            si = index.get(o.station)
            if si is None:
                si = index[o.station] = len(names)
                names.append(o.station)
            tcol.append(o.time)
            scol.append(si)
            vals = (o.wind_dir_deg, o.wind_speed_ms, o.wind_gust_ms, o.temp_c, o.dewpoint_c, o.pressure_hpa,
                    o.rain_mm)
            for app, v in zip(apps, vals, strict=True):
                app(v)
        time = np.frombuffer(tcol, dtype=np.float64).copy()
        sidx = np.frombuffer(scol, dtype=np.int32).copy()
        cols = {f: np.frombuffer(fcols[f], dtype=np.float64).copy() for f in FIELDS}
        if time.size and np.any(np.diff(time) < 0):  # keep the engine's input in time order
            order = np.argsort(time, kind="stable")
            time, sidx = time[order], sidx[order]
            cols = {f: c[order] for f, c in cols.items()}
        return cls(names, cols, time, sidx, local_day_numbers(time, tz))

    def save(self, folder: str | Path) -> None:
        d = Path(folder)
        d.mkdir(parents=True, exist_ok=True)
        np.save(d / "time.npy", self.time)
        np.save(d / "station.npy", self.station_idx)
        np.save(d / "day.npy", self.day)
        for f, c in self.cols.items():
            np.save(d / f"{f}.npy", c)
        (d / "stations.json").write_text(json.dumps({"stations": self.stations, "qc_done": self.qc_done}))

    @classmethod
    def load(cls, folder: str | Path, mmap: bool = True) -> ObsStore:
        d = Path(folder)
        mode: Literal["r"] | None = "r" if mmap else None
        meta = json.loads((d / "stations.json").read_text())
        cols = {f: np.load(d / f"{f}.npy", mmap_mode=mode) for f in FIELDS}
        return cls(meta["stations"], cols, np.load(d / "time.npy", mmap_mode=mode),
                   np.load(d / "station.npy", mmap_mode=mode), np.load(d / "day.npy", mmap_mode=mode),
                   bool(meta["qc_done"]))

    def iter_observations(self, days: Iterable[int] | None = None, chunk: int = 65536,
                          stations: Sequence[int] | None = None) -> Iterator[Observation]:
        """Rebuild Observations for the chosen local days (all days when None), in time order;
        only those of the station indices `stations` when given."""
        pick = None if stations is None else np.asarray(sorted(stations), dtype=np.int32)
        sl = self.day_slices
        wanted = sorted(sl) if days is None else sorted(d for d in set(days) if d in sl)
        # Merge adjacent days into one range so the loop below runs over few, long slices.
        ranges: list[list[int]] = []
        for d in wanted:
            s, e = sl[d]
            if ranges and ranges[-1][1] == s:
                ranges[-1][1] = e
            else:
                ranges.append([s, e])
        names = self.stations
        for s, e in ranges:
            for a in range(s, e, chunk):
                b = min(a + chunk, e)
                sidx = np.asarray(self.station_idx[a:b])
                if pick is None:
                    cols = [np.asarray(self.cols[f][a:b]).tolist() for f in FIELDS]
                    tt = np.asarray(self.time[a:b]).tolist()
                else:
                    m = np.isin(sidx, pick)
                    sidx = sidx[m]
                    cols = [np.asarray(self.cols[f][a:b])[m].tolist() for f in FIELDS]
                    tt = np.asarray(self.time[a:b])[m].tolist()
                st = [names[i] for i in sidx.tolist()]
                for row in zip(st, tt, *cols, strict=True):
                    yield Observation(*row)

    def station_parts(self, n: int) -> list[list[int]]:
        """Station indices in `n` groups of about equal record counts (greedy, largest first).

        The station detectors are independent of each other, so one trial can run as `n` jobs,
        one per group, and the events put together are those of the whole run."""
        counts = np.bincount(np.asarray(self.station_idx), minlength=len(self.stations))
        parts: list[list[int]] = [[] for _ in range(max(1, n))]
        loads = [0] * len(parts)
        for i in np.argsort(-counts, kind="stable").tolist():
            if counts[i] == 0:
                continue
            k = loads.index(min(loads))
            parts[k].append(int(i))
            loads[k] += int(counts[i])
        return [p for p in parts if p]

    def window(self, station: str, t0: float, t1: float) -> dict[str, np.ndarray]:
        """One station's records with t0 <= time <= t1, as arrays (for plots)."""
        lo = int(np.searchsorted(self.time, t0, side="left"))
        hi = int(np.searchsorted(self.time, t1, side="right"))
        if station not in self.stations:
            return {"time": np.zeros(0), **{f: np.zeros(0) for f in FIELDS}}
        si = self.stations.index(station)
        mask = np.asarray(self.station_idx[lo:hi]) == si
        out = {"time": np.asarray(self.time[lo:hi])[mask]}
        for f in FIELDS:
            out[f] = np.asarray(self.cols[f][lo:hi])[mask]
        return out


def build_store(paths: Sequence[str | Path], config: NetworkConfig) -> tuple[ObsStore, int]:
    """Decode the files once with the replay reader (same mapping, units and order as replay).

    Returns the store and the number of bad records skipped.
    """
    from .replay import merge, read_file

    d = merge([read_file(p, config) for p in paths])
    return store_from_columns(d.station, d.columns, config.tz), sum(d.bad_by_reason.values())


def store_from_columns(station: np.ndarray, columns: dict[str, np.ndarray], tz: tzinfo | None) -> ObsStore:
    """A store from time-ordered canonical columns (frontwatch.replay's decoded table)."""
    names, sidx = np.unique(np.asarray(station, dtype=str), return_inverse=True)
    time = np.asarray(columns["time"], dtype=np.float64)
    n = time.shape[0]
    cols = {f: np.asarray(columns[f], dtype=np.float64) if f in columns else np.full(n, np.nan) for f in FIELDS}
    if n and np.any(np.diff(time) < 0):
        order = np.argsort(time, kind="stable")
        time, sidx = time[order], sidx[order]
        cols = {f: c[order] for f, c in cols.items()}
    return ObsStore([str(x) for x in names], cols, time, sidx.astype(np.int32), local_day_numbers(time, tz))


def apply_qc(store: ObsStore, config: NetworkConfig) -> ObsStore:
    """The store as the Engine's QC passes it on: flagged values NaN, refused records and records of
    stations not in the network dropped. QC does not depend on the detector settings, so a search
    runs it once instead of once per trial (run_detector then feeds the detectors directly)."""
    from .engine import Engine

    if store.qc_done:
        return store
    eng = Engine(config.model_copy(update={"sites": []}))
    keep = np.zeros(len(store), dtype=bool)
    cols = {f: np.array(store.cols[f], dtype=np.float64) for f in FIELDS}
    for i, o in enumerate(store.iter_observations()):
        q = eng.qc.get(o.station)
        if q is None:
            continue
        clean, _ = q.check(o)
        if clean is None:
            continue
        keep[i] = True
        for f in FIELDS:
            cols[f][i] = getattr(clean, f)
    out = ObsStore(store.stations, {f: c[keep] for f, c in cols.items()}, np.asarray(store.time)[keep],
                   np.asarray(store.station_idx)[keep], np.asarray(store.day)[keep], qc_done=True)
    return out


def run_detector(store: ObsStore, config: NetworkConfig, days: Iterable[int] | None = None,
                 stations: Sequence[int] | None = None, finish: bool = True,
                 near_misses: list[tuple[str, float, float, str]] | None = None) -> list[PassageEvent]:
    """The Engine over the store's records (only the detector matters here: sites are dropped).

    On a store that already went through apply_qc, the Engine's station detectors are fed the QC'd
    records directly, which is what Engine.feed does after its QC step, and the network steps that
    Engine.feed applies to each event afterwards (corroboration) run in finish_events. With
    `stations` (a group of station indices) and finish=False the raw station events of that group
    are returned, to be put together with the other groups' and finished once. The tests check
    that every path gives replay's events.
    """
    from .engine import Engine

    eng = Engine(config.model_copy(update={"sites": []}))
    if near_misses is not None:
        for det in eng.detectors.values():
            det.near_misses = near_misses  # one list for all: the label command's candidates
    out: list[PassageEvent] = []
    if store.qc_done:
        dets = eng.detectors
        for o in store.iter_observations(days, stations=stations):
            ev = dets[o.station].update(o)
            if ev is not None:
                out.append(ev)
        return finish_events(store, config, out) if finish else out
    if stations is not None:
        raise ValueError("station groups need a store that went through apply_qc")
    feed = eng.feed
    for o in store.iter_observations(days):
        for x in feed(o):
            if isinstance(x, PassageEvent):
                out.append(x)
    return out


def finish_events(store: ObsStore, config: NetworkConfig, raw: list[PassageEvent]) -> list[PassageEvent]:
    """Station detectors' events in the order the stream emitted them, through the Engine's
    per-event network step (Engine.network_events, with the weak calls it confirms after the fact).

    An event is emitted on the record of its station at `detected_at`; that record's position in
    the store is the stream order (records at one time keep the files' order)."""
    from .engine import Engine

    if not raw:
        return []
    sidx = {name: i for i, name in enumerate(store.stations)}
    times = np.asarray(store.time)
    stidx = np.asarray(store.station_idx)

    def position(e: PassageEvent) -> int:
        lo = int(np.searchsorted(times, e.detected_at, side="left"))
        hi = int(np.searchsorted(times, e.detected_at, side="right"))
        hit = np.flatnonzero(stidx[lo:hi] == sidx.get(e.station, -1))
        return lo + int(hit[0]) if hit.size else hi

    ordered = sorted(raw, key=lambda e: (e.detected_at, position(e)))
    eng = Engine(config.model_copy(update={"sites": []}))
    return [x for e in ordered for x in eng.network_events(e)]


# --------------------------------------------------------------------------------------------
# The search space file


class ParamSpec(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    values: list[float | int | bool] | None = None
    low: float | None = None
    high: float | None = None
    step: float | None = None  # grid spacing between low and high
    log: bool = False  # random draws uniform in log space

    @model_validator(mode="after")
    def _shape(self) -> ParamSpec:
        if self.values is not None:
            if self.low is not None or self.high is not None:
                raise ValueError("give values, or low/high, not both")
            if not self.values:
                raise ValueError("values is empty")
        elif self.low is None or self.high is None:
            raise ValueError("give values, or both low and high")
        elif self.high < self.low:
            raise ValueError("high is below low")
        elif self.log and self.low <= 0:
            raise ValueError("log needs low > 0")
        return self


class SearchSettings(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    method: Literal["grid", "random", "halving"] = "random"
    samples: int = Field(30, ge=1, le=100_000)  # settings to try (random, halving); grid: all combinations
    seed: int = 1
    holdout_fraction: float = Field(0.3, ge=0.0, lt=1.0)
    workers: int = Field(0, ge=0)  # 0: all cores
    eta: int = Field(3, ge=2, le=10)  # halving: keep 1/eta of the settings at each rung
    min_rung_labels: int = Field(20, ge=1)  # halving: target-kind labels the smallest rung should hold
    # Train gain over the current settings needed to change them; None: one standard error of the
    # current settings' train score (the one-standard-error rule of Breiman et al. 1984, CART).
    min_gain: float | None = Field(None, ge=0)


class ObjectiveSettings(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    metric: Literal["csi", "pod", "one_minus_far"] = "csi"
    target: str = "breeze_front"
    tolerance_min: float = Field(20.0, gt=0)
    delay_penalty_per_min: float = Field(0.01, ge=0)
    delay_free_min: float = Field(4.0, ge=0)

    def objective(self) -> Objective:
        return Objective(self.metric, self.target, self.tolerance_min * 60.0, self.delay_penalty_per_min,
                         self.delay_free_min)


class SearchSpace(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)
    search: SearchSettings = Field(default_factory=lambda: SearchSettings.model_validate({}))
    objective: ObjectiveSettings = Field(default_factory=lambda: ObjectiveSettings.model_validate({}))
    params: dict[str, ParamSpec]

    @model_validator(mode="after")
    def _known(self) -> SearchSpace:
        fields = DetectorSettings.model_fields
        bad = [k for k in self.params if k not in fields]
        if bad:
            raise ValueError(f"unknown detector setting(s) {bad} (known: {', '.join(fields)})")
        if not self.params:
            raise ValueError("params is empty: name at least one detector setting to search")
        from .score import TARGETS

        if self.objective.target not in TARGETS:
            raise ValueError(f"objective.target {self.objective.target!r} is not one of {', '.join(TARGETS)}")
        return self


def parse_space(doc: dict[str, Any], source: str = "<memory>") -> SearchSpace:
    try:
        return SearchSpace.model_validate(doc)
    except ValidationError as exc:
        parts = []
        for e in exc.errors():
            path = ".".join(str(p) for p in e["loc"])
            parts.append(f"{path}: {'unknown key' if e['type'] == 'extra_forbidden' else e['msg']}")
        raise ConfigError(f"{source}: " + "; ".join(parts)) from None


def load_space(path: str | Path) -> SearchSpace:
    p = Path(path)
    try:
        doc = tomllib.loads(p.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read search space file: {exc.strerror or exc}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{p}: not valid TOML: {exc}") from None
    return parse_space(doc, str(p))


def _is_int_field(name: str) -> bool:
    return DetectorSettings.model_fields[name].annotation is int


def _cast(name: str, v: float | int | bool) -> float | int | bool:
    ann = DetectorSettings.model_fields[name].annotation
    if ann is int:
        return int(round(float(v)))
    if ann is bool:
        return bool(v)
    return float(v)


def _grid_values(name: str, p: ParamSpec) -> list[Any]:
    if p.values is not None:
        return [_cast(name, v) for v in p.values]
    assert p.low is not None and p.high is not None
    step = p.step if p.step is not None else (1.0 if _is_int_field(name) else (p.high - p.low) / 4 or 1.0)
    n = int(math.floor((p.high - p.low) / step + 1e-9)) + 1
    vals = [_cast(name, p.low + i * step) for i in range(n)]
    return list(dict.fromkeys(vals))


def _draw(name: str, p: ParamSpec, rng: random.Random) -> Any:
    if p.values is not None:
        return _cast(name, rng.choice(p.values))
    assert p.low is not None and p.high is not None
    if _is_int_field(name):
        return rng.randint(int(math.ceil(p.low)), int(math.floor(p.high)))
    if p.log:
        return _cast(name, math.exp(rng.uniform(math.log(p.low), math.log(p.high))))
    return _cast(name, round(rng.uniform(p.low, p.high), 4))


def candidates(space: SearchSpace, base: DetectorSettings) -> list[dict[str, Any]]:
    """The settings to try, as changes to `base`; invalid combinations (e.g. out of a field's range)
    are dropped. Grid: every combination; random/halving: `samples` distinct draws (seeded)."""
    names = sorted(space.params)
    out: list[dict[str, Any]] = []
    seen: set[tuple[Any, ...]] = set()

    def keep(ch: dict[str, Any]) -> None:
        key = tuple(ch[n] for n in names)
        if key in seen:
            return
        try:
            DetectorSettings.model_validate({**base.model_dump(), **ch})
        except ValidationError:
            return
        seen.add(key)
        out.append(ch)

    if space.search.method == "grid":
        for combo in itertools.product(*(_grid_values(n, space.params[n]) for n in names)):
            keep(dict(zip(names, combo, strict=True)))
        return out
    rng = random.Random(space.search.seed)
    tries = 0
    while len(out) < space.search.samples and tries < space.search.samples * 50:
        tries += 1
        keep({n: _draw(n, space.params[n], rng) for n in names})
    return out


# --------------------------------------------------------------------------------------------
# Trials and the search


@dataclass
class Trial:
    index: int  # 0 is the current settings of the network file
    changes: dict[str, Any]
    settings: DetectorSettings
    rung: int = 0
    train_days: int = 0
    train: ScoreReport | None = None
    test: ScoreReport | None = None
    train_value: float = float("nan")
    test_value: float = float("nan")
    events: list[PassageEvent] = field(default_factory=list)

    @property
    def is_current(self) -> bool:
        return self.index == 0


@dataclass
class TuneResult:
    space: SearchSpace
    trials: list[Trial]  # final evaluation of every setting (halving: the rung it stopped at)
    best: Trial
    current: Trial
    train_days: list[int]
    test_days: list[int]
    labels: list[Label]
    wall_s: float
    records: int
    workers: int
    top: Trial | None = None  # the best train objective, before the one-standard-error rule
    margin: float = 0.0  # the train gain `top` needed over the current settings to be chosen


# Worker process state: the store (memory-mapped) and the config, set once by the initializer.
_W: dict[str, Any] = {}


def _worker_init(store_dir: str, config_json: str) -> None:
    _W["store"] = ObsStore.load(store_dir)
    _W["config"] = NetworkConfig.model_validate_json(config_json)


def _worker_run(changes: dict[str, Any], days: list[int] | None,
                stations: list[int] | None = None) -> list[PassageEvent]:
    cfg: NetworkConfig = _W["config"].with_detector(**changes)
    return run_detector(_W["store"], cfg, days, stations, finish=False)


def _label_predicate(target: str) -> Callable[[Label], bool]:
    if target == "any":
        return lambda lb: lb.is_passage
    return lambda lb: lb.kind == target


def split_by_day(items: Iterable[Any], when: Callable[[Any], float], tz: tzinfo | None,
                 days: set[int]) -> list[Any]:
    xs = list(items)
    if not xs:
        return []
    nums = local_day_numbers(np.array([when(x) for x in xs]), tz)
    return [x for x, d in zip(xs, nums.tolist(), strict=True) if d in days]


class _Runner:
    """Runs trials in worker processes (or in this process for workers=1) with one progress bar."""

    def __init__(self, store: ObsStore, store_dir: str, config: NetworkConfig, workers: int,
                 progress: Callable[[float], None]) -> None:
        self.store, self.config, self.workers, self.progress = store, config, workers, progress
        self.pool: ProcessPoolExecutor | None = None
        if workers > 1:
            self.pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                            initializer=_worker_init,
                                            initargs=(store_dir, config.model_dump_json()))

    def run(self, jobs: list[tuple[dict[str, Any], list[int] | None, float]]) -> list[list[PassageEvent]]:
        if self.pool is None:
            res = []
            for ch, days, work in jobs:
                res.append(run_detector(self.store, self.config.with_detector(**ch), days))
                self.progress(work)
            return res
        # Each trial as one job per group of stations, so the workers stay busy to the end of a rung
        # even when the trials do not divide evenly among them.
        grouped = self.store.qc_done
        parts: list[list[int] | None] = list(self.store.station_parts(self.workers)) if grouped else [None]
        futs: list[list[Future[list[PassageEvent]]]] = []
        for ch, days, work in jobs:
            row = [self.pool.submit(_worker_run, ch, days, part) for part in parts]
            for f in row:
                f.add_done_callback(self._ticker(work / len(parts)))
            futs.append(row)
        out = []
        for (ch, _, _), row in zip(jobs, futs, strict=True):
            evs = [e for f in row for e in f.result()]
            out.append(finish_events(self.store, self.config.with_detector(**ch), evs) if grouped else evs)
        return out

    def _ticker(self, work: float) -> Callable[[Future[list[PassageEvent]]], None]:
        def done(_f: Future[list[PassageEvent]]) -> None:
            self.progress(work)

        return done

    def close(self) -> None:
        if self.pool is not None:
            self.pool.shutdown()


def tune(store: ObsStore, config: NetworkConfig, labels: Sequence[Label], space: SearchSpace, *,
         store_dir: str | None = None, workers: int | None = None,
         progress: Callable[[float, float], None] | None = None) -> TuneResult:
    """Search `space` around the network's current detector settings; see the module docstring.

    `progress(done, total)` is called as trials finish (units: records run through a detector).
    `store_dir` is where `store` is saved for worker processes (required when workers > 1).
    """
    import tempfile
    import time as _time

    t_start = _time.perf_counter()
    obj = space.objective.objective()
    tz = config.tz
    nworkers = workers if workers is not None else (space.search.workers or os.cpu_count() or 1)
    nworkers = max(1, nworkers)
    all_days = store.days
    train_days, test_days = split_days(all_days, space.search.holdout_fraction, space.search.seed)
    train_set, test_set = set(train_days), set(test_days)
    lab_train = split_by_day(labels, lambda lb: lb.time, tz, train_set)
    lab_test = split_by_day(labels, lambda lb: lb.time, tz, test_set)
    sizes = {d: e - s for d, (s, e) in store.day_slices.items()}

    cands = candidates(space, config.detector)
    current = {k: getattr(config.detector, k) for k in space.params}
    cands = [c for c in cands if c != current]
    trials = [Trial(0, {}, config.detector)] + [
        Trial(i + 1, ch, config.detector.model_copy(update=ch)) for i, ch in enumerate(cands)]

    # Plan the rungs: (trial indices, days they run on). Grid/random: one rung over all days.
    rungs_days: list[list[int] | None]
    if space.search.method == "halving":
        eta = space.search.eta
        n_rungs = max(1, int(math.floor(math.log(max(len(trials), 1), eta))) + 1)
        # The smallest rung must still hold enough labels of the target kind to rank settings by.
        pos_l = _label_predicate(obj.target)
        n_pos = sum(1 for lb in lab_train if pos_l(lb))
        while n_rungs > 1 and n_pos * eta ** -(n_rungs - 1) < space.search.min_rung_labels:
            n_rungs -= 1
        order = train_days[:]
        random.Random(space.search.seed + 7).shuffle(order)
        rungs_days = []
        for r in range(n_rungs - 1):
            k = max(1, math.ceil(len(order) * eta ** (r - (n_rungs - 1))))
            rungs_days.append(sorted(order[:k]))
        rungs_days.append(None)
    else:
        eta, n_rungs, rungs_days = 1, 1, [None]

    def work(days: list[int] | None) -> float:
        return float(sum(sizes[d] for d in (all_days if days is None else days)))

    # Work planned, in records run; for halving an upper bound (the current settings may be carried
    # along), and the bar is closed at 100 % when the search ends.
    total, count = 0.0, len(trials)
    for days in rungs_days:
        total += work(days) * count
        count = max(1, math.ceil(count / eta)) + 1
    done = [0.0]

    def tick(w: float) -> None:
        done[0] += w
        if progress is not None:
            progress(done[0], total)

    tmp: tempfile.TemporaryDirectory[str] | None = None
    if nworkers > 1 and store_dir is None:
        tmp = tempfile.TemporaryDirectory(prefix="frontwatch-store-")
        store.save(tmp.name)
        store_dir = tmp.name
    runner = _Runner(store, store_dir or "", config, nworkers, tick)
    try:
        alive = trials
        for r, days in enumerate(rungs_days):
            last = days is None
            jobs = [(t.changes, days, work(days)) for t in alive]
            results = runner.run(jobs)
            for t, evs in zip(alive, results, strict=True):
                t.rung = r
                if last:
                    t.events = evs
                    t.train = score(split_by_day(evs, lambda e: e.onset, tz, train_set), lab_train,
                                    tolerance_s=obj.tolerance_s, target=obj.target)
                    t.test = score(split_by_day(evs, lambda e: e.onset, tz, test_set), lab_test,
                                   tolerance_s=obj.tolerance_s, target=obj.target)
                    t.train_days = len(train_days)
                    t.train_value = obj.value(t.train)
                    t.test_value = obj.value(t.test)
                else:
                    sub = set(days or [])
                    t.train = score(evs, split_by_day(lab_train, lambda lb: lb.time, tz, sub),
                                    tolerance_s=obj.tolerance_s, target=obj.target)
                    t.train_days = len(sub)
                    t.train_value = obj.value(t.train)
            if not last:
                keep = max(1, math.ceil(len(alive) / eta))
                ranked = sorted(alive, key=lambda t: (-t.train_value, t.index))
                survivors = ranked[:keep]
                if all(not t.is_current for t in survivors):
                    survivors.append(trials[0])  # the current settings always reach the end, for comparison
                alive = sorted(survivors, key=lambda t: t.index)
        if progress is not None:
            progress(done[0], done[0])  # halving's total was an estimate: end the bar at 100 %
    finally:
        runner.close()
        if tmp is not None:
            tmp.cleanup()

    finalists = [t for t in trials if t.rung == n_rungs - 1 and t.test is not None]
    top = sorted(finalists, key=lambda t: (-t.train_value, len(t.changes), t.index))[0]
    # One-standard-error rule: change the settings only for a train gain larger than the noise of
    # the current settings' train score (or the stated min_gain).
    cur = trials[0]
    assert cur.train is not None
    margin = space.search.min_gain if space.search.min_gain is not None else obj.standard_error(cur.train)
    best = top if top.train_value - cur.train_value > margin else cur
    return TuneResult(space, trials, best, cur, train_days, test_days, list(labels),
                      _time.perf_counter() - t_start, len(store), nworkers, top, margin)


# --------------------------------------------------------------------------------------------
# Output: the [detector] table


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        r = repr(float(f"{v:.6g}"))
        return r if any(ch in r for ch in ".eE") or r in ("inf", "nan") else r + ".0"
    return json.dumps(str(v))


def detector_toml(settings: DetectorSettings, searched: Iterable[str] = (), header: str = "") -> str:
    """The settings as a TOML [detector] table (every field; the searched ones are marked)."""
    marked = set(searched)
    lines = [f"# {ln}" for ln in header.splitlines()] if header else []
    lines.append("[detector]")
    for name in DetectorSettings.model_fields:
        v = getattr(settings, name)
        lines.append(f"{name} = {_toml_value(v)}" + ("  # searched" if name in marked else ""))
    return "\n".join(lines) + "\n"


def result_header(res: TuneResult) -> str:
    def f(x: float | None) -> str:
        return "n/a" if x is None else f"{x:.3f}"

    b, c = res.best, res.current
    kept = ""
    if b is c and res.top is not None and res.top is not c:
        kept = (f"\nkept the current settings: the top train objective (#{res.top.index}, "
                f"{res.top.train_value:.3f}) beat theirs ({c.train_value:.3f}) by less than {res.margin:.3f}")
    return (f"frontwatch tune: {res.space.search.method} search, {len(res.trials)} settings, objective "
            f"{res.space.objective.metric} of {res.space.objective.target}\n"
            f"chosen on {len(res.train_days)} train days; held-out {len(res.test_days)} days\n"
            f"held-out CSI {f(b.test.overall.csi if b.test else None)} "
            f"(current settings {f(c.test.overall.csi if c.test else None)})" + kept)


def cached_store(paths: Sequence[str | Path], config: NetworkConfig, cache_dir: str | Path | None,
                 qc: bool = True) -> tuple[ObsStore, int, bool]:
    """build_store (then apply_qc when `qc`), kept in `cache_dir` and reused while the files and the
    reading and QC settings are the same.

    Returns (store, bad records skipped, whether the cache was used).
    """
    key = json.dumps({
        "files": [[str(Path(p).resolve()), Path(p).stat().st_size, Path(p).stat().st_mtime_ns]
                  for p in paths if Path(p).exists()],
        "input": config.input.model_dump(), "network": config.network.model_dump(),
        "qc": config.qc.model_dump(), "stations": [st.id for st in config.stations], "qc_applied": qc,
    }, sort_keys=True)
    if cache_dir is not None:
        d = Path(cache_dir)
        meta = d / "key.json"
        if meta.exists():
            try:
                m = json.loads(meta.read_text())
                if m.get("key") == key:
                    return ObsStore.load(d), int(m.get("bad", 0)), True
            except (OSError, ValueError):
                pass
    store, bad = build_store(paths, config)
    if qc:
        store = apply_qc(store, config)
    if cache_dir is not None:
        d = Path(cache_dir)
        store.save(d)
        (d / "key.json").write_text(json.dumps({"key": key, "bad": bad}))
    return store, bad, False
