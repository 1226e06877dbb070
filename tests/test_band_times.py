"""Exact time in each cabin band: verdicts and minutes that do not depend on the sampling step.

The checks run on the profile cut at the exact times the cabin crosses each threshold
(:func:`altox.plan.timeline.cabin_crossings`).  Held here: (1) every verdict, leg list, message and
minute count is the same at sample_every 10 s, 1 min, 2 min and 10 min, for every demo and for
random plans; (2) the exact times agree with a brute-force 1-second sampling of the same profile
to within one second per leg and threshold (a sample straddles at most one crossing of a
threshold per leg, since the cabin is monotone within a leg); (3) a worked example by hand.
"""

from dataclasses import asdict
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings, strategies as st

from altox.errors import AltoxError
from altox.evaluation.evaluate import guidance_findings
from altox.plan.profile import load_plan, plan_from_data
from altox.guidance import available_rule_sets, load_rule_set
from altox.guidance.checker import in_band
from altox.plan.timeline import cabin_crossings, expand

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))
STEPS_H = (10 / 3600, 1 / 60, 2 / 60, 10 / 60)
AVIATION = [load_rule_set(i) for i in available_rule_sets() if load_rule_set(i).kind == "aviation"]


def _verdicts(plan, rule_sets=None):
    findings, hours = guidance_findings(plan, rule_sets)
    return [asdict(f) for f in findings], hours


def _same_at_every_step(plan, rule_sets=None):
    results = [_verdicts(plan.model_copy(update={"sample_every_h": dt}), rule_sets) for dt in STEPS_H]
    first_f, first_h = results[0]
    for found, hours in results[1:]:
        assert found == first_f
        assert hours == first_h


@pytest.mark.parametrize("demo", DEMOS, ids=[d.stem for d in DEMOS])
def test_demo_verdicts_do_not_depend_on_the_sampling_step(demo):
    _same_at_every_step(load_plan(demo))


def test_piston_demo_counts_the_band_by_hand():
    # Hand calculation (linear climbs and descents in pressure altitude, cabin = aircraft):
    # climb 4,850 -> 13,500 ft in 18 min crosses 12,500 ft at 15.92 min: 2.08 min above;
    # cruise 24 min at 13,500; climb 13,500 -> 14,500 in 4 min: 2.00 min up to 14,000;
    # descent 14,500 -> 6,200 in 20 min: 14,000 -> 12,500 ft takes 1,500/415 = 3.61 min.
    # 2.08 + 24 + 2 + 3.61 = 31.70 min in (12,500, 14,000] ft: more than 30 min, 91.211(a)(1).
    plan = load_plan(ROOT / "profiles" / "piston-ridge-crossing.yaml")
    found, hours = _verdicts(plan)
    a1 = next(f for f in found if f["section"] == "91.211(a)(1)")
    assert a1["status"] == "required-not-planned" and a1["legs"] == [6]
    assert "31.7 min" in a1["message"]
    above_14000_min = 2.0 + 20 * 500 / 8300          # climb above 14,000 + descent to 14,000
    assert hours[14000.0] * 60 == pytest.approx(20 + above_14000_min, abs=1e-9)


# -- random plans --------------------------------------------------------------------------
_NICE_FT = [4_850, 8_000, 10_000, 12_000, 12_500, 13_000, 14_000, 15_000, 25_000, 35_000, 41_000]


@st.composite
def flight_data(draw):
    pressurized = draw(st.booleans())
    top = 45_000 if pressurized else 17_500
    alt = st.one_of(st.sampled_from([a for a in _NICE_FT if a <= top]), st.integers(0, top))
    dep = draw(st.sampled_from([0, 1_000, 4_850, 7_000]))
    legs = [{"phase": "ground", "duration": f"{draw(st.integers(1, 15))} min",
             "oxygen": draw(st.sampled_from(["none", "crew", "all"]))}]
    cur = dep
    for _ in range(draw(st.integers(1, 6))):
        target = draw(alt)
        phase = "climb" if target > cur + 50 else "descent" if target < cur - 50 else "cruise"
        leg = {"phase": phase, "duration": f"{draw(st.integers(1, 45))} min",
               "oxygen": draw(st.sampled_from(["none", "crew", "all"]))}
        if phase != "cruise":
            leg["altitude"] = f"{target} ft"
            cur = target
        if pressurized and draw(st.integers(0, 4)) == 0:
            leg["cabin"] = f"{draw(st.sampled_from([6_000, 8_000, 10_000, 12_500, 14_000]))} ft"
        legs.append(leg)
    if cur > dep + 50 or cur < dep - 50:
        legs.append({"phase": "descent" if cur > dep else "climb", "duration": f"{draw(st.integers(5, 30))} min",
                     "altitude": f"{dep} ft"})
    legs.append({"phase": "ground", "duration": "5 min"})
    aircraft = {"type": "test aircraft", "pressurized": pressurized}
    if pressurized:
        aircraft["max_differential"] = f"{draw(st.sampled_from([3.5, 5.5, 7.8, 8.6, 9.2]))} psi"
        aircraft["max_cabin_altitude"] = f"{draw(st.sampled_from([6_000, 8_000, 10_000]))} ft"
    return {"kind": "flight", "name": "random", "aircraft": aircraft,
            "departure_elevation": f"{dep} ft", "legs": legs}


def _plan(data):
    try:
        return plan_from_data(data)
    except AltoxError:
        assume(False)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(flight_data())
def test_random_plan_verdicts_do_not_depend_on_the_sampling_step(data):
    _same_at_every_step(_plan(data), AVIATION)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(flight_data())
def test_exact_band_times_agree_with_one_second_sampling(data):
    plan = _plan(data)
    figures = sorted({x for rs in AVIATION for th in rs.thresholds
                      for x in (th.lower_ft, th.top_ft) if x is not None})
    pieces = cabin_crossings(plan, figures)
    fine = expand(plan.model_copy(update={"sample_every_h": 1 / 3600}))
    assert pieces.duration_h.sum() == pytest.approx(fine.duration_h.sum(), abs=1e-9)
    tol_h = len(plan.legs) / 3600 + 1e-9       # one second per leg and threshold (see the docstring)
    for rs in AVIATION:
        for th in rs.thresholds:
            exact = float(np.sum(pieces.duration_h * in_band(pieces.cabin_pressure_altitude_ft,
                                                             th.lower_ft, th.top_ft)))
            sampled = float(np.sum(fine.duration_h * in_band(fine.cabin_pressure_altitude_ft,
                                                             th.lower_ft, th.top_ft)))
            assert exact == pytest.approx(sampled, abs=tol_h), (rs.id, th.id)
