"""Event-time helpers: epoch seconds <-> ISO 8601 text, and local solar-clock hours for a network."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta, timezone, tzinfo
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from .errors import ConfigError


def iso_z(t: float) -> str:
    """Epoch seconds -> '2026-01-14T02:37:00Z' (whole seconds, UTC)."""
    return datetime.fromtimestamp(int(math.floor(t)), UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def compact_z(t: float) -> str:
    """Epoch seconds -> '20260114T0237Z' (minute resolution; used in stable ids)."""
    return datetime.fromtimestamp(int(math.floor(t)), UTC).strftime("%Y%m%dT%H%MZ")


def parse_time(text: str, naive_tz: tzinfo | None = None) -> float:
    """ISO 8601 text -> epoch seconds. Naive text needs `naive_tz`; otherwise ValueError."""
    s = text.strip()
    if s.endswith(("Z", "z")):
        s = s[:-1] + "+00:00"
    dt = datetime.fromisoformat(s)
    if dt.tzinfo is None:
        if naive_tz is None:
            raise ValueError("time has no offset and no time zone is configured for naive times")
        dt = dt.replace(tzinfo=naive_tz)
    return dt.timestamp()


def make_tz(utc_offset_hours: float | None, timezone_name: str | None) -> tzinfo | None:
    """A tzinfo from a fixed offset or an IANA name (exactly one may be given)."""
    if timezone_name:
        try:
            return ZoneInfo(timezone_name)
        except (ZoneInfoNotFoundError, ValueError) as exc:
            raise ConfigError(f"unknown IANA time zone {timezone_name!r}") from exc
    if utc_offset_hours is not None:
        return timezone(timedelta(hours=utc_offset_hours))
    return None


class LocalClock:
    """Local clock hour (0-24) of an epoch time for a network's zone; cached per UTC hour for speed."""

    __slots__ = ("tz", "_cache")

    def __init__(self, tz: tzinfo | None) -> None:
        self.tz = tz if tz is not None else UTC
        self._cache: dict[int, float] = {}

    def hour(self, t: float) -> float:
        base = int(t // 3600)
        off = self._cache.get(base)
        if off is None:
            dt = datetime.fromtimestamp(base * 3600, UTC).astimezone(self.tz)
            off = dt.hour + dt.minute / 60.0
            if len(self._cache) > 4096:
                self._cache.clear()
            self._cache[base] = off
        h = off + (t - base * 3600) / 3600.0
        return h - 24.0 if h >= 24.0 else h

    def day_key(self, t: float) -> str:
        """Local calendar date, e.g. '2026-01-14' (used to split by day)."""
        return datetime.fromtimestamp(int(t), UTC).astimezone(self.tz).strftime("%Y-%m-%d")
