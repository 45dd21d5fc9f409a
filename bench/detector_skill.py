"""Detector skill on generated scenarios (seeds given on the command line; defaults are seeds the
detector was never tuned on): CSI/POD/FAR for breeze fronts, onset error, detection delay, and
breeze fronts called on labelled look-alikes. Prints one row per preset and the medians.

Usage: python bench/detector_skill.py [--seeds 101,102,103] [--presets ordinary,noisy,...] [--days 6]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from frontwatch.config import parse_network  # noqa: E402
from frontwatch.labels import label_from_dict  # noqa: E402
from frontwatch.replay import decode_frame, merge, run_decoded  # noqa: E402
from frontwatch.score import score  # noqa: E402
from frontwatch.sim import generate, preset  # noqa: E402

VARIANTS = {
    "ordinary": ("ordinary", {}),
    "noisy": ("noisy", {}),
    "noisy_sensors": ("noisy_sensors", {}),
    "smeared": ("smeared", {}),
    "smeared_blind": ("smeared", {"declare_averaging": False}),
    "south": ("south", {}),
    "curved": ("curved", {}),
}


def run_one(name: str, seed: int, days: int) -> dict[str, float]:
    base, extra = VARIANTS[name]
    sc = generate(preset(base, seed=seed, days=days, **extra))
    cfg = parse_network(sc.network)
    df = sc.observations.copy()
    d = merge([decode_frame(df, cfg, f"{name}-{seed}")])
    res = run_decoded(d, cfg)
    labels = [label_from_dict(x) for x in sc.labels]
    rep = score(res.events, labels)
    bad = sum(1 for ev, lb in rep.false_alarms if lb is not None and lb.kind != "breeze_front")
    return {
        "csi": rep.overall.csi or 0.0, "pod": rep.overall.pod or 0.0, "far": rep.overall.far or 0.0,
        "delay": (rep.delay.median or 0.0) / 60, "onset": (rep.onset_error.mean_abs or 0.0) / 60,
        "onset_bias": (rep.onset_error.mean or 0.0) / 60,
        "lookalike_bf": bad, "labels": rep.overall.a + rep.overall.c, "records": len(d),
        "a": rep.overall.a, "b": rep.overall.b, "c": rep.overall.c,
        "delays": [x / 60 for x in rep.delay.values], "onsets": [abs(x) / 60 for x in rep.onset_error.values],
    }


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", default="101,102,103")
    ap.add_argument("--presets", default=",".join(VARIANTS))
    ap.add_argument("--days", type=int, default=6)
    a = ap.parse_args()
    seeds = [int(s) for s in a.seeds.split(",")]
    print(f"{'variant':14s} {'seed':>5s} {'CSI':>6s} {'POD':>6s} {'FAR':>6s} {'delay':>6s} {'|onset|':>7s} "
          f"{'bias':>6s} {'BF-on-lookalike':>15s} {'fronts':>6s}")
    for name in a.presets.split(","):
        rows = []
        for seed in seeds:
            t0 = time.time()
            r = run_one(name, seed, a.days)
            rows.append(r)
            print(f"{name:14s} {seed:5d} {r['csi']:6.3f} {r['pod']:6.3f} {r['far']:6.3f} {r['delay']:6.1f} "
                  f"{r['onset']:7.1f} {r['onset_bias']:+6.1f} {r['lookalike_bf']:15d} {r['labels']:6d}"
                  f"   ({time.time() - t0:.1f}s)")
        ha, fb, mc = (sum(r[k] for r in rows) for k in ("a", "b", "c"))
        delays = [x for r in rows for x in r["delays"]]
        onsets = [x for r in rows for x in r["onsets"]]
        # Pooled over every hit of every seed: the acceptance's median delay and mean onset error.
        print(f"{name:14s} {'pool':>5s} {ha / max(1, ha + fb + mc):6.3f} {ha / max(1, ha + mc):6.3f} "
              f"{fb / max(1, ha + fb):6.3f} {statistics.median(delays or [0.0]):6.1f} "
              f"{statistics.fmean(onsets or [0.0]):7.1f}"
              f"   (hits {ha}, false alarms {fb}, misses {mc})")
        print(f"{name:14s} {'med':>5s} {statistics.median(r['csi'] for r in rows):6.3f} "
              f"{statistics.median(r['pod'] for r in rows):6.3f} {statistics.median(r['far'] for r in rows):6.3f} "
              f"{statistics.median(r['delay'] for r in rows):6.1f} {statistics.median(r['onset'] for r in rows):7.1f}")


if __name__ == "__main__":
    main()
