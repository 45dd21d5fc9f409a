"""Scoring passage events against labels: matching, contingency scores, timing errors, confusion.

Matching rule (also in docs/tuning.md):
- A label and an event can match only at the same station and when |event.onset - label.time| <=
  tolerance (default 20 minutes).
- Matching is one-to-one and greedy by time distance: all candidate pairs are taken in order of
  |onset - label time| (ties: a pair of the same kind first, then the earlier label, then the
  earlier event), and a pair is kept when neither side is taken yet.
- For a target kind K (default breeze_front): a label of kind K matched by an event of kind K is a
  hit (a); a label of kind K with no such event is a miss (c), whatever else was emitted near it; an
  event of kind K that is not a hit is a false alarm (b), whether no label is near it or the label
  there is of another kind (a breeze_front called on a gust front, or on a marked cloud_shadow).
- Target 'any': every passage label (the kinds of DESIGN 3.3) matched by any event is a hit; an
  event with no label near it, or near a label of a look-alike that is not a passage (say
  cloud_shadow), is a false alarm.

Scores (Wilks, Statistical Methods in the Atmospheric Sciences, the 2x2 contingency table):
POD = a/(a+c), FAR = b/(a+b), CSI = a/(a+b+c), bias = (a+b)/(a+c); None when the denominator is 0.
Onset error = event onset - label time; detection delay = event detected_at - label time (for hits).
"""

from __future__ import annotations

import bisect
import math
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .events import KINDS, PassageEvent
from .labels import Label
from .timeutil import iso_z

DEFAULT_TOLERANCE_S = 20 * 60.0
TARGETS = (*KINDS, "any")


def _ratio(num: int, den: int) -> float | None:
    return num / den if den > 0 else None


@dataclass(frozen=True, slots=True)
class Contingency:
    """Hits a, false alarms b, misses c (correct negatives are not defined for events in time)."""

    a: int
    b: int
    c: int

    @property
    def pod(self) -> float | None:
        return _ratio(self.a, self.a + self.c)

    @property
    def far(self) -> float | None:
        return _ratio(self.b, self.a + self.b)

    @property
    def csi(self) -> float | None:
        return _ratio(self.a, self.a + self.b + self.c)

    @property
    def bias(self) -> float | None:
        return _ratio(self.a + self.b, self.a + self.c)

    def to_dict(self) -> dict[str, Any]:
        return {"a": self.a, "b": self.b, "c": self.c, "pod": self.pod, "far": self.far,
                "csi": self.csi, "bias": self.bias}


@dataclass(frozen=True, slots=True)
class Pair:
    label: Label
    event: PassageEvent

    @property
    def onset_error_s(self) -> float:
        return self.event.onset - self.label.time

    @property
    def delay_s(self) -> float:
        return self.event.detected_at - self.label.time


@dataclass
class Matching:
    pairs: list[Pair]
    free_labels: list[Label]
    free_events: list[PassageEvent]


def match(events: Iterable[PassageEvent], labels: Iterable[Label],
          tolerance_s: float = DEFAULT_TOLERANCE_S) -> Matching:
    """One-to-one greedy matching by time distance, per station (see the module docstring)."""
    if tolerance_s < 0:
        raise ValueError("tolerance must be >= 0")
    evs = sorted(events, key=lambda e: (e.station, e.onset, e.kind))
    lbs = sorted(labels, key=lambda lb: (lb.station, lb.time, lb.kind))
    by_station: dict[str, list[int]] = defaultdict(list)
    for i, e in enumerate(evs):
        by_station[e.station].append(i)
    onsets = {st: [evs[i].onset for i in idx] for st, idx in by_station.items()}
    cands: list[tuple[float, int, float, float, int, int]] = []
    for j, lb in enumerate(lbs):
        idx = by_station.get(lb.station)
        if not idx:
            continue
        ts = onsets[lb.station]
        lo = bisect.bisect_left(ts, lb.time - tolerance_s)
        hi = bisect.bisect_right(ts, lb.time + tolerance_s)
        for k in range(lo, hi):
            e = evs[idx[k]]
            cands.append((abs(e.onset - lb.time), int(e.kind != lb.kind), lb.time, e.onset, j, idx[k]))
    cands.sort()
    used_l: set[int] = set()
    used_e: set[int] = set()
    pairs: list[Pair] = []
    for _, _, _, _, j, i in cands:
        if j in used_l or i in used_e:
            continue
        used_l.add(j)
        used_e.add(i)
        pairs.append(Pair(lbs[j], evs[i]))
    pairs.sort(key=lambda p: (p.label.time, p.label.station))
    return Matching(pairs,
                    [lb for j, lb in enumerate(lbs) if j not in used_l],
                    [e for i, e in enumerate(evs) if i not in used_e])


@dataclass
class Distribution:
    """Summary of a set of time differences, in seconds."""

    values: list[float]

    @property
    def n(self) -> int:
        return len(self.values)

    def quantile(self, q: float) -> float | None:
        """Linear interpolation between order statistics (numpy's default 'linear' method)."""
        if not self.values:
            return None
        v = sorted(self.values)
        pos = q * (len(v) - 1)
        lo = math.floor(pos)
        hi = min(lo + 1, len(v) - 1)
        return v[lo] + (v[hi] - v[lo]) * (pos - lo)

    @property
    def mean(self) -> float | None:
        return sum(self.values) / len(self.values) if self.values else None

    @property
    def mean_abs(self) -> float | None:
        return sum(abs(x) for x in self.values) / len(self.values) if self.values else None

    @property
    def median(self) -> float | None:
        return self.quantile(0.5)

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "mean_s": self.mean, "median_s": self.median, "mean_abs_s": self.mean_abs,
                "p10_s": self.quantile(0.1), "p90_s": self.quantile(0.9),
                "min_s": min(self.values) if self.values else None,
                "max_s": max(self.values) if self.values else None}


def _predicates(target: str) -> tuple[Callable[[Label], bool], Callable[[PassageEvent], bool]]:
    if target not in TARGETS:
        raise ValueError(f"unknown target kind {target!r} (one of {', '.join(TARGETS)})")
    if target == "any":
        return (lambda lb: lb.is_passage), (lambda e: True)
    return (lambda lb: lb.kind == target), (lambda e: e.kind == target)


def contingency(m: Matching, target: str, station: str | None = None) -> tuple[Contingency, list[Pair]]:
    """The 2x2 counts for one target kind (optionally one station) and the hit pairs."""
    pos_l, pos_e = _predicates(target)

    def here(st: str) -> bool:
        return station is None or st == station

    hits = [p for p in m.pairs if here(p.label.station) and pos_l(p.label) and pos_e(p.event)]
    n_lab = sum(1 for p in m.pairs if here(p.label.station) and pos_l(p.label)) + sum(
        1 for lb in m.free_labels if here(lb.station) and pos_l(lb))
    n_ev = sum(1 for p in m.pairs if here(p.event.station) and pos_e(p.event)) + sum(
        1 for e in m.free_events if here(e.station) and pos_e(e))
    return Contingency(len(hits), n_ev - len(hits), n_lab - len(hits)), hits


@dataclass
class ScoreReport:
    """Everything `frontwatch score` prints, for one target kind and tolerance."""

    target: str
    tolerance_s: float
    overall: Contingency
    per_station: dict[str, Contingency]
    per_kind: dict[str, Contingency]
    onset_error: Distribution
    delay: Distribution
    confusion: dict[str, Counter[str]]  # labelled kind -> {event kind or 'none': count}; 'no label' row too
    hits: list[Pair]
    misses: list[tuple[Label, PassageEvent | None]]  # with the event of another kind matched there, if any
    false_alarms: list[tuple[PassageEvent, Label | None]]  # with the label of another kind there, if any
    n_labels: int = 0
    n_events: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {
            "target": self.target, "tolerance_s": self.tolerance_s,
            "labels": self.n_labels, "events": self.n_events,
            "overall": self.overall.to_dict(),
            "per_station": {k: v.to_dict() for k, v in self.per_station.items()},
            "per_kind": {k: v.to_dict() for k, v in self.per_kind.items()},
            "onset_error": self.onset_error.to_dict(), "delay": self.delay.to_dict(),
            "confusion": {k: dict(v) for k, v in self.confusion.items()},
            "misses": [{"station": lb.station, "kind": lb.kind, "time": iso_z(lb.time),
                        "called": ev.kind if ev else None} for lb, ev in self.misses],
            "false_alarms": [{"id": ev.id, "station": ev.station, "kind": ev.kind, "onset": iso_z(ev.onset),
                              "label_kind": lb.kind if lb else None} for ev, lb in self.false_alarms],
        }


def score(events: Sequence[PassageEvent], labels: Sequence[Label], *,
          tolerance_s: float = DEFAULT_TOLERANCE_S, target: str = "breeze_front") -> ScoreReport:
    """Match `events` to `labels` and compute every figure of the score report."""
    pos_l, pos_e = _predicates(target)
    m = match(events, labels, tolerance_s)
    overall, hits = contingency(m, target)
    stations = sorted({lb.station for lb in labels} | {e.station for e in events})
    per_station = {st: contingency(m, target, st)[0] for st in stations}
    kinds_seen = {lb.kind for lb in labels if lb.is_passage} | {e.kind for e in events}
    per_kind = {k: contingency(m, k)[0] for k in KINDS if k in kinds_seen}
    confusion: dict[str, Counter[str]] = defaultdict(Counter)
    for p in m.pairs:
        confusion[p.label.kind][p.event.kind] += 1
    for lb in m.free_labels:
        confusion[lb.kind]["none"] += 1
    for e in m.free_events:
        confusion["no label"][e.kind] += 1
    hit_ids = {id(p) for p in hits}
    misses: list[tuple[Label, PassageEvent | None]] = [
        (p.label, p.event) for p in m.pairs if pos_l(p.label) and id(p) not in hit_ids]
    misses += [(lb, None) for lb in m.free_labels if pos_l(lb)]
    misses.sort(key=lambda x: (x[0].time, x[0].station))
    fas: list[tuple[PassageEvent, Label | None]] = [
        (p.event, p.label) for p in m.pairs if pos_e(p.event) and id(p) not in hit_ids]
    fas += [(e, None) for e in m.free_events if pos_e(e)]
    fas.sort(key=lambda x: (x[0].onset, x[0].station))
    return ScoreReport(
        target=target, tolerance_s=tolerance_s, overall=overall, per_station=per_station,
        per_kind=per_kind, onset_error=Distribution([p.onset_error_s for p in hits]),
        delay=Distribution([p.delay_s for p in hits]), confusion=dict(confusion), hits=hits,
        misses=misses, false_alarms=fas, n_labels=len(labels), n_events=len(events))


@dataclass(frozen=True)
class Objective:
    """What the search maximises: a skill score minus a penalty on slow detection.

    value = score - delay_penalty_per_min * max(0, median delay in minutes - delay_free_min).
    The default (CSI, 0.01 per minute beyond 4 minutes) follows the core issue's acceptance of a
    median delay of 4 minutes at most; the weight itself is a choice, not a published value.
    """

    metric: str = "csi"  # csi | pod | one_minus_far
    target: str = "breeze_front"
    tolerance_s: float = DEFAULT_TOLERANCE_S
    delay_penalty_per_min: float = 0.01
    delay_free_min: float = 4.0

    def _score(self, c: Contingency) -> tuple[float | None, int]:
        """The metric and the count it is a proportion of."""
        if self.metric == "csi":
            return c.csi, c.a + c.b + c.c
        if self.metric == "pod":
            return c.pod, c.a + c.c
        if self.metric == "one_minus_far":
            return (None if c.far is None else 1.0 - c.far), c.a + c.b
        raise ValueError(f"unknown objective metric {self.metric!r}")

    def standard_error(self, rep: ScoreReport) -> float:
        """Binomial standard error sqrt(p (1 - p) / n) of the metric, taken as a proportion of n
        (an approximation: the matching makes the trials not quite independent)."""
        p, n = self._score(rep.overall)
        if p is None or n == 0:
            return 0.0
        return math.sqrt(max(p * (1.0 - p), 0.0) / n)

    def value(self, rep: ScoreReport) -> float:
        s, _ = self._score(rep.overall)
        base = s if s is not None else 0.0
        med = rep.delay.median
        if med is None:
            return base
        return base - self.delay_penalty_per_min * max(0.0, med / 60.0 - self.delay_free_min)


def read_events(path: str | Path) -> list[PassageEvent]:
    """Read an events JSONL file (one PassageEvent.to_dict() a line); errors name file and line."""
    import json

    from .errors import FrontwatchError

    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise FrontwatchError(f"{p}: cannot read events file: {exc}") from None
    out: list[PassageEvent] = []
    for n, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        try:
            d = json.loads(line)
            if not isinstance(d, dict):
                raise ValueError(f"expected a JSON object, got {type(d).__name__}")
            if d.get("type") not in (None, "event"):
                continue  # a mixed outputs file: forecasts and alerts are not events
            out.append(PassageEvent.from_dict(d))
        except KeyError as exc:
            raise FrontwatchError(f"{p}, line {n}: field {exc.args[0]!r} is missing") from None
        except (ValueError, TypeError) as exc:
            raise FrontwatchError(f"{p}, line {n}: {exc}") from None
    return out
