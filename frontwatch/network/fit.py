"""Fit a moving straight front to arrival times at stations: t = t0 + s . (p - p_ref).

The front is a straight line moving at constant velocity. Its slowness vector s (s/m) points the
way the front moves and has length 1/speed, so the arrival time at any point p is linear in p. With
three or more stations not on one line this is an ordinary least-squares problem in (t0, sx, sy)
(the plane-wave fit of array seismology and of time-of-arrival front tracking; common practice).

With fewer stations (or stations nearly on one line) a Gaussian prior on s is added: the direction
and the speed a density current would have (see prior.py), with wide standard deviations. The
posterior covariance then gives the interval of every predicted arrival time.

Positions are local metres east (x) and north (y); times are epoch seconds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

# Uncertainty of one detected onset time, s (the detector's change point is good to a few
# minutes; common practice, no source). Used as a floor on the residual standard deviation.
ONSET_SIGMA_S = 120.0
# Stations whose positions span less than this fraction across their main axis are "on a line":
# the heading is not determined by them alone and the prior is kept.
MIN_SPREAD_RATIO = 0.15


@dataclass(frozen=True, slots=True)
class Prior:
    """Prior on the slowness vector: mean speed (m/s) and heading (deg, the way the front moves,
    clockwise from north) with relative speed sd and heading sd (deg)."""

    speed_ms: float
    heading_deg: float
    speed_rel_sd: float = 0.5
    heading_sd_deg: float = 35.0


@dataclass(frozen=True, slots=True)
class FrontFit:
    """The fitted front. `ref` is the reference point (x, y) of t0; cov is over (t0, sx, sy)."""

    t0: float
    sx: float
    sy: float
    ref: tuple[float, float]
    cov: tuple[tuple[float, ...], ...]
    n: int
    residual_rms_s: float
    used_prior: bool

    @property
    def speed_ms(self) -> float:
        s = math.hypot(self.sx, self.sy)
        return 1.0 / s if s > 0 else math.inf

    @property
    def heading_deg(self) -> float:
        """Direction of motion, degrees clockwise from north (x east, y north)."""
        return math.degrees(math.atan2(self.sx, self.sy)) % 360.0

    def arrival(self, x: float, y: float) -> tuple[float, float]:
        """Predicted arrival time at (x, y) and its standard deviation (s), from the covariance."""
        dx = x - self.ref[0]
        dy = y - self.ref[1]
        t = self.t0 + self.sx * dx + self.sy * dy
        g = (1.0, dx, dy)
        c = self.cov
        var = 0.0
        for i in range(3):
            for j in range(3):
                var += g[i] * c[i][j] * g[j]
        return t, math.sqrt(max(var, 0.0))

    def progress(self, x: float, y: float) -> float:
        """Distance (m) of (x, y) along the direction of motion, from the reference point."""
        s = math.hypot(self.sx, self.sy)
        if s == 0:
            return 0.0
        return (self.sx * (x - self.ref[0]) + self.sy * (y - self.ref[1])) / s

    def speed_heading_sd(self) -> tuple[float, float]:
        """Standard deviations of speed (m/s) and heading (deg), by linearising s -> (1/|s|, angle)."""
        sx, sy = self.sx, self.sy
        s2 = sx * sx + sy * sy
        if s2 == 0:
            return math.inf, 180.0
        s = math.sqrt(s2)
        c = np.array(self.cov)[1:, 1:]
        g_speed = np.array([-sx / s**3, -sy / s**3])  # d(1/|s|)/ds
        g_head = np.array([sy / s2, -sx / s2])  # d atan2(sx, sy)/ds
        v_speed = float(g_speed @ c @ g_speed)
        v_head = float(g_head @ c @ g_head)
        return math.sqrt(max(v_speed, 0.0)), math.degrees(math.sqrt(max(v_head, 0.0)))


def _spread_ratio(xy: np.ndarray) -> float:
    """Minor over major singular value of the centred station positions (0 = all on one line)."""
    if len(xy) < 3:
        return 0.0
    sv = np.linalg.svd(xy - xy.mean(axis=0), compute_uv=False)
    return float(sv[1] / sv[0]) if sv[0] > 0 else 0.0


def fit_front(
    points: list[tuple[float, float, float]],
    prior: Prior | None = None,
    onset_sigma_s: float = ONSET_SIGMA_S,
) -> FrontFit | None:
    """Fit arrival times `points` = [(x, y, t), ...] (m, m, epoch s).

    Pure least squares when there are >= 3 stations spread in two dimensions; otherwise the prior
    is needed (None is returned without one). The residual sd is floored at `onset_sigma_s`.
    """
    n = len(points)
    if n == 0:
        return None
    arr = np.asarray(points, dtype=float)
    xy = arr[:, :2]
    ref = xy.mean(axis=0)
    tref = float(arr[:, 2].mean())
    a = np.column_stack([np.ones(n), xy - ref])
    b = arr[:, 2] - tref
    use_prior = n < 3 or _spread_ratio(xy) < MIN_SPREAD_RATIO
    if use_prior and prior is None:
        return None
    if not use_prior:
        ata = a.T @ a
        beta = np.linalg.solve(ata, a.T @ b)
        resid = b - a @ beta
        dof = n - 3
        rss = float(resid @ resid)
        sigma2 = max(rss / dof if dof > 0 else 0.0, onset_sigma_s**2)
        cov = sigma2 * np.linalg.inv(ata)
    else:
        assert prior is not None
        # Prior mean and covariance of s in the (along, across) frame of the prior heading.
        h = math.radians(prior.heading_deg)
        u = np.array([math.sin(h), math.cos(h)])  # unit vector of motion
        w = np.array([math.cos(h), -math.sin(h)])  # across
        s0 = 1.0 / max(prior.speed_ms, 0.1)
        sd_along = prior.speed_rel_sd * s0
        sd_across = math.tan(math.radians(prior.heading_sd_deg)) * s0
        rot = np.column_stack([u, w])
        p_cov = rot @ np.diag([sd_along**2, sd_across**2]) @ rot.T
        prec = np.zeros((3, 3))
        prec[1:, 1:] = np.linalg.inv(p_cov)
        prec[0, 0] = 1e-12  # flat prior on t0
        mean = np.array([0.0, *(s0 * u)])
        sig2 = onset_sigma_s**2
        post_prec = a.T @ a / sig2 + prec
        cov = np.linalg.inv(post_prec)
        beta = cov @ (a.T @ b / sig2 + prec @ mean)
        resid = b - a @ beta
        rss = float(resid @ resid)
    rms = math.sqrt(rss / n)
    return FrontFit(
        t0=tref + float(beta[0]),
        sx=float(beta[1]),
        sy=float(beta[2]),
        ref=(float(ref[0]), float(ref[1])),
        cov=tuple(tuple(float(v) for v in row) for row in cov),
        n=n,
        residual_rms_s=rms,
        used_prior=use_prior,
    )
