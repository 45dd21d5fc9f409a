"""The Observation type, unit conversion by field suffix, and decoding of one record (JSON or row).

Units are converted once, here at the edge; everything downstream sees SI-ish canonical units
(m/s, degC, hPa, mm) as plain floats, with NaN for a missing value.
"""

from __future__ import annotations

import functools
import json
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from datetime import tzinfo
from operator import itemgetter
from typing import Any, NamedTuple

from .calc.moisture import dewpoint_from_rh
from .errors import DecodeError
from .timeutil import iso_z, parse_time

NAN = float("nan")

_orjson: Any
try:  # optional: a faster reader of the same JSON (see _loads)
    import orjson as _orjson
except ImportError:  # pragma: no cover - exercised where orjson is absent
    _orjson = None

# Canonical quantity -> {suffix: converter to the canonical unit}
_SPEED = {"ms": lambda x: x, "kt": lambda x: x * 1852.0 / 3600.0, "mph": lambda x: x * 0.44704, "kmh": lambda x: x / 3.6}
_TEMP = {"c": lambda x: x, "f": lambda x: (x - 32.0) * 5.0 / 9.0, "k": lambda x: x - 273.15}
_PRES = {"hpa": lambda x: x, "inhg": lambda x: x * 33.8638866667, "pa": lambda x: x / 100.0, "kpa": lambda x: x * 10.0}

UNIT_FIELDS: dict[str, dict[str, Callable[[float], float]]] = {
    "wind_speed": _SPEED,
    "wind_gust": _SPEED,
    "temp": _TEMP,
    "dewpoint": _TEMP,
    "pressure": _PRES,
}
PLAIN_FIELDS = ("wind_dir_deg", "rh_pct", "rain_mm")
CANONICAL = ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c", "dewpoint_c", "pressure_hpa", "rain_mm")
CANONICAL_IDENTITY = frozenset(CANONICAL) | frozenset(PLAIN_FIELDS)  # names read as they are


def _identity(x: float) -> float:
    return x


@functools.lru_cache(maxsize=512)
def split_unit(name: str) -> tuple[str, Callable[[float], float]] | None:
    """'wind_speed_kt' -> ('wind_speed_ms', knots->m/s); canonical names map to themselves.

    Cached: a feed uses a handful of names, and this runs for every field of every record.
    """
    if name in CANONICAL_IDENTITY:
        return name, _identity
    base, _, suffix = name.rpartition("_")
    conv = UNIT_FIELDS.get(base, {}).get(suffix)
    if conv is None:
        return None
    canon = {"wind_speed": "wind_speed_ms", "wind_gust": "wind_gust_ms", "temp": "temp_c",
             "dewpoint": "dewpoint_c", "pressure": "pressure_hpa"}[base]
    return canon, conv


class Observation(NamedTuple):
    """One station at one time, canonical units, NaN = missing. `time` is epoch seconds (UTC).

    A NamedTuple rather than a dataclass: it is immutable and about five times cheaper to make,
    which matters at hundreds of thousands of records per second.

    Wind direction is the bearing the wind blows FROM (meteorological convention); a calm wind has
    `wind_dir_deg` NaN and `wind_speed_ms` 0.
    """

    station: str
    time: float
    wind_dir_deg: float = NAN
    wind_speed_ms: float = NAN
    wind_gust_ms: float = NAN
    temp_c: float = NAN
    dewpoint_c: float = NAN
    pressure_hpa: float = NAN
    rain_mm: float = NAN

    def to_record(self, time_text: str | None = None) -> dict[str, Any]:
        """The canonical JSON record (DESIGN 3.1); missing values are null. `time_text`: the time's
        ISO text when the caller has it already (many stations share each minute's)."""
        out: dict[str, Any] = {"station": self.station, "time": iso_z(self.time) if time_text is None else time_text}
        for f, v in zip(CANONICAL, self[2:], strict=True):  # the fields after station and time, in order
            out[f] = None if v != v else round(v, 3)
        return out


def _number(value: Any, field: str) -> float:
    """A JSON/CSV value -> float; None/'' -> NaN; anything not a finite number -> DecodeError."""
    if value is None:
        return NAN
    if isinstance(value, bool):
        raise DecodeError(f"expected a number, got {value!r}", field=field, code="wrong_type")
    if isinstance(value, int | float):
        x = float(value) if isinstance(value, float) or abs(value) <= 1.7976931348623157e308 else math.inf
    elif isinstance(value, str):
        s = value.strip()
        if s == "":
            return NAN
        try:
            x = float(s)
        except ValueError:
            raise DecodeError(f"expected a number, got {value[:40]!r}", field=field, code="wrong_type") from None
    else:
        raise DecodeError(f"expected a number, got {type(value).__name__}", field=field, code="wrong_type")
    if not math.isfinite(x):
        raise DecodeError(f"value {value!r} is not a finite number", field=field, code="not_finite")
    return x


def decode_record(
    rec: Mapping[str, Any],
    *,
    naive_tz: tzinfo | None = None,
    columns: Mapping[str, str] | None = None,
    station: str | None = None,
) -> Observation:
    """Decode one record (JSON object or CSV row as a dict) into an Observation.

    `columns` maps foreign names to canonical ones (with a unit suffix, e.g. 'wind_speed_kt').
    `station` is used when the record has no station field (e.g. the topic names it).
    Unknown fields are ignored (a feed may carry more than we need); a wrong type is an error.
    """
    if not isinstance(rec, Mapping):
        raise DecodeError(f"expected a JSON object, got {type(rec).__name__}", code="not_object")
    vals: dict[str, float] = {}
    rh = NAN
    st: Any = station
    tval: Any = None
    for key, raw in rec.items():
        name = columns.get(key, key) if columns else key
        if name == "station":
            st = raw
            continue
        if name == "time":
            tval = raw
            continue
        su = split_unit(name)
        if su is None:
            continue
        canon, conv = su
        x = raw if type(raw) is float and raw - raw == 0.0 else _number(raw, key)  # fast path: finite float
        if x == x and conv is not _identity:
            x = conv(x) if -1e300 < x < 1e300 else _number(conv(x), key)  # 1e308 inHg overflows to inf
        if canon == "rh_pct":
            rh = x
        else:
            vals[canon] = x
    if not isinstance(st, str) or not st.strip():
        raise DecodeError("missing or empty station id", field="station", code="no_station")
    st = st.strip()
    if tval is None or not isinstance(tval, str):
        raise DecodeError("missing time (ISO 8601 text)", field="time", station=st, code="bad_time")
    try:
        t = parse_time(tval, naive_tz)
    except (ValueError, OverflowError) as exc:
        raise DecodeError(f"bad time {tval[:40]!r}: {exc}", field="time", station=st, code="bad_time") from None
    td = vals.get("dewpoint_c", NAN)
    tc = vals.get("temp_c", NAN)
    if td != td and rh == rh and tc == tc and 0.0 < rh <= 100.5:
        td = dewpoint_from_rh(tc, min(rh, 100.0))
    wd = vals.get("wind_dir_deg", NAN)
    ws = vals.get("wind_speed_ms", NAN)
    if wd == wd:
        if not 0.0 <= wd <= 360.0:
            raise DecodeError(f"wind direction {wd} outside 0-360", field="wind_dir_deg", station=st,
                              code="out_of_range")
        wd = wd % 360.0
    return Observation(st, t, wd, ws, vals.get("wind_gust_ms", NAN), tc, td,
                       vals.get("pressure_hpa", NAN), vals.get("rain_mm", NAN))


MAX_PAYLOAD_BYTES = 1_000_000

# --- the fast path for well-formed records -------------------------------------------------------
# Live feeds send the canonical record (DESIGN 3.1) with whole-second UTC times, thousands a second.
# `_fast_record` decodes exactly that shape without the general machinery and gives up (None) on
# anything else, which then goes through `decode_record`: so the result is always what
# decode_record gives, and every refusal still comes from decode_record with its reason.
_FAST_INDEX = {name: i for i, name in enumerate(CANONICAL)}
_WIND_DIR = _FAST_INDEX["wind_dir_deg"]
_hour_epoch: dict[str, float] = {}  # 'YYYY-MM-DDTHH' -> epoch seconds of that UTC hour
_time_seen: dict[str, float] = {}  # recent time texts (a network's stations share each minute's)


def _fast_time(s: str) -> float | None:
    """'YYYY-MM-DDTHH:MM:SSZ' -> epoch seconds, or None for any other form (left to parse_time).

    The date and hour go through parse_time once per hour (cached); minutes and seconds are added
    as whole numbers, which is exact in a float, so the result equals parse_time's."""
    if len(s) != 20 or s[19] != "Z" or s[13] != ":" or s[16] != ":":
        return None
    mm, ss = s[14:16], s[17:19]
    if not (mm.isdigit() and ss.isdigit() and mm.isascii() and ss.isascii()):
        return None
    m, sec = int(mm), int(ss)
    if m > 59 or sec > 59:
        return None
    hour = s[:13]
    base = _hour_epoch.get(hour)
    if base is None:
        try:
            base = parse_time(hour + ":00:00Z")
        except (ValueError, OverflowError):
            return None
        if len(_hour_epoch) > 4096:  # a long-running feed walks through hours: keep it bounded
            _hour_epoch.clear()
        _hour_epoch[hour] = base
    return base + (m * 60 + sec)


def _fast_record(rec: Any) -> Observation | None:
    """A canonical record with plain numbers (or null) -> Observation; None = take the general path."""
    if type(rec) is not dict:
        return None
    vals = [NAN, NAN, NAN, NAN, NAN, NAN, NAN]
    st: Any = None
    t: float | None = None
    index = _FAST_INDEX
    for key, raw in rec.items():
        i = index.get(key)
        if i is not None:
            tr = type(raw)
            if tr is float:
                if not -_BIG < raw < _BIG:  # NaN, infinite (refused by the general path) or absurd
                    return None
                vals[i] = raw
            elif tr is int:
                if not -(2**53) <= raw <= 2**53:
                    return None
                vals[i] = float(raw)
            elif raw is not None:
                return None
        elif key == "station":
            st = raw
        elif key == "time":
            t = _time_seen.get(raw) if type(raw) is str else None
            if t is None:
                if type(raw) is not str:
                    return None
                t = _parse_time_cached(raw)
                if t is None:
                    return None
        else:
            return None  # unit suffixes, rh_pct, unknown fields
    if t is None or type(st) is not str or not st or st[0].isspace() or st[-1].isspace():
        return None
    wd = vals[_WIND_DIR]
    if wd == wd:
        if not 0.0 <= wd <= 360.0:
            return None
        vals[_WIND_DIR] = wd % 360.0
    return Observation(st, t, *vals)


def _parse_time_cached(raw: str) -> float | None:
    """_fast_time of a text not in _time_seen, remembered there (the cache is bounded: cleared past
    4096 texts). None when the shortcut does not take it."""
    t = _fast_time(raw)
    if t is not None:
        if len(_time_seen) > 4096:
            _time_seen.clear()
        _time_seen[raw] = t
    return t


def _loads(payload: bytes | str) -> tuple[Any, bool]:
    """(document, whether orjson read it). orjson is several times faster than json and reads the
    same documents but for two things: it refuses what json takes (NaN and Infinity tokens,
    lone surrogates, UTF-16/32, a byte-order mark: json.loads then reads it, as before), and it
    reads an integer beyond 64 bits as a float, rounded not always as float(int) rounds. The
    shortcuts take no float of magnitude _BIG or more (no field's value is near it), so what they
    take is json's value; anything else is read again by json.loads before the general path sees
    it (decode_payload), so every refusal stays json's. tests/test_service_gateway_decode.py and
    tests/test_decode_fastpath.py check both against json.loads."""
    if _orjson is not None:
        try:
            return _orjson.loads(payload), True
        except _orjson.JSONDecodeError:
            pass
    return json.loads(payload), False


_BIG = 2.0**63  # floats from here on may be orjson's reading of a huge integer: left to the general path
_NUMERIC = {float, int, type(None)}
_FLOAT_ONLY = {float}
_FLOAT_OR_NULL = {float, type(None)}
_DICT_ONLY = {dict}
_STR_ONLY = {str}
_FAST_KEYS = frozenset(("station", "time", *CANONICAL))
_INT_EXACT = 2**53
# (half _BIG: a rounded sum, or one compensated as Python 3.12 sums, may fall just short of its largest term)
_ABS_SUM_MAX = _BIG / 2


class Records:
    """Decoded records held as columns, what a gateway's uniform array decodes to: station ids,
    times (epoch s) and the canonical fields in CANONICAL order, sequences of one length. The same
    records as the Observations `observations()` makes; the core's batch path takes the columns."""

    __slots__ = ("station", "time", "values")

    def __init__(self, station: Sequence[str], time: Sequence[float], values: list[Sequence[float]]) -> None:
        self.station = station
        self.time = time
        self.values = values

    def __len__(self) -> int:
        return len(self.station)

    def observations(self) -> list[Observation]:
        return list(map(Observation, self.station, self.time, *self.values))

    def observation(self, i: int) -> Observation:
        return Observation(self.station[i], self.time[i], *(v[i] for v in self.values))


def _fast_array(items: list[Any], topic_station: str | None,
                may_speak_for: Callable[[str], bool] | None) -> Records | None:
    """A uniform array of canonical records (all dicts with the same canonical keys, plain numbers or
    null, whole-second UTC times, stations the topic may speak for) decoded column by column: what
    `_fast_record` gives record by record. None for anything else (the record loop takes it).

    The columns are cut out and checked whole, in C (itemgetter, zip, set, sum, min, max), not
    value by value in Python: that was most of a gateway array's decoding time."""
    first = items[0]
    if type(first) is not dict:
        return None
    keys = tuple(first)
    if "station" not in first or "time" not in first or not _FAST_KEYS.issuperset(keys):
        return None
    # every record a dict with as many keys as the first, and (itemgetter) each of the first's keys
    if set(map(type, items)) != _DICT_ONLY or set(map(len, items)) != {len(keys)}:
        return None
    try:
        by_key = dict(zip(keys, zip(*map(itemgetter(*keys), items), strict=True), strict=True))
    except KeyError:
        return None
    stations: tuple[Any, ...] = by_key["station"]
    texts: tuple[Any, ...] = by_key["time"]
    if set(map(type, stations)) != _STR_ONLY or set(map(type, texts)) != _STR_ONLY:
        return None  # (an id that is not text, even one that does not hash: the record loop refuses it alone)
    for st in dict.fromkeys(stations):
        if not st or st[0].isspace() or st[-1].isspace():
            return None
        if topic_station is not None and st != topic_station and \
                not (may_speak_for is not None and may_speak_for(st)):
            return None  # refusals are the record loop's to make, in order
    seen = _time_seen
    for raw in dict.fromkeys(texts):
        if raw not in seen and _parse_time_cached(raw) is None:
            return None
    try:
        times = list(map(seen.__getitem__, texts))
    except KeyError:  # the cache was cleared part-way (more than 4096 distinct times in one array)
        return None
    n = len(items)
    cols: list[Sequence[float]] = []
    for name in CANONICAL:
        col: Sequence[Any] | None = by_key.get(name)
        if col is None:
            cols.append([NAN] * n)
            continue
        types = set(map(type, col))
        if types == _FLOAT_ONLY:
            nums = col
        elif types == _FLOAT_OR_NULL:
            nums = [x for x in col if x is not None]
            col = [NAN if x is None else x for x in col]
        elif types.issubset(_NUMERIC):  # integers among them (rare): value by value
            for x in col:
                if type(x) is float:
                    if not -_BIG < x < _BIG:
                        return None
                elif type(x) is int and not -_INT_EXACT <= x <= _INT_EXACT:
                    return None
            col = [NAN if x is None else float(x) for x in col]
            nums = [x for x in col if x == x]
        else:
            return None
        if name == "wind_dir_deg":
            if nums:
                # A float sum is finite only where every term is (directions cannot overflow it):
                # it finds a NaN or an infinity (refused by the general path); min/max the range.
                total = sum(nums)
                if total - total != 0.0 or min(nums) < 0.0 or max(nums) > 360.0:
                    return None
                if 0.0 in col or 360.0 in col:  # x % 360.0 is x on (0, 360); 360 -> 0 and -0.0 -> 0.0
                    col = [x % 360.0 for x in col]
        elif not sum(map(abs, nums)) < _ABS_SUM_MAX:
            # A sum of magnitudes is at least its largest term, and NaN or infinite if any term is:
            # one pass refuses a NaN, an infinity or a value of magnitude _BIG (or an absurd total).
            return None
        cols.append(col)
    return Records(stations, times, cols)


def decode_payload(
    payload: bytes | str,
    *,
    topic_station: str | None,
    may_speak_for: Callable[[str], bool] | None = None,
    naive_tz: tzinfo | None = None,
) -> tuple[list[Observation], list[DecodeError]]:
    """Decode an MQTT payload: one JSON record or an array of them.

    A record naming a station other than `topic_station` is refused (code 'station_mismatch')
    unless `may_speak_for(station)` is true (a gateway topic). Returns the good observations and
    one error per refused record, so every refusal can be counted by reason.

    Each record is the Observation `decode_record` makes of it; well-formed canonical records take
    a shortcut (`_fast_record`, or `_fast_array` for a uniform array) that gives the same result.
    """
    good, bad = decode_payload_records(payload, topic_station=topic_station, may_speak_for=may_speak_for,
                                       naive_tz=naive_tz)
    return (good.observations() if isinstance(good, Records) else good), bad


def decode_payload_records(
    payload: bytes | str,
    *,
    topic_station: str | None,
    may_speak_for: Callable[[str], bool] | None = None,
    naive_tz: tzinfo | None = None,
) -> tuple[Records | list[Observation], list[DecodeError]]:
    """decode_payload, with a gateway's uniform array of canonical records left as columns
    (Records: the same records, without an Observation made for each)."""
    if len(payload) > MAX_PAYLOAD_BYTES:
        return [], [DecodeError(f"payload of {len(payload)} bytes exceeds {MAX_PAYLOAD_BYTES}",
                                station=topic_station, code="too_large")]
    try:
        doc, fast_reader = _loads(payload)
    except (ValueError, UnicodeDecodeError, RecursionError) as exc:
        return [], [DecodeError(f"malformed JSON: {exc}", station=topic_station, code="malformed_json")]
    if type(doc) is dict:  # one record, the usual case: spare the loop below
        one = _fast_record(doc)
        if one is not None and (topic_station is None or one.station == topic_station):
            return [one], []
    elif type(doc) is list and len(doc) >= 8:  # a gateway's array: column by column when it is uniform
        many = _fast_array(doc, topic_station, may_speak_for)
        if many is not None:
            return many, []
    if fast_reader:
        doc = json.loads(payload)  # the general path reads json's document (see _loads)
    items: Iterable[Any] = doc if type(doc) is list else (doc,)
    good: list[Observation] = []
    bad: list[DecodeError] = []
    fast = _fast_record
    speaks: dict[str, bool] = {}  # may_speak_for asked once per station of a payload
    for item in items:
        obs = fast(item)
        if obs is None:
            try:
                obs = decode_record(item, naive_tz=naive_tz, station=topic_station)
            except DecodeError as err:
                bad.append(err)
                continue
        st = obs.station
        if topic_station is not None and st != topic_station:
            ok = speaks.get(st)
            if ok is None:
                ok = speaks[st] = may_speak_for is not None and bool(may_speak_for(st))
            if not ok:
                bad.append(DecodeError(f"payload names station {st!r} on the topic of {topic_station!r}",
                                       station=topic_station, field="station", code="station_mismatch"))
                continue
        good.append(obs)
    return good, bad
