"""Labels JSONL: round trip, statuses, and errors that name the file and the line."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from frontwatch.labels import Label, LabelError, read_labels, usable, write_labels
from frontwatch.timeutil import parse_time


def test_round_trip(tmp_path: Path) -> None:
    labels = [
        Label("KB02", "breeze_front", parse_time("2026-01-14T03:10:00Z"), "clear turn", "confirmed"),
        Label("KB01", "gust_front", parse_time("2026-01-14T02:37:00Z")),
        Label("KB01", "cloud_shadow", parse_time("2026-01-15T01:00:00Z"), status="rejected"),
    ]
    p = tmp_path / "labels.jsonl"
    assert write_labels(p, labels) == 3
    back = read_labels(p)
    assert sorted(back, key=lambda lb: lb.time) == sorted(labels, key=lambda lb: lb.time)
    first = json.loads(p.read_text().splitlines()[0])
    assert first == {"station": "KB01", "kind": "gust_front", "time": "2026-01-14T02:37:00Z"}


def test_offsets_and_blank_lines(tmp_path: Path) -> None:
    p = tmp_path / "l.jsonl"
    p.write_text('{"station": "S1", "kind": "breeze_front", "time": "2026-01-14T10:37:00+08:00"}\n\n')
    (lb,) = read_labels(p)
    assert lb.time == parse_time("2026-01-14T02:37:00Z")
    assert lb.effective_status == "confirmed" and lb.is_passage


@pytest.mark.parametrize(("line", "words"), [
    ('{"station": "S1", "kind": "breeze_front"}', "field 'time' is missing"),
    ('{"station": "S1", "kind": "breeze_front", "time": "2026-01-14 10:37"}', "field 'time'"),
    ('{"station": "S1", "kind": "Breeze Front", "time": "2026-01-14T10:37Z"}', "field 'kind'"),
    ('{"station": "", "kind": "breeze_front", "time": "2026-01-14T10:37Z"}', "field 'station'"),
    ('{"station": "S1", "kind": "breeze_front", "time": "2026-01-14T10:37Z", "status": "maybe"}', "field 'status'"),
    ('{"station": "S1", "kind": "breeze_front", "time": "2026-01-14T10:37Z", "stauts": "confirmed"}', "did you mean 'status'"),
    ('{"station": "S1", "kind": "breeze_front", "time": "2026-01-14T10:37Z", "note": 3}', "field 'note'"),
    ('{"station": "S1", "kind": ', "not valid JSON"),
    ('["S1", "breeze_front"]', "expected a JSON object"),
])
def test_errors_name_file_line_and_field(tmp_path: Path, line: str, words: str) -> None:
    p = tmp_path / "bad.jsonl"
    good = '{"station": "S1", "kind": "breeze_front", "time": "2026-01-14T02:37:00Z"}'
    p.write_text(good + "\n" + line + "\n")
    with pytest.raises(LabelError) as err:
        read_labels(p)
    msg = str(err.value)
    assert f"{p}, line 2" in msg and words in msg


def test_every_bad_line_is_reported(tmp_path: Path) -> None:
    p = tmp_path / "bad.jsonl"
    p.write_text("{}\nnot json\n")
    with pytest.raises(LabelError) as err:
        read_labels(p)
    assert "line 1" in str(err.value) and "line 2" in str(err.value)


def test_extra_fields_are_kept(tmp_path: Path) -> None:
    p = tmp_path / "l.jsonl"
    line = {"station": "S1", "kind": "breeze_front", "time": "2026-01-14T02:37:00Z", "front": "f-1",
            "transition_min": 6}
    p.write_text(json.dumps(line) + "\n")
    (lb,) = read_labels(p)
    assert dict(lb.extra) == {"front": "f-1", "transition_min": 6}
    write_labels(p, [lb])
    assert json.loads(p.read_text()) == line


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(LabelError, match="cannot read labels file"):
        read_labels(tmp_path / "nope.jsonl")


def test_usable_statuses() -> None:
    t = 1.0e9
    labels = [Label("S", "breeze_front", t, status=s) for s in ("confirmed", "unreviewed", "rejected")]
    labels.append(Label("S", "breeze_front", t))
    assert [lb.status for lb in usable(labels)] == ["confirmed", None]
    assert [lb.status for lb in usable(labels, include_unreviewed=True)] == ["confirmed", "unreviewed", None]
