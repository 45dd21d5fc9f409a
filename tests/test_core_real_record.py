"""Regression on an excerpt of the shared real record (tests/data/README.md gives the attribution:
data.gov.sg via github.com/grandey/access-data-gov-sg, Singapore Open Data Licence 1.0).

The days were judged by tools/real_record_days.py (a rule written before looking at the detector's
output): breeze-front passages early in the afternoon of 2017-02-05 (about 13:27 local) and
2017-03-22 (about 13:50); on 2017-04-15 a rain storm from 14:44 local whose outflow must not be
called a breeze front.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

from frontwatch.config import load_network
from frontwatch.replay import run_replay

ROOT = Path(__file__).resolve().parents[1]
LOCAL = timedelta(hours=8)


def _events():
    cfg = load_network(ROOT / "examples/real-coastal-s116.toml")
    res = run_replay([ROOT / "tests/data/real-s116-excerpt.csv.gz"], cfg)
    return [(datetime.fromtimestamp(e.onset, UTC).replace(tzinfo=None) + LOCAL, e) for e in res.events]


def test_judged_passages_are_flagged_as_breeze_fronts():
    evs = _events()
    for day, lo, hi in (("2017-02-05", "13:00", "14:30"), ("2017-03-22", "13:20", "14:40")):
        t0 = datetime.fromisoformat(f"{day} {lo}")
        t1 = datetime.fromisoformat(f"{day} {hi}")
        hits = [e for t, e in evs if e.kind == "breeze_front" and t0 <= t <= t1]
        assert len(hits) == 1, (day, [(t, e.kind) for t, e in evs])
        assert hits[0].temp_change_c < 0 and hits[0].dewpoint_change_c > 0


def test_no_breeze_front_at_night_or_in_the_rain_outflow():
    evs = _events()
    for t, e in evs:
        if e.kind != "breeze_front":
            continue
        assert 8 <= t.hour < 20, (t, e.id)
        assert not (datetime(2017, 4, 15, 14, 30) <= t <= datetime(2017, 4, 15, 17, 30)), (t, e.id)
    # the storm itself is reported, as convective outflow
    assert any(e.kind == "gust_front" and datetime(2017, 4, 15, 14, 30) <= t <= datetime(2017, 4, 15, 15, 30)
               for t, e in evs)


def _holed_events(gaps):
    """The excerpt's events with the records inside each (start, end) local time cut out."""
    from frontwatch.replay import Decoded, merge, read_file, run_decoded

    cfg = load_network(ROOT / "examples/real-coastal-s116.toml")
    d = merge([read_file(ROOT / "tests/data/real-s116-excerpt.csv.gz", cfg)])
    t = d.columns["time"]
    keep = t == t
    for lo, hi in gaps:
        a, b = ((datetime.fromisoformat(x) - LOCAL).replace(tzinfo=UTC).timestamp() for x in (lo, hi))
        keep &= ~((t >= a) & (t < b))
    res = run_decoded(Decoded(d.station[keep], {k: v[keep] for k, v in d.columns.items()}), cfg)
    return [(datetime.fromtimestamp(e.onset, UTC).replace(tzinfo=None) + LOCAL, e) for e in res.events]


def test_judged_passages_are_found_across_a_silence():
    # The logger silent for 35 minutes from 10 minutes before each judged passage (a generic outage,
    # not fitted to the data): the passage is called when the station reports again, timed to the
    # gap's middle; the rain storm with a silence across its start is still no breeze front.
    gaps = [("2017-02-05 13:17", "2017-02-05 13:52"), ("2017-03-22 13:40", "2017-03-22 14:15"),
            ("2017-04-15 14:34", "2017-04-15 15:09")]
    evs = _holed_events(gaps)
    for lo, hi in gaps[:2]:
        t0, t1 = datetime.fromisoformat(lo), datetime.fromisoformat(hi)
        hits = [e for t, e in evs if e.kind == "breeze_front" and t0 - timedelta(minutes=20) <= t <= t1]
        assert len(hits) == 1, (lo, [(t, e.kind, e.note) for t, e in evs])
        assert hits[0].note and "silent" in hits[0].note
    assert not [t for t, e in evs if e.kind == "breeze_front" and
                datetime(2017, 4, 15, 14, 30) <= t <= datetime(2017, 4, 15, 17, 30)]


def _every_kth_minute_events(k):
    """The excerpt's events with only every k-th minute's record kept (a station reporting every k
    minutes: many networks report every 5 or 10 minutes)."""
    from frontwatch.replay import Decoded, merge, read_file, run_decoded

    cfg = load_network(ROOT / "examples/real-coastal-s116.toml")
    d = merge([read_file(ROOT / "tests/data/real-s116-excerpt.csv.gz", cfg)])
    keep = (d.columns["time"] // 60).astype(int) % k == 0
    res = run_decoded(Decoded(d.station[keep], {c: v[keep] for c, v in d.columns.items()}), cfg)
    return [(datetime.fromtimestamp(e.onset, UTC).replace(tzinfo=None) + LOCAL, e) for e in res.events]


def test_judged_passages_are_found_at_five_minute_reports():
    # A station reporting every 5 minutes (a fifth of the records, each 5-minute spacing under the
    # bridged-gap length): the same two passages are still breeze fronts and the storm is still no
    # breeze front. (Over the whole shared record: 42 of the 43 judged days at 5-minute reports,
    # 37 at 10-minute ones; docs/tuning.md.)
    evs = _every_kth_minute_events(5)
    for day, lo, hi in (("2017-02-05", "13:00", "14:30"), ("2017-03-22", "13:20", "14:40")):
        t0, t1 = datetime.fromisoformat(f"{day} {lo}"), datetime.fromisoformat(f"{day} {hi}")
        hits = [e for t, e in evs if e.kind == "breeze_front" and t0 <= t <= t1]
        assert len(hits) == 1, (day, [(t, e.kind) for t, e in evs])
    for t, e in evs:
        if e.kind == "breeze_front":
            assert 8 <= t.hour < 20, (t, e.id)
            assert not (datetime(2017, 4, 15, 14, 30) <= t <= datetime(2017, 4, 15, 17, 30)), (t, e.id)
