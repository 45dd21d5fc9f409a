"""Passage events (DESIGN 3.3): the frozen record a station detector emits."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .timeutil import compact_z, iso_z, parse_time

KINDS = ("breeze_front", "land_breeze", "gust_front", "cold_front", "wind_shift")


def _r(x: float | None, nd: int = 1) -> float | None:
    return None if x is None or x != x else round(float(x), nd)


@dataclass(frozen=True, slots=True)
class PassageEvent:
    """One passage at one station. Times are epoch seconds; changes are after minus before."""

    station: str
    kind: str
    onset: float
    detected_at: float
    confidence: float
    wind_dir_before_deg: float | None
    wind_dir_after_deg: float | None
    speed_change_ms: float | None
    temp_change_c: float | None
    dewpoint_change_c: float | None
    pressure_change_hpa: float | None
    # Extras beyond the contract, used by tracking and site forecasts.
    speed_after_ms: float | None = None
    gust_after_ms: float | None = None
    temp_after_c: float | None = None
    note: str | None = None  # why the kind is what it is, when that is not obvious
    # Internal, not in the contract: a breeze front the station's detector found within repeat_min
    # of its previous one, as strong. Whether that is the same regime going on (dropped) or a new
    # passage after a call the network did not confirm is the network's to say (corroborate.py).
    repeat: bool = False
    # Internal too: how far either way the true onset may lie from `onset`, s (0: timed to the
    # minute). A passage found across a silence of the station has its onset at the gap's middle,
    # give or take half the gap; the tracker does not fit its time (network/track.py).
    onset_spread_s: float = 0.0
    # Internal too: the classifier found the change's channels apart in time (classify.py,
    # `untimed`), so the network confirms it as it does any weak call (corroborate.is_weak).
    untimed: bool = False

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"unknown event kind {self.kind!r}")
        if not 0.0 <= self.confidence <= 1.0:
            raise ValueError(f"confidence {self.confidence} outside 0-1")

    @property
    def id(self) -> str:
        # Stable: depends only on the station, the kind and the onset minute (input data).
        return f"{self.station}-{self.kind}-{compact_z(self.onset)}"

    def to_dict(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "station": self.station,
            "kind": self.kind,
            "onset": iso_z(self.onset),
            "detected_at": iso_z(self.detected_at),
            "confidence": round(self.confidence, 2),
            "wind_dir_before_deg": _r(self.wind_dir_before_deg, 0),
            "wind_dir_after_deg": _r(self.wind_dir_after_deg, 0),
            "speed_change_ms": _r(self.speed_change_ms),
            "temp_change_c": _r(self.temp_change_c),
            "dewpoint_change_c": _r(self.dewpoint_change_c),
            "pressure_change_hpa": _r(self.pressure_change_hpa),
            "speed_after_ms": _r(self.speed_after_ms),
            "gust_after_ms": _r(self.gust_after_ms),
            "temp_after_c": _r(self.temp_after_c),
            **({"note": self.note} if self.note else {}),
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> PassageEvent:
        return cls(
            station=d["station"], kind=d["kind"], onset=parse_time(d["onset"]),
            detected_at=parse_time(d["detected_at"]), confidence=float(d["confidence"]),
            wind_dir_before_deg=d.get("wind_dir_before_deg"), wind_dir_after_deg=d.get("wind_dir_after_deg"),
            speed_change_ms=d.get("speed_change_ms"), temp_change_c=d.get("temp_change_c"),
            dewpoint_change_c=d.get("dewpoint_change_c"), pressure_change_hpa=d.get("pressure_change_hpa"),
            speed_after_ms=d.get("speed_after_ms"), gust_after_ms=d.get("gust_after_ms"),
            temp_after_c=d.get("temp_after_c"), note=d.get("note"),
        )
