"""Skill scores against the hand-worked contingency table of DOMAIN.md section 4 (Wilks)."""

from __future__ import annotations

import numpy as np
import pytest

from frontwatch.events import PassageEvent
from frontwatch.labels import Label
from frontwatch.score import Contingency, Distribution, Objective, score

T0 = 1_767_225_600.0  # 2026-01-01T00:00:00Z


def _ev(station: str, onset: float, kind: str = "breeze_front", delay: float = 240.0) -> PassageEvent:
    return PassageEvent(station, kind, onset, onset + delay, 0.9, 250.0, 80.0, 2.0, -1.5, 2.0, 0.3)


def test_wilks_table_scores() -> None:
    # Source: Wilks, Statistical Methods in the Atmospheric Sciences (2x2 contingency table scores);
    # worked values a=40, b=10, c=20 -> POD 0.667, FAR 0.200, CSI 0.571 as quoted in DOMAIN.md section 4.
    c = Contingency(40, 10, 20)
    assert c.pod == pytest.approx(0.667, abs=5e-4)
    assert c.far == pytest.approx(0.200, abs=5e-4)
    assert c.csi == pytest.approx(0.571, abs=5e-4)
    assert c.bias == pytest.approx(50 / 60)  # bias = (a+b)/(a+c), Wilks


def test_wilks_table_through_matching() -> None:
    # The same table (Wilks: a=40, b=10, c=20) built from events and labels, one label a day:
    # 40 labels with an event 3 minutes later (hits), 20 labels with none (misses), and 10 events
    # on days with no label (false alarms).
    day = 86400.0
    labels = [Label("ST1", "breeze_front", T0 + i * day + 3 * 3600) for i in range(60)]
    events = [_ev("ST1", T0 + i * day + 3 * 3600 + 180) for i in range(40)]
    events += [_ev("ST1", T0 + (100 + i) * day + 3 * 3600) for i in range(10)]
    rep = score(events, labels)
    assert (rep.overall.a, rep.overall.b, rep.overall.c) == (40, 10, 20)
    assert rep.overall.pod == pytest.approx(0.667, abs=5e-4)
    assert rep.overall.far == pytest.approx(0.200, abs=5e-4)
    assert rep.overall.csi == pytest.approx(0.571, abs=5e-4)
    assert rep.onset_error.median == pytest.approx(180.0)
    assert rep.delay.median == pytest.approx(420.0)
    assert len(rep.misses) == 20 and len(rep.false_alarms) == 10


def test_undefined_scores_are_none() -> None:
    c = Contingency(0, 0, 0)
    assert c.pod is None and c.far is None and c.csi is None and c.bias is None
    assert Contingency(0, 3, 0).far == 1.0


def test_quantiles_match_numpy() -> None:
    # Reference: numpy.quantile with its default 'linear' method.
    vals = [5.0, -3.0, 12.0, 7.5, 0.0, 100.0, 2.0]
    d = Distribution(vals)
    for q in (0.1, 0.5, 0.9):
        assert d.quantile(q) == pytest.approx(float(np.quantile(vals, q)))
    assert d.mean == pytest.approx(float(np.mean(vals)))


def test_objective_penalises_slow_detection() -> None:
    labels = [Label("ST1", "breeze_front", T0 + i * 86400.0) for i in range(4)]
    fast = score([_ev("ST1", lb.time, delay=180.0) for lb in labels], labels)
    slow = score([_ev("ST1", lb.time, delay=14 * 60.0) for lb in labels], labels)
    obj = Objective()
    assert obj.value(fast) == pytest.approx(1.0)
    # median delay 14 min: 10 min beyond the free 4, at 0.01 per minute
    assert obj.value(slow) == pytest.approx(0.9)


def test_standard_error_of_csi() -> None:
    # Binomial standard error sqrt(p(1-p)/n) of CSI = 40/70 (the Wilks table above): 0.0591 by hand.
    labels = [Label("ST1", "breeze_front", T0 + i * 86400.0) for i in range(60)]
    events = [_ev("ST1", T0 + i * 86400.0) for i in range(40)] + [_ev("ST1", T0 + (100 + i) * 86400.0) for i in range(10)]
    rep = score(events, labels)
    assert Objective().standard_error(rep) == pytest.approx(((40 / 70) * (30 / 70) / 70) ** 0.5)
    assert Objective().standard_error(rep) == pytest.approx(0.0591, abs=1e-4)
