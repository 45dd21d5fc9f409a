"""The pure core: feed(obs) -> what it caused (passage events, site forecasts, alerts).

No I/O, no clock, no globals. Time is the observation's own timestamp, so an offline replay and
the live service give the same outputs for the same input. snapshot()/restore() round-trip the
whole state as JSON-able data.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from typing import Any, Protocol

import numpy as np

from .config import NetworkConfig
from .detect.corroborate import Corroborator
from .detect.station import StationDetector
from .events import PassageEvent
from .obs import CANONICAL, NAN, Observation
from .qc import StationQC

SNAPSHOT_VERSION = 1
MAX_UNKNOWN = 256  # distinct unknown station ids counted by name; the rest under '(others)'
BATCH_MIN = 128  # records from which feed_many takes the station-major batch path: below, its fixed
# costs per chunk (~0.5 ms) outweigh what it saves (bench: record by record is faster up to ~100)


class Output(Protocol):
    """Anything the core emits: it can render itself as its contract JSON object."""

    def to_dict(self) -> dict[str, Any]: ...


class EngineStats:
    """Counters the shell reports (records, QC flags by reason, events by kind, unknown stations)."""

    def __init__(self) -> None:
        self.records = 0
        self.used = 0
        self.qc = Counter[str]()
        self.events = Counter[str]()
        self.unknown_stations = Counter[str]()
        self.last_time: dict[str, float] = {}

    def to_dict(self) -> dict[str, Any]:
        return {"records": self.records, "used": self.used, "qc": dict(self.qc), "events": dict(self.events),
                "unknown_stations": dict(self.unknown_stations), "last_time": dict(self.last_time)}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> EngineStats:
        s = cls()
        s.records = int(d["records"])
        s.used = int(d["used"])
        s.qc.update(d["qc"])
        s.events.update(d["events"])
        s.unknown_stations.update(d["unknown_stations"])
        s.last_time.update(d["last_time"])
        return s


class Engine:
    """Wires QC, one detector per station (cloned from one prototype) and the site watch."""

    def __init__(self, config: NetworkConfig) -> None:
        self.config = config
        self.stats = EngineStats()
        prototype = StationDetector(config.detector, tz=config.tz, southern=config.southern,
                                    alone=len(config.stations) == 1, emit_repeats=True)
        self.detectors: dict[str, StationDetector] = {}
        self.qc: dict[str, StationQC] = {}
        for st in config.stations:
            self.detectors[st.id] = prototype.clone(st)
            self.qc[st.id] = StationQC(config.qc, st.id)
        self.watch = _make_watch(config)
        self._pairs = {k: (self.qc[k], self.detectors[k]) for k in self.detectors}  # one lookup per record
        self.corroborate = Corroborator(config)
        for k, det in self.detectors.items():
            det.inland = not self.corroborate.coastal.get(k, True)
        # frontwatch.batch's constants, made once: each station's scan parameters, and each group of
        # stations' parameters and onshore sines/cosines stacked (a gateway's chunks repeat a group)
        self._scan_params: dict[str, Any] = {}
        self._scan_groups: dict[tuple[str, ...], Any] = {}

    def feed(self, obs: Observation) -> list[Output]:
        """Take one observation (any station, event-time order per station) and return its outputs."""
        stats = self.stats
        stats.records += 1
        pair = self._pairs.get(obs.station)
        if pair is None:
            # bounded: a flood of junk ids must not grow memory or snapshots
            u = stats.unknown_stations
            key = obs.station if obs.station in u or len(u) < MAX_UNKNOWN else "(others)"
            u[key] += 1
            return []
        clean, flags = pair[0].check(obs)
        if flags:
            for f in flags:
                stats.qc[f] += 1
            if clean is None:
                return []
        stats.used += 1
        stats.last_time[obs.station] = obs.time
        ev = pair[1].update(clean)  # type: ignore[arg-type]
        watch = self.watch
        if ev is None:
            return [] if watch is None else watch.observe(clean, None)
        evs = self.network_events(ev)
        if not evs:
            return [] if watch is None else watch.observe(clean, None)
        out: list[Output] = list(evs)
        if watch is not None:
            for x in evs[:-1]:
                out.extend(watch.passage(x, obs.time))
            out.extend(watch.observe(clean, evs[-1]))
        return out

    def network_events(self, ev: PassageEvent) -> list[PassageEvent]:
        """A station detector's event through the network check (corroboration), counted by kind:
        what feed() emits for it (frontwatch.batch and frontwatch.tune call it in the same stream
        order). The event as the network reports it comes last, after the weak calls it confirmed
        after the fact (corroborate.py, _confirm_late; in onset order); [] when the network drops
        it (a repeat of a confirmed breeze front)."""
        got = self.corroborate.check(ev)
        if got is None:
            return []
        late, self.corroborate.late = self.corroborate.late, []
        for x in (got, *late):
            self.stats.events[x.kind] += 1
        return [*late, got]

    def feed_many(self, records: Sequence[Observation]) -> list[Output]:
        """feed() over `records` in their order, in one call: the same outputs in the same order,
        the same statistics and state afterwards (any engine state; late, duplicate, out-of-order
        and unknown-station records included)."""
        return [o for _, o in self.feed_indexed(records)]

    def feed_indexed(self, records: Sequence[Observation],
                     qc_flags: dict[str, list[str]] | None = None) -> list[tuple[int, Output]]:
        """feed_many() with each output paired with the index (in `records`) of the record that
        caused it. With `qc_flags`, each known station's QC flag names of these records are added
        to it, record by record in order (what the dashboard shows).

        From BATCH_MIN records on (and with numba) the chunk goes station by station through the
        compiled scan (frontwatch.batch); fewer go record by record, where that is cheaper. A
        failure part-way leaves the engine part-way through the chunk."""
        if len(records) >= BATCH_MIN:
            from . import batch

            if batch.available():
                station, columns = batch.columns_of(records)
                return batch.run_indexed(self, station, columns, qc_flags=qc_flags)
        out: list[tuple[int, Output]] = []
        feed = self.feed
        qc = self.stats.qc
        seen = dict(qc) if qc_flags is not None else {}
        total = qc.total()
        for i, o in enumerate(records):
            produced = feed(o)
            if produced:
                out.extend((i, x) for x in produced)
            if qc_flags is not None and qc.total() != total:
                # a record raises each flag at most once: the counters that rose are its flags
                qc_flags.setdefault(o.station, []).extend(k for k, v in qc.items() if v > seen.get(k, 0))
                seen = dict(qc)
                total = qc.total()
        return out

    def feed_columns(self, station: Sequence[str], columns: Mapping[str, Sequence[float]],
                     qc_flags: dict[str, list[str]] | None = None) -> list[tuple[int, Output]]:
        """feed_indexed() for records given as columns: station ids, and 'time' and the canonical
        fields (frontwatch.obs.CANONICAL; a missing one is all NaN) as equal-length sequences.
        A gateway's arrays reach the batch path this way without an Observation per record."""
        n = len(station)
        if n >= BATCH_MIN:
            from . import batch

            if batch.available():
                ids = np.empty(n, dtype=object)
                ids[:] = station
                return batch.run_indexed(self, ids, columns, qc_flags=qc_flags)
        nan = [NAN] * n
        cols = [_floats(columns.get(k, nan)) for k in ("time", *CANONICAL)]
        return self.feed_indexed(list(map(Observation, list(station), *cols)), qc_flags)

    def snapshot(self) -> dict[str, Any]:
        return {
            "version": SNAPSHOT_VERSION,
            "stats": self.stats.to_dict(),
            "detectors": {k: d.snapshot() for k, d in self.detectors.items()},
            "qc": {k: q.snapshot() for k, q in self.qc.items()},
            "watch": self.watch.snapshot() if self.watch is not None else None,
            "corroborate": self.corroborate.snapshot(),
        }

    @classmethod
    def restore(cls, config: NetworkConfig, snap: dict[str, Any]) -> Engine:
        from .errors import StateError

        if snap.get("version") != SNAPSHOT_VERSION:
            raise StateError(f"snapshot version {snap.get('version')!r}, expected {SNAPSHOT_VERSION}")
        eng = cls(config)
        eng.stats = EngineStats.from_dict(snap["stats"])
        for k, d in snap["detectors"].items():
            if k in eng.detectors:
                eng.detectors[k].restore(d)
        for k, q in snap["qc"].items():
            if k in eng.qc:
                eng.qc[k].restore(q)
        eng._pairs = {k: (eng.qc[k], eng.detectors[k]) for k in eng.detectors}
        eng.corroborate.restore(snap["corroborate"])
        if eng.watch is not None and snap.get("watch") is not None:
            eng.watch.restore(snap["watch"])
        return eng


def _floats(col: Sequence[float]) -> list[float]:
    return col.tolist() if isinstance(col, np.ndarray) else [float(x) for x in col]


def _make_watch(config: NetworkConfig) -> Any:
    """The network tracker and site alerts, when the network has sites (frontwatch.network)."""
    if not config.sites:
        return None
    try:
        from .network.watch import SiteWatch
    except ImportError:  # tracking not built yet in this checkout
        return None
    return SiteWatch(config)
