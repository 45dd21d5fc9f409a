"""Station QC: each check flags with a reason, a flagged value never reaches the detector.

Limits are frontwatch's defaults (from memory after Zahumensky 2004, WMO QC guidelines for AWS).
"""

from __future__ import annotations

import math

from frontwatch.config import QCSettings
from frontwatch.obs import Observation
from frontwatch.qc import StationQC

T0 = 1767225600.0


def ob(m, temp=20.0, td=10.0, ws=3.0, wd=90.0, p=1010.0, gust=float("nan")):
    return Observation("A", T0 + 60 * m, wd, ws, gust, temp, td, p, 0.0)


def test_clean_record_passes_unchanged():
    qc = StationQC(QCSettings(), "A")
    o = ob(0)
    clean, flags = qc.check(o)
    assert clean is o and flags == []


def test_range_and_dewpoint_above_temperature():
    qc = StationQC(QCSettings(), "A")
    clean, flags = qc.check(ob(0, temp=75.0))
    assert "temp_range" in flags and math.isnan(clean.temp_c)
    clean, flags = qc.check(ob(1, temp=20.0, td=13.0))
    assert flags == []
    clean, flags = qc.check(ob(2, temp=17.0, td=18.0))
    assert flags == ["dewpoint_above_temp"] and math.isnan(clean.dewpoint_c) and clean.temp_c == 17.0


def test_spike_is_flagged_and_the_level_after_it_is_kept():
    qc = StationQC(QCSettings(), "A")
    for m in range(5):
        qc.check(ob(m))
    clean, flags = qc.check(ob(5, temp=31.0))  # +11 K in a minute: a spike
    assert flags == ["temp_step"] and math.isnan(clean.temp_c)
    clean, flags = qc.check(ob(6, temp=20.1))
    assert flags == [] and clean.temp_c == 20.1


def test_a_real_new_level_is_accepted_after_a_few_minutes():
    qc = StationQC(QCSettings(), "A")
    for m in range(5):
        qc.check(ob(m, p=1010.0))
    results = [qc.check(ob(m, p=1016.0))[1] for m in range(5, 10)]  # a recalibrated barometer
    assert results[0] == ["pressure_step"] and results[-1] == []


def test_stuck_sensor_and_stuck_vane():
    s = QCSettings(persist_min=30, vane_persist_min=20)
    qc = StationQC(s, "A")
    flags_seen = set()
    for m in range(40):
        _, flags = qc.check(ob(m, temp=20.0 + 0.1 * (m % 3), td=12.3, wd=45.0, ws=3.0 + 0.1 * (m % 2)))
        flags_seen.update(flags)
    assert "dewpoint_stuck" in flags_seen and "wind_dir_stuck" in flags_seen
    assert "temp_stuck" not in flags_seen


def test_calm_night_is_not_a_stuck_anemometer():
    qc = StationQC(QCSettings(persist_min=30), "A")
    flags_seen = set()
    for m in range(100):
        _, flags = qc.check(ob(m, temp=15 + 0.1 * (m % 2), td=10 + 0.1 * (m % 2), ws=0.0, wd=float("nan"),
                              p=1010 + 0.1 * (m % 2)))
        flags_seen.update(flags)
    assert flags_seen == set()


def test_duplicates_out_of_order_late_and_gaps():
    qc = StationQC(QCSettings(late_s=600, gap_s=300), "A")
    assert qc.check(ob(10))[1] == []
    assert qc.check(ob(10)) == (None, ["duplicate"])
    assert qc.check(ob(8)) == (None, ["out_of_order"])
    assert qc.check(ob(-5)) == (None, ["late"])
    clean, flags = qc.check(ob(30))
    assert clean is not None and flags == ["gap"]


def test_snapshot_round_trip():
    qc = StationQC(QCSettings(), "A")
    for m in range(5):
        qc.check(ob(m))
    qc2 = StationQC(QCSettings(), "A")
    qc2.restore(qc.snapshot())
    assert qc2.check(ob(5, temp=31.0)) == qc.check(ob(5, temp=31.0))
    assert qc2.check(ob(4)) == (None, ["out_of_order"])
