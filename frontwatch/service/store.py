"""The service's SQLite store: outputs (an outbox), core snapshots, and a journal of accepted input.

How a restart stays exact:
- Each batch of MQTT messages is written to `journal` in the same transaction as the outputs it
  caused; only after that commit are the messages acknowledged to the broker. A crash before the
  commit leaves them unacknowledged, so the broker delivers them again.
- A snapshot of the core records the journal position it covers; on start the service restores
  the newest snapshot and feeds the journal after it again, which reproduces the same outputs.
- Outputs are keyed (events by their stable id); a key already stored is not stored or published
  again. `published` is set once the broker acknowledged it, so an output stored but not yet
  sent goes out after a restart or reconnect (at least once; the stable id lets readers dedupe).

WAL mode with synchronous=NORMAL: a commit survives the process being killed (it is in the OS),
not necessarily a power cut. That is the trade for keeping up with the feed. A new file gets
16 KiB pages: a gateway's array (about 18 kB for 100 records) then spans two pages instead of
five, which made a journalled message about a third cheaper here (bench/bench_service.py).

The live service calls the store from one writer thread (frontwatch.service.runner), so that
SQLite's work, done without the GIL, overlaps the core's; a lock lets other threads (tests, the
demo) read while it runs.
"""

from __future__ import annotations

import functools
import hashlib
import json
import sqlite3
import threading
import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeVar

from ..errors import StateError

F = TypeVar("F", bound=Callable[..., Any])


def _locked(fn: F) -> F:
    """Run a Store method under the store's lock."""

    @functools.wraps(fn)
    def wrapper(self: Store, *a: Any, **k: Any) -> Any:
        with self.lock:
            return fn(self, *a, **k)

    return wrapper  # type: ignore[return-value]


_SCHEMA = """
CREATE TABLE IF NOT EXISTS journal (
    seq INTEGER PRIMARY KEY,
    topic TEXT NOT NULL,
    payload BLOB NOT NULL
);
CREATE TABLE IF NOT EXISTS outputs (
    n INTEGER PRIMARY KEY AUTOINCREMENT,
    key TEXT NOT NULL UNIQUE,
    type TEXT NOT NULL,
    topic TEXT NOT NULL,
    payload TEXT NOT NULL,
    retain INTEGER NOT NULL,
    published INTEGER NOT NULL DEFAULT 0,
    created REAL NOT NULL
);
CREATE INDEX IF NOT EXISTS outputs_unpublished ON outputs (published) WHERE published = 0;
CREATE TABLE IF NOT EXISTS snapshots (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    taken REAL NOT NULL,
    journal_seq INTEGER NOT NULL,
    last_time TEXT NOT NULL,
    state TEXT NOT NULL
);
"""


def output_key(out: dict[str, Any]) -> str:
    """Stable key of an output: an event's id; for forecasts and alerts, type, site and content."""
    kind = out.get("type")
    if kind is None:
        return str(out["id"])
    body = json.dumps(out, sort_keys=True, separators=(",", ":"))
    return f"{kind}:{out.get('site')}:{hashlib.sha1(body.encode()).hexdigest()[:20]}"


@dataclass(frozen=True)
class Pending:
    """An output stored but not yet acknowledged by the broker."""

    n: int
    key: str
    type: str
    topic: str
    payload: str
    retain: bool
    created: float


def snapshot_text(state: dict[str, Any]) -> str:
    """The JSON text a snapshot is stored as (made where the state is, before another thread stores it)."""
    return json.dumps(state, separators=(",", ":"), allow_nan=True)


class Store:
    """One SQLite file (or ':memory:'). Each method holds the store's lock: one caller at a time."""

    def __init__(self, path: str | Path) -> None:
        self.path = str(path)
        self.lock = threading.RLock()
        try:
            self.db = sqlite3.connect(self.path, isolation_level=None, check_same_thread=False)
            self.db.execute("PRAGMA page_size=16384")  # (a file that exists keeps its own)
            self.db.execute("PRAGMA journal_mode=WAL")
            self.db.execute("PRAGMA synchronous=NORMAL")
            self.db.executescript(_SCHEMA)
        except sqlite3.DatabaseError as exc:
            raise StateError(f"{self.path}: cannot open the state store: {exc}") from None
        row = self.db.execute("SELECT COALESCE(MAX(seq), 0) FROM journal").fetchone()
        snap = self.db.execute("SELECT COALESCE(MAX(journal_seq), 0) FROM snapshots").fetchone()
        self.seq = max(int(row[0]), int(snap[0]))
        # Outputs stored and not yet acknowledged by the broker, kept as a count so that asking
        # "is everything sent?" (Service.settled, polled by tests, the demo and the benchmarks) needs
        # neither a query nor the lock, which the writer thread holds through each commit.
        self.unsent = int(self.db.execute("SELECT COUNT(*) FROM outputs WHERE published = 0").fetchone()[0])

    @_locked
    def close(self) -> None:
        self.db.close()

    # --- one batch: journal + outputs, one transaction --------------------------------------
    @_locked
    def commit_batch(self, messages: Iterable[tuple[str, bytes]],
                     outputs: Iterable[tuple[str, str, dict[str, Any], bool, float]]) -> list[str]:
        """Journal the messages and store the outputs; returns the keys that were new.

        `outputs` items are (key, topic, output dict, retain, created wall time).
        """
        new: list[str] = []
        db = self.db
        db.execute("BEGIN")
        try:
            rows = []
            for topic, payload in messages:
                self.seq += 1
                rows.append((self.seq, topic, payload))
            if rows:
                db.executemany("INSERT INTO journal (seq, topic, payload) VALUES (?, ?, ?)", rows)
            for key, topic, out, retain, created in outputs:
                cur = db.execute(
                    "INSERT OR IGNORE INTO outputs (key, type, topic, payload, retain, created) VALUES (?,?,?,?,?,?)",
                    (key, out.get("type", "event"), topic, json.dumps(out), int(retain), created))
                if cur.rowcount:
                    new.append(key)
            db.execute("COMMIT")
        except BaseException:
            db.execute("ROLLBACK")
            raise
        self.unsent += len(new)
        return new

    def journal_after(self, seq: int) -> Iterator[tuple[int, str, bytes]]:
        """The journal after `seq` (at start-up, before anything else uses the store)."""
        for s, topic, payload in self.db.execute(
                "SELECT seq, topic, payload FROM journal WHERE seq > ? ORDER BY seq", (seq,)):
            yield int(s), str(topic), bytes(payload)

    # --- outbox ---------------------------------------------------------------------------
    @_locked
    def unpublished(self, limit: int = 500) -> list[Pending]:
        rows = self.db.execute(
            "SELECT n, key, type, topic, payload, retain, created FROM outputs WHERE published = 0 ORDER BY n LIMIT ?",
            (limit,)).fetchall()
        return [Pending(int(r[0]), r[1], r[2], r[3], r[4], bool(r[5]), float(r[6])) for r in rows]

    @_locked
    def mark_published(self, ns: Iterable[int]) -> None:
        cur = self.db.executemany("UPDATE outputs SET published = 1 WHERE n = ? AND published = 0", [(n,) for n in ns])
        self.unsent = max(0, self.unsent - max(cur.rowcount, 0))

    @_locked
    def outputs(self, kind: str | None = None) -> list[dict[str, Any]]:
        """Stored outputs in order (all, or one type: 'event', 'forecast', 'alert')."""
        q = "SELECT payload FROM outputs" + (" WHERE type = ?" if kind else "") + " ORDER BY n"
        return [json.loads(p) for (p,) in self.db.execute(q, (kind,) if kind else ())]

    # --- snapshots ------------------------------------------------------------------------
    @_locked
    def save_snapshot(self, state: dict[str, Any] | str, last_time: dict[str, float], keep: int = 3) -> None:
        """Store the core state (or its JSON text, see snapshot_text) as of the current journal
        position; trim older journal and snapshots."""
        db = self.db
        body = state if isinstance(state, str) else snapshot_text(state)
        db.execute("BEGIN")
        try:
            db.execute("INSERT INTO snapshots (taken, journal_seq, last_time, state) VALUES (?, ?, ?, ?)",
                       (time.time(), self.seq, json.dumps(last_time), body))
            db.execute("DELETE FROM journal WHERE seq <= ?", (self.seq,))
            db.execute("DELETE FROM snapshots WHERE id NOT IN (SELECT id FROM snapshots ORDER BY id DESC LIMIT ?)",
                       (keep,))
            db.execute("COMMIT")
        except BaseException:
            db.execute("ROLLBACK")
            raise

    @_locked
    def latest_snapshot(self) -> tuple[int, dict[str, Any]] | None:
        """(journal position it covers, core state) of the newest snapshot, or None."""
        row = self.db.execute("SELECT journal_seq, state FROM snapshots ORDER BY id DESC LIMIT 1").fetchone()
        if row is None:
            return None
        try:
            return int(row[0]), json.loads(row[1])
        except ValueError as exc:
            raise StateError(f"{self.path}: newest snapshot is not valid JSON: {exc}") from None
