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
# minutes; common practice, no source). With LINE_ROUGH_M below, a floor on the residual sd.
ONSET_SIGMA_S = 120.0
# The front line is not straight: it bends with the coast and the land, and its head breaks into
# lobes and clefts, so a station sees it up to about this far (m) ahead of or behind a straight line
# through the others (from memory: hundreds of metres to a kilometre over a network). Divided by the
# speed it is a timing error of its own, added to the onset's: ROUGH_M * slowness.
LINE_ROUGH_M = 1000.0
PRIOR_DOF = 2.0  # weight of that expected error against the fit's residuals (see _residual_var)
# Stations whose positions span less than this fraction across their main axis are "on a line":
# the heading is not determined by them alone and the prior is kept.
MIN_SPREAD_RATIO = 0.15
# A least-squares fit less certain than this (relative sd of the slowness, sd of the heading) is
# combined with the prior instead (when one is given).
MAX_REL_SLOWNESS_SD = 0.3
MAX_HEADING_SD_DEG = 25.0
# The prior's across-track sd follows the slowness the data give (see _fit_with_prior): passes of
# that fixed point, and a floor on the slowness it uses (1/20 s/m: no breeze front runs at 20 m/s).
PRIOR_PASSES = 6
MIN_SLOWNESS = 0.05
# Acceleration: fitted from this many stations on, kept when significant (|c| >= CURV_T se) and
# when the front's speed at its last station stays below MAX_SPEED_MS.
CURV_MIN_STATIONS = 5
CURV_T = 2.0
MAX_SPEED_MS = 10.0
# Fronts speed up through the day: "from under 3 to over 6 m/s" (Linacre & Geerts 1997), i.e. about
# a doubling. It happens between the front's forming late in the morning (mean onset 10:40 local over
# 475 events at one station, Azorin-Molina et al. 2011) and the mid-afternoon end of the speed-up
# (track.ACCEL_END_LOCAL_H, 15:00): a doubling over about four hours, 0.25 per hour (a reading of
# those sources, not a published rate; it was 0.2, "a doubling over five hours", which did not
# match the end hour used with it). Capped at 2 times. Used where the data do not show the acceleration yet
# (fits without the fitted acceleration term). The speed-up lasts only while the land-sea contrast
# that drives the breeze still grows: it stops at a local clock hour (ACCEL_END_H, set by the
# caller: see track.ACCEL_END_LOCAL_H), after which the front is taken to keep its speed.
ACCEL_PER_H = 0.25
ACCEL_MAX_FACTOR = 2.0


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
    # Optional acceleration term: t += curv * Q(q), q = u . (p - ref) the distance along the motion
    # u, Q(q) = q^2 within the stations' span [q_min, q_max] and continued along its tangent beyond
    # it (the front keeps the speed it had at the last station; no further speed-up is assumed).
    # cov is then 4 x 4 over (t0, sx, sy, curv).
    curv: float = 0.0
    u: tuple[float, float] = (0.0, 1.0)
    q_span: tuple[float, float] = (0.0, 0.0)
    # Data time after which the assumed speed-up stops (None: only the ACCEL_MAX_FACTOR cap).
    accel_until: float | None = None

    def _q2(self, q: float) -> float:
        lo, hi = self.q_span
        if q > hi:
            return hi * hi + 2.0 * hi * (q - hi)
        if q < lo:
            return lo * lo + 2.0 * lo * (q - lo)
        return q * q

    @property
    def speed_ms(self) -> float:
        """Speed at the front's furthest station (constant-speed fit: the speed)."""
        s = math.hypot(self.sx, self.sy)
        if self.curv:
            s = self.sx * self.u[0] + self.sy * self.u[1] + 2.0 * self.curv * self.q_span[1]
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
        g: tuple[float, ...] = (1.0, dx, dy)
        if self.curv:
            q2 = self._q2(self.u[0] * dx + self.u[1] * dy)
            t += self.curv * q2
            g = (1.0, dx, dy, q2)
        c = self.cov
        var = 0.0
        k = len(g)
        for i in range(k):
            for j in range(k):
                var += g[i] * c[i][j] * g[j]
        return t, math.sqrt(max(var, 0.0))

    def predict(self, x: float, y: float) -> tuple[float, float, float]:
        """(arrival time with the front's speed-up, constant-speed arrival time, sd) at (x, y).

        The speed-up is the fitted acceleration term when there is one, else the assumed rate of
        `accelerated_eta`."""
        t, sd = self.arrival(x, y)
        return (t if self.curv else accelerated_eta(self.t0, t, until=self.accel_until)), t, sd

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
        # g' C g over the (sx, sy) block of the covariance, written out (it runs for every site
        # forecast; numpy on 2 x 2 arrays costs more than the arithmetic)
        cxx, cxy, cyy = self.cov[1][1], self.cov[1][2], self.cov[2][2]
        ax, ay = -sx / s**3, -sy / s**3  # d(1/|s|)/ds
        bx, by = sy / s2, -sx / s2  # d atan2(sx, sy)/ds
        v_speed = ax * ax * cxx + 2.0 * ax * ay * cxy + ay * ay * cyy
        v_head = bx * bx * cxx + 2.0 * bx * by * cxy + by * by * cyy
        return math.sqrt(max(v_speed, 0.0)), math.degrees(math.sqrt(max(v_head, 0.0)))


def _residual_var(rss: float, dof: int, onset_sigma_s: float, slowness: float) -> float:
    """Variance (s^2) of one arrival time about the fitted front.

    The expected value, onset sd and line roughness (LINE_ROUGH_M x slowness) combined, counts as
    PRIOR_DOF residuals pooled with the fit's own (a scaled inverse chi-square prior on the
    variance, e.g. Gelman et al., Bayesian Data Analysis, ch. 3): with few degrees of freedom it
    rules, with many the residuals do; never below the onset sd alone."""
    expected = onset_sigma_s**2 + (LINE_ROUGH_M * slowness) ** 2
    pooled = (rss + PRIOR_DOF * expected) / (max(dof, 0) + PRIOR_DOF)
    return max(pooled, onset_sigma_s**2)


def _well_determined(sx: float, sy: float, cov: np.ndarray) -> bool:
    """True when the slowness is known to MAX_REL_SLOWNESS_SD and its direction to MAX_HEADING_SD_DEG."""
    s2 = sx * sx + sy * sy
    if s2 == 0:
        return False
    s = math.sqrt(s2)
    c = cov[1:3, 1:3]
    g_along = np.array([sx / s, sy / s])
    g_head = np.array([sy / s2, -sx / s2])
    rel = math.sqrt(max(float(g_along @ c @ g_along), 0.0)) / s
    head = math.degrees(math.sqrt(max(float(g_head @ c @ g_head), 0.0)))
    return rel <= MAX_REL_SLOWNESS_SD and head <= MAX_HEADING_SD_DEG


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
    accel_until: float | None = None,
) -> FrontFit | None:
    """Fit arrival times `points` = [(x, y, t), ...] (m, m, epoch s).

    Pure least squares when there are >= 3 stations spread in two dimensions and the result is well
    determined; otherwise the prior is combined with the data (None is returned without one). The
    residual sd is floored at `onset_sigma_s`. `accel_until` ends the assumed speed-up (see
    accelerated_eta).
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
        sigma2 = _residual_var(rss, dof, onset_sigma_s, math.hypot(float(beta[1]), float(beta[2])))
        cov = sigma2 * np.linalg.inv(ata)
        if prior is not None and not _well_determined(float(beta[1]), float(beta[2]), cov):
            use_prior = True  # e.g. stations the front reached almost together: lean on the prior
    if use_prior:
        assert prior is not None
        beta, cov, rss = _fit_with_prior(a, b, prior, onset_sigma_s)
    rms = math.sqrt(rss / n)
    if not use_prior and n >= CURV_MIN_STATIONS:
        curved = _fit_curved(arr, ref, tref, beta, onset_sigma_s)
        if curved is not None:
            return curved  # its own acceleration term: accel_until does not apply
    return FrontFit(
        t0=tref + float(beta[0]),
        sx=float(beta[1]),
        sy=float(beta[2]),
        ref=(float(ref[0]), float(ref[1])),
        cov=tuple(tuple(float(v) for v in row) for row in cov),
        n=n,
        residual_rms_s=rms,
        used_prior=use_prior,
        accel_until=accel_until,
    )


def _fit_with_prior(a: np.ndarray, b: np.ndarray, prior: Prior,
                    onset_sigma_s: float) -> tuple[np.ndarray, np.ndarray, float]:
    """Gaussian posterior of (t0, sx, sy) from the arrival times and the prior on the slowness.

    The prior is set in the frame of the prior heading: along it, mean 1/speed with a relative sd;
    across it, mean 0 with sd tan(heading sd) times the along-track slowness. That across sd scales
    with the slowness the data give, not with the prior's: a heading uncertainty is an angle, and
    with the prior's (often too small or too large) speed in it, two stations whose speed differs
    from the prior's would be explained by turning the front instead (an error of the old form: a
    prior at 1 m/s let a 3 m/s front seen at two stations swing 40 deg off the shore normal). With two
    stations apart along the heading this is the two-station fit: the heading from the shore normal,
    the speed from the two arrival times. A few fixed-point passes settle the across sd.
    """
    h = math.radians(prior.heading_deg)
    u = np.array([math.sin(h), math.cos(h)])  # unit vector of motion
    w = np.array([math.cos(h), -math.sin(h)])  # across
    s0 = 1.0 / max(prior.speed_ms, 0.1)
    sd_along = prior.speed_rel_sd * s0
    rot = np.column_stack([u, w])
    mean = np.array([0.0, *(s0 * u)])
    s_along = s0
    for _ in range(PRIOR_PASSES):
        sig2 = onset_sigma_s**2 + (LINE_ROUGH_M * max(s_along, MIN_SLOWNESS)) ** 2
        sd_across = math.tan(math.radians(prior.heading_sd_deg)) * max(s_along, MIN_SLOWNESS)
        p_cov = rot @ np.diag([sd_along**2, sd_across**2]) @ rot.T
        prec = np.zeros((3, 3))
        prec[1:, 1:] = np.linalg.inv(p_cov)
        prec[0, 0] = 1e-12  # flat prior on t0
        cov = np.linalg.inv(a.T @ a / sig2 + prec)
        beta = cov @ (a.T @ b / sig2 + prec @ mean)
        s_new = float(beta[1:3] @ u)
        if abs(s_new - s_along) <= 1e-3 * s0:
            s_along = s_new
            break
        s_along = s_new
    resid = b - a @ beta
    return beta, cov, float(resid @ resid)


def _fit_curved(arr: np.ndarray, ref: np.ndarray, tref: float, beta: np.ndarray,
                onset_sigma_s: float) -> FrontFit | None:
    """The constant-speed fit plus an along-track quadratic term, or None if it is not warranted.

    Fronts speed up through the day (Linacre & Geerts 1997: from under 3 to over 6 m/s), which a
    constant-speed fit averages away; t = t0 + s . d + c q^2 along the first fit's direction of
    motion catches it. Linear least squares again.
    """
    n = len(arr)
    sx, sy = float(beta[1]), float(beta[2])
    s = math.hypot(sx, sy)
    if s == 0:
        return None
    u = np.array([sx / s, sy / s])
    d = arr[:, :2] - ref
    q = d @ u
    a = np.column_stack([np.ones(n), d, q * q])
    b = arr[:, 2] - tref
    scale = np.linalg.norm(a, axis=0)  # columns differ by orders of magnitude (1, m, m^2)
    scale[scale == 0] = 1.0
    an = a / scale
    ata = an.T @ an
    if np.linalg.cond(ata) > 1e10:
        return None
    inv = np.linalg.inv(ata)
    bet = (inv @ (an.T @ b)) / scale
    resid = b - a @ bet
    rss = float(resid @ resid)
    dof = n - 4
    sigma2 = _residual_var(rss, dof, onset_sigma_s, s)
    cov = sigma2 * inv / np.outer(scale, scale)
    c = float(bet[3])
    se_c = math.sqrt(max(cov[3, 3], 0.0))
    if se_c == 0 or abs(c) < CURV_T * se_c:
        return None
    q_lo, q_hi = float(q.min()), float(q.max())
    local = float(bet[1] * u[0] + bet[2] * u[1]) + 2.0 * c * q_hi
    # The speed at the last station must stay plausible: below MAX_SPEED_MS and within the
    # speed-up (or slow-down) factor ACCEL_MAX_FACTOR of the constant-speed fit.
    if local < max(1.0 / MAX_SPEED_MS, s / ACCEL_MAX_FACTOR) or local > s * ACCEL_MAX_FACTOR:
        return None
    return FrontFit(
        t0=tref + float(bet[0]), sx=float(bet[1]), sy=float(bet[2]), ref=(float(ref[0]), float(ref[1])),
        cov=tuple(tuple(float(v) for v in row) for row in cov), n=n, residual_rms_s=math.sqrt(rss / n),
        used_prior=False, curv=c, u=(float(u[0]), float(u[1])), q_span=(q_lo, q_hi),
    )


def accelerated_eta(t_ref: float, eta_const: float, accel_per_h: float = ACCEL_PER_H,
                    max_factor: float = ACCEL_MAX_FACTOR, until: float | None = None) -> float:
    """Arrival time of a front that speeds up, from the constant-speed arrival time.

    The constant-speed fit gives the front's speed v at t_ref (the mean time of the passages it
    used) and a travel time d = eta_const - t_ref at that speed. With speed v (1 + a tau), tau the
    time since t_ref, the distance v d is covered when tau + a tau^2 / 2 = d, so
    tau = (sqrt(1 + 2 a d) - 1) / a. The speed-up stops at max_factor times v, or at data time
    `until` if that comes first (at t_ref or before it: no speed-up); the front then keeps the
    speed it has reached. Before t_ref (upstream of the passages) nothing changes.
    """
    d = eta_const - t_ref
    a = accel_per_h / 3600.0
    if d <= 0.0 or a <= 0.0:
        return eta_const
    tau_cap = (max_factor - 1.0) / a
    if until is not None:
        tau_cap = min(tau_cap, max(until - t_ref, 0.0))
    d_cap = tau_cap + a * tau_cap * tau_cap / 2.0
    if d > d_cap:  # past the end of the speed-up: on at the speed reached
        return t_ref + tau_cap + (d - d_cap) / (1.0 + a * tau_cap)
    return t_ref + (math.sqrt(1.0 + 2.0 * a * d) - 1.0) / a
