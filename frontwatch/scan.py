"""Compiled scan of stations' series: QC, wind vector and the detector's gate, per record.

The same steps as frontwatch.qc.StationQC.check, the wind conversion of
frontwatch.detect.station.StationDetector.update and frontwatch.detect.gate.Gate.update, written
once more as a loop that numba compiles, so that a chunk of records (a whole file offline, a
chunk of gateway messages live) runs them at C speed, several stations in one call
(frontwatch.batch). The Python classes stay the reference and the record-by-record path (single
records live): tests/test_core_batch.py and tests/test_core_feedmany.py check on generated
presets with their faults that this scan gives bit-identical values, flags, gate openings and
states. The arithmetic is written in the same order as there (IEEE doubles, no fast-math, powers
through pow() as Python does them), which is what makes it identical.

Without numba installed, `available()` is False and the core takes the record-by-record path.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from .detect import gate
from .detect.station import NCOL, RESET_GAP_S
from .qc import _RECOVER

njit: Any
try:  # optional: the record-by-record path needs nothing compiled
    from numba import njit
except ImportError:  # pragma: no cover - exercised where numba is absent
    njit = None

# QC flags as bits of one int per record; the names are frontwatch.qc's counter labels.
FLAG_NAMES = ("gap", "temp_range", "temp_stuck", "temp_step", "dewpoint_range", "dewpoint_stuck",
              "dewpoint_step", "dewpoint_above_temp", "wind_speed_range", "wind_speed_stuck",
              "wind_speed_step", "pressure_range", "pressure_stuck", "pressure_step", "wind_dir_stuck",
              "gust_range", "duplicate", "late", "out_of_order")
REFUSED_BITS = (1 << 16) | (1 << 17) | (1 << 18)  # a refused record never reaches the detector
# QC state (qc_state_list): newest, then (last, last_t, run_value, run_start, pend, npend) of T, Td, speed,
# pressure, vane. Gate state: frontwatch.detect.gate.Gate.state(), in its __slots__ order.
GATE_STATE_LEN = len(gate.Gate.__slots__)


def available() -> bool:
    return njit is not None


def _scan_py(t: np.ndarray, wd: np.ndarray, ws: np.ndarray, gust: np.ndarray, tc: np.ndarray,
             td: np.ndarray, p: np.ndarray, rain: np.ndarray, qs: np.ndarray, qp: np.ndarray,
             gs: np.ndarray, last_row_t: float, so: float, co: float, rows: np.ndarray,
             wd_out: np.ndarray, ws_out: np.ndarray, flags: np.ndarray, opened: np.ndarray,
             reset: np.ndarray) -> float:
    """The loop numba compiles (see the module docstring); qp is made by `params`.
    Returns the time of the detector's last row (NaN if it has none)."""
    RAD = math.pi / 180.0
    nan = math.nan
    FAST, SLOW, WANDER, K2, FLOOR_T, FLOOR_W, MIN_W = qp[22], qp[23], qp[24], qp[25], qp[26], qp[27], qp[28]
    recover = qp[29]
    # Powers through pow() with exponents numba cannot see: the gate's `x ** 2` and `x ** 0.5` are
    # libm pow() calls in Python, and numba would turn constant exponents into x * x and sqrt(x),
    # which differ from pow() in the last bit now and then (about 1 value in 1,000 here).
    SQ, ROOT = qp[30 + GATE_STATE_LEN], qp[31 + GATE_STATE_LEN]
    n = t.shape[0]
    for i in range(n):
        ti = t[i]
        fl = 0
        newest = qs[0]
        opened[i] = False
        reset[i] = False
        if ti <= newest:
            if ti == newest:
                fl = 1 << 16
            elif newest - ti > qp[17]:
                fl = 1 << 17
            else:
                fl = 1 << 18
            flags[i] = fl
            wd_out[i] = nan
            ws_out[i] = nan
            continue
        if ti - newest > qp[18] and newest > -1e17:
            fl |= 1
        qs[0] = ti
        # --- QC per quantity (frontwatch.qc._Channel.check; channel k's state at 1 + 6k)
        x_t = tc[i]
        if x_t == x_t:
            bad = _chan(qs, 1, qp[0], qp[1], qp[2], qp[3], recover, x_t, ti)
            if bad:
                fl |= 1 << bad  # temp_range=1, temp_stuck=2, temp_step=3
                x_t = nan
        x_d = td[i]
        if x_d == x_d:
            bad = _chan(qs, 7, qp[4], qp[5], qp[6], qp[7], recover, x_d, ti)
            if bad:
                fl |= 1 << (3 + bad)
                x_d = nan
            elif x_t == x_t and x_d > x_t + qp[19]:
                fl |= 1 << 7
                x_d = nan
        x_s = ws[i]
        if x_s == x_s:
            if x_s == 0.0:
                qs[15] = nan  # calm is not a stuck anemometer
                qs[13] = 0.0
                qs[14] = ti
            else:
                bad = _chan(qs, 13, qp[8], qp[9], qp[10], qp[11], recover, x_s, ti)
                if bad:
                    fl |= 1 << (7 + bad)
                    x_s = nan
        x_p = p[i]
        if x_p == x_p:
            bad = _chan(qs, 19, qp[12], qp[13], qp[14], qp[15], recover, x_p, ti)
            if bad:
                fl |= 1 << (10 + bad)
                x_p = nan
        x_w = wd[i]
        if x_w == x_w:
            if x_s != x_s:
                x_w = nan
            elif x_s > 0.5:
                if x_w != qs[27]:
                    qs[27] = x_w
                    qs[28] = ti
                elif ti - qs[28] > qp[16]:
                    fl |= 1 << 14
                    x_w = nan
        x_g = gust[i]
        if x_g == x_g and (x_g < 0.0 or x_g > qp[20]):
            fl |= 1 << 15
            x_g = nan
        flags[i] = fl
        wd_out[i] = x_w
        ws_out[i] = x_s
        # --- the detector's row (StationDetector.update)
        if last_row_t == last_row_t and ti - last_row_t > qp[21]:
            reset[i] = True
            gs[:] = qp[30:30 + GATE_STATE_LEN]  # a fresh Gate()'s state
        last_row_t = ti
        if x_s == x_s and x_w == x_w:
            r = x_w * RAD
            u = -x_s * math.sin(r)
            v = -x_s * math.cos(r)
        elif x_s == 0.0:
            u = 0.0
            v = 0.0
        else:
            u = nan
            v = nan
        rows[i, 0] = ti
        rows[i, 1] = x_t
        rows[i, 2] = x_d
        rows[i, 3] = -(u * so + v * co)
        rows[i, 4] = -u * co + v * so
        rows[i, 5] = x_p
        rows[i, 6] = u
        rows[i, 7] = v
        rows[i, 8] = x_g
        rows[i, 9] = rain[i]
        # --- the gate (frontwatch.detect.gate.Gate.update)
        z2 = 0.0
        if x_t == x_t:
            if gs[0] == gs[0]:
                gs[0] += FAST * (x_t - gs[0])
                gs[1] += SLOW * (x_t - gs[1])
                x = gs[0] - gs[1]
                dev = abs(x - gs[8])
                gs[8] += SLOW * (x - gs[8])
                if dev > FLOOR_T:
                    z2 += (dev / gs[10]) ** SQ
                gs[10] += WANDER * (max(dev, MIN_W) - gs[10])
            else:
                gs[0] = x_t
                gs[1] = x_t
        if x_d == x_d:
            if gs[2] == gs[2]:
                gs[2] += FAST * (x_d - gs[2])
                gs[3] += SLOW * (x_d - gs[3])
                x = gs[2] - gs[3]
                dev = abs(x - gs[9])
                gs[9] += SLOW * (x - gs[9])
                if dev > FLOOR_T:
                    z2 += (dev / gs[11]) ** SQ
                gs[11] += WANDER * (max(dev, MIN_W) - gs[11])
            else:
                gs[2] = x_d
                gs[3] = x_d
        if u == u and v == v:
            if gs[4] == gs[4]:
                gs[4] += FAST * (u - gs[4])
                gs[5] += SLOW * (u - gs[5])
                gs[6] += FAST * (v - gs[6])
                gs[7] += SLOW * (v - gs[7])
                du = gs[4] - gs[5]
                dv = gs[6] - gs[7]
                dw = (du * du + dv * dv) ** ROOT
                if dw > FLOOR_W:
                    z2 += (dw / gs[12]) ** SQ
                gs[12] += WANDER * (max(dw, MIN_W) - gs[12])
            else:
                gs[4] = u
                gs[5] = u
                gs[6] = v
                gs[7] = v
        if gs[13] < 15.0:
            gs[13] += 1.0
        else:
            opened[i] = z2 > K2
    return last_row_t


def _chan_py(qs: np.ndarray, k: int, lo: float, hi: float, step: float, persist: float, recover: float,
             x: float, t: float) -> int:
    """frontwatch.qc._Channel.check on state qs[k:k+6]: 0 good, 1 range, 2 stuck, 3 step."""
    if not lo <= x <= hi:
        return 1
    if x == qs[k + 2]:
        if t - qs[k + 3] > persist:
            return 2
    else:
        qs[k + 2] = x
        qs[k + 3] = t
    last = qs[k]
    if last == last and t - qs[k + 1] <= 180.0 and abs(x - last) > step:
        if qs[k + 5] != 0.0 and abs(x - qs[k + 4]) <= step:
            qs[k + 5] += 1.0
        else:
            qs[k + 5] = 1.0
        qs[k + 4] = x
        if qs[k + 5] < recover:
            return 3
    qs[k + 5] = 0.0
    qs[k] = x
    qs[k + 1] = t
    return 0


def _scan_many_py(bounds: np.ndarray, t: np.ndarray, wd: np.ndarray, ws: np.ndarray, gust: np.ndarray,
                  tc: np.ndarray, td: np.ndarray, p: np.ndarray, rain: np.ndarray, qs: np.ndarray, qp: np.ndarray,
                  gs: np.ndarray, last_row_t: np.ndarray, so: np.ndarray, co: np.ndarray, rows: np.ndarray,
                  wd_out: np.ndarray, ws_out: np.ndarray, flags: np.ndarray, opened: np.ndarray,
                  reset: np.ndarray) -> None:
    """_scan_py over several stations in one call: station k's records are [bounds[k], bounds[k+1])
    of the arrays, its states row k of qs, qp, gs, last_row_t, so, co (last_row_t updated in place)."""
    for k in range(bounds.shape[0] - 1):
        lo = bounds[k]
        hi = bounds[k + 1]
        last_row_t[k] = _scan(t[lo:hi], wd[lo:hi], ws[lo:hi], gust[lo:hi], tc[lo:hi], td[lo:hi], p[lo:hi],
                              rain[lo:hi], qs[k], qp[k], gs[k], last_row_t[k], so[k], co[k], rows[lo:hi],
                              wd_out[lo:hi], ws_out[lo:hi], flags[lo:hi], opened[lo:hi], reset[lo:hi])


if njit is not None:
    _chan = njit(cache=True, inline="always")(_chan_py)
    _scan = njit(cache=True)(_scan_py)
    _scan_many = njit(cache=True)(_scan_many_py)
else:  # pragma: no cover
    _chan = _chan_py
    _scan = _scan_py
    _scan_many = _scan_many_py


def params(qc: Any) -> np.ndarray:
    """The parameter vector of _scan_py, from a StationQC (its channels hold the limits) and the
    detector's own constants: per channel (lo, hi, step, persist) for T, Td, speed, pressure [0:16],
    vane persist, late_s, gap_s, dewpoint excess, gust max, the ring's reset gap [16:22], the
    gate's constants [22:29], the QC step recovery count [29], a fresh gate's state [30:44], the
    gate's exponents 2 and 0.5 [44:46]."""
    s = qc.settings
    vals: list[float] = []
    for ch in (qc._t, qc._d, qc._s, qc._p):
        vals += [ch.lo, ch.hi, ch.step, ch.persist_s]
    vals += [qc.vane.persist_s, s.late_s, s.gap_s, s.dewpoint_excess_c, s.speed_max_ms * 1.5, RESET_GAP_S]
    vals += [gate.FAST, gate.SLOW, gate.WANDER, gate.K2, gate.FLOOR_T, gate.FLOOR_W, gate.MIN_WANDER, _RECOVER]
    vals += gate.Gate().state()
    vals += [2.0, 0.5]  # the gate's exponents (see _scan_py)
    return np.array(vals, dtype=np.float64)


# A channel's state as frontwatch.qc._Channel.state() lists it (its last six slots, in this order)
_CHANNEL_STATE = ("last", "last_t", "run_value", "run_start", "pend", "npend")
QC_STATE_LEN = 1 + 5 * len(_CHANNEL_STATE)  # newest + 5 channels


def _make_state_io() -> tuple[Callable[[Any], list[float]], Callable[[Any, list[float]], None],
                              Callable[[Any], tuple[float, ...]], Callable[[Any, list[float]], None]]:
    """Fast readers and writers of a StationQC's and a Gate's state (one generated function each,
    from the slot names, instead of a call per channel and a setattr per slot). They read and write
    what StationQC's channels' state()/set_state() and Gate.state/set_state do:
    tests/test_core_feedmany.py compares the snapshots."""
    chans = ("_t", "_d", "_s", "_p", "vane")
    qc_attrs = ["newest"] + [f"{c}.{a}" for c in chans for a in _CHANNEL_STATE]
    slots = gate.Gate.__slots__
    src = (
        "def qc_get(q):\n    return [" + ", ".join(f"q.{a}" for a in qc_attrs) + "]\n"
        "def qc_set(q, v):\n    " + ", ".join(f"q.{a}" for a in qc_attrs) + " = v\n"
        + "".join(f"    q.{c}.npend = int(q.{c}.npend)\n" for c in chans)
        + "def gate_get(g):\n    return (" + ", ".join(f"g.{a}" for a in slots) + ",)\n"
        "def gate_set(g, v):\n    " + ", ".join(f"g.{a}" for a in slots) + " = v\n"
        "    g.primed = int(g.primed)\n"
    )
    ns: dict[str, Any] = {}
    exec(src, ns)  # noqa: S102 - built from the slot names above, no outside input
    return ns["qc_get"], ns["qc_set"], ns["gate_get"], ns["gate_set"]


qc_state_list, set_qc_state_list, gate_state, set_gate_state = _make_state_io()


def scan_many(bounds: np.ndarray, t: np.ndarray, wd: np.ndarray, ws: np.ndarray, gust: np.ndarray, tc: np.ndarray,
              td: np.ndarray, p: np.ndarray, rain: np.ndarray, qs: np.ndarray, qp: np.ndarray, gs: np.ndarray,
              last_row_t: np.ndarray, so: np.ndarray, co: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Run the scan (_scan_py) over several stations' records in one compiled call: station k's
    records are [bounds[k], bounds[k+1]) of the arrays (each station's in its event-time order),
    its states row k of qs, qp, gs and element k of last_row_t, so, co; qs, gs and last_row_t are
    updated in place. Returns (rows, wind_dir, wind_speed, flags, opened, reset) over all records."""
    n = len(t)
    rows = np.empty((n, NCOL))
    wd_out = np.empty(n)
    ws_out = np.empty(n)
    flags = np.zeros(n, dtype=np.int64)
    opened = np.zeros(n, dtype=np.bool_)
    reset = np.zeros(n, dtype=np.bool_)
    f = np.ascontiguousarray
    _scan_many(f(bounds, np.int64), f(t, float), f(wd, float), f(ws, float), f(gust, float), f(tc, float),
               f(td, float), f(p, float), f(rain, float), qs, qp, gs, last_row_t, so, co, rows, wd_out, ws_out,
               flags, opened, reset)
    return rows, wd_out, ws_out, flags, opened, reset
