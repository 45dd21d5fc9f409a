"""Decide what a detected change is: breeze front, land breeze, gust front, cold front, wind shift.

Scoring (how strong a change is) happens elsewhere; this module only weighs the physical
signature measured around the change against the look-alikes of DOMAIN.md section 3:
- gust front (Engerer, Stensrud & Coniglio 2008): big temperature drop, pressure jump, strong
  gusts, rain;
- synoptic cold front (Ahrens, Meteorology Today): dewpoint FALLS, wind shift, pressure rise;
- land breeze (Ahrens): night, wind turns offshore, weak;
- breeze front (Miller et al. 2003; Linacre & Geerts 1997): daytime, wind turns into the onshore
  sector, temperature drops against the trend (or stops rising), moisture rises;
- wind shift: a clear turn of a sustained wind that fits none of them (cf. FMH-1's 45 degrees).
A decision may be 'wait': the signature is still forming (e.g. temperature still plunging, which
may yet become a gust front, or a smoothed wind vane not yet turned).
A breeze front on less than a clear onshore turn with clearly marine air (the air alone under a
missing or stuck vane, a halted offshore wind, an already-onshore wind) is a *weak* call: it waits
to persist, and frontwatch/detect/corroborate.py has the network confirm it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..config import DetectorSettings

# Minutes a weak breeze-front candidate must persist before it is called (a cloud shadow's dip lasts
# some 10 to 40 minutes, from memory; 10 keeps the delay of the few weak calls moderate).
WEAK_PERSIST_MIN = 10.0
# Change strength (noise units) from which a channel's own change time is trusted to within
# coherence_min; weaker changes get a wider allowance (see the coherence test). 5 is a judgement,
# set once and not searched.
TIMED_Z = 5.0
# At a front the wind turns first and the marine air reaches the sensors a few minutes later (the
# head's convergence runs ahead of the cold air, and thermometer and hygrometer lag; common practice,
# from memory): a wind change ahead of the air's gets this many times the timing allowance, one behind
# it (the air changing first, as under a cloud) only the allowance. 1.5 is a judgement, not searched.
WIND_LEADS_FACTOR = 1.5
# A light turn (see classify) is accepted with marine air of this many times
# breeze_min_marine_index_c: between a clear turn's 1 and the air-alone paths' 2, since the wind
# still says something. A judgement, set once.
LIGHT_TURN_MARINE = 1.5
# Degrees a wind from the sector's outer half must turn towards the onshore bearing to count as
# turning onshore (edge_turn). A judgement, set once.
EDGE_TURN_DEG = 40.0
# Minutes after its onset at which a clear turn of a sustained wind that fits no other kind is
# called a wind shift; a daytime turn into the onshore sector waits longer for the air to follow
# (up to max_wait_min). Counted from the wind's own change where that is timed. A judgement, set
# once. (Also tried: asking the air that follows a turn after these minutes to show in full, not
# the half a clear turn allows: it lost weak inland fronts of the generated scenarios.)
WIND_SHIFT_MIN = 6.0


@dataclass(frozen=True, slots=True)
class Signature:
    """What was measured around a candidate change (after minus before, drift removed)."""

    strength: float  # change-point strength, noise units
    minutes_after: float  # data minutes since the onset
    local_hour: float
    dir_before: float  # deg from; NaN if calm
    dir_after: float
    speed_before: float
    speed_after: float
    spread_after: float  # circular spread of the recent wind, deg
    turn_deg: float  # smallest angle between before and after directions (NaN if either calm)
    onshore_before: float  # onshore wind component, m/s
    onshore_after: float
    after_offset_deg: float  # |dir_after - onshore bearing|
    change_offset_deg: float  # |direction the added wind (after - before vector) blows from - onshore|
    change_speed: float  # size of that added wind vector, m/s
    before_offset_deg: float
    z_temp: float  # significance of the shift since onset, noise units (negative = cooler)
    z_dewpoint: float
    z_onshore: float
    temp_change: float
    temp_rate: float  # degC/min over the last two minutes (negative = still falling)
    dewpoint_change: float
    pressure_change: float
    pressure_jump: float  # max rise of pressure after onset vs before
    gust_after: float
    rain_after: float
    depression_after: float = float("nan")  # T - Td of the recent air, degC (0 = saturated)
    change_times_min: tuple[float, ...] = ()  # each of T, Td, onshore wind: own change time vs onset
    sample_min: float = 1.0  # the station's reporting interval, minutes (change times come in these steps)
    early_dir: float = float("nan")  # deg from, of the wind 30 to 15 minutes before the onset (NaN: calm)
    early_offset_deg: float = 180.0  # |early_dir - onshore bearing| (180 when calm or unknown)
    peak_speed_after: float = float("nan")  # strongest 3-record mean wind (m/s) since the onset


@dataclass(frozen=True, slots=True)
class Decision:
    kind: str | None  # None: nothing to report
    confidence: float
    wait: bool  # True: not yet decidable, look again next minute
    evidence: float = 0.0  # how strong the signature was (comparable within a kind)
    note: str = ""  # for a non-call: which breeze-front conditions failed (near-miss reports, debugging)
    weak_held: bool = False  # waiting: a weak breeze-front call that holds, waiting to persist
    failed: tuple[str, ...] = ()  # for a non-call: the names of the conditions in `note`, for code to read
    untimed: bool = False  # a breeze front whose channels' changes came apart in time: weak for the network
    onset_shift_min: float = 0.0  # minutes after the candidate's onset that the call is timed at


def _nz(x: float, default: float = 0.0) -> float:
    return default if x != x else x


def _logistic(x: float) -> float:
    return 1.0 / (1.0 + math.exp(-x))


def edge_turn(before_offset_deg: float, after_offset_deg: float, halfwidth: float) -> bool:
    """The wind turned from the outer half of the onshore sector (or beyond) at least EDGE_TURN_DEG
    towards the onshore bearing: a turn onshore even where the wind before was, just, in the sector
    (a sector's edge is a convention; a 10-minute running mean has half turned already)."""
    return before_offset_deg >= 0.5 * halfwidth and before_offset_deg - after_offset_deg >= EDGE_TURN_DEG


def recent_turn(sig: Signature, halfwidth: float) -> bool:
    """The wind turned onshore in the half hour before the air changed: from outside the sector
    (30 to 15 minutes before the onset) to inside it (the 15 minutes before), towards the onshore
    bearing by at least EDGE_TURN_DEG. At a front the wind shift often leads the marine air by
    several minutes (see WIND_LEADS_FACTOR); the passage then began with that turn, and the event
    reports the wind from before it."""
    return sig.before_offset_deg <= halfwidth < sig.early_offset_deg and \
        sig.early_offset_deg - sig.after_offset_deg >= EDGE_TURN_DEG


def classify(sig: Signature, s: DetectorSettings, halfwidth: float, can_wait: bool, averaging: int = 1,
             weak_ok: bool = True, held_weak: bool = False, untimed_ok: bool = False) -> Decision:
    """The kind of change `sig` is (or None: wait, or nothing). `weak_ok` False: a weak breeze-front
    call cannot be confirmed (a network of one station), so none is made; a clear one may follow.
    `held_weak`: this candidate (the same onset) was a weak call waiting to persist at an earlier
    minute (Decision.weak_held). `untimed_ok`: the station is inland of another (see `untimed`)."""
    dT = _nz(sig.temp_change)
    dTd = _nz(sig.dewpoint_change)
    dp = _nz(sig.pressure_jump)
    gust = _nz(sig.gust_after)
    rain = _nz(sig.rain_after)
    rate = _nz(sig.temp_rate)
    has_moist = sig.dewpoint_change == sig.dewpoint_change
    # Near saturation the dewpoint cannot rise past the falling temperature: marine air that arrives
    # saturated shows as a vanishing dewpoint depression instead (common practice).
    saturated = sig.depression_after == sig.depression_after and sig.depression_after <= 1.0
    calm_before = not sig.speed_before >= s.calm_ms
    calm_after = not sig.speed_after >= s.calm_ms

    # 1. Convective outflow: the strongest signature wins first.
    gusty = gust >= s.gust_front_gust_ms
    if (dT <= -s.gust_front_temp_drop_c and (gusty or dp >= 0.5 * s.gust_front_pressure_jump_hpa or rain > 0.2)) \
            or (dp >= s.gust_front_pressure_jump_hpa and dT <= -1.5) \
            or (dT <= -s.gust_front_temp_drop_c * 1.3) \
            or (rain >= 1.0 and dT <= -1.5 and (gusty or dp >= 0.5)) \
            or (rain >= 0.2 and dT <= -1.5):  # a rain-cooled outflow, even without gust or pressure data
        conf = _logistic(-dT / s.gust_front_temp_drop_c * 2 + dp + gust / s.gust_front_gust_ms - 1.5)
        return Decision("gust_front", min(0.99, max(0.5, conf)), False)
    # Still plunging, raining or jumping: it may yet turn out a gust front (checked before calling one).
    convective = rate < -0.5 or rain > 0.2 or dp >= 0.6 * s.gust_front_pressure_jump_hpa or gusty
    # Blowing harder than a breeze does (breeze_max_speed_ms): a squall's outflow, no breeze front.
    squall = max(_nz(sig.peak_speed_after), _nz(sig.speed_after)) > s.breeze_max_speed_ms

    turned = (sig.turn_deg == sig.turn_deg and sig.turn_deg >= s.min_shift_deg) or (calm_before and not calm_after)
    daytime = s.day_start_h <= sig.local_hour < s.day_end_h

    # 2. Synoptic cold front: drier air behind a shift, with the pressure rising sharply (DOMAIN.md
    # section 3) or, where that is not seen, colder air too (Ahrens, from memory): a drier wind that
    # is not cooler is the morning's mixing-out of moisture or a dry downdraft as often. The cooling
    # may lag the shift and the drying: while the candidate may wait, it waits for it.
    if has_moist and dTd <= -s.cold_front_dewpoint_fall_c and \
            (turned or dp >= 0.8) and not saturated and \
            not (not daytime and sig.after_offset_deg > 180 - halfwidth and sig.speed_after <= s.land_breeze_max_ms
                 and dTd > -2 * s.cold_front_dewpoint_fall_c and dp < 0.8):
        if dT <= -s.cold_front_temp_drop_c or dp >= 0.8:
            conf = _logistic(-dTd / s.cold_front_dewpoint_fall_c + dp - 0.5)
            return Decision("cold_front", min(0.99, max(0.5, conf)), False)
        if can_wait:
            return Decision(None, 0.0, True, 0.0, "cold front? drier, not yet colder: waiting")

    settled = sig.spread_after <= 60.0 and not calm_after

    # 3. Land breeze: outside the day window, the wind turns offshore and stays weak.
    offshore_after = sig.after_offset_deg >= 180.0 - halfwidth
    offshore_before = sig.before_offset_deg >= 180.0 - halfwidth and not calm_before
    if not daytime and offshore_after and not offshore_before and settled and sig.speed_after <= s.land_breeze_max_ms and \
            (turned or sig.onshore_after - sig.onshore_before <= -1.0):
        conf = _logistic((sig.after_offset_deg - (180.0 - halfwidth)) / 20.0 + sig.strength / 10.0 - 0.5)
        return Decision("land_breeze", min(0.98, max(0.5, conf)), False)

    # 4. Breeze front: daytime, the wind comes into the onshore sector from outside it (or from calm),
    # and marine air arrives: cooler against the trend and moister (DOMAIN.md section 2). The
    # 'marine index' -dT + dTd (degC) weighs both; moisture must rise where it is measured, since
    # a cloud shadow cools without moistening (common practice).
    onshore_after = sig.after_offset_deg <= halfwidth and _nz(sig.onshore_after) >= 1.0
    # Early in a turn the latest wind may still be short of the sector while the change itself
    # already blows from the water: the added wind vector points onshore and brings >= 1 m/s of it.
    # The latest wind must itself already carry some onshore flow: a slackening offshore wind also adds
    # an 'onshore' vector, but it still blows from the land.
    turning_onshore = sig.change_offset_deg <= 0.75 * halfwidth and sig.change_speed >= 1.5 and \
        _nz(sig.onshore_after) - _nz(sig.onshore_before) >= 1.0 and _nz(sig.onshore_after) >= 1.0 and \
        sig.after_offset_deg <= halfwidth + 20.0 and sig.before_offset_deg - sig.after_offset_deg >= 30.0
    # From outside the sector or from calm: an onshore wind that merely freshens is no front
    # (an onshore synoptic wind leaves no distinct front; Arritt 1993, from memory).
    came_onshore = calm_before or sig.before_offset_deg > halfwidth
    dry_measure = not has_moist or (saturated and dTd > -2.0)
    marine = -2.0 * dT if dry_measure else -dT + dTd
    # A clear onshore turn is itself strong evidence of the front: then the marine air need only
    # have begun to show (half the usual magnitudes), as long as each shift is beyond the noise.
    clear_turn = came_onshore and sig.before_offset_deg - sig.after_offset_deg >= 60.0 and sig.z_onshore >= 4.0
    f = 0.5 if clear_turn else 1.0
    thermal = marine >= f * s.breeze_min_marine_index_c and dT <= 0.1 and \
        (dT <= -f * s.breeze_min_temp_drop_c if dry_measure else dTd >= f * s.breeze_min_moisture_rise_c)
    # Evidence: the three shifts' significance since onset, each capped so one channel cannot carry it.
    evidence = min(6.0, max(0.0, -sig.z_temp)) * (2.0 if dry_measure else 1.0) + \
        (0.0 if dry_measure else min(6.0, max(0.0, sig.z_dewpoint))) + min(6.0, max(0.0, sig.z_onshore))
    # A front changes everything at once; a cloud shadow, a moisture drift and a wind wobble that
    # happen to overlap change at different times. The vane of a running-mean station lags by
    # about half its averaging time.
    times = sig.change_times_min
    # Which shifts are beyond the noise, in the marine direction: cooler, moister, more onshore.
    sig_t = sig.z_temp <= -2.0
    sig_d = (not dry_measure) and sig.z_dewpoint >= 2.0
    coherent = sig_t or sig_d
    if coherent and len(times) == 3:
        # A change barely beyond the noise cannot be timed closely: the change-point estimate of a
        # mean shift scatters in proportion to (sigma/delta)^2, i.e. to 1/z^2 for a given window
        # (Hinkley 1970, Biometrika 57). Each channel's allowance widens by (TIMED_Z / |z|)^2 below
        # TIMED_Z, the strength from which a change is taken as timed to within coherence_min.
        # Change times come in whole reporting intervals: a station reporting every 10 minutes
        # cannot show two channels changing closer than one interval apart.
        step = 1.5 * sig.sample_min

        def allow(z: float) -> float:
            return max(s.coherence_min * max(1.0, (TIMED_Z / max(abs(z), 1e-9)) ** 2), step)
        lag = 0.5 * max(0, averaging - 1)
        zs = (sig.z_temp, sig.z_dewpoint, sig.z_onshore)
        idx = [i for i, ok in ((0, sig_t), (1, sig_d)) if ok]
        def fits(i: int, j: int, lead: bool, slack: float = 0.0) -> bool:  # channel i's change time vs j's
            return abs(times[j] - times[i]) <= max(allow(zs[j]), allow(zs[i])) * (WIND_LEADS_FACTOR if lead else 1.0) \
                + slack
        # The temperature's own change time is taken against the drift extrapolated from before it:
        # where the warming levels off in the minutes before the front, it comes early. With the
        # moisture and the wind changing together (marine air, which no cloud shadow brings), the
        # temperature may lead them by as much as the wind may lead the air.
        wind_t = sig.z_onshore >= 2.0
        t_early = sig_t and sig_d and wind_t and times[0] < min(times[1], times[2]) and \
            fits(1, 2, times[2] < times[1], lag)
        if wind_t:
            coherent = all(fits(i, 2, times[2] < times[i] or (i == 0 and t_early), lag) for i in idx)
        if coherent and len(idx) == 2:
            coherent = fits(0, 1, t_early)
    dry = rain < 0.2  # rain at the change means convection, not a breeze front (DOMAIN.md section 3)
    # Where the large-scale wind already blew from the water (a bay's far side), the front shows in
    # the air alone: then a strong, simultaneous cooling and moistening under an onshore wind will do.
    # (Marine air that arrives saturated shows no dewpoint rise beyond the noise, see `saturated`: its
    # vanishing depression stands for the moisture then.)
    moist = sig_d or (has_moist and dry_measure)
    # The wind behind the change has not turned into the land's (offshore) half: calm, or within 90
    # deg of the onshore bearing.
    not_offshore_after = calm_after or sig.after_offset_deg <= 90.0
    # ... also where that onshore wind slackened behind the change to under 1 m/s of onshore flow
    # without turning offshore (a light wind's bearing says little: the air must say it all).
    slackened = not came_onshore and _nz(sig.onshore_after) < 1.0 and sig.speed_after < sig.speed_before - 1.0 \
        and not_offshore_after
    marine_air_only = ((onshore_after and settled) or slackened) and sig_t and moist and \
        marine >= 2.0 * s.breeze_min_marine_index_c
    # Where the vane cannot be read (its wind is missing, or a vane that reports the very same bearing
    # minute after minute while the cups turn: stuck, Zahumensky 2004), the air must say it alone,
    # as strongly as under an already-onshore wind. Not for a running mean, which is steady anyway.
    wind_missing = sig.speed_after != sig.speed_after
    vane_frozen = averaging <= 1 and sig.spread_after < 0.5 and not calm_after  # same bearing to within 1 deg
    air_only = (wind_missing or vane_frozen) and sig_t and moist and marine >= 2.0 * s.breeze_min_marine_index_c
    wind_turned = came_onshore and ((onshore_after and settled) or (turning_onshore and sig.spread_after <= 90.0))
    # Against an opposing offshore wind, the front first halts it: just behind the front the wind may
    # turn alongshore and carry little onshore flow yet. A clear turn out of the offshore half that adds
    # >= 2 m/s of onshore flow at a speed that has not slackened (a slackening offshore wind keeps its
    # bearing) is that, but it too is a weak call that the network must confirm (corroborate.py). Not
    # for a running-mean vane: just behind the front its reading is a blend of the old and new wind.
    # (both this and the light turn below: a clear turn, beyond the noise, out of the offshore half)
    offshore_turn = came_onshore and not calm_after and sig.before_offset_deg > 90.0 and \
        sig.before_offset_deg - sig.after_offset_deg >= 60.0 and sig.z_onshore >= 4.0
    halted_offshore = averaging <= 1 and offshore_turn and sig.after_offset_deg <= 90.0 and \
        _nz(sig.onshore_after) - _nz(sig.onshore_before) >= 2.0 and sig.speed_after >= 1.5 and settled
    # A light breeze behind a weak front: the wind turns out of the offshore half into the sector but
    # carries under 1 m/s of onshore flow (0.5 at least), with clearly marine air. A weak call too:
    # under 1 m/s of onshore flow marks it so for the network (corroborate.is_weak).
    light_air = sig_t and moist and marine >= LIGHT_TURN_MARINE * s.breeze_min_marine_index_c
    light_turn = offshore_turn and sig.after_offset_deg <= halfwidth and 0.5 <= _nz(sig.onshore_after) < 1.0 and \
        light_air
    # A weak call that held while it waited to persist, whose wind has since died to calm behind a
    # halting front (a light breeze stilled against the opposing wind), has persisted as long as its
    # marine air does: a calm wind has not turned back offshore. Still a weak call.
    stilled = held_weak and calm_after and light_air
    # A weak call on a turn out of the offshore half that held through the whole decision window (it
    # can wait no longer) has persisted as long as its marine air does (moister beyond the noise)
    # and its wind has not turned back into the offshore half. At a lone station (no network to
    # confirm it) this is the only weak call made: not on the air alone, nor under a wind that was
    # onshore already (see `weak` below).
    persisted = held_weak and not can_wait and light_air and sig_d and not wind_missing and \
        sig.speed_before == sig.speed_before and sig.before_offset_deg > 90.0 and \
        not_offshore_after
    wind_ok = wind_turned or marine_air_only or air_only or halted_offshore or light_turn or stilled or persisted
    # A call on less than a clear turn and clearly marine air is weak: corroborate.py recognises it
    # by the same marks in the event and asks the network. Its evidence counts half, so that a clear
    # front soon after is not taken for the same regime going on. Marine air under a wind that was
    # already onshore is weak too, at the shore as inland (an onshore large-scale wind leaves no
    # distinct front, Arritt 1993; a shower's outflow nearby or a moist surge look the same), unless
    # the wind swung in from the edge of the sector towards its middle (edge_turn) or turned onshore
    # in the half hour before the air changed (recent_turn).
    turned_in = edge_turn(sig.before_offset_deg, sig.after_offset_deg, halfwidth) or recent_turn(sig, halfwidth)
    weak = not ((wind_turned or (marine_air_only and turned_in)) and thermal)
    # Channels beyond the noise whose changes came apart in time: a weak front's change points
    # scatter (Hinkley 1970, above) and its air may trail the wind; a look-alike's too. At an inland
    # station of a network (`untimed_ok`: one nearer the water may have seen the front first), once
    # the candidate can wait no longer (a clear signature formed meanwhile wins), a weak call that
    # the network must confirm. Not at the shore, where the front is strongest and a clear call is
    # the rule: there it pre-empted clear calls a few minutes later (docs/tuning.md, stop 15).
    untimed = untimed_ok and not can_wait and not coherent and weak_ok and (sig_t or sig_d)
    # ... timed by the latest of its significant channels: the passage is when all have changed
    late_min = 0.0
    if untimed and len(times) == 3:
        sig_ch = [i for i, ok in ((0, sig_t), (1, sig_d), (2, sig.z_onshore >= 2.0)) if ok]
        late_min = max(0.0, *(times[i] for i in sig_ch))
    weak = weak or untimed
    failed = [name for name, ok in (("daytime", daytime), ("thermal", thermal), ("coherent", coherent or untimed),
                                    ("wind", wind_ok), ("evidence", evidence >= s.breeze_min_evidence), ("dry", dry),
                                    ("breeze-strength", not squall),
                                    ("confirmable", weak_ok or not weak or persisted)) if not ok]
    if not failed and convective and can_wait:
        return Decision(None, 0.0, True, evidence, "breeze front? convective signs: waiting for a gust front")
    if can_wait and not weak_ok and failed == ["confirmable"]:
        # A lone station's weak call: remembered while it holds, made only if it persists (above).
        return Decision(None, 0.0, True, evidence, "breeze front? not confirmable (alone): waiting for it to persist", True)
    if not failed and weak and can_wait and sig.minutes_after < WEAK_PERSIST_MIN:
        # A weak call waits until the change has persisted: by then a clear signature may have formed
        # (a strong call instead, which a hasty weak one would have blocked), or a passing cloud's
        # cooling begun to recover.
        return Decision(None, 0.0, True, evidence, "breeze front? weak: waiting for it to persist", True)
    if not failed:
        margin = marine / s.breeze_min_marine_index_c + (halfwidth - sig.after_offset_deg) / halfwidth \
            + evidence / s.breeze_min_evidence
        return Decision("breeze_front", min(0.99, max(0.5, _logistic(margin - 2.0))), False,
                        0.5 * evidence if weak and not untimed else evidence,
                        "weak: needs the network" if weak else "", untimed=untimed,
                        onset_shift_min=late_min)
    note = "breeze front? not " + ", ".join(failed)
    # Waiting costs a full evaluation a minute, so wait only while the wind is moving onshore
    # (or is a running mean that lags): a thermal change alone, like a cloud shadow, is not a front.
    wind_moving = sig.z_onshore >= 1.0 or averaging > 1 or calm_before
    if daytime and thermal and can_wait and wind_moving:
        # The right kind of air but the wind or the evidence is not there yet (a smoothed vane, a
        # turn in progress, a weak change that must persist): look again next minute.
        return Decision(None, 0.0, True, evidence, note, failed=tuple(failed))

    # 5. A clear turn of a sustained wind that fits no other kind.
    sustained = sig.speed_before >= 2.5 and sig.speed_after >= 2.5
    if turned and sustained and sig.turn_deg >= 45.0 and settled:
        # At a front the wind often turns first and the marine air reaches the sensors minutes later
        # (see WIND_LEADS_FACTOR): a daytime turn into the onshore sector is not yet called a mere
        # wind shift while the candidate may still wait (max_wait_min) for the air to follow. A
        # hasty wind shift would hold the station's quiet time over the breeze front that follows.
        # The minutes are the wind's own: where the onshore wind's change is timed (beyond the noise)
        # later than the candidate's onset (an earlier drift of the air set the onset), they count
        # from that change. A turn still in progress is not yet a shift, and may yet bring the air.
        wind_age = sig.minutes_after - max(0.0, times[2]) if len(times) == 3 and sig.z_onshore >= 2.0 \
            else sig.minutes_after
        if can_wait and (wind_age < WIND_SHIFT_MIN or (daytime and wind_turned)):
            return Decision(None, 0.0, True, 0.0, note, failed=tuple(failed))
        conf = _logistic((sig.turn_deg - 45.0) / 30.0 + sig.strength / 10.0 - 1.0)
        return Decision("wind_shift", min(0.95, max(0.4, conf)), False)
    return Decision(None, 0.0, can_wait and sig.minutes_after < 4, 0.0, note, failed=tuple(failed))
