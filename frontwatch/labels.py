"""Labels: what an analyst (or a scenario generator) says happened, as a JSONL file.

One JSON object a line: `station`, `kind`, `time` (ISO 8601 with `Z` or an offset), optional
`note` (text) and optional `status` (`unreviewed`, `confirmed` or `rejected`); other fields are kept as they are, unless
one looks like a misspelt field name (`stauts`), which is an error. A label without a
status is taken as confirmed (a generator's truth). Kinds are the passage kinds of DESIGN 3.3 or
any other lower-case name (e.g. `cloud_shadow`) for a look-alike the analyst wants to mark: such
labels are not passages, and an event on them is a false alarm (see frontwatch/score.py).

Errors name the file and the line (and the field), and a whole file's problems are reported
together so an analyst editing by hand can fix them in one go.
"""

from __future__ import annotations

import difflib
import json
import re
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .errors import FrontwatchError
from .events import KINDS
from .timeutil import iso_z, parse_time

STATUSES = ("unreviewed", "confirmed", "rejected")
_KIND_RE = re.compile(r"^[a-z][a-z0-9_]{0,39}$")
_FIELDS = {"station", "kind", "time", "note", "status"}


class LabelError(FrontwatchError):
    """A labels file is unreadable or holds bad lines; the message names the file and each line."""


@dataclass(frozen=True, slots=True)
class Label:
    """One labelled happening at one station; `time` is epoch seconds (UTC)."""

    station: str
    kind: str
    time: float
    note: str | None = None
    status: str | None = None
    extra: tuple[tuple[str, Any], ...] = ()  # other fields (a generator's details), kept on write

    @property
    def effective_status(self) -> str:
        return self.status or "confirmed"

    @property
    def is_passage(self) -> bool:
        """A passage kind of the contract (as opposed to a marked look-alike such as cloud_shadow)."""
        return self.kind in KINDS

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {"station": self.station, "kind": self.kind, "time": iso_z(self.time)}
        if self.note is not None:
            d["note"] = self.note
        if self.status is not None:
            d["status"] = self.status
        d.update(self.extra)
        return d


def label_from_dict(d: Any) -> Label:
    """Validate one decoded JSON value into a Label; ValueError says which field is wrong."""
    if not isinstance(d, dict):
        raise ValueError(f"expected a JSON object, got {type(d).__name__}")
    for key in sorted(set(d) - _FIELDS):
        # Extra fields are kept (a generator adds details); one that looks like a misspelt field
        # would silently lose a review, so it is an error.
        near = difflib.get_close_matches(key, _FIELDS, n=1, cutoff=0.75)
        if near:
            raise ValueError(f"unknown field {key!r}: did you mean {near[0]!r}?")
    for f in ("station", "kind", "time"):
        if f not in d:
            raise ValueError(f"field {f!r} is missing")
    st, kind, tx = d["station"], d["kind"], d["time"]
    if not isinstance(st, str) or not st.strip():
        raise ValueError("field 'station': expected a non-empty text")
    if not isinstance(kind, str) or not _KIND_RE.match(kind):
        raise ValueError(f"field 'kind': {kind!r} is not a kind name (lower-case letters, digits, _; "
                         f"passage kinds: {', '.join(KINDS)})")
    if not isinstance(tx, str):
        raise ValueError("field 'time': expected ISO 8601 text")
    try:
        t = parse_time(tx)
    except (ValueError, OverflowError) as exc:
        raise ValueError(f"field 'time': bad time {tx[:40]!r}: {exc}") from None
    note = d.get("note")
    if note is not None and not isinstance(note, str):
        raise ValueError("field 'note': expected text")
    status = d.get("status")
    if status is not None and status not in STATUSES:
        raise ValueError(f"field 'status': {status!r} is not one of {', '.join(STATUSES)}")
    extra = tuple((k, v) for k, v in d.items() if k not in _FIELDS)
    return Label(st.strip(), kind, t, note, status, extra)


def read_labels(path: str | Path) -> list[Label]:
    """Read a labels JSONL file (blank lines are skipped). LabelError lists every bad line."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise LabelError(f"{p}: cannot read labels file: {exc.strerror or exc}") from None
    except UnicodeDecodeError as exc:
        raise LabelError(f"{p}: not UTF-8 text: {exc}") from None
    out: list[Label] = []
    problems: list[str] = []
    for n, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        try:
            d = json.loads(line)
        except ValueError as exc:
            problems.append(f"{p}, line {n}: not valid JSON: {exc}")
            continue
        try:
            out.append(label_from_dict(d))
        except ValueError as exc:
            problems.append(f"{p}, line {n}: {exc}")
    if problems:
        more = f" (and {len(problems) - 10} more)" if len(problems) > 10 else ""
        raise LabelError("; ".join(problems[:10]) + more)
    return out


def write_labels(path: str | Path, labels: Iterable[Label]) -> int:
    """Write labels as JSONL, in time order then station; returns how many were written."""
    rows = sorted(labels, key=lambda lb: (lb.time, lb.station, lb.kind))
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    with p.open("w", encoding="utf-8") as fh:
        for lb in rows:
            fh.write(json.dumps(lb.to_dict(), ensure_ascii=False) + "\n")
    return len(rows)


def usable(labels: Iterable[Label], include_unreviewed: bool = False) -> list[Label]:
    """The labels that count as truth: confirmed (or no status); unreviewed only when asked.

    Rejected labels are left out: a rejected candidate is "nothing happened here", so an event
    there is scored as a false alarm because no label matches it.
    """
    ok = {"confirmed", "unreviewed"} if include_unreviewed else {"confirmed"}
    return [lb for lb in labels if lb.effective_status in ok]
