"""Core commands: `replay` (offline run over files) and `check-config` (validate a network file)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Any

import typer

from ..errors import FrontwatchError


def _fail(msg: str) -> None:
    typer.echo(f"frontwatch: {msg}", err=True)
    raise typer.Exit(2)


def _parse_map(items: list[str] | None) -> dict[str, str]:
    out: dict[str, str] = {}
    for it in items or []:
        if "=" not in it:
            _fail(f"--map {it!r}: expected FOREIGN=CANONICAL, e.g. air_temp=temp_c")
        k, v = it.split("=", 1)
        out[k.strip()] = v.strip()
    return out


def replay(
    files: Annotated[list[Path], typer.Argument(help="CSV or Parquet observation files (DESIGN 3.1)")],
    config: Annotated[Path, typer.Option("--config", "-c", help="network TOML file")],
    events: Annotated[Path | None, typer.Option("--events", help="write passage events (JSONL)")] = None,
    alerts: Annotated[Path | None, typer.Option("--alerts", help="write site forecasts and alerts (JSONL)")] = None,
    cap: Annotated[Path | None, typer.Option("--cap", help="write each alert as CAP 1.2 XML into this folder")] = None,
    cap_status: Annotated[str, typer.Option("--cap-status", help="CAP status: Actual, Exercise, Test ...")] = "Actual",
    column_map: Annotated[list[str] | None, typer.Option("--map", help="FOREIGN=CANONICAL column mapping")] = None,
    to: Annotated[str | None, typer.Option("--to", help="publish to a broker instead: mqtt://host:port")] = None,
    speed: Annotated[float, typer.Option("--speed", help="with --to: times real time (0 = as fast as possible)")] = 0.0,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="no progress bar or summary")] = False,
) -> None:
    """Run the detector over files offline, as fast as the machine allows (no broker needed)."""
    from rich.console import Console

    from ..config import load_network
    from ..replay import merge, read_file, run_decoded

    try:
        cfg = load_network(config)
        mapping = _parse_map(column_map)
        if to is not None:
            _publish(files, cfg, mapping, to, speed)
            return
        decoded = merge([read_file(p, cfg, mapping) for p in files])
    except FrontwatchError as exc:
        _fail(str(exc))
        return
    console = Console(stderr=True)
    show = not quiet and console.is_terminal
    if show:
        from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

        with Progress(TextColumn("replay"), BarColumn(), TextColumn("{task.completed:,}/{task.total:,} records"),
                      TimeRemainingColumn(), console=console) as bar:
            task = bar.add_task("replay", total=len(decoded))
            result = run_decoded(decoded, cfg, progress=lambda i: bar.update(task, completed=i))
            bar.update(task, completed=len(decoded))
    else:
        result = run_decoded(decoded, cfg)
    evs = result.events
    if events is not None:
        _write_jsonl(events, [e.to_dict() for e in evs])
    site_outputs = [d for d in (o.to_dict() for o in result.outputs) if "type" in d]
    if alerts is not None:
        _write_jsonl(alerts, site_outputs)
    if cap is not None:
        _write_cap(cap, [d for d in site_outputs if d["type"] == "alert"], cap_status)
    if not quiet:
        _summary(Console(), result, files)


def _publish(files: list[Path], cfg: Any, mapping: dict[str, str], url: str, speed: float) -> None:
    try:
        from ..service.publish import publish_files
    except ImportError:
        _fail("publishing to a broker is not available in this build")
        return
    publish_files(files, cfg, url, speed=speed, columns=mapping)


def _write_jsonl(path: Path, rows: list[dict[str, Any]]) -> None:
    try:
        with path.open("w", encoding="utf-8") as fh:
            for r in rows:
                fh.write(json.dumps(r, separators=(",", ":")) + "\n")
    except OSError as exc:
        _fail(f"{path}: cannot write: {exc.strerror or exc}")


def _write_cap(folder: Path, alerts: list[dict[str, Any]], status: str) -> None:
    from ..alerts.cap import to_cap_xml

    try:
        folder.mkdir(parents=True, exist_ok=True)
        for a in alerts:
            (folder / f"{a['id']}-{a['seq']:03d}.xml").write_text(to_cap_xml(a, status=status), encoding="utf-8")
    except OSError as exc:
        _fail(f"{folder}: cannot write CAP files: {exc.strerror or exc}")
    except ValueError as exc:
        _fail(f"--cap-status: {exc}")


def _summary(console: Any, result: Any, files: list[Path]) -> None:
    from rich.table import Table

    st = result.stats
    t = Table(title="frontwatch replay", show_header=True)
    t.add_column("what")
    t.add_column("count", justify="right")
    t.add_row("files", str(len(files)))
    t.add_row("stations seen", str(len(st.last_time)))
    t.add_row("records read", f"{result.records:,}")
    t.add_row("records used", f"{st.used:,}")
    for reason, n in sorted(result.bad_by_reason.items()):
        if n:
            t.add_row(f"refused: {reason}", f"{n:,}")
    for reason, n in sorted(st.qc.items()):
        t.add_row(f"qc: {reason}", f"{n:,}")
    for sid, n in sorted(st.unknown_stations.items()):
        t.add_row(f"unknown station {sid}", f"{n:,}")
    for kind, n in sorted(st.events.items()):
        t.add_row(f"events: {kind}", str(n))
    console.print(t)
    for b in result.bad[:10]:
        console.print(f"[yellow]skipped[/] {b}")
    if len(result.bad) > 10:
        console.print(f"... and {sum(result.bad_by_reason.values()) - 10} more skipped records")


def check_config(config: Annotated[Path, typer.Argument(help="network TOML file")]) -> None:
    """Validate a network file and print what it describes."""
    from ..config import load_network

    try:
        cfg = load_network(config)
    except FrontwatchError as exc:
        _fail(str(exc))
        return
    typer.echo(f"{config}: ok: network {cfg.network.name!r}, {len(cfg.stations)} stations, {len(cfg.sites)} sites, "
               f"{'southern' if cfg.southern else 'northern'} hemisphere")


def register(app: typer.Typer) -> None:
    app.command("replay")(replay)
    app.command("check-config")(check_config)


