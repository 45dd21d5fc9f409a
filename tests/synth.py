"""Tiny hand-made station signals for unit tests (not the scenario generator: one change, known time)."""

from __future__ import annotations

import math

import numpy as np

from frontwatch.config import parse_network
from frontwatch.obs import Observation

T0 = 1767225600.0  # 2026-01-01T00:00:00Z
NET = {
    "network": {"name": "unit", "utc_offset_hours": 0},
    "stations": [{"id": "A", "lat": 40.0, "lon": 0.0, "onshore_from_deg": 180.0}],
}


def config(**detector):
    doc = dict(NET)
    if detector:
        doc = {**NET, "detector": detector}
    return parse_network(doc)


def passage(kind: str = "breeze", onset_min: int = 720, seed: int = 1, n_min: int = 900, ramp: int = 4,
            noise: float = 1.0) -> tuple[list[Observation], float]:
    """A day at station A (local = UTC), with one change at `onset_min` after midnight.

    kinds: breeze (N wind 3 m/s -> S onshore 4 m/s, T -1.5 against a warming trend, Td +1.5),
    cold (W -> N wind, Td -4, p +2), shadow (T dip only), none.
    """
    rng = np.random.default_rng(seed)
    out = []
    for m in range(n_min):
        t = T0 + 60.0 * m
        frac = 0.0 if m < onset_min else min(1.0, (m - onset_min + 1) / ramp)
        temp = 18.0 + 8.0 * math.sin(math.pi * (m - 360) / 720) if 360 <= m <= 1080 else 18.0
        td = 12.0
        p = 1012.0
        wd, ws = 0.0, 3.0
        if kind == "breeze":
            temp -= 1.5 * frac
            td += 1.5 * frac
            wd = (0.0 + 180.0 * frac) % 360 if frac < 1 else 180.0
            ws = 3.0 + 1.0 * frac
        elif kind == "cold":
            td -= 4.0 * frac
            p += 2.0 * frac
            wd, ws = (270.0 + 90.0 * frac) % 360, 5.0 + 2.0 * frac
        elif kind == "shadow":
            temp -= 1.2 * frac if m < onset_min + 15 else 0.0
        ws_obs = max(0.0, ws + noise * 0.3 * rng.standard_normal())
        out.append(Observation("A", t, round((wd + noise * 8 * rng.standard_normal()) % 360, 0), round(ws_obs, 1),
                               float("nan"), round(temp + noise * 0.08 * rng.standard_normal(), 1),
                               round(td + noise * 0.1 * rng.standard_normal(), 1),
                               round(p + noise * 0.03 * rng.standard_normal(), 1), 0.0))
    return out, T0 + 60.0 * onset_min
