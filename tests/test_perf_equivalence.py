"""The core's speed-ups give the same numbers to the bit as the plain formulations they replace.

Each check runs the fast code and a straightforward version (written here from the same formulas:
numpy's median, calc.wind's circular mean and Yamartino spread, the course monitor's windows()) on
generated inputs, and compares exactly (repr of floats, so NaN and -0.0 count). The whole-engine
equality of the batch path and the record path is tests/test_core_batch.py and
tests/test_core_feedmany.py; these pin the pieces one by one, so a failure says which.
"""

from __future__ import annotations

import math
import random
from collections import deque

import numpy as np

from frontwatch.calc.wind import angle_diff_deg, circular_mean_deg, yamartino_sigma_deg
from frontwatch.config import parse_network
from frontwatch.detect.station import NCOL, StationDetector, _cadence_s
from frontwatch.network.race import (
    PATTERN_MIN,
    PATTERN_MIN_POINTS,
    STEADY_SPREAD_DEG,
    CourseMonitor,
    Pattern,
    _pattern,
    _pattern_py,
    analyse_pattern,
)

T0 = 1_800_000_000.0


def _plain_pattern(minute_dirs: list[tuple[float, float]]) -> Pattern:
    """The pattern analysis written directly on calc.wind's functions (its formulation before the
    per-minute sin/cos were kept): persistent / oscillating / steady / unsettled."""
    from frontwatch.network import race as r

    pts = [(t, d) for t, d in minute_dirs if d == d]
    if len(pts) < PATTERN_MIN_POINTS:
        return Pattern("unknown", None, None, None)
    ref = circular_mean_deg([d for _, d in pts])
    ts = [(t - pts[0][0]) / 60.0 for t, _ in pts]
    rs = [angle_diff_deg(d, ref) for _, d in pts]
    n = len(rs)
    k = max(n // 4, 5)
    trend = sum(rs[-k:]) / k - sum(rs[:k]) / k
    tm = sum(ts) / n
    rm = sum(rs) / n
    stt = sum((t - tm) ** 2 for t in ts)
    b = sum((t - tm) * (x - rm) for t, x in zip(ts, rs, strict=True)) / stt if stt > 0 else 0.0
    e = [x - rm - b * (t - tm) for t, x in zip(ts, rs, strict=True)]
    sd = math.sqrt(sum(x * x for x in e) / n)
    amp = math.sqrt(2.0) * sd
    band = 0.3 * sd
    crossings: list[float] = []
    sign = 0
    last_t = last_e = None
    for t, x in zip(ts, e, strict=True):
        s = 1 if x > band else (-1 if x < -band else 0)
        if s != 0:
            if sign != 0 and s != sign and last_t is not None and last_e is not None:
                crossings.append(last_t + (t - last_t) * (last_e / (last_e - x)) if last_e != x else t)
            sign = s
            last_t, last_e = t, x
    period = 2.0 * (crossings[-1] - crossings[0]) / (len(crossings) - 1) if len(crossings) >= 2 else None
    r1 = sum(a * c for a, c in zip(e, e[1:], strict=False)) / (sd * sd * n) if sd > 0 else 0.0
    if abs(trend) >= r.PERSIST_DEG and abs(trend) >= 1.5 * amp:
        return Pattern("persistent", trend, None, None)
    if (len(crossings) >= r.OSC_MIN_CROSSINGS and amp >= r.OSC_MIN_DEG and r1 >= r.OSC_MIN_AUTOCORR
            and period is not None and period >= r.OSC_MIN_PERIOD_MIN):
        return Pattern("oscillating", trend, period, amp)
    y = yamartino_sigma_deg([d for _, d in pts[-10:]])
    return Pattern("steady" if y <= STEADY_SPREAD_DEG else "unsettled", trend, None, None)


def _series(rng: random.Random, kind: int, n: int = 40) -> list[tuple[float, float]]:
    base = rng.uniform(0.0, 360.0)
    out = []
    for k in range(n):
        if kind == 0:
            d = base + rng.gauss(0.0, 4.0)
        elif kind == 1:
            d = base + 12.0 * math.sin(2.0 * math.pi * k / rng.uniform(6.0, 14.0)) + rng.gauss(0.0, 2.0)
        elif kind == 2:
            d = base + 0.7 * k + rng.gauss(0.0, 3.0)
        else:
            d = rng.uniform(0.0, 360.0)
        out.append((T0 + 60.0 * k + rng.choice([0.0, 0.0, 17.0]), math.nan if rng.random() < 0.07 else d % 360.0))
    return out


def test_pattern_analysis_equals_the_plain_formulation() -> None:
    rng = random.Random(11)
    kinds: set[str] = set()
    for i in range(400):
        s = _series(rng, i % 4, n=rng.choice([15, 25, 40]))
        got = analyse_pattern(s)
        assert repr(got) == repr(_plain_pattern(s)), s
        kinds.add(got.kind)
    assert {"persistent", "oscillating", "steady", "unsettled", "unknown"} <= kinds  # every branch ran


def test_compiled_pattern_kernel_equals_the_same_code_run_as_python() -> None:
    """Where numba is installed the pattern kernel is compiled; without it the same function runs
    as Python. Both give the same bits (a machine without numba reports the same patterns)."""
    rng = random.Random(11)
    codes: set[int] = set()
    for i in range(400):
        s = _series(rng, i % 4, n=rng.choice([15, 25, 40]))
        flat = np.array([x for pair in s for x in pair], dtype=float)
        got = tuple(float(x) for x in _pattern(flat, 2.0, 3.0))
        assert repr(got) == repr(tuple(float(x) for x in _pattern_py(flat, 2.0, 3.0))), s
        codes.add(int(got[0]))
    assert codes == {0, 1, 2, 3, 4}


def test_monitor_minute_by_minute_equals_its_windows_and_the_plain_pattern() -> None:
    """A monitor fed 6 hours of wind: each report's windows equal windows() at that time, and the
    pattern it holds equals the plain analysis of its minutes (also after a snapshot round trip)."""
    rng = random.Random(5)
    mon = CourseMonitor("s", 90.0, 80.0, 60.0)
    reports = 0
    for m in range(360):
        t = T0 + 60.0 * m
        base = 250.0 if m < 150 else 80.0
        for j in range(3):
            d = (base + 15.0 * math.sin(m / 5.0) + rng.gauss(0.0, 5.0)) % 360.0
            mon.add(t + 20.0 * j, math.nan if rng.random() < 0.03 else d, max(0.0, rng.gauss(4.0, 1.5)))
        now = t + 60.0
        want_windows = mon.windows(now)[1:]
        rep = mon.tick(now)
        if rep is not None:
            reports += 1
            assert repr(rep.windows) == repr(want_windows)
        if int(now // 60.0) % 3 == 0:
            assert repr(mon.last_pattern) == repr(_plain_pattern(list(mon.minutes)))
        # the minutes it holds are the last PATTERN_MIN ticks', in order (also across the restore)
        assert [t for t, _ in mon.minutes] == [now - 60.0 * k for k in range(min(m + 1, PATTERN_MIN) - 1, -1, -1)]
        if m == 200:
            snap = mon.snapshot()
            mon = CourseMonitor("s", 90.0, 80.0, 60.0)
            mon.restore(snap)
    assert reports >= 3


def test_cadence_equals_numpy_median() -> None:
    rng = np.random.default_rng(3)
    steps = np.array([60.0, 60.0, 60.0, 120.0, 300.0, 600.0, 59.5, 61.0, 3000.0])
    for _ in range(3000):
        n = int(rng.integers(0, 30))
        t = T0 + np.cumsum(rng.choice(steps, size=n) + rng.normal(0.0, rng.choice([0.0, 3.0]), size=n))
        want = 60.0 if len(t) < 3 else max(60.0, float(np.median(np.diff(t))))
        assert _cadence_s(t) == want


def test_ring_as_array_and_as_deque_are_the_same_ring() -> None:
    cfg = parse_network({"network": {"name": "one", "utc_offset_hours": 0},
                         "stations": [{"id": "A", "lat": 40.0, "lon": 0.0, "onshore_from_deg": 180.0}]})
    det = StationDetector(cfg.detector, station=cfg.stations[0])
    rows = np.random.default_rng(1).normal(size=(det.maxlen + 5, NCOL))
    rows[3, 4] = np.nan
    det.set_ring_rows(rows[-det.maxlen:].copy())
    assert det.ring_last_time() == rows[-1, 0]
    want = deque(map(tuple, rows[-det.maxlen:].tolist()), maxlen=det.maxlen)
    got = det.ring  # made from the array on first use
    assert repr(list(got)) == repr(list(want)) and got.maxlen == det.maxlen
    assert np.array_equal(det.ring_rows(), rows[-det.maxlen:], equal_nan=True)
    det.ring.append(tuple(range(NCOL)))  # the record path appends to the deque it got
    assert det.ring_last_time() == 0.0 and len(det.ring) == det.maxlen
    det.ring = deque(maxlen=det.maxlen)
    assert math.isnan(det.ring_last_time()) and det.ring_rows().shape == (0, NCOL)
