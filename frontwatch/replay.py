"""File sources and the offline run: CSV/Parquet -> time-ordered Observations -> the pure core.

Decoding is vectorised (pandas) and happens once at the edge: column mapping, unit suffixes,
naive local times, RH -> dewpoint. A broken file (unreadable, no time column, torn rows) raises
InputFileError naming the file and line; a bad record inside a good file is counted, listed with
its line and field, and skipped.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from datetime import timedelta, timezone, tzinfo
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .calc.moisture import BOLTON_A, BOLTON_B, BOLTON_C  # the same Bolton (1980) formula, vectorised
from .config import InputSettings, NetworkConfig
from .engine import Engine, Output
from .errors import InputFileError
from .events import PassageEvent
from .obs import Observation, split_unit

_OFFSET_RE = r"(?:[Zz]|[+-]\d\d:?\d\d)\s*$"


@dataclass(frozen=True, slots=True)
class BadRecord:
    source: str
    line: int
    field: str
    reason: str

    def __str__(self) -> str:
        return f"{self.source}, line {self.line}, field {self.field!r}: {self.reason}"


@dataclass
class Decoded:
    """Canonical columns as numpy arrays (time = epoch seconds), plus what was refused."""

    station: np.ndarray
    columns: dict[str, np.ndarray]
    bad: list[BadRecord] = field(default_factory=list)
    bad_by_reason: Counter[str] = field(default_factory=Counter)

    def __len__(self) -> int:
        return len(self.station)


DELIMITERS = (",", ";", "\t", "|")


def _header_line(path: Path) -> str:
    """The file's first line (decompressed by its suffix as pandas does; '' if unreadable here)."""
    import bz2
    import gzip
    import lzma

    opener = {".gz": gzip.open, ".bz2": bz2.open, ".xz": lzma.open}.get(path.suffix.lower())
    try:
        if opener is None and path.suffix.lower() in (".zip", ".zst", ".tar"):
            return ""
        with (opener or open)(path, "rt", encoding="utf-8-sig", errors="replace") as fh:  # type: ignore[operator]
            return str(fh.readline(65536))
    except OSError:
        return ""


def _delimiter(path: Path, settings: InputSettings | None) -> str:
    """The configured CSV separator, else the one of DELIMITERS the header line uses most (',' on a tie)."""
    if settings is not None and settings.delimiter is not None:
        return settings.delimiter
    head = _header_line(path)
    best = max(DELIMITERS, key=lambda d: (head.count(d), d == ","))
    return best if head.count(best) else ","


def _read_table(path: Path, settings: InputSettings | None = None) -> tuple[pd.DataFrame, int]:
    """The raw table and the line number of its first data row (CSV header = line 1)."""
    if not path.exists():
        raise InputFileError(f"{path}: no such file")
    suffixes = "".join(path.suffixes).lower()
    try:
        if suffixes.endswith(".parquet") or suffixes.endswith(".pq"):
            return pd.read_parquet(path), 1
        return pd.read_csv(path, dtype={"station": str, "time": str}, keep_default_na=False,
                           na_values=[""], low_memory=False, sep=_delimiter(path, settings),
                           decimal=settings.decimal if settings is not None else "."), 2
    except pd.errors.ParserError as exc:
        msg = str(exc).replace("Error tokenizing data. C error: ", "")
        raise InputFileError(f"{path}: malformed table: {msg}") from None
    except pd.errors.EmptyDataError:
        raise InputFileError(f"{path}: empty file") from None
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputFileError(f"{path}: cannot read: {exc}") from None


def _parse_times(raw: pd.Series, naive_tz: tzinfo | None, src: str, first_line: int) -> np.ndarray:
    """Epoch seconds (float, NaN where unparseable). Naive times need a configured zone."""
    s, has_off = _strip_and_match(raw)
    out = np.full(len(s), np.nan)
    if has_off.any():
        dt = pd.to_datetime(s[has_off], utc=True, errors="coerce", format="ISO8601")
        out[has_off] = _epoch(dt)
    naive = ~has_off & raw.notna().to_numpy()
    if naive.any():
        if naive_tz is None:
            line = first_line + int(np.argmax(naive))
            raise InputFileError(
                f"{src}, line {line}, field 'time': time {s[naive].iloc[0]!r} has no UTC offset and no zone is "
                "configured (set [input] naive_utc_offset_hours or [network] utc_offset_hours/timezone)")
        dtn = pd.to_datetime(s[naive], errors="coerce", format="ISO8601")
        if isinstance(naive_tz, timezone):
            off = naive_tz.utcoffset(None) or timedelta(0)
            out[naive] = _epoch(dtn) - off.total_seconds()
        else:
            out[naive] = _epoch(dtn.dt.tz_localize(naive_tz, ambiguous="NaT", nonexistent="NaT"))
    return out


def _strip_and_match(raw: pd.Series) -> tuple[pd.Series, np.ndarray]:
    """The times as stripped strings, and which carry a UTC offset. In Arrow's compute kernels
    (vectorised, about ten times pandas' per-string regex); pandas' where the column is not text."""
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        st = pc.utf8_trim_whitespace(pa.array(raw, type=pa.string(), from_pandas=True))
    except (pa.ArrowInvalid, pa.ArrowTypeError, TypeError):
        s = raw.astype(str).str.strip()
        return s, s.str.contains(_OFFSET_RE, regex=True, na=False).to_numpy()
    has_off = pc.fill_null(pc.match_substring_regex(st, _OFFSET_RE), False).to_numpy(zero_copy_only=False)
    return pd.Series(pd.array(st, dtype=pd.ArrowDtype(pa.string())), index=raw.index), has_off


def _epoch(dt: pd.Series) -> np.ndarray:
    # Nanoseconds since the epoch as float seconds; NaT -> NaN. Works for naive and aware series.
    if getattr(dt.dt, "tz", None) is not None:
        dt = dt.dt.tz_convert("UTC").dt.tz_localize(None)
    ns = dt.to_numpy(dtype="datetime64[ns]").astype("int64").astype(float)
    ns[dt.isna().to_numpy()] = np.nan
    return ns / 1e9


def decode_frame(df: pd.DataFrame, config: NetworkConfig, src: str, first_line: int = 2,
                 columns: dict[str, str] | None = None, max_listed: int = 50) -> Decoded:
    """Map, convert and check a raw table; rows with a bad field are dropped and recorded."""
    mapping = {**config.input.columns, **(columns or {})}
    df = df.rename(columns={k: v for k, v in mapping.items() if k in df.columns})
    if "time" not in df.columns:
        raise InputFileError(f"{src}, line 1: no 'time' column (columns: {', '.join(map(str, df.columns))}); "
                             "map one with [input.columns]")
    n = len(df)
    bad_mask = np.zeros(n, dtype=bool)
    bad: list[BadRecord] = []
    reasons: Counter[str] = Counter()

    def refuse(mask: np.ndarray, fld: str, reason: str, code: str) -> None:
        new = mask & ~bad_mask
        idx = np.flatnonzero(new)
        reasons[code] += len(idx)
        for i in idx[: max(0, max_listed - len(bad))]:
            bad.append(BadRecord(src, first_line + int(i), fld, reason))
        bad_mask[:] |= mask

    if "station" in df.columns:
        station = df["station"].astype(str).str.strip().to_numpy(dtype=object)
        refuse(df["station"].isna().to_numpy() | (station == ""), "station", "missing station id", "no_station")
    elif config.input.station or len(config.stations) == 1:
        station = np.full(n, config.input.station or config.stations[0].id, dtype=object)
    else:
        raise InputFileError(f"{src}, line 1: no 'station' column and no [input] station configured")
    t = _parse_times(df["time"], config.naive_tz, src, first_line)
    refuse(np.isnan(t), "time", "missing or unparseable time", "bad_time")
    cols: dict[str, np.ndarray] = {}
    rh = None
    for name in df.columns:
        if name in ("station", "time"):
            continue
        su = split_unit(str(name))
        if su is None:
            continue
        canon, conv = su
        raw = df[name]
        if config.input.decimal == "," and not pd.api.types.is_numeric_dtype(raw):
            # read as text (the reader's decimal comma did not fit every cell): take both marks
            raw = raw.where(raw.isna(), raw.astype(str).str.replace(",", ".", regex=False))
        num = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
        wrong = np.isnan(num) & raw.notna().to_numpy()
        refuse(wrong, str(name), "not a number", "wrong_type")
        inf = np.isinf(num)
        refuse(inf, str(name), "not a finite number", "not_finite")
        num = np.where(inf, np.nan, num)
        vals = conv(num)  # type: ignore[arg-type]
        if canon == "rh_pct":
            rh = vals
        else:
            cols[canon] = np.asarray(vals, dtype=float)
    if "wind_dir_deg" in cols:
        wd = cols["wind_dir_deg"]
        refuse((wd < 0) | (wd > 360), "wind_dir_deg", "wind direction outside 0-360", "out_of_range")
        cols["wind_dir_deg"] = np.where(np.isnan(wd), wd, np.mod(wd, 360.0))
    if rh is not None:
        tc = cols.get("temp_c")
        if tc is not None:
            with np.errstate(all="ignore"):
                ok = (rh > 0) & (rh <= 100.5)
                e = np.minimum(rh, 100.0) / 100.0 * BOLTON_A * np.exp(BOLTON_B * tc / (tc + BOLTON_C))
                g = np.log(e / BOLTON_A)
                td = np.where(ok, BOLTON_C * g / (BOLTON_B - g), np.nan)
            cur = cols.get("dewpoint_c")
            cols["dewpoint_c"] = td if cur is None else np.where(np.isnan(cur), td, cur)
    keep = ~bad_mask
    cols = {k: v[keep] for k, v in cols.items()}
    cols["time"] = t[keep]
    return Decoded(station[keep], cols, bad, reasons)


def read_file(path: str | Path, config: NetworkConfig, columns: dict[str, str] | None = None) -> Decoded:
    p = Path(path)
    df, first_line = _read_table(p, config.input)
    return decode_frame(df, config, str(p), first_line, columns)


def merge(decoded: Sequence[Decoded]) -> Decoded:
    """One table from several, stably sorted by time (so per-station order is event-time order)."""
    if len(decoded) == 1:
        d = decoded[0]
        order = np.argsort(d.columns["time"], kind="stable")
        return Decoded(d.station[order], {k: v[order] for k, v in d.columns.items()}, d.bad, d.bad_by_reason)
    names = sorted({k for d in decoded for k in d.columns})
    station = np.concatenate([d.station for d in decoded])
    cols = {k: np.concatenate([d.columns.get(k, np.full(len(d), np.nan)) for d in decoded]) for k in names}
    order = np.argsort(cols["time"], kind="stable")
    bad = [b for d in decoded for b in d.bad]
    reasons: Counter[str] = Counter()
    for d in decoded:
        reasons.update(d.bad_by_reason)
    return Decoded(station[order], {k: v[order] for k, v in cols.items()}, bad, reasons)


def observations(d: Decoded) -> Iterator[Observation]:
    """The table as Observations, in its order."""
    n = len(d)
    nan = np.full(n, np.nan)
    c = d.columns
    cols = [c.get(k, nan).tolist() for k in ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms", "temp_c",
                                             "dewpoint_c", "pressure_hpa", "rain_mm")]
    yield from map(Observation, d.station.tolist(), c["time"].tolist(), *cols)


def read_observations(paths: Sequence[str | Path], config: NetworkConfig,
                      columns: dict[str, str] | None = None) -> Iterator[Observation]:
    """All files' observations merged in time order (bad records skipped; see read_file)."""
    return observations(merge([read_file(p, config, columns) for p in paths]))


@dataclass
class ReplayResult:
    outputs: list[Output]
    engine: Engine
    records: int
    bad: list[BadRecord]
    bad_by_reason: Counter[str]

    @property
    def events(self) -> list[PassageEvent]:
        return [o for o in self.outputs if isinstance(o, PassageEvent)]

    @property
    def stats(self) -> Any:
        return self.engine.stats


def run_decoded(d: Decoded, config: NetworkConfig, progress: Callable[[int], None] | None = None,
                engine: Engine | None = None, record_by_record: bool = False) -> ReplayResult:
    """The core over a decoded table. Station by station (frontwatch.batch, the same outputs and
    final state) where numba is installed, else record by record through Engine.feed."""
    from . import batch

    eng = engine or Engine(config)
    if not record_by_record and batch.available():
        return ReplayResult(batch.run(eng, d.station, d.columns, progress), eng, len(d), d.bad, d.bad_by_reason)
    outputs: list[Output] = []
    feed = eng.feed
    if progress is None:
        for o in observations(d):
            r = feed(o)
            if r:
                outputs.extend(r)
    else:
        for i, o in enumerate(observations(d)):
            r = feed(o)
            if r:
                outputs.extend(r)
            if i % 20000 == 0:
                progress(i)
    return ReplayResult(outputs, eng, len(d), d.bad, d.bad_by_reason)


def run_replay(paths: Sequence[str | Path], config: NetworkConfig, columns: dict[str, str] | None = None,
               progress: Callable[[int], None] | None = None) -> ReplayResult:
    """Offline run of the pure core over files: the same outputs the live service would publish."""
    return run_decoded(merge([read_file(p, config, columns) for p in paths]), config, progress)


