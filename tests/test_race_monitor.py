"""Race-course monitor: window statistics against Yamartino (1984) check values and scipy's circular
statistics; oscillation / persistent-shift classification and the new-breeze signal on series with a
known answer."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

from frontwatch.network.race import CourseMonitor, analyse_pattern, window_stat

T0 = 1_800_000_000.0


def _samples(dirs: list[float], speed: float = 4.0, t0: float = T0) -> list[tuple[float, float, float]]:
    return [(t0 + 60.0 * i, d, speed) for i, d in enumerate(dirs)]


def test_spread_matches_yamartino_check_values() -> None:
    """DOMAIN.md (Yamartino 1984, J. Climate Appl. Meteor. 23): {350, 10} -> 10.008 deg; {0, 180} -> 103.92 deg."""
    w = window_stat(_samples([350.0, 10.0]), T0 + 60.0, 2)
    assert w.spread_deg == pytest.approx(10.008, abs=1e-3)
    assert w.dir_deg == pytest.approx(0.0, abs=1e-9) or w.dir_deg == pytest.approx(360.0, abs=1e-9)
    w2 = window_stat(_samples([0.0, 180.0]), T0 + 60.0, 2)
    assert w2.spread_deg == pytest.approx(103.92, abs=0.01)


def test_windows_against_scipy_circular_statistics() -> None:
    rng = np.random.default_rng(5)
    dirs = list((75.0 + rng.normal(0, 6.0, 10)) % 360.0)
    smp = _samples(dirs)
    now = smp[-1][0]
    for minutes in (2, 5, 10):
        w = window_stat(smp, now, minutes)
        sel = np.radians([d for t, d, _ in smp if t >= now - minutes * 60.0])
        assert w.n == len(sel)
        # Equal speeds: the vector mean direction is the mean of unit vectors = scipy's circmean.
        assert w.dir_deg == pytest.approx(math.degrees(stats.circmean(sel)), abs=1e-6)
        # For a small spread Yamartino's sigma approaches scipy's circstd (sqrt(-2 ln R)).
        assert w.spread_deg == pytest.approx(math.degrees(stats.circstd(sel)), rel=0.03, abs=0.05)


def test_monitor_windows_equal_the_batch_computation() -> None:
    """The monitor's running per-minute sums against window_stat over the raw records (every 20 s,
    with calms and missing directions), at each minute."""
    rng = np.random.default_rng(9)
    mon = CourseMonitor("c", 75.0, 80.0, 60.0)
    recs: list[tuple[float, float, float]] = []
    for i in range(3 * 40):
        t = T0 + 20.0 * i
        if i % 3 == 0 and i:
            for k in (2, 5, 10):
                w = mon.window(t, k)
                ref = window_stat([r for r in recs if r[0] < t], t, k)
                assert w.n == ref.n
                for a, b in ((w.dir_deg, ref.dir_deg), (w.spread_deg, ref.spread_deg), (w.speed_ms, ref.speed_ms)):
                    assert (a is None) == (b is None)
                    if a is not None and b is not None:
                        assert a == pytest.approx(b, abs=1e-9)
        d = float((60.0 + rng.normal(0, 20)) % 360)
        sp = float(abs(rng.normal(3, 1)))
        if i % 17 == 0:
            d, sp = math.nan, 0.0  # calm
        if i % 23 == 0:
            d = math.nan  # direction missing at speed
        mon.add(t, d, sp)
        recs.append((t, d, sp))


def test_vector_mean_weights_by_speed() -> None:
    # 1 m/s from 0 deg and 3 m/s from 90 deg: mean vector from atan2(3, 1) = 71.57 deg.
    smp = [(T0, 0.0, 1.0), (T0 + 60, 90.0, 3.0)]
    w = window_stat(smp, T0 + 60, 2)
    assert w.dir_deg == pytest.approx(math.degrees(math.atan2(3, 1)), abs=1e-6)
    assert w.speed_ms == pytest.approx(2.0)


def test_oscillation_period_and_amplitude() -> None:
    rng = np.random.default_rng(1)
    t = np.arange(40)
    dirs = 80.0 + 10.0 * np.sin(2 * math.pi * t / 12.0) + rng.normal(0, 1.0, 40)
    p = analyse_pattern([(T0 + 60.0 * i, float(d % 360)) for i, d in enumerate(dirs)])
    assert p.kind == "oscillating"
    assert p.period_min == pytest.approx(12.0, abs=1.5)
    assert p.amplitude_deg == pytest.approx(10.0, abs=2.0)


def test_persistent_shift() -> None:
    rng = np.random.default_rng(2)
    dirs = [70.0 + rng.normal(0, 2.0) for _ in range(20)] + [100.0 + rng.normal(0, 2.0) for _ in range(20)]
    p = analyse_pattern([(T0 + 60.0 * i, d) for i, d in enumerate(dirs)])
    assert p.kind == "persistent"
    assert p.trend_deg == pytest.approx(30.0, abs=4.0)


def test_white_noise_is_not_an_oscillation() -> None:
    rng = np.random.default_rng(8)
    for _ in range(5):
        dirs = [80.0 + rng.normal(0, 6.0) for _ in range(40)]
        p = analyse_pattern([(T0 + 60.0 * i, d) for i, d in enumerate(dirs)])
        assert p.kind in ("steady", "unsettled")


def test_steady_and_too_short() -> None:
    rng = np.random.default_rng(3)
    dirs = [(90.0 + rng.normal(0, 1.5)) for _ in range(40)]
    assert analyse_pattern([(T0 + 60.0 * i, d) for i, d in enumerate(dirs)]).kind == "steady"
    assert analyse_pattern([(T0 + 60.0 * i, d) for i, d in enumerate(dirs[:10])]).kind == "unknown"


def _feed(mon: CourseMonitor, dirs: list[float], speeds: list[float]) -> list[dict[str, object]]:
    reports = []
    for i, (d, s) in enumerate(zip(dirs, speeds, strict=True)):
        t = T0 + 60.0 * i
        rep = mon.tick(t)
        if rep is not None:
            reports.append(rep.to_dict())
        mon.add(t, d, s)
    return reports


def test_new_breeze_fills_in_and_reports_are_sparse() -> None:
    """An offshore 250-deg wind until minute 60, then an onshore 80-deg breeze at 5 m/s, steady.
    The 10-minute window is all new breeze from minute 71 (records 60-69 plus the minute's edge);
    the signal must come with that time and no report should be sent every minute."""
    rng = np.random.default_rng(4)
    dirs = [250.0 + rng.normal(0, 5) for _ in range(60)] + [80.0 + rng.normal(0, 3) for _ in range(60)]
    speeds = [2.0] * 60 + [5.0] * 60
    mon = CourseMonitor("course", axis_deg=75.0, onshore_from_deg=80.0, onshore_halfwidth_deg=60.0)
    reports = _feed(mon, dirs, speeds)
    filled = [r for r in reports if r["new_breeze"]]
    assert filled
    since = filled[0]["new_breeze_since"]
    from frontwatch.timeutil import parse_time

    # The first minute whose 10-minute window (records 60-69) is all new breeze is minute 70; the
    # signal is believed after holding 3 minutes (70, 71, 72).
    assert parse_time(str(since)) == T0 + 70 * 60
    assert parse_time(str(filled[0]["issued_at"])) == T0 + 72 * 60
    assert len(reports) < 25  # 120 minutes of data, reports only on change
    last = reports[-1]
    assert last["shift_deg"] is not None and abs(float(last["shift_deg"])) <= 10  # type: ignore[arg-type]
    assert last["windows"][2]["minutes"] == 10  # type: ignore[index]


def test_monitor_snapshot_round_trip() -> None:
    rng = np.random.default_rng(6)
    dirs = [float(d) for d in 80.0 + 8.0 * np.sin(np.arange(90) / 2.0) + rng.normal(0, 1, 90)]
    dirs[30] = math.nan  # a calm record
    speeds = [4.0] * 90
    speeds[30] = 0.0
    a = CourseMonitor("c", 75.0, 80.0, 60.0)
    ref = _feed(a, dirs, speeds)
    b = CourseMonitor("c", 75.0, 80.0, 60.0)
    part = _feed(b, dirs[:45], speeds[:45])
    c = CourseMonitor("c", 75.0, 80.0, 60.0)
    c.restore(json.loads(json.dumps(b.snapshot(), allow_nan=False)))
    rest = []
    for i in range(45, 90):
        t = T0 + 60.0 * i
        rep = c.tick(t)
        if rep is not None:
            rest.append(rep.to_dict())
        c.add(t, dirs[i], speeds[i])
    assert part + rest == ref
