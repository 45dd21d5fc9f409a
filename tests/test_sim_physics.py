"""The generator's labels agree with the physics in its own records (frontwatch.sim).

Each check reads the generated observations around a label and compares with the signatures of
DOMAIN.md: breeze fronts (Miller et al. 2003; Linacre & Geerts 1997), cold fronts (Ahrens),
gust fronts (Engerer et al. 2008), land breezes (Ahrens), density-current speed (Benjamin 1968;
Simpson & Britter 1980). Circular means use scipy.stats.circmean; distances along the front's
heading use pyproj's geodesic (WGS84), independent of the generator's flat-earth geometry.
Scenarios are small (a few stations and days) and fault-free unless a test is about faults.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from pyproj import Geod
from scipy.stats import circmean

from frontwatch.calc.density import density_current_speed
from frontwatch.sim import ScenarioSpec, generate, preset
from frontwatch.timeutil import parse_time

PLAN = ("breeze+land_breeze", "breeze_stall", "cold_front", "breeze+gust_front", "onshore", "offshore_strong")


class Records:
    """Per-station series of a scenario, indexed by epoch seconds."""

    def __init__(self, scenario):
        df = scenario.observations.drop_duplicates(["station", "time"]).copy()
        df["t"] = [parse_time(x) for x in df["time"]]
        df["wind_dir_deg"] = df["wind_dir_deg"].astype(float)
        self.by = {s: g.sort_values("t").set_index("t") for s, g in df.groupby("station")}
        self.onshore = {s["id"]: s["onshore_from_deg"] for s in scenario.network["stations"]}
        self.halfwidth = {s["id"]: s.get("onshore_halfwidth_deg", 70.0) for s in scenario.network["stations"]}

    def win(self, st: str, t: float, a_min: float, b_min: float) -> pd.DataFrame:
        g = self.by[st]
        return g[(g.index >= t + a_min * 60) & (g.index < t + b_min * 60)]

    def mean(self, st, t, a, b, col) -> float:
        return float(self.win(st, t, a, b)[col].mean())

    def direction(self, st, t, a, b) -> float:
        d = self.win(st, t, a, b)["wind_dir_deg"].dropna()
        return float(circmean(d, high=360.0, low=0.0)) if len(d) else math.nan


def rel(a: float, b: float) -> float:
    """Signed angle a - b in (-180, 180]."""
    return (a - b + 180.0) % 360.0 - 180.0


@pytest.fixture(scope="module")
def north():
    sc = generate(ScenarioSpec(seed=11, days=len(PLAN), stations=8, plan=PLAN, fault_rate=0.0))
    return sc, Records(sc)


@pytest.fixture(scope="module")
def south():
    sc = generate(preset("south", seed=5, days=3, stations=6, plan=("breeze", "cold_front", "breeze"), fault_rate=0.0))
    return sc, Records(sc)


def of_kind(sc, kind):
    return [lab for lab in sc.labels if lab["kind"] == kind]


def test_scenario_has_every_labelled_kind(north):
    sc, _ = north
    kinds = {lab["kind"] for lab in sc.labels}
    assert kinds == {"breeze_front", "land_breeze", "cold_front", "gust_front"}


def test_breeze_labels_wind_turns_into_the_station_onshore_sector(north):
    sc, rec = north
    labs = of_kind(sc, "breeze_front")
    assert len(labs) >= 10
    inside, shifted = 0, 0
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        after = rec.direction(st, t, 15, 35)
        before = rec.direction(st, t, -30, -3)
        off_after = abs(rel(after, rec.onshore[st]))
        assert off_after < 90.0, lab  # never blowing from the land after a breeze passage
        inside += off_after <= rec.halfwidth[st]
        shifted += abs(rel(after, before)) >= 35.0
    assert inside >= 0.95 * len(labs)
    assert shifted >= 0.9 * len(labs)


def test_breeze_passages_cool_and_moisten_against_the_trend(north):
    sc, rec = north
    dts, dtds = [], []
    for lab in of_kind(sc, "breeze_front"):
        t, st = parse_time(lab["time"]), lab["station"]
        dts.append(rec.mean(st, t, 10, 25, "temp_c") - rec.mean(st, t, -20, -2, "temp_c"))
        dtds.append(rec.mean(st, t, 10, 25, "dewpoint_c") - rec.mean(st, t, -20, -2, "dewpoint_c"))
    dts, dtds = np.array(dts), np.array(dtds)
    assert (dts < 0).all(), dts  # a drop against the day's warming (DOMAIN.md section 2)
    assert np.median(dts) < -0.5
    assert (dtds > 0).mean() >= 0.95, dtds
    assert np.median(dtds) > 0.5
    assert (dts > -3.5).all() and (dtds < 3.5).all()  # 0.5-3 degC magnitudes, plus noise


def test_breeze_signature_weakens_inland(north):
    sc, _ = north
    d = {s.id: s.shore_km for s in sc.setting.stations}
    for front in sc.fronts:
        labs = [lab for lab in of_kind(sc, "breeze_front") if lab["front"] == front["id"]]
        labs.sort(key=lambda x: d[x["station"]])
        drops = [-lab["change"]["temp_c"] for lab in labs]
        assert drops[0] >= drops[-1]


def test_no_breeze_front_on_onshore_or_strong_offshore_days(north):
    sc, _ = north
    dates = {f["date"] for f in sc.fronts}
    kinds = [d["kind"] for d in sc.days]
    assert len(sc.fronts) == sum(k.split("+")[0] in ("breeze", "breeze_stall") for k in kinds)
    assert "2027-07-16" not in dates and "2027-07-17" not in dates  # onshore, offshore_strong days


def test_cold_front_dewpoint_falls_pressure_rises_wind_veers(north):
    sc, rec = north
    labs = of_kind(sc, "cold_front")
    assert len(labs) == len(sc.setting.stations)
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        assert rec.mean(st, t, 40, 90, "dewpoint_c") - rec.mean(st, t, -40, -5, "dewpoint_c") < -1.0, lab
        p = rec.win(st, t, -30, 10)["pressure_hpa"]
        if p.notna().any():  # some stations have no barometer
            assert rec.mean(st, t, 60, 120, "pressure_hpa") - p.min() > 0.5, lab
        assert rel(rec.direction(st, t, 20, 60), rec.direction(st, t, -60, -10)) > 20.0, lab  # veers (NH)
        assert rec.win(st, t, 0, 60)["wind_gust_ms"].max() > 10.0


def test_cold_front_backs_in_the_south(south):
    sc, rec = south
    labs = of_kind(sc, "cold_front")
    assert labs
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        assert rel(rec.direction(st, t, 20, 60), rec.direction(st, t, -60, -10)) < -20.0, lab
        assert rec.mean(st, t, 40, 90, "dewpoint_c") < rec.mean(st, t, -40, -5, "dewpoint_c")


def test_gust_front_signature(north):
    """Engerer et al. 2008: pressure jump 2-4.5 hPa, temperature drop 5-11 K, strong gusts, rain."""
    sc, rec = north
    labs = of_kind(sc, "gust_front")
    assert labs
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        before = rec.win(st, t, -20, -2)
        after = rec.win(st, t, 0, 30)
        if before["pressure_hpa"].notna().any():
            assert 1.5 < after["pressure_hpa"].max() - before["pressure_hpa"].mean() < 5.5, lab
        assert after["temp_c"].min() - before["temp_c"].mean() < -3.5, lab
        assert after["wind_gust_ms"].max() > 12.0, lab
        rain = rec.win(st, t, 0, 60)["rain_mm"]
        if rain.notna().any():
            assert rain.sum() > 0.0, lab


def test_land_breeze_is_night_offshore_and_weak(north):
    sc, rec = north
    labs = of_kind(sc, "land_breeze")
    assert labs
    off = sc.setting.utc_offset_hours
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        local_h = ((t / 3600.0) + off) % 24.0
        assert local_h >= 20.0 or local_h < 7.0, lab
        assert abs(rel(rec.direction(st, t, 30, 60), rec.onshore[st] + 180.0)) < 70.0, lab
        assert rec.mean(st, t, 30, 60, "wind_speed_ms") < 4.0


def test_arrival_order_follows_distance_along_the_heading(north):
    sc, _ = north
    geod = Geod(ellps="WGS84")
    pos = {s["id"]: (s["lat"], s["lon"]) for s in sc.network["stations"]}
    checked = 0
    for front in sc.fronts:
        o = front["origin"]
        labs = [lab for lab in sc.labels if lab.get("front") == front["id"]]
        checked += len(labs) >= 3
        proj = []
        for lab in labs:
            lat, lon = pos[lab["station"]]
            az, _, dist = geod.inv(o["lon"], o["lat"], lon, lat)
            proj.append(dist / 1000.0 * math.cos(math.radians(az - front["heading_deg"])))
        # Labels time the middle of each station's transition; the track is the leading edge.
        times = np.array([parse_time(lab["time"]) - 30.0 * lab["transition_min"] for lab in labs])
        proj = np.array(proj)
        lobe = front["lobes"]["amplitude_km"]
        # A station clearly farther along the heading (beyond the lobes of the line) is reached later.
        for i in range(len(labs)):
            for j in range(len(labs)):
                if proj[j] - proj[i] > 2 * lobe + 0.2:
                    assert times[j] > times[i], (front["id"], labs[i]["station"], labs[j]["station"])
        # ... and the track (distance travelled by time) puts the front at each station when labelled.
        tt = [parse_time(p["time"]) for p in front["track"]]
        dd = [p["distance_km"] for p in front["track"]]
        for x, t in zip(proj, times, strict=True):
            assert abs(np.interp(t, tt, dd) - x) < lobe + 0.3
        # Sites: the stated arrival is where the track reaches them; null only if it never does.
        for site in sc.network["sites"]:
            az, _, dist = geod.inv(o["lon"], o["lat"], site["lon"], site["lat"])
            x = dist / 1000.0 * math.cos(math.radians(az - front["heading_deg"]))
            eta = front["site_arrivals"][site["id"]]
            if eta is None:
                assert max(dd) < x + lobe + 0.3
            else:
                assert abs(np.interp(parse_time(eta), tt, dd) - x) < lobe + 0.3
    assert checked >= 2


def test_front_speed_is_a_density_current_slowed_by_opposing_wind(north):
    sc, _ = north
    for front in sc.fronts:
        m = front["speed_model"]
        u = density_current_speed(m["dtheta_k"], 300.0, m["depth_m"], k=m["k"])  # Benjamin 1968
        assert m["density_current_ms"] == pytest.approx(u, rel=1e-5)
        late = min(6.0, max(1.0, u - 0.6 * m["opposing_wind_ms"]))  # Simpson & Britter 1980
        assert m["late_ms"] == pytest.approx(late, abs=1e-5)
        speeds = [p["speed_ms"] for p in front["track"]]
        assert max(speeds) <= 6.0 + 1e-9 and min(speeds) >= 0.0
        if front["stall_km"] is None:  # speeds up through the day (Linacre & Geerts 1997)
            assert np.all(np.diff(speeds) >= -1e-9) and speeds[-1] > speeds[0]


def test_stalled_front_never_reaches_the_far_stations(north):
    sc, _ = north
    stalled = [f for f in sc.fronts if f["stall_km"] is not None]
    assert stalled
    for f in stalled:
        far = [s for s, d in f["station_distance_km"].items() if d > f["stall_km"]]
        assert far
        assert all(f["station_arrivals"][s] is None for s in far)
        assert max(p["distance_km"] for p in f["track"]) <= f["stall_km"]
        reached = {lab["station"] for lab in sc.labels if lab.get("front") == f["id"]}
        assert reached == {s for s, a in f["station_arrivals"].items() if a is not None}


def _turn_after_onset(sc, rec) -> list[float]:
    out = []
    for lab in of_kind(sc, "breeze_front"):
        t, st = parse_time(lab["time"]), lab["station"]
        if len(rec.win(st, t, 0, 180)) < 170:
            continue
        out.append(rel(rec.direction(st, t, 130, 170), rec.direction(st, t, 15, 55)))
    return out


def test_onshore_wind_veers_in_the_north_and_backs_in_the_south(north, south):
    n_turns = _turn_after_onset(*north)
    s_turns = _turn_after_onset(*south)
    assert len(n_turns) >= 3 and len(s_turns) >= 3
    assert np.mean(n_turns) > 3.0
    assert np.mean(s_turns) < -3.0
    assert all(s["lat"] < 0 for s in south[0].network["stations"])


def test_curved_shore_stations_face_different_ways_and_get_their_own_onshore_wind():
    sc = generate(preset("curved", seed=3, days=2, stations=7, plan=("breeze",), fault_rate=0.0))
    rec = Records(sc)
    facing = [s["onshore_from_deg"] for s in sc.network["stations"]]
    spread = max(abs(rel(a, b)) for a in facing for b in facing)
    assert spread > 60.0
    labs = of_kind(sc, "breeze_front")
    assert len(labs) >= 4
    for lab in labs:
        t, st = parse_time(lab["time"]), lab["station"]
        assert abs(rel(rec.direction(st, t, 15, 35), rec.onshore[st])) <= rec.halfwidth[st], lab


def test_smeared_stations_report_a_running_mean_wind():
    sc = generate(preset("smeared", seed=2, days=1, stations=6, plan=("breeze",), fault_rate=0.0))
    smeared = {s["id"] for s in sc.network["stations"] if s.get("wind_averaging_min") == 10}
    assert 1 <= len(smeared) < 6
    rec = Records(sc)

    def roughness(st):
        d = rec.by[st]["wind_dir_deg"].dropna().to_numpy()
        return np.std([rel(a, b) for a, b in zip(d[1:], d[:-1], strict=True)])

    r_s = np.mean([roughness(s) for s in smeared])
    r_o = np.mean([roughness(s) for s in rec.by if s not in smeared])
    assert r_s < 0.5 * r_o
    blind = generate(preset("smeared", seed=2, days=1, stations=6, plan=("breeze",), fault_rate=0.0,
                            declare_averaging=False))
    assert not any("wind_averaging_min" in s for s in blind.network["stations"])
    pd.testing.assert_frame_equal(blind.observations, sc.observations)


def test_noise_scale_two_doubles_the_minute_to_minute_noise():
    kw = {"seed": 9, "days": 1, "stations": 4, "plan": ("overcast",), "fault_rate": 0.0}
    quiet = Records(generate(ScenarioSpec(**kw)))
    noisy = Records(generate(ScenarioSpec(noise_scale=2.0, **kw)))

    def jitter(rec):  # minute-to-minute change of the east wind component (turbulence + sensor)
        out = []
        for g in rec.by.values():
            u = -g["wind_speed_ms"] * np.sin(np.radians(g["wind_dir_deg"].fillna(0.0)))
            out.append(np.std(np.diff(u.to_numpy())))
        return np.mean(out)

    ratio = jitter(noisy) / jitter(quiet)
    assert 1.5 < ratio < 2.6, ratio


def test_weak_inland_variant_fades_faster():
    kw = {"seed": 12, "days": 1, "stations": 8, "plan": ("breeze",), "fault_rate": 0.0}
    ordinary, weak = generate(ScenarioSpec(**kw)), generate(ScenarioSpec(weak_inland=True, **kw))
    d = {s.id: s.shore_km for s in ordinary.setting.stations}

    def far_over_near(sc):
        labs = sorted(of_kind(sc, "breeze_front"), key=lambda x: d[x["station"]])
        assert len(labs) >= 4
        return labs[-1]["change"]["temp_c"] / labs[0]["change"]["temp_c"], d[labs[-1]["station"]]

    r_ord, far_ord = far_over_near(ordinary)
    r_weak, far_weak = far_over_near(weak)
    assert far_ord > 15 and far_weak > 15
    assert r_weak < r_ord
    assert r_weak < 0.5


def test_sensor_noise_can_be_doubled_apart_from_the_air_turbulence():
    """`noisy_sensors` doubles the sensors' own white noise only: the wind (turbulence, gusts) is
    the ordinary preset's to the bit, the temperature and dewpoint differ by little, and the
    `noisy` preset's harsher doubling (the air's wander too) moves them much more."""
    kw = dict(seed=12, days=2, stations=4, weak_inland=True)
    ordinary = generate(preset("ordinary", **kw)).observations
    sensors = generate(preset("noisy_sensors", **{k: v for k, v in kw.items() if k != "weak_inland"})).observations
    both = generate(preset("noisy", **{k: v for k, v in kw.items() if k != "weak_inland"})).observations
    for c in ("wind_dir_deg", "wind_speed_ms", "wind_gust_ms"):
        pd.testing.assert_series_equal(ordinary[c], sensors[c])
    for c in ("temp_c", "dewpoint_c"):
        d_sensors = float((sensors[c] - ordinary[c]).abs().mean())
        d_both = float((both[c] - ordinary[c]).abs().mean())
        assert 0.0 < d_sensors < 0.1 and d_both > 2 * d_sensors, (c, d_sensors, d_both)
