"""Station-major processing: the outputs of Engine.feed record by record, computed station by station.

Given a chunk of records at once (a whole file offline; a gateway message or what waits in the
live service's queue), each station's records go through QC, the wind conversion and the gate in
one compiled scan (frontwatch.scan), and the full change-point evaluation (Python, the same
StationDetector._evaluate the record path runs) only on the records where the gate opens or a
candidate is pending. The stations' events are then put back in stream order (the record that
emitted each one) and go through the network steps (corroboration, the site watch) exactly as
Engine.feed would pass them, with the site watch fed only the records that can change what it
says (its own stations' records, records that start a new data minute, events), its 'last seen'
times brought up to date before each.

The engine may hold state from earlier records (a restored snapshot, earlier chunks) and the
records need not be in time order: QC refuses late, out-of-order and duplicate records per
station as it does record by record, each station's records keep their stream order, and a data
minute starts where a record's minute passes the largest minute seen so far. The outputs, their
order, the statistics and the final engine state equal the record-by-record path's:
tests/test_core_batch.py (whole files) and tests/test_core_feedmany.py (chunks on a carried
state, messy input) check it.
"""

from __future__ import annotations

import warnings
from bisect import bisect_right
from collections import deque
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from . import scan as scanmod
from .detect.gate import Gate
from .detect.station import NCOL, StationDetector
from .engine import MAX_UNKNOWN, Engine, Output
from .events import PassageEvent
from .obs import Observation

_FIELDS = ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm")


def available() -> bool:
    """The batch path needs the compiled scan (numba)."""
    return scanmod.available()


def usable(eng: Engine, times: np.ndarray) -> bool:
    """Whether run() applies: wherever the compiled scan is available (any engine state, any order)."""
    return scanmod.available()


def columns_of(records: Sequence[Observation]) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Observations -> (station ids as an object array, canonical columns incl. 'time')."""
    if not records:
        return np.empty(0, dtype=object), {k: np.empty(0) for k in ("time", *_FIELDS)}
    cols = list(zip(*records, strict=True))
    station = np.empty(len(records), dtype=object)
    station[:] = cols[0]
    out = {"time": np.array(cols[1], dtype=float)}
    for k, c in zip(_FIELDS, cols[2:], strict=True):
        out[k] = np.array(c, dtype=float)
    return station, out


def run(eng: Engine, station: np.ndarray, columns: Mapping[str, Any],
        progress: Callable[[int], None] | None = None) -> list[Output]:
    """Feed all records (station ids, canonical columns; in stream order) through `eng`; its outputs."""
    return [o for _, o in run_indexed(eng, station, columns, progress)]


def run_indexed(eng: Engine, station: np.ndarray, columns: Mapping[str, Any],
                progress: Callable[[int], None] | None = None,
                qc_flags: dict[str, list[str]] | None = None) -> list[tuple[int, Output]]:
    """run() with each output paired with the index of the record that caused it. With `qc_flags`,
    each known station's QC flag names of these records (record by record, in order) are added to it."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # empty slices of all-missing channels (as update())
        return _run(eng, station, columns, progress, qc_flags)


def _run(eng: Engine, station: np.ndarray, columns: Mapping[str, Any],
         progress: Callable[[int], None] | None, qc_flags: dict[str, list[str]] | None) -> list[tuple[int, Output]]:
    n = len(station)
    nan = np.full(n, np.nan)
    cols = {k: np.asarray(columns.get(k, nan), dtype=float) for k in _FIELDS}
    times = np.asarray(columns["time"], dtype=float)
    stats = eng.stats
    stats.records += n
    codes, uniq = pd.factorize(station, sort=True)  # hashing: much cheaper than sorting the ids
    ids = np.asarray(uniq, dtype=object).astype(str)
    order = np.argsort(codes, kind="stable")  # station-major, each station's records in stream order
    bounds = np.searchsorted(codes[order], np.arange(len(ids) + 1))
    used = np.zeros(n, dtype=bool)
    # The QC'd records, as the site watch is given them (the rain is not QC'd)
    clean = {k: np.full(n, np.nan) for k in _FIELDS[:-1]}
    raw: list[tuple[int, PassageEvent]] = []
    unknown_pos: list[int] = []
    done = 0
    for k, sid in enumerate(ids.tolist()):
        pos = order[bounds[k]:bounds[k + 1]]
        pair = eng._pairs.get(sid)
        if pair is None:
            unknown_pos.extend(pos.tolist())
            continue
        q, det = pair
        qs = scanmod.qc_state(q)
        gs = np.array(det.gate.state(), dtype=float)
        last_row_t = det.ring[-1][0] if det.ring else np.nan
        rows, wd, ws, flags, opened, reset = scanmod.scan(
            times[pos], cols["wind_dir_deg"][pos], cols["wind_speed_ms"][pos], cols["wind_gust_ms"][pos],
            cols["temp_c"][pos], cols["dewpoint_c"][pos], cols["pressure_hpa"][pos], cols["rain_mm"][pos],
            qs, scanmod.params(q), gs, last_row_t, det._sin_o, det._cos_o)
        scanmod.set_qc_state(q, qs)
        _count_flags(stats.qc, flags)
        if qc_flags is not None and flags.any():
            qc_flags.setdefault(sid, []).extend(_flag_names(flags))
        ok = (flags & scanmod.REFUSED_BITS) == 0
        acc = pos[ok]
        used[acc] = True
        clean["wind_dir_deg"][acc] = wd[ok]
        clean["wind_speed_ms"][acc] = ws[ok]
        rows = np.ascontiguousarray(rows[ok])
        for name, col in (("wind_gust_ms", 8), ("temp_c", 1), ("dewpoint_c", 2), ("pressure_hpa", 5)):
            clean[name][acc] = rows[:, col]
        if len(rows):
            stats.last_time[sid] = float(rows[-1, 0])
        raw.extend(_detect(det, rows, opened[ok], reset[ok], acc))
        det.gate = Gate()
        det.gate.set_state(gs.tolist())
        done += len(pos)
        if progress is not None:
            progress(done)
    stats.used += int(used.sum())
    u = stats.unknown_stations
    for i in sorted(unknown_pos):  # in stream order: which ids are counted by name depends on it
        s = str(station[i])
        u[s if s in u or len(u) < MAX_UNKNOWN else "(others)"] += 1
    raw.sort(key=lambda x: x[0])
    out = _network(eng, raw, codes, ids, times, used, cols, clean)
    if progress is not None:
        progress(n)
    return out


def _count_flags(counter: Any, flags: np.ndarray) -> None:
    nz = flags[flags != 0]
    if not len(nz):
        return
    for b, name in enumerate(scanmod.FLAG_NAMES):
        c = int(np.count_nonzero(nz & (1 << b)))
        if c:
            counter[name] += c


def _flag_names(flags: np.ndarray) -> list[str]:
    """The flag names of each flagged record, record by record (bits in StationQC.check's order)."""
    names: list[str] = []
    for f in flags[flags != 0].tolist():
        names.extend(name for b, name in enumerate(scanmod.FLAG_NAMES) if f & (1 << b))
    return names


def _detect(det: StationDetector, rows: np.ndarray, opened: np.ndarray, reset: np.ndarray,
            gpos: np.ndarray) -> list[tuple[int, PassageEvent]]:
    """StationDetector.update's decisions over a station's new scanned rows (after the rows its
    ring holds already): where the gate opened or a candidate is pending, its evaluate_if_due;
    leave the detector in the state record-by-record feeding would leave it."""
    n_new = len(rows)
    maxlen = det.maxlen
    ring = det.ring
    out: list[tuple[int, PassageEvent]] = []
    if n_new and (det.pending or opened.any()):
        # The windows reach back into the rows held from before: put them in front (index `base`
        # is the first new row; nothing before it is a candidate or a restart).
        base = len(ring)
        if base:
            rows_all = np.concatenate([np.array(ring, dtype=float).reshape(base, NCOL), rows])
            opened_all = np.concatenate([np.zeros(base, dtype=bool), opened])
            reset_all = np.concatenate([np.zeros(base, dtype=bool), reset])
        else:
            rows_all, opened_all, reset_all = rows, opened, reset
        n = len(rows_all)
        tl = rows_all[:, 0].tolist()
        cand = np.flatnonzero(opened_all).tolist()
        seg = np.flatnonzero(reset_all).tolist()  # indices where the ring restarted
        j = 0  # next candidate in cand
        i = base - 1
        while True:
            if det.pending and i + 1 < n:
                i += 1
            else:
                while j < len(cand) and cand[j] <= i:
                    j += 1
                if j >= len(cand):
                    break
                i = cand[j]
            if reset_all[i]:
                det.pending = False
                if not opened_all[i]:
                    continue
            k = bisect_right(seg, i)
            start = seg[k - 1] if k else 0
            length = min(maxlen, i - start + 1)
            ev = det.evaluate_if_due(length, tl[i], rows_all[i - length + 1:i + 1].copy())
            if ev is not None:
                out.append((int(gpos[i - base]), ev))
            if i + 1 >= n:
                break
    if n_new:
        restarts = np.flatnonzero(reset)
        if len(restarts):
            start = int(restarts[-1])
            det.ring = ring = deque(maxlen=maxlen)
        else:
            start = 0
        ring.extend(map(tuple, rows[max(start, n_new - maxlen):].tolist()))
    return out


def _network(eng: Engine, raw: list[tuple[int, PassageEvent]], codes: np.ndarray, ids: np.ndarray,
             times: np.ndarray, used: np.ndarray, cols: dict[str, np.ndarray],
             clean: dict[str, np.ndarray]) -> list[tuple[int, Output]]:
    """Corroboration and the site watch over the events in stream order (Engine.feed's tail)."""
    watch = eng.watch
    if watch is None:
        return [(g, eng.network_event(e)) for g, e in raw]
    out: list[tuple[int, Output]] = []
    upos = np.flatnonzero(used)
    ut = times[upos]
    ucode = codes[upos]
    ust = ids[ucode]
    # Records the watch must see: its own stations', those whose data minute passes the largest
    # one before them (a superset of the watch's minute ticks: the loop checks its clock too), the
    # events'.
    watched = np.isin(ucode, [k for k, sid in enumerate(ids.tolist()) if sid in watch._watched])
    minute = np.floor_divide(ut, 60.0)
    new_minute = np.ones(len(ut), dtype=bool)
    if len(ut) > 1:
        new_minute[1:] = minute[1:] > np.maximum.accumulate(minute)[:-1]
    ev_at: dict[int, PassageEvent] = dict(raw)
    ev_mask = np.isin(upos, np.fromiter(ev_at, dtype=np.int64, count=len(ev_at)))
    calls = np.flatnonzero(watched | new_minute | ev_mask)
    # The records the watch is given, as Engine.feed hands them over: QC'd (the rain is not QC'd)
    cg = upos[calls]
    given = list(map(Observation, ust[calls].tolist(), ut[calls].tolist(),
                     *(clean[k][cg].tolist() for k in _FIELDS[:-1]), cols["rain_mm"][cg].tolist()))
    is_watched = watched[calls].tolist()
    ut_l = ut.tolist()
    ust_l = ust.tolist()
    last_seen = watch.last_seen
    synced = 0  # used records [0, synced) are in last_seen
    for ci, g, o, w in zip(calls.tolist(), cg.tolist(), given, is_watched, strict=True):
        ev: PassageEvent | None = ev_at.get(g)
        if ev is None and o.time < watch._next_tick:
            if w:
                watch.observe(o, None)  # updates its course monitors
            continue
        if synced < ci:
            last_seen.update(zip(ust_l[synced:ci], ut_l[synced:ci], strict=True))
        synced = ci + 1
        if ev is not None:
            ev = eng.network_event(ev)
            out.append((g, ev))
        produced = watch.observe(o, ev)
        if produced:
            out.extend((g, x) for x in produced)
    if synced < len(ut_l):
        last_seen.update(zip(ust_l[synced:], ut_l[synced:], strict=True))
    return out
