"""Station-major processing: the outputs of Engine.feed record by record, computed station by station.

Given a chunk of records at once (a whole file offline; a gateway message or what waits in the
live service's queue), each station's records go through QC, the wind conversion and the gate in
one compiled scan (frontwatch.scan), and the full change-point evaluation (Python, the same
StationDetector._evaluate the record path runs) only on the records where the gate opens or a
candidate is pending. The stations' events are then put back in stream order (the record that
emitted each one) and go through the network steps (corroboration, the site watch) exactly as
Engine.feed would pass them, with the site watch fed only the records that can change what it
says (its own stations' records, records that start a new data minute, events), its 'last seen'
times brought up to date before each. Between chunks a detector's ring stays the array the scan
wrote (StationDetector.ring_rows), turned into Python rows only if the record path or a snapshot
reads it.

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
from collections.abc import Callable, Collection, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from . import scan as scanmod
from .detect.station import StationDetector
from .engine import MAX_UNKNOWN, Engine, Output
from .events import PassageEvent
from .network.watch import DROP_WINDOW_S
from .obs import Observation

_FIELDS = ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm")


def available() -> bool:
    """Whether run() applies: wherever the compiled scan (numba) is; any engine state, any order."""
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


GROUP_RECORDS = 1 << 18  # records scanned in one compiled call at most (bounds the scan's arrays offline)


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
    ids_l = ids.tolist()
    order = np.argsort(codes, kind="stable")  # station-major, each station's records in stream order
    bounds = np.searchsorted(codes[order], np.arange(len(ids) + 1)).tolist()
    used = np.zeros(n, dtype=bool)
    # The QC'd records, as the site watch is given them (the rain is not QC'd)
    clean = {k: np.full(n, np.nan) for k in _FIELDS[:-1]}
    raw: list[tuple[int, PassageEvent]] = []
    unknown_pos: list[int] = []
    group: list[int] = []
    size = 0
    done = 0
    for k, sid in enumerate(ids_l):
        m = bounds[k + 1] - bounds[k]
        if sid not in eng._pairs:
            unknown_pos.extend(order[bounds[k]:bounds[k + 1]].tolist())
            continue
        if group and size + m > GROUP_RECORDS:
            done = _scan_group(eng, group, ids_l, order, bounds, times, cols, used, clean, raw, qc_flags,
                               progress, done)
            group, size = [], 0
        group.append(k)
        size += m
    if group:
        _scan_group(eng, group, ids_l, order, bounds, times, cols, used, clean, raw, qc_flags, progress, done)
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


def _scan_group(eng: Engine, group: list[int], ids: list[str], order: np.ndarray, bounds: list[int],
                times: np.ndarray, cols: dict[str, np.ndarray], used: np.ndarray, clean: dict[str, np.ndarray],
                raw: list[tuple[int, PassageEvent]], qc_flags: dict[str, list[str]] | None,
                progress: Callable[[int], None] | None, done: int) -> int:
    """QC, wind and gate of the group's stations (indices into `ids`) in one compiled scan, then
    each station's detector decisions; the stations' states are read before and written after."""
    m = len(group)
    pos = np.concatenate([order[bounds[k]:bounds[k + 1]] for k in group])
    gb = np.zeros(m + 1, dtype=np.int64)
    gb[1:] = np.cumsum([bounds[k + 1] - bounds[k] for k in group])
    pairs = [eng._pairs[ids[k]] for k in group]
    qs = np.array([scanmod.qc_state_list(q) for q, _ in pairs], dtype=float).reshape(m, scanmod.QC_STATE_LEN)
    gs = np.array([scanmod.gate_state(d.gate) for _, d in pairs], dtype=float).reshape(m, scanmod.GATE_STATE_LEN)
    last = np.array([d.ring_last_time() for _, d in pairs], dtype=float)
    qp, so, co = _group_constants(eng, tuple(ids[k] for k in group), pairs)
    rows, wd, ws, flags, opened, reset = scanmod.scan_many(
        gb, times[pos], cols["wind_dir_deg"][pos], cols["wind_speed_ms"][pos], cols["wind_gust_ms"][pos],
        cols["temp_c"][pos], cols["dewpoint_c"][pos], cols["pressure_hpa"][pos], cols["rain_mm"][pos],
        qs, qp, gs, last, so, co)
    stats = eng.stats
    _count_flags(stats.qc, flags)
    ok = (flags & scanmod.REFUSED_BITS) == 0
    acc = pos[ok]
    used[acc] = True
    clean["wind_dir_deg"][acc] = wd[ok]
    clean["wind_speed_ms"][acc] = ws[ok]
    rows = rows[ok]
    for name, col in (("wind_gust_ms", 8), ("temp_c", 1), ("dewpoint_c", 2), ("pressure_hpa", 5)):
        clean[name][acc] = rows[:, col]
    opened = opened[ok]
    reset = reset[ok]
    okb = np.zeros(m + 1, dtype=np.int64)  # each station's accepted rows are okb[j]:okb[j + 1]
    okb[1:] = np.cumsum(ok)[gb[1:] - 1]
    # per station: any gate opening, and its last restart (index in its accepted rows, or -1)
    n_open = np.concatenate([[0], np.cumsum(opened)])
    any_open = (n_open[okb[1:]] > n_open[okb[:-1]]).tolist()
    restarts = np.flatnonzero(reset)
    k_last = np.searchsorted(restarts, okb[1:]) - 1
    r_last = np.where(k_last >= 0, restarts[np.maximum(k_last, 0)] if len(restarts) else -1, -1)
    last_reset = np.where(r_last >= okb[:-1], r_last - okb[:-1], -1).tolist()
    okb_l = okb.tolist()
    gb_l = gb.tolist()
    qs_l = qs.tolist()
    gs_l = gs.tolist()
    flagged = np.flatnonzero(np.add.reduceat(flags != 0, gb[:-1])).tolist() if qc_flags is not None else []
    for j in flagged:
        assert qc_flags is not None
        qc_flags.setdefault(ids[group[j]], []).extend(_flag_names(flags[gb_l[j]:gb_l[j + 1]]))
    set_qc, set_gate = scanmod.set_qc_state_list, scanmod.set_gate_state
    last_time = stats.last_time
    for j, (q, det) in enumerate(pairs):
        set_qc(q, qs_l[j])
        set_gate(det.gate, gs_l[j])  # every slot: as a restarted gate (a fresh Gate()) or the running one
        lo, hi = okb_l[j], okb_l[j + 1]
        if hi > lo:
            last_time[ids[group[j]]] = float(rows[hi - 1, 0])
            raw.extend(_detect(det, rows[lo:hi], opened[lo:hi], reset[lo:hi], acc[lo:hi], any_open[j],
                               last_reset[j]))
        done += gb_l[j + 1] - gb_l[j]
        if progress is not None:
            progress(done)
    return done


_GROUP_CACHE_MAX = 64  # distinct station groups kept per engine (a gateway's chunks mostly repeat one)


def _group_constants(eng: Engine, key: tuple[str, ...], pairs: list[Any]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The scan's constant inputs of a group of stations (parameters, sine and cosine of the
    onshore bearings), stacked once per engine and group; scan_many does not write them."""
    cache = eng._scan_groups
    got = cache.get(key)
    if got is None:
        if len(cache) >= _GROUP_CACHE_MAX:
            cache.clear()
        qp = np.stack([_params(eng, sid, q) for sid, (q, _) in zip(key, pairs, strict=True)])
        so = np.array([d._sin_o for _, d in pairs], dtype=float)
        co = np.array([d._cos_o for _, d in pairs], dtype=float)
        got = cache[key] = (qp, so, co)
    return got


def _params(eng: Engine, sid: str, q: Any) -> np.ndarray:
    """The scan's parameter vector of a station (scan.params), made once per engine."""
    cache = eng._scan_params
    qp = cache.get(sid)
    if qp is None:
        qp = cache[sid] = scanmod.params(q)
    return qp


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
            gpos: np.ndarray, any_open: bool, last_reset: int) -> list[tuple[int, PassageEvent]]:
    """StationDetector.update's decisions over a station's new scanned rows (after the rows its
    ring holds already): where the gate opened or a candidate is pending, its evaluate_if_due;
    leave the detector in the state record-by-record feeding would leave it. `any_open`: whether
    `opened` has a True; `last_reset`: the last index where `reset` is True, or -1."""
    n_new = len(rows)
    maxlen = det.maxlen
    out: list[tuple[int, PassageEvent]] = []
    held: np.ndarray | None = None
    if n_new and (det.pending or any_open):
        # The windows reach back into the rows held from before: put them in front (index `base`
        # is the first new row; nothing before it is a candidate or a restart).
        held = det.ring_rows()
        base = len(held)
        if base:
            rows_all = np.concatenate([held, rows])
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
        # The ring afterwards: the last maxlen rows since its last restart (held as an array)
        if last_reset >= 0:
            tail = rows[max(last_reset, n_new - maxlen):]
        elif n_new >= maxlen:
            tail = rows[n_new - maxlen:]
        else:
            if held is None:
                held = det.ring_rows()
            keep = held[max(0, len(held) - (maxlen - n_new)):]
            tail = np.concatenate([keep, rows]) if len(keep) else rows
        det.set_ring_rows(np.array(tail, dtype=float))  # a copy: the chunk's arrays are not kept
    return out


def _in_drop_windows(ut: np.ndarray, ucode: np.ndarray, id_list: list[str],
                     windows: list[tuple[str, float]]) -> np.ndarray:
    """Mask of the used records (times `ut`, station codes `ucode`) that fall in a passage's
    drop window (DROP_WINDOW_S after its onset) at its station; `windows` = [(station, onset)]."""
    mask = np.zeros(len(ut), dtype=bool)
    if not windows:
        return mask
    code_of = {sid: c for c, sid in enumerate(id_list)}
    by_code: dict[int, list[float]] = {}
    for st, onset in windows:
        c = code_of.get(st)
        if c is not None:
            by_code.setdefault(c, []).append(onset)
    order = np.argsort(ucode, kind="stable")
    bounds = np.searchsorted(ucode[order], np.arange(len(id_list) + 1))
    lo_s, hi_s = DROP_WINDOW_S
    for c, onsets in by_code.items():
        pos = order[bounds[c]:bounds[c + 1]]
        tt = ut[pos]
        hit = np.zeros(len(pos), dtype=bool)
        for onset in onsets:
            hit |= (tt >= onset + lo_s) & (tt < onset + hi_s)
        mask[pos[hit]] = True
    return mask


def _network(eng: Engine, raw: list[tuple[int, PassageEvent]], codes: np.ndarray, ids: np.ndarray,
             times: np.ndarray, used: np.ndarray, cols: dict[str, np.ndarray],
             clean: dict[str, np.ndarray]) -> list[tuple[int, Output]]:
    """Corroboration and the site watch over the events in stream order (Engine.feed's tail)."""
    watch = eng.watch
    if watch is None:
        return [(g, x) for g, e in raw for x in eng.network_events(e)]
    out: list[tuple[int, Output]] = []
    upos = np.flatnonzero(used)
    ut = times[upos]
    ucode = codes[upos]
    ust = ids.astype(object)[ucode]  # object: tolist() hands out the ids, not new strings
    # Records the watch must see: its own stations', those whose data minute passes the largest
    # one before them (a superset of the watch's minute ticks: the loop checks its clock too), the
    # events'.
    id_list = ids.tolist()

    def of_stations(keys: Collection[str]) -> np.ndarray:  # used records of these stations
        return np.array([sid in keys for sid in id_list], dtype=bool)[ucode]

    watched = of_stations(watch._watched)
    # ... and those of stations whose passage's temperature drop the watch measures (SiteWatch.
    # refining), inside the drop window of that passage: one already being measured, or a breeze
    # front of this chunk (a superset: the loop asks the watch; refine_temp takes nothing outside)
    refining = _in_drop_windows(ut, ucode, id_list,
                                [(st, r.onset) for st, r in watch.refining.items()]
                                + [(e.station, e.onset) for _, e in raw if e.kind == "breeze_front"])
    minute = np.floor_divide(ut, 60.0)
    new_minute = np.ones(len(ut), dtype=bool)
    if len(ut) > 1:
        new_minute[1:] = minute[1:] > np.maximum.accumulate(minute)[:-1]
    ev_at: dict[int, PassageEvent] = dict(raw)
    at_event = np.zeros(len(used), dtype=bool)
    at_event[list(ev_at)] = True
    ev_mask = at_event[upos]
    calls = np.flatnonzero(watched | refining | new_minute | ev_mask)
    # The records the watch is given, as Engine.feed hands them over: QC'd (the rain is not QC'd).
    # An Observation is made only for those that reach observe(); the others (a watched
    # station's records within a minute) go to watch_wind as values.
    cg = upos[calls]
    cg_l = cg.tolist()
    st_c = ust[calls].tolist()
    t_c = ut[calls].tolist()
    wd_c = clean["wind_dir_deg"][cg].tolist()
    ws_c = clean["wind_speed_ms"][cg].tolist()
    gu_c, tc_c, td_c, p_c = (clean[k][cg].tolist() for k in _FIELDS[2:-1])
    rain_c = cols["rain_mm"][cg].tolist()
    watched_call = watched[calls].tolist()
    refining_call = refining[calls].tolist()
    refine_temp = watch.refine_temp
    drop_of = watch.refining
    ut_l = ut.tolist()
    ust_l = ust.tolist()
    last_seen = watch.last_seen
    mons_of = watch._watched
    watch_wind = watch.watch_wind
    next_tick = watch._next_tick
    synced = 0  # used records [0, synced) are in last_seen
    for k, ci in enumerate(calls.tolist()):
        g = cg_l[k]
        ev: PassageEvent | None = ev_at.get(g)
        t = t_c[k]
        if ev is None and t < next_tick:
            if watched_call[k]:
                st = st_c[k]
                last_seen[st] = t  # (as observe(): the order keys enter last_seen is kept)
                watch_wind(st, t, wd_c[k], ws_c[k], mons_of[st])
            if refining_call[k] and st_c[k] in drop_of:
                refine_temp(st_c[k], t, tc_c[k])
            continue
        if synced < ci:
            last_seen.update(zip(ust_l[synced:ci], ut_l[synced:ci], strict=True))
        synced = ci + 1
        if ev is not None:
            evs = eng.network_events(ev)
            out.extend((g, x) for x in evs)
            ev = evs[-1] if evs else None
            for x in evs[:-1]:
                out.extend((g, y) for y in watch.passage(x, t))
        o = Observation(st_c[k], t, wd_c[k], ws_c[k], gu_c[k], tc_c[k], td_c[k], p_c[k], rain_c[k])
        produced = watch.observe(o, ev)
        next_tick = watch._next_tick
        if produced:
            out.extend((g, x) for x in produced)
    if synced < len(ut_l):
        last_seen.update(zip(ust_l[synced:], ut_l[synced:], strict=True))
    return out
