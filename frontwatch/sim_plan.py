"""Day plans for generated scenarios: what kind of day each one is, and its synoptic background.

A day is one of the KINDS below, optionally with extras ("+gust_front", "+land_breeze" for the night
after it, "+shadows"). Plans are drawn at random with summer-coast frequencies, or given explicitly,
e.g. ("breeze", "breeze_stall+land_breeze", "cold_front"). Magnitudes follow DOMAIN.md; the
frequencies and background ranges are from memory (a plausible mid-latitude summer coast).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

KINDS = ("breeze", "breeze_stall", "offshore_strong", "onshore", "cold_front", "storm", "overcast")
EXTRAS = ("gust_front", "land_breeze", "shadows")
BREEZE_KINDS = ("breeze", "breeze_stall")

# Summer-coast day frequencies (from memory; breeze days dominate a fair-weather season).
_FREQ = {"breeze": 0.46, "breeze_stall": 0.14, "offshore_strong": 0.08, "onshore": 0.10,
         "cold_front": 0.10, "storm": 0.05, "overcast": 0.07}


@dataclass(frozen=True)
class DayPlan:
    index: int
    kind: str
    extras: frozenset[str]
    syn_from_deg: float  # synoptic (large-scale) surface wind at the start of the day
    syn_speed_ms: float
    end_from_deg: float  # ... and at its end (differs after a cold front)
    end_speed_ms: float
    t_mean_c: float  # 24-h mean air temperature inland
    amp_shore_c: float  # half the diurnal range at the shore
    amp_inland_c: float  # half the diurnal range far inland
    td_mean_c: float  # mean dewpoint
    p_mean_hpa: float  # mean sea-level pressure
    sea_temp_c: float

    @property
    def label(self) -> str:
        return "+".join([self.kind, *sorted(self.extras)])


def parse_day(text: str) -> tuple[str, frozenset[str]]:
    """'breeze_stall+land_breeze' -> ('breeze_stall', {'land_breeze'}); ValueError names a bad part."""
    parts = [p.strip() for p in text.split("+") if p.strip()]
    if not parts or parts[0] not in KINDS:
        raise ValueError(f"unknown day kind {text!r}: choose from {', '.join(KINDS)}")
    bad = [p for p in parts[1:] if p not in EXTRAS]
    if bad:
        raise ValueError(f"unknown day extra {bad[0]!r} in {text!r}: choose from {', '.join(EXTRAS)}")
    return parts[0], frozenset(parts[1:])


def _random_days(rng: np.random.Generator, n: int) -> list[tuple[str, frozenset[str]]]:
    kinds = list(_FREQ)
    p = np.array([_FREQ[k] for k in kinds])
    out = []
    for _ in range(n):
        kind = kinds[int(rng.choice(len(kinds), p=p / p.sum()))]
        extras = set()
        if kind in BREEZE_KINDS and rng.random() < 0.12:
            extras.add("gust_front")
        if rng.random() < 0.45:
            extras.add("shadows")
        out.append((kind, extras))
    # Land breezes on quiet nights: not after or before a windy day.
    windy = {"offshore_strong", "onshore", "cold_front"}
    for i, (kind, extras) in enumerate(out):
        nxt = out[i + 1][0] if i + 1 < n else "breeze"
        if kind not in windy and nxt not in windy and rng.random() < 0.5:
            extras.add("land_breeze")
    return [(k, frozenset(e)) for k, e in out]


def _synoptic(rng: np.random.Generator, kind: str, inland: float, south: bool) -> tuple[float, float, float, float]:
    """(from_deg, speed, end_from_deg, end_speed) of the day's large-scale surface wind.

    `inland` is the bearing from sea to land, so an offshore wind blows FROM `inland`.
    """
    u = rng.uniform
    if kind in BREEZE_KINDS or kind in ("storm", "overcast"):
        regime = rng.choice(["offshore", "alongshore", "weak"], p=[0.4, 0.3, 0.3])
        if regime == "offshore":
            d, s = inland + u(-35, 35), u(1.5, 7.0)
        elif regime == "alongshore":  # alongshore with an offshore lean: the breeze must turn it
            d, s = inland + rng.choice([-1, 1]) * u(55, 95), u(2.0, 6.0)
        else:
            d, s = inland + u(-90, 90), u(0.3, 1.5)
        if kind == "overcast":
            s = min(s, 4.0)
        return d % 360, s, (d + u(-20, 20)) % 360, s * u(0.8, 1.2)
    if kind == "offshore_strong":  # Arritt 1993 (from memory): above ~11 m/s offshore, no breeze
        d, s = inland + u(-25, 25), u(11.5, 16.0)
        return d % 360, s, (d + u(-15, 15)) % 360, s * u(0.85, 1.1)
    if kind == "onshore":  # onshore synoptic wind: marine air all day, no distinct front
        d, s = inland + 180 + u(-30, 30), u(4.5, 9.0)
        return d % 360, s, (d + u(-15, 15)) % 360, s * u(0.85, 1.15)
    if kind == "cold_front":  # ahead: warm sector wind; behind: veered (NH) / backed (SH) and stronger
        if south:
            d = u(305, 350)
            e = d - u(55, 100)
        else:
            d = u(190, 235)
            e = d + u(55, 100)
        return d % 360, u(4.0, 8.0), e % 360, u(7.0, 12.0)
    raise ValueError(kind)


def make_plan(rng: np.random.Generator, days: int, inland_bearing: float, south: bool,
              explicit: tuple[str, ...] | None = None) -> list[DayPlan]:
    """One DayPlan per day; `explicit` (cycled if shorter than `days`) overrides the random draw."""
    if explicit:
        chosen = [parse_day(explicit[i % len(explicit)]) for i in range(days)]
    else:
        chosen = _random_days(rng, days)
    plans = []
    p_mean = float(rng.uniform(1010, 1018))
    sea = float(rng.uniform(19.5, 22.5))
    for i, (kind, extras) in enumerate(chosen):
        d, s, e, es = _synoptic(rng, kind, inland_bearing, south)
        t_mean = float(rng.uniform(21.0, 25.0))
        amp_shore, amp_in = float(rng.uniform(2.5, 4.0)), float(rng.uniform(6.0, 8.5))
        td = float(rng.uniform(12.0, 17.0))
        if kind == "onshore":
            amp_shore, amp_in, td = amp_shore * 0.5, amp_in * 0.6, float(rng.uniform(16.5, 19.0))
        elif kind == "offshore_strong":
            t_mean, td = t_mean + 2.0, float(rng.uniform(5.0, 10.0))
        elif kind == "storm" or "gust_front" in extras:
            t_mean, td = t_mean + 1.5, float(rng.uniform(17.0, 19.5))
        elif kind == "overcast":
            amp_shore, amp_in = amp_shore * 0.4, amp_in * 0.35
        p_mean = float(np.clip(p_mean + rng.normal(0, 2.5), 1004, 1024))
        plans.append(DayPlan(i, kind, extras, float(d), float(s), float(e), float(es), t_mean, amp_shore, amp_in, td, p_mean, sea))
    # Ahead of a cold front the warm-sector wind sets in during the day before.
    for i in range(len(plans) - 1):
        nxt = plans[i + 1]
        if nxt.kind == "cold_front":
            plans[i] = replace(plans[i], end_from_deg=nxt.syn_from_deg, end_speed_ms=nxt.syn_speed_ms)
    return plans
