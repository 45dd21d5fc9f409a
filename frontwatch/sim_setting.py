"""The invented setting of generated scenarios: the Sallowmere coast, its stations and sites.

Sallowmere is fictional. Its reference point lies in open ocean (no land there), so no real coast is
implied; geometry is flat-earth kilometres around that point (fine over the ~100 km of a network).
Two shore shapes: a straight shore (every station faces the same way) and a bay (a circular bight of
water; each station's onshore direction follows the local shore normal).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

KM_PER_DEG_LAT = 111.195  # mean metres per degree of latitude on a 6371 km sphere, /1000

# Reference points in open ocean (invented coast). North: mid North Atlantic; south: SE Pacific.
_REF = {"north": (41.30, -42.70, -3.0), "south": (-33.40, -118.00, -8.0)}
# Bearing from the sea towards the land (the direction a breeze front moves) for the straight shore.
_INLAND_BEARING = {"north": 250.0, "south": 290.0}

_NAME_HEADS = ["Sallow", "Quill", "Tarrow", "Brindle", "Ashen", "Gannet", "Wrenna", "Corrow", "Mistle",
               "Hallow", "Pennick", "Ravel", "Selby", "Oxmere", "Tolland", "Varrow", "Kesh", "Dunnock"]
_NAME_TAILS = ["mere", " Flats", " Pier", "brook", " Downs", " Ridge", "field", " Fen", " Cross",
               "holt", " Gap", "stead", " Mill", " Heath", "combe", " Marsh"]


@dataclass(frozen=True)
class Place:
    """A station or site: position, distance inland, coordinate along the shore, local onshore bearing."""

    id: str
    name: str
    lat: float
    lon: float
    x_km: float  # east of the reference point
    y_km: float  # north of the reference point
    shore_km: float  # distance inland from the shore along the local shore normal
    along_km: float  # coordinate along the shore (arc length for a bay)
    onshore_from_deg: float  # bearing the onshore wind blows FROM (local shore normal, water to land)
    elevation_m: float = 0.0
    extra: dict[str, Any] = field(default_factory=dict)  # site settings (gust_limit_ms, ...)


@dataclass(frozen=True)
class Setting:
    name: str
    hemisphere: str  # "north" or "south"
    shore: str  # "straight" or "bay"
    utc_offset_hours: float
    ref_lat: float
    ref_lon: float
    inland_bearing_deg: float  # straight: sea->land normal; bay: the bay's axis (centre -> head)
    bay_radius_km: float
    along_span_km: tuple[float, float]  # the stretch of coast the network covers
    stations: list[Place]
    sites: list[Place]

    @property
    def shore_km(self) -> np.ndarray:
        return np.array([p.shore_km for p in self.stations])

    @property
    def along_km(self) -> np.ndarray:
        return np.array([p.along_km for p in self.stations])

    @property
    def onshore_from(self) -> np.ndarray:
        return np.array([p.onshore_from_deg for p in self.stations])

    @property
    def elevation(self) -> np.ndarray:
        return np.array([p.elevation_m for p in self.stations])

    def latlon(self, x_km: float, y_km: float) -> tuple[float, float]:
        lat = self.ref_lat + y_km / KM_PER_DEG_LAT
        lon = self.ref_lon + x_km / (KM_PER_DEG_LAT * math.cos(math.radians(self.ref_lat)))
        return lat, lon

    def xy(self, lat: float, lon: float) -> tuple[float, float]:
        y = (lat - self.ref_lat) * KM_PER_DEG_LAT
        x = (lon - self.ref_lon) * KM_PER_DEG_LAT * math.cos(math.radians(self.ref_lat))
        return x, y


def unit(bearing_deg: float | np.ndarray) -> tuple[Any, Any]:
    """(east, north) components of a unit vector pointing towards `bearing_deg`."""
    b = np.radians(bearing_deg)
    return np.sin(b), np.cos(b)


def _place_geometry(shore: str, inland: float, radius: float, d: float, a: float) -> tuple[float, float, float]:
    """(x, y, onshore_from) of a point `d` km inland at shore coordinate `a` km."""
    if shore == "straight":
        nx, ny = unit(inland)
        tx, ty = unit(inland + 90.0)
        return float(a * tx + d * nx), float(a * ty + d * ny), (inland + 180.0) % 360.0
    # Bay: water is a disc of `radius` centred on the reference point; the point lies outward along
    # the radial at arc angle a / radius from the axis, and onshore wind blows from the centre.
    bearing = inland + math.degrees(a / radius)
    ux, uy = unit(bearing)
    return float((radius + d) * ux), float((radius + d) * uy), (bearing + 180.0) % 360.0


def make_setting(rng: np.random.Generator, n_stations: int, hemisphere: str = "north",
                 shore: str = "straight", max_inland_km: float = 40.0) -> Setting:
    """Place `n_stations` stations 0-`max_inland_km` km inland (stratified, the first at the shore)."""
    if hemisphere not in _REF:
        raise ValueError(f"hemisphere must be 'north' or 'south', not {hemisphere!r}")
    if shore not in ("straight", "bay"):
        raise ValueError(f"shore must be 'straight' or 'bay', not {shore!r}")
    if n_stations < 1:
        raise ValueError("need at least one station")
    ref_lat, ref_lon, offset = _REF[hemisphere]
    inland = _INLAND_BEARING[hemisphere] + float(rng.uniform(-10, 10))
    radius = 14.0
    if shore == "straight":
        half = max(15.0, 8.0 * math.sqrt(n_stations))
        span = (-half, half)
    else:
        half = radius * math.radians(75.0)  # stations within +-75 deg of the bay's axis
        span = (-radius * math.radians(85.0), radius * math.radians(85.0))
    edges = np.linspace(0.0, max_inland_km, n_stations + 1)
    d = rng.uniform(edges[:-1], edges[1:])
    d[0] = rng.uniform(0.2, 0.8)
    along = rng.uniform(-half, half, n_stations)
    along[0] = rng.uniform(-0.3, 0.3) * half
    combos = [(h, t) for h in _NAME_HEADS for t in _NAME_TAILS]
    order = rng.permutation(len(combos))
    stations = []
    setting_stub = Setting("", hemisphere, shore, offset, ref_lat, ref_lon, inland, radius, span, [], [])
    for i in range(n_stations):
        x, y, onshore = _place_geometry(shore, inland, radius, float(d[i]), float(along[i]))
        lat, lon = setting_stub.latlon(x, y)
        h, t = combos[order[i % len(combos)]]
        name = h + t + ("" if i < len(combos) else f" {i // len(combos) + 1}")
        elev = float(np.clip(2.0 + 4.0 * d[i] + rng.normal(0, 15), 1.0, 220.0))
        stations.append(Place(f"SM{i + 1:02d}", name, round(lat, 5), round(lon, 5), x, y, float(d[i]),
                              float(along[i]), round(onshore, 1), round(elev, 0)))
    sites = []
    for sid, name, dd, aa, extra in (
        ("lanternfield-green", "Lanternfield Green festival ground", rng.uniform(11, 17), rng.uniform(-0.3, 0.3) * half,
         {"gust_limit_ms": 15.0, "shift_limit_deg": 60.0, "temp_drop_limit_c": 4.0}),
        ("tollmere-water", "Tollmere Water race area", rng.uniform(2.5, 5.0), rng.uniform(-0.6, -0.3) * half, {}),
    ):
        x, y, onshore = _place_geometry(shore, inland, radius, float(dd), float(aa))
        lat, lon = setting_stub.latlon(x, y)
        if not extra:  # the race committee lays the course into the expected breeze
            extra = {"course_axis_deg": round(onshore, 0)}
        sites.append(Place(sid, name, round(lat, 5), round(lon, 5), x, y, float(dd), float(aa),
                           round(onshore, 1), 0.0, extra))
    return Setting("sallowmere-coast", hemisphere, shore, offset, ref_lat, ref_lon, inland, radius, span,
                   stations, sites)


def network_doc(setting: Setting, smeared: set[str], declare_averaging: bool = True) -> dict[str, Any]:
    """The network file as a dict (DESIGN 3.2; what frontwatch.config.parse_network takes)."""
    stations = []
    for p in setting.stations:
        st: dict[str, Any] = {"id": p.id, "lat": p.lat, "lon": p.lon, "onshore_from_deg": p.onshore_from_deg,
                              "onshore_halfwidth_deg": 70.0, "elevation_m": p.elevation_m, "name": p.name}
        if declare_averaging and p.id in smeared:
            st["wind_averaging_min"] = 10
        stations.append(st)
    sites = [{"id": s.id, "lat": s.lat, "lon": s.lon, "name": s.name, **s.extra} for s in setting.sites]
    return {"network": {"name": setting.name, "utc_offset_hours": setting.utc_offset_hours,
                        "hemisphere": setting.hemisphere},
            "stations": stations, "sites": sites}


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int | float):
        return repr(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def network_toml(doc: dict[str, Any], header: str = "") -> str:
    """TOML text of a network dict made by network_doc (tables of scalars and arrays of tables)."""
    lines = [f"# {line}" for line in header.splitlines()] if header else []
    lines.append("[network]")
    lines += [f"{k} = {_toml_value(v)}" for k, v in doc["network"].items()]
    for table in ("stations", "sites"):
        for item in doc.get(table, []):
            lines += ["", f"[[{table}]]"]
            lines += [f"{k} = {_toml_value(v)}" for k, v in item.items()]
    return "\n".join(lines) + "\n"
