"""The change-point statistic against ruptures (Truong, Oudre & Vayatis; a general-purpose
offline change-point library) on seeded synthetic signals with known change points.

With one channel and the pre-window reaching back to the start, frontwatch's split statistic is
the reduction of the L2 (least-squares) cost by one change, so its best split must be exactly the
optimal single change ruptures' dynamic programming finds with the L2 cost.
"""

from __future__ import annotations

import numpy as np
import pytest

from frontwatch.detect.changepoint import best_split

rpt = pytest.importorskip("ruptures")


def _window(signal: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n = len(signal)
    t = np.arange(n) * 60.0
    x = np.full((n, 5), np.nan)
    x[:, 2] = signal[:, 0]  # the onshore-wind channel: no drift removal, so the model is plain L2
    return t, x


@pytest.mark.parametrize("seed", range(12))
def test_single_split_matches_ruptures_dynp_l2(seed):
    signal, bkps = rpt.pw_constant(n_samples=80, n_features=1, n_bkps=1, noise_std=1.0, delta=(2, 5), seed=seed)
    t, x = _window(signal)
    w = np.array([0.0, 0.0, 1.0, 0.0, 0.0])
    sp = best_split(t, x, w, first=8, last=len(t) - 3, baseline_s=1e9)
    algo = rpt.Dynp(model="l2", min_size=2, jump=1).fit(signal)
    ref = algo.predict(n_bkps=1)[0]
    if not 8 <= ref <= len(t) - 3:
        pytest.skip(f"ruptures' change at {ref} lies outside the detector's candidate range")
    assert sp is not None
    assert sp.split_index == ref
    assert abs(sp.split_index - bkps[0]) <= 3  # and both find the true change (steps of 2-5 sigma)


def test_strength_grows_with_step_size():
    rng = np.random.default_rng(5)
    base = rng.normal(0, 1, (60, 1))
    strengths = []
    for step in (0.0, 1.0, 3.0):
        sig = base.copy()
        sig[40:] += step
        t, x = _window(sig)
        sp = best_split(t, x, np.array([0.0, 0.0, 1.0, 0.0, 0.0]), 20, 57, 1e9)
        strengths.append(sp.strength if sp else 0.0)
    assert strengths[0] < strengths[1] < strengths[2]
