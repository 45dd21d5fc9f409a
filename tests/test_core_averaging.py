"""A station whose wind averaging the network file does not declare: the detector tells a running-mean
vane from its wind (frontwatch.detect.station._inferred_averaging) and treats it as declared.

References: the running means are computed with pandas' rolling mean (a general-purpose library,
not the code under test); the 1-minute/10-minute mean-square ratio of an AR(1) series is
(1 - r) / (1 - r^10) (from the AR(1) autocorrelation r^k, Box & Jenkins); the real record's README
says its vane reports a 10-minute running mean.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from frontwatch.config import load_network, parse_network
from frontwatch.detect.station import INFERRED_AVERAGING, SMOOTH_RATIO, _inferred_averaging
from frontwatch.replay import decode_frame, merge, run_decoded, run_replay

ROOT = Path(__file__).resolve().parents[1]


def _ar1(rng: np.random.Generator, n: int, r: float, sigma: float) -> np.ndarray:
    x = np.empty(n)
    x[0] = rng.standard_normal()
    e = rng.standard_normal(n) * np.sqrt(1 - r * r)
    for i in range(1, n):
        x[i] = r * x[i - 1] + e[i]
    return sigma * x


@pytest.mark.parametrize("r", [0.0, 0.5, 0.8, 0.9])
def test_one_minute_winds_are_not_taken_for_running_means(r):
    rng = np.random.default_rng(7)
    calls = [_inferred_averaging(3.0 + _ar1(rng, 50, r, 1.0), -2.0 + _ar1(rng, 50, r, 1.0)) for _ in range(200)]
    # (1 - r)/(1 - r^10): 1.0, 0.50, 0.22, 0.15, all well above SMOOTH_RATIO
    assert (1 - r) / (1 - r ** 10) > 1.5 * SMOOTH_RATIO
    assert calls.count(1) >= 196, calls.count(INFERRED_AVERAGING)


@pytest.mark.parametrize("r", [0.6, 0.8, 0.9])
def test_ten_minute_running_means_are_recognised(r):
    # Turbulence persistent from minute to minute (r >= 0.6; the shared real record's median ratio,
    # 0.035, is about that of r = 0.7). A running mean of white noise (ratio 1/A = 0.1 in mean
    # square for A = 10) stays above SMOOTH_RATIO and is taken as 1-minute winds.
    rng = np.random.default_rng(11)
    hits = 0
    for _ in range(200):
        u = pd.Series(3.0 + _ar1(rng, 59, r, 1.0)).rolling(10).mean().to_numpy()[9:]  # pandas' running mean
        v = pd.Series(-2.0 + _ar1(rng, 59, r, 1.0)).rolling(10).mean().to_numpy()[9:]
        hits += _inferred_averaging(u, v) == INFERRED_AVERAGING
    assert hits >= 190, hits


def test_too_little_wind_or_a_calm_says_nothing():
    assert _inferred_averaging(np.full(10, 1.0), np.full(10, 1.0)) == 1
    assert _inferred_averaging(np.zeros(50), np.zeros(50)) == 1  # calm: no change at any lag
    assert _inferred_averaging(np.full(50, np.nan), np.full(50, np.nan)) == 1


def test_real_record_without_its_declaration_gives_the_declared_passages(tmp_path):
    """The excerpt of the shared real record (tests/data/README.md: data.gov.sg via
    github.com/grandey/access-data-gov-sg, Singapore Open Data Licence 1.0) replayed with and
    without `wind_averaging_min = 10`: the judged passages (tests/test_core_real_record.py) come
    out the same, as breeze fronts, timed alike."""
    net = ROOT / "examples/real-coastal-s116.toml"
    text = net.read_text()
    assert "wind_averaging_min = 10" in text
    blind = tmp_path / "blind.toml"
    blind.write_text("\n".join(x for x in text.splitlines() if not x.startswith("wind_averaging_min")) + "\n")
    data = [ROOT / "tests/data/real-s116-excerpt.csv.gz"]
    declared = [e for e in run_replay(data, load_network(net)).events if e.kind == "breeze_front"]
    inferred = [e for e in run_replay(data, load_network(blind)).events if e.kind == "breeze_front"]
    assert load_network(blind).stations[0].wind_averaging_min == 1
    assert len(declared) == len(inferred) >= 2
    for a, b in zip(declared, inferred, strict=True):
        assert abs(a.onset - b.onset) <= 120 and abs(a.detected_at - b.detected_at) <= 120


def test_undeclared_running_mean_stations_detected_as_promptly_as_declared():
    """Generated network with 30 % running-mean stations, declared and not: the same passages hit
    and a median detection delay within a minute of each other at the running-mean stations."""
    from frontwatch.labels import label_from_dict
    from frontwatch.score import score
    from frontwatch.sim import generate, preset

    out = {}
    for declare in (True, False):
        sc = generate(preset("smeared", seed=404, days=3, declare_averaging=declare))
        cfg = parse_network(sc.network)
        res = run_decoded(merge([decode_frame(sc.observations.copy(), cfg, "s")]), cfg)
        rep = score(res.events, [label_from_dict(x) for x in sc.labels])
        out[declare] = rep
        if declare:
            smeared = {s["id"] for s in sc.network["stations"] if s.get("wind_averaging_min", 1) > 1}
    assert smeared
    delays = {k: [(p.event.detected_at - p.label.time) / 60 for p in r.hits if p.event.station in smeared]
              for k, r in out.items()}
    assert delays[True] and len(delays[False]) >= len(delays[True]) - 1
    assert abs(float(np.median(delays[False])) - float(np.median(delays[True]))) <= 1.0, delays
    assert out[False].overall.csi >= out[True].overall.csi - 0.05


def test_compiled_sums_equal_the_same_code_run_as_python():
    from frontwatch.detect.station import _smooth_sums, _smooth_sums_py

    rng = np.random.default_rng(3)
    for n in (0, 5, 21, 50, 64):
        u, v = rng.standard_normal(n) * 3, rng.standard_normal(n)
        if n:
            u[rng.integers(n)] = np.nan
        assert _smooth_sums(u, v) == _smooth_sums_py(u, v)
    s1, n1, s10, n10 = _smooth_sums_py(np.arange(12.0), np.zeros(12))
    assert (s1, n1, s10, n10) == (11.0, 22, 200.0, 4)  # u: 11 steps of 1, 2 of 10; v: all 0
