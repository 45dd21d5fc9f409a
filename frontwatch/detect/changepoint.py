"""Change-point scoring over a short multivariate window (numpy, compiled by numba where installed; no state).

Model: each channel is piecewise constant around one change at index j, after removing the
temperature/moisture/pressure drift fitted before all candidate onsets (days warm, so a breeze
front's signature is a drop *against the trend*). The statistic for a split is the Gaussian
likelihood-ratio of a mean shift with known noise, summed over channels:
    S(j) = sum_c w_c ((mean_post - mean_pre) / sigma_c)^2 * n_pre n_post / (n_pre + n_post)
(the two-segment L2 cost of e.g. Truong, Oudre & Vayatis 2020, 'Selective review of offline change
point detection methods', for known variance). sqrt(S) is the strength in noise units.
The onset is then moved back to where the change *starts*: the earliest sample from which the
projection on the change direction stays above a quarter of the full change (a ramp's start, not
its middle; a smoothed wind's running mean also starts moving at the true onset).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

# channel order: temperature, dewpoint, onshore wind component, alongshore component, pressure
CHANNELS = ("temp", "dewpoint", "onshore", "alongshore", "pressure")
FLOORS = np.array([0.06, 0.08, 0.25, 0.25, 0.05])  # smallest credible noise per channel (sensor resolution)
START_FRACTION = 0.5
SPREAD_FACTOR = 0.5  # weight of the pre-window spread (slow wander) in the noise scale


@dataclass(frozen=True, slots=True)
class Split:
    onset_index: int  # index of the first 'after' sample
    split_index: int  # index that maximised the statistic
    strength: float  # sqrt(S) at the split, noise units
    sigma: np.ndarray  # per-channel noise used
    detrended: np.ndarray  # the window with the per-channel drift removed, NaN kept
    channel_split: np.ndarray  # per channel, the index of its own best split (its own change time)
    csum: np.ndarray  # (n+1, C) cumulative sums of the detrended window (NaN as 0) ...
    ccount: np.ndarray  # ... and of valid counts: any range mean in O(1)

    def range_means(self, *ranges: tuple[int, int]) -> list[tuple[np.ndarray, np.ndarray]]:
        """Per-channel mean and count of the detrended samples in each [lo, hi). An empty range
        divides by zero (NaN mean): call it under np.errstate(all="ignore"), as the signature does."""
        cs, cn = self.csum, self.ccount
        return [((cs[hi] - cs[lo]) / (cn[hi] - cn[lo]), cn[hi] - cn[lo]) for lo, hi in ranges]


# Clamp drifts to diurnal rates (per minute: T 3.6 K/h, Td 1.8 K/h, p 0.6 hPa/h; common practice):
# a steeper 'trend' is a change, and extrapolating it would hide the next one. Wind gets none.
SLOPE_CAP = np.array([0.06, 0.03, 0.0, 0.0, 0.01])


def _detrend_slopes(t: np.ndarray, x: np.ndarray, upto: int) -> np.ndarray:
    """Least-squares drift per channel over samples [0, upto), all channels at once (NaN-aware)."""
    if upto < 8:
        return np.zeros(x.shape[1])
    tm = (t[:upto] / 60.0)[:, None]
    y = x[:upto]
    ok = ~np.isnan(y)
    n = ok.sum(axis=0)
    w = ok.astype(float)
    yz = np.where(ok, y, 0.0)
    with np.errstate(all="ignore"):
        tbar = (w * tm).sum(axis=0) / n
        ybar = yz.sum(axis=0) / n
        tc = (tm - tbar) * w
        den = (tc * tc).sum(axis=0)
        slope = (tc * (yz - ybar * w)).sum(axis=0) / den
    slope = np.where((n >= 8) & (den > 0) & np.isfinite(slope), slope, 0.0)
    return np.clip(slope, -SLOPE_CAP, SLOPE_CAP)


def _noise(x: np.ndarray) -> np.ndarray:
    """Per-channel noise: the larger of the first-difference estimate and half the spread."""
    d = np.abs(np.diff(x, axis=0))
    okd = ~np.isnan(d)
    ok = ~np.isnan(x)
    nd_n = okd.sum(axis=0)
    n = ok.sum(axis=0)
    with np.errstate(all="ignore"):
        nd = 0.886 * np.where(okd, d, 0.0).sum(axis=0) / nd_n  # white noise: E|diff| = 2 sigma / sqrt(pi)
        xz = np.where(ok, x, 0.0)
        mean = xz.sum(axis=0) / n
        var = (np.where(ok, x - mean, 0.0) ** 2).sum(axis=0) / n
        sd = SPREAD_FACTOR * np.sqrt(var)
    nd = np.where(nd_n > 0, nd, np.inf)
    sd = np.where(n > 0, sd, 0.0)
    return np.maximum(np.maximum(nd, sd), FLOORS)


def _split_core_py(t: np.ndarray, x: np.ndarray, w: np.ndarray, first: int, last: int, baseline_s: float,
                   ow: np.ndarray, cap: np.ndarray, floors: np.ndarray, start_fraction: float,
                   spread_factor: float) -> tuple[int, int, float, np.ndarray, np.ndarray, np.ndarray,
                                                  np.ndarray, np.ndarray]:
    """best_split's arithmetic as plain loops, which numba compiles (about twenty times the numpy
    version's speed on these short windows, whose cost is all per-call overhead). The same model
    and the same NaN rules; sums run in sample order. Returns split index -1 for 'no split'."""
    n, C = x.shape
    slope = np.zeros(C)
    if first >= 8:
        for c in range(C):
            cnt = 0
            st = 0.0
            sy = 0.0
            for i in range(first):
                y = x[i, c]
                if y == y:
                    cnt += 1
                    st += t[i] / 60.0
                    sy += y
            if cnt >= 8:
                tbar = st / cnt
                ybar = sy / cnt
                den = 0.0
                num = 0.0
                for i in range(first):
                    y = x[i, c]
                    if y == y:
                        dt = t[i] / 60.0 - tbar
                        den += dt * dt
                        num += dt * (y - ybar)
                if den > 0.0:
                    b = num / den
                    if math.isfinite(b):
                        slope[c] = min(cap[c], max(-cap[c], b))
    t0 = t[first]
    xd = np.empty((n, C))
    cs = np.zeros((n + 1, C))
    cn = np.zeros((n + 1, C))
    for i in range(n):
        tm = (t[i] - t0) / 60.0
        for c in range(C):
            v = x[i, c] - tm * slope[c]
            xd[i, c] = v
            if v == v:
                cs[i + 1, c] = cs[i, c] + v
                cn[i + 1, c] = cn[i, c] + 1.0
            else:
                cs[i + 1, c] = cs[i, c]
                cn[i + 1, c] = cn[i, c]
    # noise over the samples before the first candidate onset
    sigma = np.empty(C)
    for c in range(C):
        sd_sum = 0.0
        nd_n = 0
        k = 0
        sx = 0.0
        for i in range(first):
            v = xd[i, c]
            if v == v:
                k += 1
                sx += v
            if i + 1 < first:
                d = xd[i + 1, c] - v
                if d == d:
                    sd_sum += abs(d)
                    nd_n += 1
        nd = 0.886 * sd_sum / nd_n if nd_n > 0 else math.inf  # white noise: E|diff| = 2 sigma / sqrt(pi)
        sd = 0.0
        if k > 0:
            mean = sx / k
            var = 0.0
            for i in range(first):
                v = xd[i, c]
                if v == v:
                    var += (v - mean) ** 2
            sd = spread_factor * math.sqrt(var / k)
        sigma[c] = max(max(nd, sd), floors[c])
    nj = last - first + 1
    best = -1.0
    kbest = -1
    zbest = np.zeros(C)
    jbest_c = np.zeros(C, dtype=np.int64)
    m_pre_k = np.zeros(C)
    m_post_k = np.zeros(C)
    lo = 0
    for q in range(nj):
        j = first + q
        target = t[j] - baseline_s
        while lo < n and t[lo] < target:  # searchsorted(..., 'left'): t is increasing
            lo += 1
        while lo > 0 and t[lo - 1] >= target:
            lo -= 1
        s = 0.0
        for c in range(C):
            n_pre = cn[j, c] - cn[lo, c]
            n_post = cn[n, c] - cn[j, c]
            z2 = 0.0
            if n_pre >= 6 and n_post >= 2:
                m_pre = (cs[j, c] - cs[lo, c]) / n_pre
                m_post = (cs[n, c] - cs[j, c]) / n_post
                eff = n_pre * n_post / (n_pre + n_post)
                z2 = ((m_post - m_pre) / sigma[c]) ** 2 * eff
                if not math.isfinite(z2):
                    z2 = 0.0
            if q == 0 or z2 > zbest[c]:
                zbest[c] = z2
                jbest_c[c] = j
            s += z2 * w[c]
        if q == 0 or s > best:
            best = s
            kbest = j
            for c in range(C):
                n_pre = cn[j, c] - cn[lo, c]
                n_post = cn[n, c] - cn[j, c]
                m_pre_k[c] = (cs[j, c] - cs[lo, c]) / n_pre if n_pre > 0 else math.nan
                m_post_k[c] = (cs[n, c] - cs[j, c]) / n_post if n_post > 0 else math.nan
    if not best > 0.0:
        return -1, -1, 0.0, sigma, xd, jbest_c, cs, cn
    j = kbest
    wproj = np.zeros(C)
    den = 0.0
    for c in range(C):
        dl = m_post_k[c] - m_pre_k[c]
        if not math.isfinite(dl):
            dl = 0.0
        wproj[c] = ow[c] * dl / sigma[c] ** 2
        den += wproj[c] * dl
    onset = j
    if den > 0.0:
        frac = np.zeros(n)
        for i in range(n):
            acc = 0.0
            for c in range(C):
                v = xd[i, c]
                if v == v:
                    acc += (v - m_pre_k[c]) * wproj[c]
            frac[i] = acc / den
        i = j
        while i - 1 >= first - 6 and i - 1 >= 1 and frac[i - 1] >= start_fraction:
            i -= 1
        onset = i
        # the change must be under way at the onset sample itself
        while onset < j and frac[onset] < start_fraction:
            onset += 1
    return onset, j, math.sqrt(best), sigma, xd, jbest_c, cs, cn


_split_core: Any
try:
    from numba import njit as _njit

    _split_core = _njit(cache=True)(_split_core_py)
except ImportError:  # pragma: no cover - without numba the numpy version below runs
    _split_core = None


def best_split(
    t: np.ndarray,
    x: np.ndarray,
    weights: np.ndarray,
    first: int,
    last: int,
    baseline_s: float,
    onset_weights: np.ndarray | None = None,
) -> Split | None:
    """Best single change with its first 'after' sample in [first, last] (indices into t).

    `t` is seconds (any origin), `x` is (n, 5) with NaN for missing. Returns None when there is
    too little data on either side.
    """
    n = len(t)
    if n < 12 or first > last or first < 8:
        return None
    if _split_core is not None:
        ow = weights if onset_weights is None else onset_weights
        onset, j, strength, sigma, xd, channel_split, cs, cn = _split_core(
            np.ascontiguousarray(t, dtype=float), np.ascontiguousarray(x, dtype=float),
            np.ascontiguousarray(weights, dtype=float), first, last, float(baseline_s),
            np.ascontiguousarray(ow, dtype=float), SLOPE_CAP, FLOORS, START_FRACTION, SPREAD_FACTOR)
        if j < 0:
            return None
        return Split(int(onset), int(j), float(strength), sigma, xd, channel_split, cs, cn)
    return best_split_numpy(t, x, weights, first, last, baseline_s, onset_weights)


def best_split_numpy(
    t: np.ndarray,
    x: np.ndarray,
    weights: np.ndarray,
    first: int,
    last: int,
    baseline_s: float,
    onset_weights: np.ndarray | None = None,
) -> Split | None:
    """The numpy formulation of best_split (the reference; used where numba is not installed)."""
    n = len(t)
    if n < 12 or first > last or first < 8:
        return None
    slope = _detrend_slopes(t, x, first)
    tm = (t - t[first]) / 60.0
    xd = x - tm[:, None] * slope[None, :]
    valid = ~np.isnan(xd)
    xz = np.where(valid, xd, 0.0)
    cs = np.vstack([np.zeros((1, x.shape[1])), np.cumsum(xz, axis=0)])
    cn = np.vstack([np.zeros((1, x.shape[1])), np.cumsum(valid, axis=0)])
    sigma = _noise(xd[:first])
    js = np.arange(first, last + 1)
    lo = np.searchsorted(t, t[js] - baseline_s, side="left")
    n_pre = cn[js] - cn[lo]
    n_post = cn[n] - cn[js]
    with np.errstate(all="ignore"):
        m_pre = (cs[js] - cs[lo]) / n_pre
        m_post = (cs[n] - cs[js]) / n_post
        eff = n_pre * n_post / (n_pre + n_post)
        z2 = ((m_post - m_pre) / sigma[None, :]) ** 2 * eff
    ok = (n_pre >= 6) & (n_post >= 2)
    z2 = np.where(ok & np.isfinite(z2), z2, 0.0)
    s = z2 @ weights
    k = int(np.argmax(s))
    channel_split = js[np.argmax(z2, axis=0)]
    if s[k] <= 0:
        return None
    j = int(js[k])
    pre_mean = m_pre[k]
    delta = np.where(np.isfinite(m_post[k] - pre_mean), m_post[k] - pre_mean, 0.0)
    ow = weights if onset_weights is None else onset_weights
    wproj = ow * delta / sigma**2
    den = float(np.dot(wproj, delta))
    onset = j
    if den > 0:
        dev = np.where(valid, xd - pre_mean[None, :], 0.0)
        frac = (dev @ wproj) / den
        i = j
        while i - 1 >= first - 6 and i - 1 >= 1 and frac[i - 1] >= START_FRACTION:
            i -= 1
        onset = i
        # the change must be under way at the onset sample itself
        while onset < j and frac[onset] < START_FRACTION:
            onset += 1
    return Split(onset, j, float(np.sqrt(s[k])), sigma, xd, channel_split, cs, cn)
