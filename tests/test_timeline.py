"""Tests of the expansion of plans into time samples."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft_to_mmhg
from altox.plan.profile import load_plan, load_plan_text, plan_from_data
from altox.plan.timeline import (OXYGEN_ALL, OXYGEN_CREW, OXYGEN_NONE, OXYGEN_PATIENT, Timeline,
                                 expand)
from altox.units import M_PER_FT, PA_PER_MMHG, PA_PER_PSI

ROOT = Path(__file__).resolve().parents[1]
PROFILES = sorted((ROOT / "profiles").glob("*.yaml"))
ARRAYS = ("time_h", "duration_h", "leg", "altitude_m", "aircraft_altitude_m", "pb_mmhg",
          "sleeping", "oxygen", "cabin_pressure_altitude_ft")


def demo(name):
    return load_plan(ROOT / "profiles" / f"{name}.yaml")


@pytest.fixture(scope="module")
def timelines():
    return {p.stem: (load_plan(p), expand(load_plan(p))) for p in PROFILES}


def check_shape(plan, tl: Timeline):
    n = len(tl)
    assert n > 0
    for name in ARRAYS:
        arr = getattr(tl, name)
        assert arr.shape == (n,), name
        if arr.dtype.kind == "f":
            assert np.all(np.isfinite(arr)), name
    assert tl.kind == plan.kind
    assert np.all(tl.duration_h > 0)
    assert tl.time_h[0] == 0.0
    np.testing.assert_allclose(tl.time_h[1:], tl.end_h[:-1], atol=1e-9)
    assert tl.total_duration_h == pytest.approx(plan.total_duration_h, abs=1e-9)
    assert np.all(tl.duration_h <= plan.sample_every_h + 1e-9)
    assert np.all(np.diff(tl.leg) >= 0)
    n_legs = len(plan.days) if plan.kind == "expedition" else len(plan.legs)
    assert len(tl.leg_labels) == n_legs
    assert set(np.unique(tl.leg)) == set(range(n_legs))


# -- every demo ------------------------------------------------------------------------------------
@pytest.mark.parametrize("path", PROFILES, ids=lambda p: p.name)
def test_durations_sum_to_plan_length(path, timelines):
    plan, tl = timelines[path.stem]
    check_shape(plan, tl)
    for i in range(len(tl.leg_labels)):
        length = 24.0 if plan.kind == "expedition" else plan.legs[i].duration_h
        assert tl.duration_h[tl.of_leg(i)].sum() == pytest.approx(length)


def test_arrays_are_read_only(timelines):
    _, tl = timelines["jet-highcruise"]
    with pytest.raises(ValueError):
        tl.altitude_m[0] = 0.0


# -- flights -----------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["jet-highcruise", "piston-ridge-crossing", "medevac-transfer"])
def test_climbs_and_descents_are_monotone(name, timelines):
    plan, tl = timelines[name]
    for i, leg in enumerate(plan.legs):
        alt = tl.aircraft_altitude_m[tl.of_leg(i)]
        if leg.phase == "climb":
            assert np.all(np.diff(alt) > 0)
        elif leg.phase == "descent":
            assert np.all(np.diff(alt) < 0)
        else:
            np.testing.assert_allclose(alt, alt[0], atol=1e-6)


def test_ground_legs_at_field_elevation(timelines):
    plan, tl = timelines["jet-highcruise"]
    first, last = tl.of_leg(0), tl.of_leg(len(plan.legs) - 1)
    to_ft = 1 / M_PER_FT
    np.testing.assert_allclose(tl.cabin_pressure_altitude_ft[first], 1120.0, atol=1.0)
    np.testing.assert_allclose(tl.cabin_pressure_altitude_ft[last], 35.0, atol=1.0)
    # geometric ISA altitude of a pressure altitude is a little above it
    assert np.all(tl.aircraft_altitude_m[first] * to_ft >= 1120.0)


def outside_pressure(tl):
    return np.asarray(barometric_pressure(tl.aircraft_altitude_m, "isa"))


def test_pressurized_cabin_schedule(timelines):
    plan, tl = timelines["jet-highcruise"]
    ac = plan.aircraft
    p_out = outside_pressure(tl)
    p_max_cab = pressure_altitude_ft_to_mmhg(ac.max_cabin_altitude_ft)
    differential = tl.pb_mmhg - p_out
    assert np.all(differential <= ac.max_differential_mmhg + 1e-6)
    assert np.all(differential >= -1e-6)
    allows = p_out + ac.max_differential_mmhg >= p_max_cab
    assert allows.all()  # 8.9 psi is enough at FL410
    assert np.all(tl.cabin_pressure_altitude_ft[allows] <= ac.max_cabin_altitude_ft + 1.0)
    cruise = tl.of_leg(4)
    np.testing.assert_allclose(tl.cabin_pressure_altitude_ft[cruise], 8000.0, atol=1.0)
    assert 2000 < tl.altitude_m[cruise].min() < 2500   # cabin as geometric altitude
    assert tl.aircraft_altitude_m[cruise].min() > 12000


def test_cabin_rises_when_the_differential_runs_out():
    plan = load_plan_text(
        "kind: flight\nname: low diff\ndeparture_elevation: 0 ft\nsample_every: 1 min\n"
        "aircraft: {type: invented, pressurized: true, max_differential: 3.5 psi}\n"
        "legs:\n  - {phase: climb, duration: 30 min, altitude: FL350}\n"
        "  - {phase: cruise, duration: 30 min}\n")
    tl = expand(plan)
    p_out = outside_pressure(tl)
    diff_psi = (tl.pb_mmhg - p_out) * PA_PER_MMHG / PA_PER_PSI
    assert diff_psi.max() == pytest.approx(3.5, rel=1e-6)
    assert np.all(diff_psi <= 3.5 + 1e-9)
    p_max_cab = pressure_altitude_ft_to_mmhg(8000.0)
    allows = p_out + plan.aircraft.max_differential_mmhg >= p_max_cab
    assert (~allows).any() and allows.any()
    assert np.all(tl.cabin_pressure_altitude_ft[allows] <= 8000.0 + 1.0)
    assert np.all(tl.cabin_pressure_altitude_ft[~allows] > 8000.0)
    assert np.all(np.diff(tl.cabin_pressure_altitude_ft[tl.of_leg(0)]) >= -1e-6)


def test_unpressurized_cabin_is_aircraft_altitude(timelines):
    _, tl = timelines["piston-ridge-crossing"]
    np.testing.assert_allclose(tl.altitude_m, tl.aircraft_altitude_m, atol=1e-6)
    np.testing.assert_allclose(tl.pb_mmhg, outside_pressure(tl), rtol=1e-9)
    high = tl.cabin_pressure_altitude_ft >= 13500 - 1
    assert 45 / 60 <= tl.duration_h[high].sum() <= 55 / 60


def test_stated_cabin_overrides_schedule(timelines):
    plan, tl = timelines["medevac-transfer"]
    p_out = outside_pressure(tl)
    cruise = tl.of_leg(2)
    np.testing.assert_allclose(tl.cabin_pressure_altitude_ft[cruise], 5000.0, atol=1.0)
    # below the stated cabin altitude the cabin is at the aircraft's altitude
    assert np.all(tl.pb_mmhg >= p_out - 1e-9)
    assert np.all(tl.cabin_pressure_altitude_ft <= 5000.0 + 1.0)
    assert np.all((tl.pb_mmhg - p_out) <= plan.aircraft.max_differential_mmhg + 1e-6)


def test_flight_oxygen_codes(timelines):
    _, tl = timelines["medevac-transfer"]
    assert set(np.unique(tl.oxygen[tl.of_leg(2)])) == {OXYGEN_PATIENT}
    assert set(np.unique(tl.oxygen[tl.of_leg(0)])) == {OXYGEN_NONE}
    _, tl = timelines["piston-ridge-crossing"]
    assert set(np.unique(tl.oxygen[tl.of_leg(4)])) == {OXYGEN_CREW}
    assert not tl.sleeping.any()


def test_flight_labels(timelines):
    _, tl = timelines["jet-highcruise"]
    assert tl.leg_labels[1] == "Leg 2 climb to FL370"
    assert tl.leg_labels[4] == "Leg 5 cruise FL410"
    _, tl = timelines["piston-ridge-crossing"]
    assert tl.leg_labels[2] == "Leg 3 cruise 13,500 ft"


def test_sampling_grid(timelines):
    _, tl = timelines["jet-highcruise"]
    # samples start on the 5-minute grid or at a leg boundary
    ends = np.cumsum([12, 22, 60, 6, 95, 26, 6]) / 60.0
    on_grid = np.isclose((tl.time_h * 12) % 1, 0, atol=1e-9) | np.isclose((tl.time_h * 12) % 1, 1)
    at_cut = np.isin(np.round(tl.time_h, 9), np.round(ends, 9))
    assert np.all(on_grid | at_cut)


# -- expeditions -------------------------------------------------------------------------------------
def test_sleeping_flags_cover_nights(timelines):
    plan, tl = timelines["trek-teskavor"]
    clock = np.round(tl.time_h % 24.0, 9)
    night = (clock >= 22.0) | (clock < 6.0)
    np.testing.assert_array_equal(tl.sleeping, night)
    assert tl.duration_h[tl.sleeping].sum() == pytest.approx(8.0 * len(plan.days))
    for i, day in enumerate(plan.days):
        mask = tl.of_leg(i)
        evening = mask & (clock >= 22.0)
        early = mask & (clock < 6.0)
        np.testing.assert_allclose(tl.altitude_m[evening], day.sleep_m)
        before = plan.start_altitude_m if i == 0 else plan.days[i - 1].sleep_m
        np.testing.assert_allclose(tl.altitude_m[early], before)


def test_high_point_hours(timelines):
    plan, tl = timelines["trek-teskavor"]
    for i, day in enumerate(plan.days):
        mask = tl.of_leg(i)
        if day.high_m is None:
            continue
        at_high = mask & np.isclose(tl.altitude_m, day.high_m)
        assert tl.duration_h[at_high].sum() == pytest.approx(day.hours_high_h)
        starts = tl.time_h[at_high] % 24.0
        assert starts.min() == pytest.approx(14.0 - day.hours_high_h / 2)
    summit = tl.altitude_m.max()
    assert summit == pytest.approx(6112.0)
    assert tl.leg_labels[11] == "Day 12 climb to 4,980 m (high 6,112 m)"


def test_expedition_pressure(timelines):
    plan, tl = timelines["trek-teskavor"]
    np.testing.assert_allclose(tl.aircraft_altitude_m, tl.altitude_m)
    np.testing.assert_allclose(tl.cabin_pressure_altitude_ft, tl.altitude_m / M_PER_FT)
    base_camp = np.isclose(tl.altitude_m, 4980.0)
    assert base_camp.any()
    np.testing.assert_allclose(tl.pb_mmhg[base_camp], 418.0)  # the measured pressure
    other = np.isclose(tl.altitude_m, 3700.0)
    np.testing.assert_allclose(tl.pb_mmhg[other], barometric_pressure(3700.0, "mountain"))
    assert np.all(np.diff(tl.pb_mmhg[np.argsort(tl.altitude_m)]) <= 1e-9)


def test_expedition_day_atmosphere_and_oxygen():
    plan = load_plan_text(
        "kind: expedition\nname: o\nstart_altitude: 3,000 m\nsample_every: 30 min\ndays:\n"
        "  - {day: 1, sleep: 3500 m, oxygen: {flow: 2 L/min, when: sleep}}\n"
        "  - {day: 2, sleep: 3500 m, atmosphere: isa, high: 4000 m, hours_high: 2 h,\n"
        "     oxygen: {flow: 3 L/min, when: climb}}\n"
        "  - {day: 3, sleep: 3500 m, oxygen: {fio2: 26 %}}\n")
    tl = expand(plan)
    check_shape(plan, tl)
    t = tl.time_h
    on = tl.oxygen == OXYGEN_ALL
    # day 1 oxygen at night: 22:00 day 1 to 06:00 day 2
    np.testing.assert_array_equal(on[(t >= 22) & (t < 30)], True)
    assert not on[t < 22].any()
    # day 2 oxygen at the high point only: 13:00-15:00
    np.testing.assert_array_equal(on[(t >= 37) & (t < 39)], True)
    assert not on[(t >= 30) & (t < 37)].any() and not on[(t >= 39) & (t < 48)].any()
    # day 3 'all': from 06:00 day 3 through the night after it
    np.testing.assert_array_equal(on[t >= 54], True)
    day2_high = (t >= 37) & (t < 39)
    np.testing.assert_allclose(tl.pb_mmhg[day2_high], barometric_pressure(4000.0, "isa"))
    # the night after day 2 is at day 2's site, in its atmosphere
    np.testing.assert_allclose(tl.pb_mmhg[(t >= 46) & (t < 54)], barometric_pressure(3500.0, "isa"))
    np.testing.assert_allclose(tl.pb_mmhg[(t >= 70) & (t < 72)], barometric_pressure(3500.0, "mountain"))


def test_hours_high_fills_the_waking_day():
    plan = load_plan_text("kind: expedition\nname: w\nstart_altitude: 100 m\n"
                          "days: [{day: 1, sleep: 2000 m, high: 2500 m, hours_high: 16 h}]\n")
    tl = expand(plan)
    check_shape(plan, tl)
    awake = ~tl.sleeping
    np.testing.assert_allclose(tl.altitude_m[awake], 2500.0)


def test_expand_rejects_other_objects():
    with pytest.raises(TypeError):
        expand({"kind": "expedition"})


# -- property: random valid expeditions never give NaN -------------------------------------------------
altitudes = st.integers(min_value=-400, max_value=8900)
day_strategy = st.fixed_dictionaries(
    {"sleep": altitudes},
    optional={
        "high": altitudes,
        "hours_high": st.integers(min_value=1, max_value=16 * 60),
        "activity": st.sampled_from(["trek", "climb", "rest", "fly-in", "drive", "descent"]),
        "atmosphere": st.sampled_from(["mountain", "isa"]),
        "oxygen": st.sampled_from(["sleep", "climb", "all"]),
    })


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(start=altitudes, days=st.lists(day_strategy, min_size=1, max_size=12),
       every_min=st.sampled_from([7, 10, 30, 60, 90, 180, 1440]),
       atmosphere=st.sampled_from(["mountain", "isa"]))
def test_random_expeditions_expand_without_nan(start, days, every_min, atmosphere):
    data_days = []
    for i, d in enumerate(days):
        entry = {"day": i + 1, "sleep": f"{d['sleep']:,} m"}
        if "high" in d:
            entry["high"] = f"{d['high']} m"
            if "hours_high" in d:
                entry["hours_high"] = f"{d['hours_high']} min"
        for key in ("activity", "atmosphere"):
            if key in d:
                entry[key] = d[key]
        if "oxygen" in d and (d["oxygen"] != "climb" or "high" in d):  # climb oxygen needs a high point
            entry["oxygen"] = {"flow": "2 L/min", "when": d["oxygen"]}
        data_days.append(entry)
    plan = plan_from_data({"kind": "expedition", "name": "random", "atmosphere": atmosphere,
                           "start_altitude": f"{start} m", "sample_every": f"{every_min} min",
                           "days": data_days})
    tl = expand(plan)
    check_shape(plan, tl)
    assert np.all(tl.pb_mmhg > 200) and np.all(tl.pb_mmhg < 820)
    clock = np.round(tl.time_h % 24.0, 9)
    np.testing.assert_array_equal(tl.sleeping, (clock >= 22.0) | (clock < 6.0))
