"""Change-point scoring over a short multivariate window (pure numpy, no state).

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

from dataclasses import dataclass

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

    def range_mean(self, lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
        """Per-channel mean and count of the detrended samples [lo, hi) (NaN mean when empty)."""
        cnt = self.ccount[hi] - self.ccount[lo]
        with np.errstate(all="ignore"):
            return (self.csum[hi] - self.csum[lo]) / cnt, cnt


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
