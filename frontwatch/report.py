"""Self-contained HTML reports for scoring and tuning: tables, and plots embedded as base64 PNG.

Everything is in the one file (no scripts, fonts or images fetched from anywhere), so it opens
offline and can be mailed. Plots are drawn with matplotlib's Agg backend (no display needed).
Times on panels are the network's local time, as an analyst reads a station's day.
"""

from __future__ import annotations

import base64
import html
import io
import math
from collections.abc import Iterable, Sequence
from datetime import UTC, datetime, tzinfo
from pathlib import Path
from typing import TYPE_CHECKING, Any

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from .config import DetectorSettings  # noqa: E402
from .score import Contingency, Distribution, ScoreReport  # noqa: E402

if TYPE_CHECKING:
    from .tune import ObsStore, TuneResult

CAUTION = ("Frontwatch is decision support. It does not replace official warnings from the national weather "
           "service, the judgement of the people responsible for an event or race, or the wind limits set by "
           "structure makers, engineers and local regulations. Skill measured on past data and labels says how "
           "the detector did there; it depends on sensors that fail and on labels people chose.")

_CSS = """
body{font-family:system-ui,sans-serif;margin:1.5em auto;max-width:72em;color:#1d232a;line-height:1.4}
h1{font-size:1.5em}h2{font-size:1.2em;margin-top:1.8em;border-bottom:1px solid #ccd}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #ccd;padding:.2em .6em;text-align:right}
th{background:#eef1f5}td.l,th.l{text-align:left}.note{color:#556;font-size:.9em}
.caution{background:#fff6e0;border:1px solid #e0c070;padding:.6em;margin:1em 0}
.panels{display:flex;flex-wrap:wrap;gap:.6em}.panel{border:1px solid #ddd;padding:.3em}
.panel p{margin:.2em 0;font-size:.85em}img{max-width:100%}
"""


def esc(x: Any) -> str:
    return html.escape(str(x))


def fmt(x: float | None, nd: int = 3) -> str:
    return "n/a" if x is None or (isinstance(x, float) and math.isnan(x)) else f"{x:.{nd}f}"


def fmt_min(x: float | None, signed: bool = True) -> str:
    """Seconds as minutes with one decimal ('+2.5'); 'n/a' for None."""
    if x is None:
        return "n/a"
    return f"{x / 60.0:+.1f}" if signed else f"{x / 60.0:.1f}"


def local_text(t: float, tz: tzinfo | None) -> str:
    return datetime.fromtimestamp(t, UTC).astimezone(tz or UTC).strftime("%Y-%m-%d %H:%M")


def png_tag(fig: Any, alt: str) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=80)
    plt.close(fig)
    data = base64.b64encode(buf.getvalue()).decode("ascii")
    return f'<img alt="{esc(alt)}" src="data:image/png;base64,{data}">'


def panel_figure(store: ObsStore, station: str, center: float, tz: tzinfo | None,
                 marks: Sequence[tuple[float, str, str]] = (), half_span_s: float = 90 * 60.0) -> Any | None:
    """Temperature/dewpoint, wind speed/gust and wind direction around `center` at one station.

    `marks` are vertical lines (time, legend text, colour), e.g. the label and the event onset.
    Returns None when the store has no records there.
    """
    w = store.window(station, center - half_span_s, center + half_span_s)
    if w["time"].size == 0:
        return None
    # x in minutes from the centre (cheaper to draw than date ticks); the title gives the local time.
    x = (w["time"] - center) / 60.0
    fig, axes = plt.subplots(3, 1, figsize=(6.4, 4.6), sharex=True)
    fig.subplots_adjust(left=0.11, right=0.98, top=0.93, bottom=0.1, hspace=0.12)
    a0, a1, a2 = axes
    a0.plot(x, w["temp_c"], color="#c0392b", lw=1.2, label="temperature")
    a0.plot(x, w["dewpoint_c"], color="#1e8449", lw=1.2, label="dewpoint")
    a0.set_ylabel("degC", fontsize=8)
    a1.plot(x, w["wind_speed_ms"], color="#2c3e50", lw=1.2, label="speed")
    if np.isfinite(w["wind_gust_ms"]).any():
        a1.plot(x, w["wind_gust_ms"], color="#95a5a6", lw=0.8, label="gust")
    a1.set_ylabel("m/s", fontsize=8)
    a2.scatter(x, w["wind_dir_deg"], s=4, color="#2471a3")
    a2.set_ylim(0, 360)
    a2.set_yticks([0, 90, 180, 270, 360])
    a2.set_ylabel("from (deg)", fontsize=8)
    a2.set_xlim(-half_span_s / 60.0, half_span_s / 60.0)
    a2.set_xlabel(f"minutes from {local_text(center, tz)} local", fontsize=8)
    for t, text, colour in marks:
        for ax in axes:
            ax.axvline((t - center) / 60.0, color=colour, lw=1.0, ls="--", label=text if ax is a0 else None)
    a0.legend(fontsize=7, loc="upper left", ncol=4)
    a1.legend(fontsize=7, loc="upper left")
    a0.set_title(f"{station}  {local_text(center, tz)} local", fontsize=9)
    for ax in axes:
        ax.tick_params(labelsize=7)
        ax.grid(alpha=0.3)
    return fig


def contingency_rows(rows: Iterable[tuple[str, Contingency]]) -> str:
    out = ['<table><tr><th class="l"></th><th>hits a</th><th>false alarms b</th><th>misses c</th>'
           "<th>POD</th><th>FAR</th><th>CSI</th><th>bias</th></tr>"]
    for name, c in rows:
        out.append(f'<tr><td class="l">{esc(name)}</td><td>{c.a}</td><td>{c.b}</td><td>{c.c}</td>'
                   f"<td>{fmt(c.pod)}</td><td>{fmt(c.far)}</td><td>{fmt(c.csi)}</td><td>{fmt(c.bias)}</td></tr>")
    out.append("</table>")
    return "".join(out)


def distribution_rows(rows: Iterable[tuple[str, Distribution]]) -> str:
    out = ['<table><tr><th class="l">minutes</th><th>n</th><th>mean</th><th>median</th><th>mean |x|</th>'
           "<th>10 %</th><th>90 %</th><th>min</th><th>max</th></tr>"]
    for name, d in rows:
        vals = d.values
        out.append(f'<tr><td class="l">{esc(name)}</td><td>{d.n}</td><td>{fmt_min(d.mean)}</td>'
                   f"<td>{fmt_min(d.median)}</td><td>{fmt_min(d.mean_abs, signed=False)}</td><td>{fmt_min(d.quantile(0.1))}</td>"
                   f"<td>{fmt_min(d.quantile(0.9))}</td><td>{fmt_min(min(vals) if vals else None)}</td>"
                   f"<td>{fmt_min(max(vals) if vals else None)}</td></tr>")
    out.append("</table>")
    return "".join(out)


def timing_histogram(rep: ScoreReport) -> str:
    if not rep.delay.values:
        return ""
    fig, ax = plt.subplots(figsize=(6.4, 2.6))
    lo = min(min(rep.onset_error.values), min(rep.delay.values)) / 60.0
    hi = max(max(rep.onset_error.values), max(rep.delay.values)) / 60.0
    bins = np.arange(math.floor(lo) - 0.5, math.ceil(hi) + 1.5, 1.0).tolist()
    ax.hist(np.array(rep.onset_error.values) / 60.0, bins=bins, alpha=0.6, label="onset error")
    ax.hist(np.array(rep.delay.values) / 60.0, bins=bins, alpha=0.6, label="detection delay")
    ax.set_xlabel("minutes after the labelled time")
    ax.set_ylabel("hits")
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    return png_tag(fig, "onset error and detection delay")


def confusion_table(rep: ScoreReport) -> str:
    cols = sorted({k for row in rep.confusion.values() for k in row} - {"none"}) + ["none"]
    rows = sorted(k for k in rep.confusion if k != "no label") + (["no label"] if "no label" in rep.confusion else [])
    out = ['<table><tr><th class="l">labelled \\ emitted</th>' + "".join(f"<th>{esc(c)}</th>" for c in cols) + "</tr>"]
    for r in rows:
        row = rep.confusion[r]
        out.append(f'<tr><td class="l">{esc(r)}</td>' + "".join(f"<td>{row.get(c, 0) or ''}</td>" for c in cols)
                   + "</tr>")
    out.append("</table>")
    return "".join(out)


def score_sections(rep: ScoreReport, store: ObsStore | None, tz: tzinfo | None, max_panels: int = 30,
                   plot_dir: str | None = None) -> str:
    """The body of a score report: skill tables, timing, confusion, misses and false alarms."""
    parts = [f"<h2>Skill for {esc(rep.target)} (tolerance {rep.tolerance_s / 60:.0f} min)</h2>",
             f'<p class="note">{rep.n_labels} labels, {rep.n_events} events. Scores after Wilks, Statistical '
             "Methods in the Atmospheric Sciences: POD = a/(a+c), FAR = b/(a+b), CSI = a/(a+b+c), "
             "bias = (a+b)/(a+c).</p>",
             contingency_rows([("overall", rep.overall)]),
             "<h3>Per station</h3>", contingency_rows(sorted(rep.per_station.items())),
             "<h3>Per kind</h3>", contingency_rows(sorted(rep.per_kind.items())),
             "<h2>Timing of hits</h2>",
             distribution_rows([("onset error (onset - label)", rep.onset_error),
                                ("detection delay (detected_at - label)", rep.delay)]),
             timing_histogram(rep),
             "<h2>Confusion of kinds</h2>",
             '<p class="note">For each labelled kind, what the detector emitted within the tolerance '
             "(none: nothing); the last row counts events with no label near them.</p>",
             confusion_table(rep)]
    miss_items = [(lb.station, lb.time, f"miss: labelled {lb.kind}" + (f", emitted {ev.kind}" if ev else ""),
                   [(lb.time, "label", "#1e8449")] + ([(ev.onset, f"{ev.kind} onset", "#c0392b")] if ev else []),
                   None)
                  for lb, ev in rep.misses]
    fa_items = [(ev.station, ev.onset, f"false alarm: {ev.kind} (confidence {ev.confidence:.2f})"
                 + (f" on a labelled {lb.kind}" if lb else ""),
                 [(ev.onset, "onset", "#c0392b"), (ev.detected_at, "detected", "#e67e22")]
                 + ([(lb.time, f"label {lb.kind}", "#1e8449")] if lb else []), ev.id)
                for ev, lb in rep.false_alarms]
    for title, items in (("Misses", miss_items), ("False alarms", fa_items)):
        parts.append(f"<h2>{title} ({len(items)})</h2>")
        if not items:
            parts.append("<p>None.</p>")
            continue
        parts.append('<table><tr><th class="l">station</th><th class="l">local time</th><th class="l">what</th>'
                     + ('<th class="l">plot</th>' if plot_dir else "") + "</tr>")
        for st, t, what, _, eid in items:
            link = ""
            if plot_dir and eid and (Path(plot_dir) / f"{eid}.png").exists():
                link = f'<td class="l"><a href="{esc(Path(plot_dir) / (eid + ".png"))}">{esc(eid)}.png</a></td>'
            elif plot_dir:
                link = '<td class="l"></td>'
            parts.append(f'<tr><td class="l">{esc(st)}</td><td class="l">{local_text(t, tz)}</td>'
                         f'<td class="l">{esc(what)}</td>{link}</tr>')
        parts.append("</table>")
        if store is not None:
            parts.append('<div class="panels">')
            for st, t, what, marks, _ in items[:max_panels]:
                fig = panel_figure(store, st, t, tz, marks)
                if fig is not None:
                    parts.append(f'<div class="panel">{png_tag(fig, what)}<p>{esc(what)}</p></div>')
            parts.append("</div>")
            if len(items) > max_panels:
                parts.append(f'<p class="note">{len(items) - max_panels} more not drawn (limit {max_panels}).</p>')
    return "".join(parts)


def page(title: str, body: str) -> str:
    return (f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>{esc(title)}</title>'
            f"<style>{_CSS}</style></head><body><h1>{esc(title)}</h1>"
            f'<div class="caution">{esc(CAUTION)}</div>{body}'
            f'<p class="note">Written by frontwatch; self-contained (no network needed to view).</p></body></html>')


def score_html(rep: ScoreReport, title: str, store: ObsStore | None = None, tz: tzinfo | None = None,
               plot_dir: str | None = None) -> str:
    return page(title, score_sections(rep, store, tz, plot_dir=plot_dir))


def _skill_vs_setting(res: TuneResult, name: str) -> str:
    fin = [t for t in res.trials if t.test is not None]
    early = [t for t in res.trials if t.test is None]
    fig, ax = plt.subplots(figsize=(4.6, 2.8))
    if early:
        ax.scatter([getattr(t.settings, name) for t in early], [t.train_value for t in early], s=14,
                   color="#bbbbbb", label="train (stopped early, part of the days)")
    ax.scatter([getattr(t.settings, name) for t in fin], [t.train_value for t in fin], s=18, color="#2471a3",
               label="train objective")
    ax.scatter([getattr(t.settings, name) for t in fin], [t.test.overall.csi or 0.0 for t in fin if t.test],
               s=18, marker="x", color="#e67e22", label="held-out CSI")
    ax.axvline(getattr(res.best.settings, name), color="#1e8449", lw=1, ls="--", label="chosen")
    ax.axvline(getattr(res.current.settings, name), color="#7f8c8d", lw=1, ls=":", label="current")
    ax.set_xlabel(name)
    ax.set_ylabel("skill")
    ax.legend(fontsize=6)
    ax.grid(alpha=0.3)
    return png_tag(fig, f"skill against {name}")


def tune_html(res: TuneResult, store: ObsStore | None, tz: tzinfo | None, title: str = "frontwatch tuning report") -> str:
    from .tune import day_name

    sp = res.space
    searched = sorted(sp.params)
    b, c = res.best, res.current
    parts = [f"<h2>Search</h2><p>{esc(sp.search.method)} search of {len(res.trials)} settings "
             f"(the network file's current settings among them) over {res.records:,} records, "
             f"{res.workers} worker process(es), {res.wall_s:.1f} s. Objective: {esc(sp.objective.metric)} of "
             f"{esc(sp.objective.target)} minus {sp.objective.delay_penalty_per_min} per minute of median delay "
             f"beyond {sp.objective.delay_free_min} min; tolerance {sp.objective.tolerance_min} min. "
             f"Chosen on train days only: {len(res.train_days)} train days, {len(res.test_days)} held-out days "
             f"(whole local days, seed {sp.search.seed}).</p>",
             '<p class="note">Held-out days: ' + esc(", ".join(day_name(d) for d in res.test_days)) + "</p>",
             "<h2>Train and held-out skill</h2>",
             '<table><tr><th class="l">settings</th><th>train objective</th><th>train CSI</th><th>held-out objective</th>'
             "<th>held-out POD</th><th>held-out FAR</th><th>held-out CSI</th><th>held-out bias</th>"
             "<th>held-out median delay (min)</th></tr>"]
    rows = [("chosen", b), ("current", c)]
    if res.top is not None and res.top is not b:
        rows.append(("top train objective", res.top))
    for name, t in rows:
        tr, te = t.train, t.test
        assert tr is not None and te is not None
        parts.append(f'<tr><td class="l">{name} (#{t.index})</td><td>{fmt(t.train_value)}</td>'
                     f"<td>{fmt(tr.overall.csi)}</td><td>{fmt(t.test_value)}</td><td>{fmt(te.overall.pod)}</td>"
                     f"<td>{fmt(te.overall.far)}</td><td>{fmt(te.overall.csi)}</td><td>{fmt(te.overall.bias)}</td>"
                     f"<td>{fmt_min(te.delay.median)}</td></tr>")
    parts.append("</table>")
    parts.append(f'<p class="note">One-standard-error rule: settings other than the current ones are chosen only '
                 f"when their train objective beats the current settings' by more than {res.margin:.3f} "
                 + ("(the stated min_gain)." if sp.search.min_gain is not None else
                    "(one standard error of the current train score).")
                 + (" The top train objective did not, so the current settings are kept."
                    if res.top is not None and res.top is not b else "") + "</p>")
    parts.append("<h2>Chosen settings</h2>")
    parts.append('<table><tr><th class="l">setting</th><th>current</th><th>chosen</th><th class="l"></th></tr>')
    for name in DetectorSettings.model_fields:
        cv, bv = getattr(c.settings, name), getattr(b.settings, name)
        mark = "searched" + (", changed" if cv != bv else "") if name in searched else ""
        parts.append(f'<tr><td class="l">{esc(name)}</td><td>{esc(cv)}</td><td>{esc(bv)}</td>'
                     f'<td class="l">{mark}</td></tr>')
    parts.append("</table>")
    parts.append("<h2>Skill against each searched setting</h2><div class=\"panels\">")
    for name in searched:
        parts.append(f'<div class="panel">{_skill_vs_setting(res, name)}</div>')
    parts.append("</div><h2>All settings tried</h2>")
    parts.append('<table><tr><th>#</th>' + "".join(f"<th>{esc(n)}</th>" for n in searched)
                 + "<th>rung</th><th>train days</th><th>train objective</th><th>held-out CSI</th></tr>")
    for t in sorted(res.trials, key=lambda t: (-t.rung, -t.train_value, t.index)):
        parts.append(f"<tr><td>{t.index}{' (current)' if t.is_current else ''}{' (chosen)' if t is b else ''}</td>"
                     + "".join(f"<td>{esc(getattr(t.settings, n))}</td>" for n in searched)
                     + f"<td>{t.rung}</td><td>{t.train_days}</td><td>{fmt(t.train_value)}</td>"
                     f"<td>{fmt(t.test.overall.csi if t.test else None)}</td></tr>")
    parts.append("</table>")
    assert b.test is not None
    parts.append("<h2>Chosen settings on the held-out days</h2>")
    parts.append(score_sections(b.test, store, tz))
    return page(title, "".join(parts))


def write_html(path: str | Path, text: str) -> Path:
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(text, encoding="utf-8")
    return p
