"""Tracking maths: the moving-front least-squares fit and the density-current prior.

Checks against a hand-worked example, numpy's reference least-squares solver, and the DOMAIN.md
check value of the density-current speed (sqrt(g'h) = 7.00 m/s for 3 K, 300 K, 500 m).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from frontwatch.network.fit import LINE_ROUGH_M, ONSET_SIGMA_S, PRIOR_DOF, Prior, fit_front
from frontwatch.network.prior import DEPTH_M, EARLY_FACTOR, FROUDE_K, PassageFacts, density_prior


def test_hand_worked_right_angle_three_stations() -> None:
    """Hand-worked example: stations A (0, 0), B (10 km east), C (10 km north) on a right angle see
    the front at 0 s, 1200 s and 1600 s. Then s_x = 1200 s / 10 km = 0.12 s/m and s_y = 1600 s / 10 km
    = 0.16 s/m; |s| = 0.2 s/m (a 3-4-5 triangle), so the speed is 5 m/s, and the front moves toward
    atan2(0.12, 0.16) = 36.87 deg (north-east). A fourth point D (10 km, 10 km) is due at
    t0 + 0.12 * 10000 + 0.16 * 10000 = 2800 s."""
    f = fit_front([(0.0, 0.0, 0.0), (10_000.0, 0.0, 1200.0), (0.0, 10_000.0, 1600.0)])
    assert f is not None and not f.used_prior
    assert f.sx == pytest.approx(0.12, abs=1e-12)
    assert f.sy == pytest.approx(0.16, abs=1e-12)
    assert f.speed_ms == pytest.approx(5.0, rel=1e-12)
    assert f.heading_deg == pytest.approx(math.degrees(math.atan2(3, 4)), abs=1e-9)
    assert f.heading_deg == pytest.approx(36.8699, abs=1e-4)
    t, sd = f.arrival(10_000.0, 10_000.0)
    assert t == pytest.approx(2800.0, abs=1e-6)
    assert f.residual_rms_s == pytest.approx(0.0, abs=1e-6)
    # Exactly determined: the uncertainty comes from the onset-time floor, so it is positive.
    assert sd > 0
    # Progress along the motion of D from A: (0.12 + 0.16) * 10000 / 0.2 = 14 km.
    assert f.progress(10_000.0, 10_000.0) - f.progress(0.0, 0.0) == pytest.approx(14_000.0)


def test_overdetermined_fit_matches_numpy_lstsq() -> None:
    rng = np.random.default_rng(4)
    xy = rng.uniform(-20_000, 20_000, size=(7, 2))
    true_s = np.array([-0.25, 0.1])
    t = 5000.0 + xy @ true_s + rng.normal(0, 90, size=7)
    f = fit_front([(float(x), float(y), float(tt)) for (x, y), tt in zip(xy, t, strict=True)])
    assert f is not None
    a = np.column_stack([np.ones(7), xy])
    beta, *_ = np.linalg.lstsq(a, t, rcond=None)  # reference solver (numpy)
    assert f.sx == pytest.approx(beta[1], rel=1e-9)
    assert f.sy == pytest.approx(beta[2], rel=1e-9)
    assert f.arrival(0.0, 0.0)[0] == pytest.approx(beta[0], abs=1e-6)
    resid = t - a @ beta
    assert f.residual_rms_s == pytest.approx(math.sqrt(float(resid @ resid) / 7), rel=1e-9)
    # Covariance: sigma^2 (A^T A)^-1 with sigma^2 the residuals' RSS over n - 3 = 4 degrees of
    # freedom pooled with PRIOR_DOF of the expected error (onset sd and the front line's roughness
    # over the speed, LINE_ROUGH_M x |s|), never below the onset sd.
    expected = ONSET_SIGMA_S**2 + (LINE_ROUGH_M * math.hypot(beta[1], beta[2])) ** 2
    sigma2 = max((float(resid @ resid) + PRIOR_DOF * expected) / (4 + PRIOR_DOF), ONSET_SIGMA_S**2)
    ac = np.column_stack([np.ones(7), xy - xy.mean(axis=0)])
    cov = sigma2 * np.linalg.inv(ac.T @ ac)
    assert np.allclose(np.array(f.cov)[1:, 1:], cov[1:, 1:], rtol=1e-9)


def test_speed_heading_sd_grows_with_timing_noise() -> None:
    pts = [(0.0, 0.0, 0.0), (10_000.0, 0.0, 1200.0), (0.0, 10_000.0, 1600.0), (10_000.0, 10_000.0, 2800.0)]
    base = fit_front(pts)
    noisy = fit_front([(x, y, t + d) for (x, y, t), d in zip(pts, (300, -300, -300, 300), strict=True)])
    assert base is not None and noisy is not None
    assert noisy.speed_heading_sd()[0] > base.speed_heading_sd()[0] > 0


def test_too_few_or_collinear_stations_need_the_prior() -> None:
    pts = [(0.0, 0.0, 0.0), (5000.0, 0.0, 1000.0)]
    assert fit_front(pts) is None
    line = [(0.0, 0.0, 0.0), (5000.0, 0.0, 1000.0), (10_000.0, 10.0, 2000.0)]
    assert fit_front(line) is None
    f = fit_front(line, Prior(speed_ms=4.0, heading_deg=90.0))
    assert f is not None and f.used_prior
    # Along the line the data win over the prior (5 m/s observed against 4 m/s assumed).
    assert f.speed_ms == pytest.approx(5.0, rel=0.02)
    assert f.heading_deg == pytest.approx(90.0, abs=1.0)


def test_single_station_prior_prediction() -> None:
    """One station: the front is assumed to move at the prior speed along the prior heading."""
    f = fit_front([(0.0, 0.0, 1000.0)], Prior(speed_ms=4.0, heading_deg=270.0))
    assert f is not None and f.used_prior
    t, sd = f.arrival(-8000.0, 0.0)  # 8 km west: 2000 s later at 4 m/s
    assert t == pytest.approx(3000.0, abs=1e-6)
    # Wide: the onset's sd and the line's roughness at 4 m/s (LINE_ROUGH_M / 4 s), and 50 % of the
    # 2000 s lead from the prior's speed sd.
    assert sd == pytest.approx(math.hypot(ONSET_SIGMA_S, LINE_ROUGH_M / 4.0, 0.5 * 2000.0), rel=1e-3)


def test_density_prior_matches_domain_check_value() -> None:
    """DOMAIN.md: delta theta 3 K, theta 300 K, h 500 m -> sqrt(g'h) = 7.00 m/s; the prior uses
    U = k sqrt(g'h) with k = FROUDE_K, subtracts 0.6 x the opposing wind (Simpson & Britter 1980), and
    takes EARLY_FACTOR of that for a young front."""
    assert DEPTH_M == 500.0
    facts = PassageFacts(shore_normal_to_deg=270.0, temp_change_c=-3.0, temp_after_c=300.0 - 273.15,
                         dir_before_deg=None, speed_before_ms=None)
    p = density_prior([facts])
    assert p.speed_ms == pytest.approx(EARLY_FACTOR * FROUDE_K * 7.00, abs=0.01)
    assert p.heading_deg == pytest.approx(270.0)
    # A 2 m/s wind from the west opposes a front moving west: 0.6 x 2 = 1.2 m/s slower.
    opp = PassageFacts(270.0, -3.0, 300.0 - 273.15, dir_before_deg=270.0, speed_before_ms=2.0)
    assert density_prior([opp]).speed_ms == pytest.approx(EARLY_FACTOR * (FROUDE_K * 7.00 - 1.2), abs=0.01)
    # A following wind (from the east) is not applied (the paper's result is for opposing flow).
    fol = PassageFacts(270.0, -3.0, 300.0 - 273.15, dir_before_deg=90.0, speed_before_ms=2.0)
    assert density_prior([fol]).speed_ms == pytest.approx(EARLY_FACTOR * FROUDE_K * 7.00, abs=0.01)


def test_accelerated_eta_hand_worked() -> None:
    """Speed v (1 + a tau) with a = 0.2 per hour covers in tau hours what constant speed covers in
    tau + a tau^2 / 2: one constant-speed hour is reached after (sqrt(1 + 2 a) - 1) / a =
    (sqrt(1.4) - 1) / 0.2 = 0.9161 h. With the speed-up capped at 2 x (reached after 5 h, 7.5 h of
    constant-speed travel), 10 h of constant-speed travel take 5 + (10 - 7.5) / 2 = 6.25 h."""
    from frontwatch.network.fit import accelerated_eta

    assert accelerated_eta(0.0, 3600.0, 0.2, 2.0) == pytest.approx((math.sqrt(1.4) - 1) / 0.2 * 3600.0, rel=1e-12)
    assert (math.sqrt(1.4) - 1) / 0.2 == pytest.approx(0.9161, abs=1e-4)
    assert accelerated_eta(0.0, 10 * 3600.0, 0.2, 2.0) == pytest.approx(6.25 * 3600.0, rel=1e-12)
    assert accelerated_eta(100.0, 50.0) == 50.0  # upstream of the passages: unchanged
    assert accelerated_eta(0.0, 3600.0, 0.0) == 3600.0


def test_default_speed_up_doubles_in_four_hours_hand_worked() -> None:
    """The default rate reads Linacre & Geerts (1997)'s doubling ("from under 3 to over 6 m/s") as
    spread over the four hours from a late-morning onset to mid-afternoon: at 0.25 per hour the
    speed is 2 v after 4 h, when the front has covered 4 + 0.25 x 16 / 2 = 6 constant-speed hours;
    8 constant-speed hours then take 4 + (8 - 6) / 2 = 5 h (hand-worked)."""
    from frontwatch.network.fit import accelerated_eta

    h = 3600.0
    assert accelerated_eta(0.0, 6 * h) == pytest.approx(4 * h, rel=1e-12)
    assert accelerated_eta(0.0, 8 * h) == pytest.approx(5 * h, rel=1e-12)


def test_accelerated_eta_stops_at_the_end_hour_hand_worked() -> None:
    """Hand-worked: a = 0.2 per hour, the speed-up ends 1 h after t_ref (speed then 1.2 v). In that
    hour the front covers 1 + 0.2 / 2 = 1.1 constant-speed hours; of 3 constant-speed hours the
    other 1.9 take 1.9 / 1.2 = 1.5833 h: arrival 2.5833 h after t_ref. An end at or before t_ref
    means no speed-up at all; an end beyond the cap (5 h for 2 x) changes nothing."""
    from frontwatch.network.fit import accelerated_eta

    h = 3600.0
    assert accelerated_eta(0.0, 3 * h, 0.2, 2.0, until=1 * h) == pytest.approx((1.0 + 1.9 / 1.2) * h, rel=1e-12)
    assert pytest.approx(2.5833, abs=1e-4) == 1.0 + 1.9 / 1.2
    assert accelerated_eta(0.0, 3 * h, 0.2, 2.0, until=-h) == 3 * h
    assert accelerated_eta(0.0, 3 * h, 0.2, 2.0, until=0.0) == 3 * h
    assert accelerated_eta(0.0, 10 * h, 0.2, 2.0, until=8 * h) == accelerated_eta(0.0, 10 * h, 0.2, 2.0)
    # Within the speed-up hour the end changes nothing: 1 constant-speed hour takes 0.9161 h.
    assert accelerated_eta(0.0, 1 * h, 0.2, 2.0, until=0.95 * h) == pytest.approx(accelerated_eta(0.0, h, 0.2, 2.0))


def test_fit_carries_the_speed_up_end_into_its_forecast() -> None:
    """Two stations 10 km apart along a front moving west 3420 s apart (2.92 m/s): the forecast 20 km
    beyond the second one with the speed-up ended at the second passage is the constant-speed one."""
    pts = [(0.0, 0.0, 0.0), (-10_000.0, 0.0, 3420.0)]
    prior = Prior(speed_ms=2.0, heading_deg=270.0, speed_rel_sd=1.0, heading_sd_deg=20.0)
    free = fit_front(pts, prior)
    ended = fit_front(pts, prior, accel_until=1710.0)  # the fit's t_ref: the mean passage time
    assert free is not None and ended is not None
    t_acc, t_lin, _ = free.predict(-30_000.0, 0.0)
    e_acc, e_lin, _ = ended.predict(-30_000.0, 0.0)
    assert t_acc < t_lin  # without an end the front speeds up
    assert e_lin == pytest.approx(t_lin)
    assert e_acc == pytest.approx(e_lin)


def test_two_stations_far_along_the_coast_set_the_speed_not_the_prior() -> None:
    """A second station 10 km further inland and 22 km along the coast reports 3420 s after the first
    (2.92 m/s along the shore normal, 270 deg). The prior says 1.07 m/s (a density-current guess
    from a small temperature drop). With the prior's speed sd at its mean (prior.SPEED_REL_SD) the
    fit's speed lies nearer the observed one than the prior's, and the heading stays within the
    prior's 20 deg, rather than keeping the prior's speed by turning the front."""
    from frontwatch.network.prior import HEADING_SD_DEG, SPEED_REL_SD

    pts = [(0.0, 0.0, 0.0), (-10_000.0, 22_000.0, 3420.0)]
    f = fit_front(pts, Prior(speed_ms=1.07, heading_deg=270.0, speed_rel_sd=SPEED_REL_SD,
                             heading_sd_deg=HEADING_SD_DEG))
    assert f is not None and f.used_prior
    assert abs(f.speed_ms - 2.92) < abs(f.speed_ms - 1.07)
    assert abs((f.heading_deg - 270.0 + 180.0) % 360.0 - 180.0) < HEADING_SD_DEG
    # The old, tighter speed prior (0.7) kept the speed nearer the prior's: the case this guards.
    tight = fit_front(pts, Prior(speed_ms=1.07, heading_deg=270.0, speed_rel_sd=0.7, heading_sd_deg=HEADING_SD_DEG))
    assert tight is not None and tight.speed_ms < f.speed_ms


def test_fitted_acceleration_term() -> None:
    """Nine stations on a front moving east whose arrival time is t = q / 2 - 2e-6 q^2 (q metres
    east): it speeds up. The fit finds the quadratic term, reports the speed at the furthest station
    (1 / (0.5 - 4e-6 q_max)) and continues beyond it at that speed (no further speed-up assumed).
    Nine, not fewer: a front line may bend by LINE_ROUGH_M, and with few stations a bend and a
    speed-up look alike (the expected error, not these near-perfect residuals, sets the sd)."""
    pts = []
    ys = [3000, -2000, 2500, -3000, 1000]
    for i in range(9):
        x = 30000.0 * i / 8
        t = x / 2.0 - 2e-6 * x * x + (30.0 if i % 2 else -30.0)
        pts.append((x, float(ys[i % 5]), t))
    f = fit_front(pts)
    assert f is not None and f.curv != 0.0
    assert f.curv == pytest.approx(-2e-6, rel=0.10)
    assert f.speed_ms == pytest.approx(1.0 / (0.5 - 4e-6 * 30000.0), rel=0.05)
    assert f.heading_deg == pytest.approx(90.0, abs=3.0)
    t_end, _ = f.arrival(30000.0, 0.0)
    t_beyond, _ = f.arrival(40000.0, 0.0)
    assert (t_beyond - t_end) == pytest.approx(10000.0 / f.speed_ms, rel=0.05)
    # Without the acceleration (constant speed), no quadratic term is kept.
    g = fit_front([(x, y, x / 2.0 + (30.0 if i % 2 else -30.0)) for i, (x, y, _) in enumerate(pts)])
    assert g is not None and g.curv == 0.0


def test_two_stations_give_the_speed_along_the_prior_heading() -> None:
    """Two stations, the second 6 km further along the prior heading (west) and 5 km along the shore,
    reached 2000 s later: the two-station fit keeps the heading near the shore normal and takes the
    speed from the data, 6000 m / 2000 s = 3 m/s (hand-worked), although the prior says 1 m/s. The
    heading prior is an angle: it is not loosened because the prior's speed is wrong (an earlier
    form scaled it by the prior's slowness and turned this front 16 deg to 2.2 m/s)."""
    f = fit_front([(0.0, 0.0, 0.0), (-6000.0, 5000.0, 2000.0)], Prior(1.0, 270.0, 0.7, 20.0))
    assert f is not None and f.used_prior
    assert f.speed_ms == pytest.approx(3.0, rel=0.10)
    assert abs(f.heading_deg - 270.0) <= 5.0
    # Straight along the heading the data decide nearly alone (the front line's roughness, 1 km
    # against 6 km of separation, leaves the prior a few percent).
    g = fit_front([(0.0, 0.0, 0.0), (-6000.0, 0.0, 2000.0)], Prior(1.0, 270.0, 0.7, 20.0))
    assert g is not None
    assert g.speed_ms == pytest.approx(3.0, rel=0.05) and g.heading_deg == pytest.approx(270.0, abs=0.1)


def test_overdue_counts_from_the_constant_speed_eta() -> None:
    """A front seen at four stations moving west at 2.5 m/s (t = -x / 2.5, exact) and a site 60 km
    west: the assumed speed-up puts the ETA well before the constant-speed one (24000 s). Silence at
    the site's live station past the sped-up ETA is no stall (fronts also keep their speed): the site
    is 'not_expected' (overdue) only past the constant-speed ETA plus the margin."""
    from frontwatch.network.forecast import EXPECTED, NOT_EXPECTED, forecast_for_site
    from frontwatch.network.track import OVERDUE_MIN_S, OVERDUE_SIGMAS, Arrival, Front

    fr = Front(key="f")
    for sid, x, y in (("A", 0.0, 0.0), ("B", -10_000.0, 8000.0), ("C", -20_000.0, -8000.0), ("D", -30_000.0, 0.0)):
        t = -x / 2.5
        fr.arrivals[sid] = Arrival(sid, x, y, t, t + 300.0, 0.9, 270.0, 90.0, 270.0, 2.0, 4.0, 6.0, -2.0, 24.0)
    fr.refit()
    assert fr.fit is not None and fr.basis == "fit"
    eta, eta_lin, sd = fr.fit.predict(-60_000.0, 0.0)
    assert eta_lin == pytest.approx(24_000.0, abs=1.0)
    margin = max(OVERDUE_MIN_S, OVERDUE_SIGMAS * sd)
    assert eta_lin - eta > margin  # the old rule (from the sped-up ETA) would have called it overdue

    def status(now: float) -> str:
        return forecast_for_site("s", -60_000.0, 0.0, fr, now, None, None, station_up=True).status

    assert status(eta + margin + 60.0) == EXPECTED
    assert status(eta_lin + margin - 60.0) == EXPECTED
    assert status(eta_lin + margin + 60.0) == NOT_EXPECTED
