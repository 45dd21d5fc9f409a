"""The analyst's commands: `score` events against labels, `label` (propose candidates), `tune`."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

import typer

if TYPE_CHECKING:
    from ..config import NetworkConfig
    from ..score import ScoreReport


def _fail(cmd: str, msg: str) -> typer.Exit:
    typer.echo(f"frontwatch {cmd}: {msg}", err=True)
    return typer.Exit(code=2)


def _config(cmd: str, path: Path) -> NetworkConfig:
    from ..config import load_network
    from ..errors import FrontwatchError

    try:
        return load_network(path)
    except FrontwatchError as exc:
        raise _fail(cmd, str(exc)) from None


def _print_score(rep: ScoreReport, tz: Any) -> None:
    from rich.console import Console
    from rich.table import Table

    from ..report import fmt, fmt_min, local_text

    con = Console()
    if not con.is_terminal:
        con = Console(width=130)  # a file or pipe: do not wrap the tables at 80 columns
    o = rep.overall
    con.print(f"[bold]{rep.target}[/bold]: {rep.n_labels} labels, {rep.n_events} events, matched within "
              f"{rep.tolerance_s / 60:.0f} min at the same station (Wilks scores)")
    tab = Table("", "hits a", "false alarms b", "misses c", "POD", "FAR", "CSI", "bias")
    tab.add_row("overall", str(o.a), str(o.b), str(o.c), fmt(o.pod), fmt(o.far), fmt(o.csi), fmt(o.bias),
                style="bold")
    for name, c in sorted(rep.per_station.items()):
        tab.add_row(f"station {name}", str(c.a), str(c.b), str(c.c), fmt(c.pod), fmt(c.far), fmt(c.csi), fmt(c.bias))
    for name, c in sorted(rep.per_kind.items()):
        tab.add_row(f"kind {name}", str(c.a), str(c.b), str(c.c), fmt(c.pod), fmt(c.far), fmt(c.csi), fmt(c.bias))
    con.print(tab)
    t2 = Table("minutes (hits)", "n", "mean", "median", "mean |x|", "10 %", "90 %")
    for name, d in (("onset error", rep.onset_error), ("detection delay", rep.delay)):
        t2.add_row(name, str(d.n), fmt_min(d.mean), fmt_min(d.median), fmt_min(d.mean_abs, signed=False),
                   fmt_min(d.quantile(0.1)), fmt_min(d.quantile(0.9)))
    con.print(t2)
    cols = sorted({k for row in rep.confusion.values() for k in row} - {"none"}) + ["none"]
    t3 = Table("labelled \\ emitted", *cols)
    for r in sorted(rep.confusion, key=lambda k: (k == "no label", k)):
        t3.add_row(r, *[str(rep.confusion[r].get(c, "")) for c in cols])
    con.print(t3)
    for lab, ev in rep.misses:
        con.print(f"miss         {lab.station} {local_text(lab.time, tz)} local  labelled {lab.kind}"
                  + (f", emitted {ev.kind} ({ev.id})" if ev else ""))
    for ev, lb in rep.false_alarms:
        con.print(f"false alarm  {ev.station} {local_text(ev.onset, tz)} local  {ev.id}"
                  + (f" on a labelled {lb.kind}" if lb else ""))


def register(app: typer.Typer) -> None:
    @app.command("score")
    def score_cmd(
        events: Path = typer.Argument(..., help="events JSONL (from `frontwatch replay --events`)"),
        labels: Path = typer.Argument(..., help="labels JSONL (station, kind, time[, note, status])"),
        tolerance_min: float = typer.Option(20.0, "--tolerance-min", help="match window, minutes either side"),
        kind: str = typer.Option("breeze_front", "--kind", help="target kind, or 'any'"),
        include_unreviewed: bool = typer.Option(False, "--include-unreviewed",
                                                help="count labels still marked unreviewed as truth"),
        json_out: Path | None = typer.Option(None, "--json", help="also write every figure as JSON here"),
        report: Path | None = typer.Option(None, "--report", help="write a self-contained HTML report here"),
        data: list[Path] = typer.Option([], "--data", help="observation files, to draw panels in the report"),
        config: Path | None = typer.Option(None, "--config", help="network file (local time; needed with --data)"),
        plots: Path | None = typer.Option(None, "--plots", help="folder of `frontwatch label` plots to link"),
    ) -> None:
        """Score passage events against labels: POD, FAR, CSI, bias, timing, confusion of kinds."""
        import json

        from ..errors import FrontwatchError
        from ..labels import read_labels, usable
        from ..score import read_events, score

        try:
            evs = read_events(events)
            lbs = read_labels(labels)
            rep = score(evs, usable(lbs, include_unreviewed), tolerance_s=tolerance_min * 60.0, target=kind)
        except (FrontwatchError, ValueError) as exc:
            raise _fail("score", str(exc)) from None
        cfg = _config("score", config) if config is not None else None
        if data and cfg is None:
            raise _fail("score", "--data needs --config (the network file that says how to read the files)")
        n_left = len(lbs) - rep.n_labels
        tz = cfg.tz if cfg is not None else None
        _print_score(rep, tz)
        if n_left:
            typer.echo(f"({n_left} labels not counted: rejected"
                       f"{'' if include_unreviewed else ' or unreviewed; see --include-unreviewed'})")
        if json_out is not None:
            json_out.write_text(json.dumps(rep.to_dict(), indent=1))
        if report is not None:
            from ..report import score_html, write_html
            from ..tune import build_store

            store = None
            if data and cfg is not None:
                try:
                    store, _ = build_store(data, cfg)
                except FrontwatchError as exc:
                    raise _fail("score", str(exc)) from None
            write_html(report, score_html(rep, f"frontwatch score: {events.name} against {labels.name}", store,
                                          tz, str(plots) if plots else None))
            typer.echo(f"report: {report}")

    @app.command("label")
    def label_cmd(
        files: list[Path] = typer.Argument(..., help="observation files (CSV or Parquet)"),
        config: Path = typer.Option(..., "--config", help="network file (TOML)"),
        out: Path = typer.Option(..., "--out", help="labels JSONL to write (status unreviewed)"),
        plots: Path | None = typer.Option(None, "--plots", help="write one PNG per candidate here"),
        force: bool = typer.Option(False, "--force", help="overwrite an existing labels file"),
        kinds: list[str] = typer.Option([], "--kind", help="propose only events of this kind (repeatable)"),
    ) -> None:
        """Propose label candidates from a replay: the detector's events, each with a plot to review."""
        from ..errors import FrontwatchError
        from ..labels import Label, write_labels
        from ..report import panel_figure
        from ..tune import apply_qc, build_store, run_detector

        cfg = _config("label", config)
        if out.exists() and not force:
            raise _fail("label", f"{out} exists (it may hold reviews); pass --force to overwrite")
        try:
            store, bad = build_store(files, cfg)
        except FrontwatchError as exc:
            raise _fail("label", str(exc)) from None
        from ..events import KINDS

        bad_kinds = sorted(set(kinds) - set(KINDS))
        if bad_kinds:
            raise _fail("label", f"unknown kind(s) {', '.join(bad_kinds)} (one of {', '.join(KINDS)})")
        near: list[tuple[str, float, float, str]] = []
        events = run_detector(apply_qc(store, cfg), cfg, near_misses=near)  # the plots show the raw records
        if kinds:
            events = [e for e in events if e.kind in kinds]
        cands = [Label(e.station, e.kind, e.onset,
                       f"event {e.id}, confidence {e.confidence:.2f}; set status to confirmed or rejected "
                       "(and fix kind/time if needed)", "unreviewed") for e in events]
        # Near-misses: breeze-front candidates that failed one condition, one per station and hour,
        # away from any event (the analyst decides whether the detector was too strict there).
        taken = [(e.station, e.onset) for e in events]
        misses: list[tuple[str, float, float, str]] = []
        if not kinds or "breeze_front" in kinds:
            for st, onset, decided, note in sorted(near, key=lambda x: (x[1], x[0])):
                if any(s2 == st and abs(t2 - onset) < 3600.0 for s2, t2 in taken):
                    continue
                taken.append((st, onset))
                misses.append((st, onset, decided, note))
                cands.append(Label(st, "breeze_front", onset, f"near-miss: {note[len('breeze front? '):]}; "
                                   "set status to confirmed if it was a passage, else rejected", "unreviewed"))
        write_labels(out, cands)
        if plots is not None:
            import matplotlib.pyplot as plt

            from ..timeutil import compact_z

            plots.mkdir(parents=True, exist_ok=True)
            items = [(e.id, e.station, e.onset, e.detected_at, f"{e.kind} onset", "detected") for e in events] + \
                [(f"{st}-near_miss-{compact_z(on)}", st, on, dec, "near-miss onset", "given up")
                 for st, on, dec, _ in misses]
            for pid, st, on, dec, l1, l2 in items:
                fig = panel_figure(store, st, on, cfg.tz, [(on, l1, "#c0392b"), (dec, l2, "#e67e22")])
                if fig is not None:
                    fig.savefig(plots / f"{pid}.png", dpi=80)
                    plt.close(fig)
        typer.echo(f"{len(cands)} candidates ({len(events)} events, {len(misses)} near-misses) from "
                   f"{len(store):,} records ({bad} bad records skipped) -> {out}"
                   + (f"; plots in {plots}/<id>.png" if plots else ""))

    @app.command("tune")
    def tune_cmd(
        files: list[Path] = typer.Argument(..., help="observation files (CSV or Parquet)"),
        config: Path = typer.Option(..., "--config", help="network file (TOML); its [detector] is the start"),
        labels: Path = typer.Option(..., "--labels", help="labels JSONL"),
        space: Path = typer.Option(..., "--space", help="search space TOML (see docs/tuning.md)"),
        out: Path | None = typer.Option(None, "--out", help="write the best [detector] table here"),
        report: Path | None = typer.Option(None, "--report", help="write a self-contained HTML report here"),
        workers: int | None = typer.Option(None, "--workers", help="processes (default: [search] workers or all cores)"),
        method: str | None = typer.Option(None, "--method", help="override [search] method: grid, random, halving"),
        samples: int | None = typer.Option(None, "--samples", help="override [search] samples"),
        seed: int | None = typer.Option(None, "--seed", help="override [search] seed"),
        cache: Path | None = typer.Option(None, "--cache", help="keep the decoded observations here for reruns"),
        include_unreviewed: bool = typer.Option(False, "--include-unreviewed",
                                                help="count labels still marked unreviewed as truth"),
    ) -> None:
        """Search detector settings against labels (held-out days kept apart); write the best as TOML."""
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeElapsedColumn,
            TimeRemainingColumn,
        )

        from ..errors import FrontwatchError
        from ..labels import read_labels, usable
        from ..tune import cached_store, detector_toml, load_space, result_header, tune

        cfg = _config("tune", config)
        try:
            sp = load_space(space)
            over = {k: v for k, v in (("method", method), ("samples", samples), ("seed", seed)) if v is not None}
            if over:
                sp = type(sp).model_validate({**sp.model_dump(), "search": {**sp.search.model_dump(), **over}})
            lbs = usable(read_labels(labels), include_unreviewed)
            store, bad, hit = cached_store(files, cfg, cache)
        except (FrontwatchError, ValueError) as exc:
            raise _fail("tune", str(exc).splitlines()[0]) from None
        known = {s.id for s in cfg.stations}
        strangers = sorted({lb.station for lb in lbs} - known)
        con = Console(stderr=True)
        con.print(f"{len(store):,} records over {len(store.days)} local days ({'cache' if hit else 'decoded'}; "
                  f"{bad} bad records skipped); {len(lbs)} labels")
        if strangers:
            con.print(f"[yellow]labels name stations not in the network file: {', '.join(strangers)}[/yellow]")
        columns = (TextColumn("searching"), BarColumn(), MofNCompleteColumn(), TextColumn("records run"),
                   TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn())
        with Progress(*columns, console=con, disable=not con.is_terminal) as prog:
            task = prog.add_task("search", total=None)

            def progress(done: float, total: float) -> None:
                prog.update(task, completed=done, total=total)

            try:
                res = tune(store, cfg, lbs, sp, store_dir=str(cache) if cache else None, workers=workers,
                           progress=progress)
            except (FrontwatchError, ValueError) as exc:
                raise _fail("tune", str(exc)) from None
        text = detector_toml(res.best.settings, sp.params, result_header(res))
        sys.stdout.write(text)
        if out is not None:
            out.write_text(text, encoding="utf-8")
            con.print(f"best settings: {out}")
        if report is not None:
            from ..report import tune_html, write_html

            write_html(report, tune_html(res, store, cfg.tz))
            con.print(f"report: {report}")
        con.print(f"{len(res.trials)} settings in {res.wall_s:.1f} s on {res.workers} worker(s)")
