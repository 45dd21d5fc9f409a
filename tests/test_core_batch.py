"""The station-major replay (frontwatch.batch + the compiled scan) against the record-by-record
path the live service runs: the same outputs, statistics and final engine state, bit for bit.

The reference is the project's own Python implementation (Engine.feed -> StationQC.check ->
StationDetector.update -> Gate.update), so these are consistency checks, not skill checks; the
detector's skill is checked against outside references elsewhere (ruptures, MetPy, DOMAIN.md).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from frontwatch import scan
from frontwatch.config import parse_network
from frontwatch.detect import changepoint as cp
from frontwatch.replay import Decoded, decode_frame, merge, run_decoded
from frontwatch.sim import generate, preset

pytestmark = pytest.mark.skipif(not scan.available(), reason="numba is not installed: replay runs record by record")


def _both(d, cfg):
    a = run_decoded(d, cfg, record_by_record=True)
    b = run_decoded(d, cfg)
    return a, b


def _same(a, b) -> None:
    assert [o.to_dict() for o in a.outputs] == [o.to_dict() for o in b.outputs]
    assert json.dumps(a.engine.snapshot(), sort_keys=True) == json.dumps(b.engine.snapshot(), sort_keys=True)


@pytest.mark.parametrize(("name", "seed"), [("ordinary", 61), ("noisy", 62), ("smeared", 63), ("south", 64),
                                            ("curved", 65)])
def test_batch_replay_equals_record_by_record_on_each_preset(name, seed):
    # Each preset carries the generator's sensor faults (spikes, stuck vanes, gaps, repeated rows),
    # so every QC branch and the gate's restart after a long silence are exercised.
    sc = generate(preset(name, seed=seed, days=3))
    cfg = parse_network(sc.network)
    d = merge([decode_frame(sc.observations.copy(), cfg, f"{name}-{seed}")])
    a, b = _both(d, cfg)
    assert a.events, "the scenario must hold passages for the comparison to mean anything"
    assert sum(a.engine.stats.qc.values()) > 0, "and QC flags"
    _same(a, b)


def test_batch_replay_equals_record_by_record_on_messy_input():
    sc = generate(preset("ordinary", seed=66, days=2))
    cfg = parse_network(sc.network)
    d = merge([decode_frame(sc.observations.copy(), cfg, "messy")])
    rng = np.random.default_rng(5)
    n = len(d)
    station = d.station.astype(object).copy()
    cols = {k: v.copy() for k, v in d.columns.items()}
    # unknown stations, exact duplicates, a two-hour silence, calm spells, missing fields, absurd values
    station[rng.choice(n, 300, replace=False)] = "NOPE"
    dup = np.sort(rng.choice(n, 200, replace=False))
    first = station[0]
    silent = (station == first) & (cols["time"] > cols["time"][0] + 20 * 3600) & (cols["time"] < cols["time"][0] + 22 * 3600)
    keep = ~silent
    calm = rng.choice(n, 2000, replace=False)
    cols["wind_speed_ms"][calm] = 0.0
    cols["wind_dir_deg"][calm] = np.nan
    for k in ("temp_c", "dewpoint_c", "pressure_hpa", "wind_gust_ms"):
        cols[k][rng.choice(n, 500, replace=False)] = np.nan
    cols["temp_c"][rng.choice(n, 50, replace=False)] = 99.0
    cols["wind_gust_ms"][rng.choice(n, 50, replace=False)] = -3.0
    idx = np.sort(np.concatenate([np.flatnonzero(keep), dup[keep[dup]]]))  # duplicates right after their originals
    messy = Decoded(station[idx].astype(str), {k: v[idx] for k, v in cols.items()})
    a, b = _both(messy, cfg)
    st = a.engine.stats
    assert st.qc["duplicate"] >= 150 and st.qc["temp_range"] > 0 and st.qc["gust_range"] > 0 and st.qc["gap"] > 0
    assert st.unknown_stations["NOPE"] >= 300  # (some duplicated)
    _same(a, b)


def test_a_replay_split_in_two_on_one_engine_equals_the_whole():
    # an engine already fed (e.g. restored state) takes the rest of the file with its state carried
    # over (the batch path continues from it), and the outputs are those of one record-by-record run
    sc = generate(preset("ordinary", seed=67, days=1))
    cfg = parse_network(sc.network)
    d = merge([decode_frame(sc.observations.copy(), cfg, "x")])
    half = len(d) // 2
    first = Decoded(d.station[:half], {k: v[:half] for k, v in d.columns.items()})
    rest = Decoded(d.station[half:], {k: v[half:] for k, v in d.columns.items()})
    r1 = run_decoded(first, cfg)
    r2 = run_decoded(rest, cfg, engine=r1.engine)
    whole = run_decoded(d, cfg, record_by_record=True)
    assert [o.to_dict() for o in r1.outputs + r2.outputs] == [o.to_dict() for o in whole.outputs]


def test_compiled_split_matches_the_numpy_formulation():
    # Random windows with steps, drifts, gaps in time and missing values: the compiled loops and the
    # numpy version of the same statistic agree (sums in a different order: equal to ~1e-12).
    rng = np.random.default_rng(0)
    w = np.array([1.0, 1.0, 1.0, 0.7, 0.5])
    compared = 0
    for _ in range(400):
        n = int(rng.integers(12, 64))
        t = np.cumsum(rng.choice([60.0, 60.0, 60.0, 120.0], n))
        x = rng.normal(0, 1, (n, 5)) * np.array([0.1, 0.15, 0.8, 0.8, 0.05])
        k = int(rng.integers(5, n))
        x[k:] += rng.normal(0, 1, 5) * np.array([0.5, 0.5, 2, 2, 0.3])
        x += (t[:, None] / 3600) * rng.normal(0, 0.5, 5)
        x[rng.random((n, 5)) < 0.05] = np.nan
        first = int(rng.integers(8, max(9, n - 2)))
        last = int(rng.integers(first, n))
        a = cp.best_split(t, x, w, first, last, 1800.0)
        b = cp.best_split_numpy(t, x, w, first, last, 1800.0)
        assert (a is None) == (b is None)
        if a is None or b is None:
            continue
        compared += 1
        assert (a.onset_index, a.split_index) == (b.onset_index, b.split_index)
        assert a.strength == pytest.approx(b.strength, rel=1e-9)
        assert np.allclose(a.sigma, b.sigma, rtol=1e-12)
        assert np.allclose(a.detrended, b.detrended, rtol=1e-12, atol=1e-12, equal_nan=True)
        assert (a.channel_split == b.channel_split).all()
    assert compared > 300
