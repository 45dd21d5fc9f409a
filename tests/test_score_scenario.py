"""A tiny scenario scored by hand: labels, events, and the matches worked out in the comments."""

from __future__ import annotations

import pytest

from frontwatch.events import PassageEvent
from frontwatch.labels import Label
from frontwatch.score import match, score
from frontwatch.timeutil import parse_time


def t(hhmm: str) -> float:
    return parse_time(f"2026-01-14T{hhmm}:00Z")


def ev(station: str, hhmm: str, kind: str = "breeze_front") -> PassageEvent:
    onset = t(hhmm)
    return PassageEvent(station, kind, onset, onset + 240.0, 0.8, 250.0, 80.0, 1.5, -1.0, 1.5, 0.2)


# Labels                         Events (detected 4 min after onset)      Worked by hand (20 min tolerance)
# A breeze_front 02:00           A breeze_front 02:05                     hit, onset +5, delay +9
# A gust_front   06:00           A breeze_front 06:03                     breeze called on a gust front: FA
#                                A breeze_front 05:00                     no label at A 05:00: FA
# B breeze_front 03:00           B breeze_front 03:25                     25 min apart: miss + FA
# B breeze_front 04:00           B breeze_front 03:50, 04:02              04:02 is nearer: hit (+2, +6); 03:50 FA
# C breeze_front 05:00           (A's 05:00 event is another station)     miss
# C cloud_shadow 07:00           C wind_shift 07:05                       not breeze; for 'any' a FA
# D breeze_front 10:00, 10:30    D breeze_front 10:14, 10:20              greedy: 10:30-10:20 (10 min) first,
#                                                                         then 10:00-10:14 (14): both hits
LABELS = [
    Label("A", "breeze_front", t("02:00")), Label("A", "gust_front", t("06:00")),
    Label("B", "breeze_front", t("03:00")), Label("B", "breeze_front", t("04:00")),
    Label("C", "breeze_front", t("05:00")), Label("C", "cloud_shadow", t("07:00")),
    Label("D", "breeze_front", t("10:00")), Label("D", "breeze_front", t("10:30")),
]
EVENTS = [
    ev("A", "02:05"), ev("A", "06:03"), ev("A", "05:00"), ev("B", "03:25"), ev("B", "03:50"),
    ev("B", "04:02"), ev("C", "07:05", "wind_shift"), ev("D", "10:14"), ev("D", "10:20"),
]


def test_breeze_front_counts_by_hand() -> None:
    rep = score(EVENTS, LABELS)
    # a = 4 (A 02:00, B 04:00, D 10:00, D 10:30); c = 2 (B 03:00, C 05:00); b = 4 (A 06:03, A 05:00,
    # B 03:25, B 03:50). POD 4/6, FAR 4/8, CSI 4/10, bias 8/6.
    o = rep.overall
    assert (o.a, o.b, o.c) == (4, 4, 2)
    assert o.pod == pytest.approx(4 / 6)
    assert o.far == pytest.approx(0.5)
    assert o.csi == pytest.approx(0.4)
    assert o.bias == pytest.approx(8 / 6)
    assert {k: (v.a, v.b, v.c) for k, v in rep.per_station.items()} == {
        "A": (1, 2, 0), "B": (1, 2, 1), "C": (0, 0, 1), "D": (2, 0, 0)}


def test_timing_by_hand() -> None:
    rep = score(EVENTS, LABELS)
    # onset errors of the hits: +5, +2, +14, -10 min -> median 3.5, mean 2.75
    assert sorted(rep.onset_error.values) == [-600.0, 120.0, 300.0, 840.0]
    assert rep.onset_error.median == pytest.approx(3.5 * 60)
    assert rep.onset_error.mean == pytest.approx(2.75 * 60)
    # delays are onset errors + 4 min: -6, +6, +9, +18 -> median 7.5
    assert rep.delay.median == pytest.approx(7.5 * 60)


def test_greedy_pairs_by_hand() -> None:
    m = match(EVENTS, LABELS)
    got = {(p.label.station, p.label.time, p.event.onset) for p in m.pairs}
    assert ("D", t("10:00"), t("10:14")) in got
    assert ("D", t("10:30"), t("10:20")) in got
    assert ("B", t("04:00"), t("04:02")) in got
    assert ("A", t("06:00"), t("06:03")) in got
    assert len(m.pairs) == 6  # the four hits, A gust/breeze, C cloud_shadow/wind_shift


def test_confusion_and_lists_by_hand() -> None:
    rep = score(EVENTS, LABELS)
    conf = {k: dict(v) for k, v in rep.confusion.items()}
    assert conf == {
        "breeze_front": {"breeze_front": 4, "none": 2},
        "gust_front": {"breeze_front": 1},
        "cloud_shadow": {"wind_shift": 1},
        "no label": {"breeze_front": 3},
    }
    assert [(lb.station, lb.time) for lb, _ in rep.misses] == [("B", t("03:00")), ("C", t("05:00"))]
    fa = [(e.station, e.onset, lb.kind if lb else None) for e, lb in rep.false_alarms]
    assert fa == [("B", t("03:25"), None), ("B", t("03:50"), None), ("A", t("05:00"), None),
                  ("A", t("06:03"), "gust_front")]


def test_any_kind_and_per_kind_by_hand() -> None:
    rep = score(EVENTS, LABELS, target="any")
    # passage labels: 6 breeze + 1 gust = 7; matched: 4 breeze + the gust front = 5 -> a=5, c=2;
    # 9 events - 5 hits = 4 false alarms (3 with no label, the wind_shift on a cloud shadow).
    assert (rep.overall.a, rep.overall.b, rep.overall.c) == (5, 4, 2)
    assert (rep.per_kind["gust_front"].a, rep.per_kind["gust_front"].c) == (0, 1)
    assert rep.per_kind["wind_shift"].b == 1


def test_tolerance_is_an_option() -> None:
    # With 30 minutes, B 03:00 and B 03:25 now match: one more hit, one fewer miss and false alarm.
    rep = score(EVENTS, LABELS, tolerance_s=30 * 60)
    assert (rep.overall.a, rep.overall.b, rep.overall.c) == (5, 3, 1)
    with pytest.raises(ValueError):
        score(EVENTS, LABELS, target="tornado")
