"""Supplemental oxygen: targets, device FiO2, ventilation by activity, cylinders (altox.evaluation.oxygen)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from altox.evaluation import oxygen as ox
from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft_to_mmhg
from altox.errors import AltoxError
from altox.physiology.gas_exchange import AIR_FIO2


def test_cannula_rule_of_thumb_at_sea_level():
    # Common practice (rule of thumb, read in secondary summaries: droracle.ai, qoschin.com):
    # each L/min through a nasal cannula adds about 3-4 % (taught as 4 %) to 21 %, up to 6 L/min.
    dev = ox.get_device("nasal-cannula")
    n = ox.inspired_gas_l_min("rest", 760.0)
    for flow in (1.0, 2.0, 3.0, 4.0):
        fio2 = ox.fio2_from_flow(flow, n, dev["delivery_fraction"], dev["max_fio2"])
        assert 0.21 + 0.03 * flow - 0.005 <= fio2 <= 0.21 + 0.04 * flow + 0.005
    # at 6 L/min the rule gives about 44-45 %: the device's cap
    assert ox.fio2_from_flow(6.0, n, dev["delivery_fraction"], dev["max_fio2"]) == pytest.approx(0.45, abs=0.01)


def test_perfect_mixing_formula():
    # the low-flow perfect-mixing model FiO2 = (Q*1.0 + (VE - Q)*0.21)/VE (from memory), d = 1
    assert ox.fio2_from_flow(2.0, 8.0) == pytest.approx((2.0 + 6.0 * AIR_FIO2) / 8.0)
    assert ox.flow_for_fio2((2.0 + 6.0 * AIR_FIO2) / 8.0, 8.0) == pytest.approx(2.0)


def test_oxygen_is_worth_more_at_altitude():
    n_sl = ox.inspired_gas_l_min("rest", 760.0)
    n_hi = ox.inspired_gas_l_min("rest", float(barometric_pressure(5500.0, "mountain")), days=10)
    assert n_hi < n_sl  # less gas in each breath, even with the hypoxic ventilatory response


def test_activity_raises_ventilation():
    pb = float(barometric_pressure(4000.0, "mountain"))
    v = [ox.inspired_gas_l_min(a, pb) for a in ("sleep", "rest", "trekking", "climbing")]
    assert v == sorted(v)


@pytest.mark.parametrize("target_ft, lo, hi", [
    # 100 % O2 keeps the alveolar PO2 of sea-level air up to about 33,700-34,000 ft and that of
    # 10,000 ft air up to about 39,000-40,000 ft (aviation physiology teaching, from memory; the
    # same figures seen in a forum post at aviationbanter.com, read).
    (0.0, 33000.0, 34500.0),
    (10000.0, 39000.0, 40700.0),
])
def test_ceiling_of_100_percent_oxygen(target_ft, lo, hi):
    from altox.evaluation.oxygen import _assess

    pa_target = float(_assess(pressure_altitude_ft_to_mmhg(target_ft), AIR_FIO2)["alveolar_po2_mmhg"])
    r = ox.fio2_for_target(pressure_altitude_ft_to_mmhg(30000.0), alveolar_po2_mmhg=pa_target)
    assert lo <= r["ceiling_pressure_altitude_ft"] <= hi


def test_unreachable_target_gives_ceiling():
    r = ox.fio2_for_target(pressure_altitude_ft_to_mmhg(45000.0), equivalent_altitude_m=0.0)
    assert not r["reachable"] and r["fio2_needed"] == 1.0
    assert 30000 < r["ceiling_pressure_altitude_ft"] < 45000


def test_pressure_demand_uses_pressure_breathing():
    r = ox.oxygen_for_target(pressure_altitude_ft_to_mmhg(43000.0), "pressure-demand", "rest",
                             equivalent_altitude_m=3048.0)
    assert r["pressure_breathing"] and r["reachable"]
    r2 = ox.oxygen_for_target(pressure_altitude_ft_to_mmhg(43000.0), "diluter-demand", "rest",
                              equivalent_altitude_m=3048.0)
    assert not r2["reachable"]


def test_device_cannot_reach_target_is_said():
    pb = float(barometric_pressure(8000.0, "mountain"))
    r = ox.oxygen_for_target(pb, "nasal-cannula", "climbing", atmosphere="mountain", equivalent_altitude_m=2000.0)
    assert not r["device_reaches_target"]


def test_demand_regulator_refuses_a_flow():
    with pytest.raises(AltoxError):
        ox.device_fio2("diluter-demand", 2.0, 400.0)


def test_unknown_device_names_the_valid_ones():
    with pytest.raises(AltoxError, match="nasal-cannula"):
        ox.get_device("nasal-canula")


def test_cylinder_worked_example_bar():
    # Common practice: gas = water volume x fill pressure (bar) / 1 bar: 10 L at 200 bar -> 2,000 L,
    # lasting 1,000 min at 2 L/min.
    gas = ox.gas_volume_l(10.0, 200.0, reference_bar=1.0)
    assert gas == pytest.approx(2000.0)
    assert ox.duration_min(gas, 2.0) == pytest.approx(1000.0)
    # altox's default reference is 1 atm (1.01325 bar)
    assert ox.gas_volume_l(10.0, 200.0) == pytest.approx(2000.0 / 1.01325)


def test_cylinder_worked_example_psi():
    # Worked example (read at globalbizfin.com, a translation of a US how-to citing the American
    # Academy of Orthopaedic Surgeons): D cylinder factor 0.16 L/psi, 2,000 psi with a 200 psi safe
    # residual -> 1,800 x 0.16 = 288 L, lasting 576 min at 0.5 L/min. The factor is water volume /
    # 14.696 psi (1 atm).
    psi_per_bar = 1e5 / 6894.757293168
    water_l = 0.16 * 14.6959
    usable = ox.usable_gas_l(water_l, 2000.0 / psi_per_bar, 200.0 / psi_per_bar,
                             reference_bar=14.6959 / psi_per_bar)
    assert usable == pytest.approx(288.0, rel=1e-3)
    assert ox.duration_min(usable, 0.5) == pytest.approx(576.0, rel=1e-3)


def test_cylinder_count_with_margin():
    assert ox.cylinders_needed(1000.0, 1000.0, 0.0) == 1
    assert ox.cylinders_needed(1000.0, 1000.0, 0.25) == 2
    assert ox.cylinders_needed(0.0, 500.0) == 0


def test_shipped_cylinders_parse():
    for cid in ox.cylinders():
        c = ox.get_cylinder(cid)
        assert c["fill_bar"] > c["residual_bar"] >= 0 and c["source"] and c["basis"]


def test_data_entries_have_sources():
    for name in ("oxygen_devices", "activity_ventilation", "cylinders", "tuc"):
        data = ox.load_data(name)
        table = data.get("devices") or data.get("activities") or data.get("cylinders") or data.get("rows")
        entries = table.values() if isinstance(table, dict) else table
        for e in entries:
            assert e.get("source") and e.get("basis") in ("read", "from memory", "common practice",
                                                         "calibrated", "altox convention")


# -- properties ------------------------------------------------------------------------------
@settings(max_examples=40, deadline=None)
@given(st.floats(0.0, 15.0), st.floats(0.0, 15.0), st.floats(1.0, 200.0),
       st.sampled_from(sorted(ox.devices())))
def test_more_flow_never_lowers_fio2(q1, q2, n, device_id):
    dev = ox.get_device(device_id)
    lo, hi = sorted((q1, q2))
    f = lambda q: ox.fio2_from_flow(q, n, dev["delivery_fraction"], dev["max_fio2"])  # noqa: E731
    assert f(hi) >= f(lo) - 1e-12


@settings(max_examples=15, deadline=None)
@given(st.floats(0.0, 8000.0), st.floats(0.0, 8000.0), st.floats(3000.0, 8800.0))
def test_higher_target_never_needs_less_oxygen_altitude(t1, t2, site_m):
    # "higher target" = a lower equivalent altitude to hold
    pb = float(barometric_pressure(site_m, "mountain"))
    lo_alt, hi_alt = sorted((t1, t2))
    r = ox.oxygen_for_target(pb, "climbing-mask", "climbing", atmosphere="mountain",
                             equivalent_altitude_m=np.array([hi_alt, lo_alt]))
    assert r["fio2_needed"][1] >= r["fio2_needed"][0] - 1e-12
    assert r["flow_l_min"][1] >= r["flow_l_min"][0] - 1e-9


@settings(max_examples=8, deadline=None)
@given(st.floats(70.0, 97.0), st.floats(70.0, 97.0), st.floats(3000.0, 8000.0))
def test_higher_target_never_needs_less_oxygen_sao2(s1, s2, site_m):
    pb = float(barometric_pressure(site_m, "mountain"))
    lo, hi = sorted((s1, s2))
    r = ox.fio2_for_target(np.array([pb, pb]), sao2_pct=np.array([lo, hi]), atmosphere="mountain")
    assert r["fio2_needed"][1] >= r["fio2_needed"][0] - 1e-6


# -- plans ---------------------------------------------------------------------------------
def _trek(n_oxygen_days: int) -> str:
    days = ["  - {day: 1, sleep: '5,000 m'}"]
    for d in range(2, 2 + n_oxygen_days):
        days.append(f"  - {{day: {d}, sleep: '5,400 m', oxygen: {{flow: '1 L/min', when: sleep}}}}")
    return ("kind: expedition\nname: t\nstart_altitude: '4,800 m'\nparty:\n  - {name: A, age: 30}\n"
            "  - {name: B, age: 40}\ndays:\n" + "\n".join(days) + "\n")


@settings(max_examples=6, deadline=None)
@given(st.integers(1, 12), st.integers(1, 12))
def test_cylinder_count_never_falls_as_the_plan_lengthens(a, b):
    from altox.evaluation.evaluate import evaluate_plan
    from altox.evaluation.oxygen_plan import oxygen_review
    from altox.plan.profile import load_plan_text

    short, long = sorted((a, b))
    counts = []
    for n in (short, long):
        plan = load_plan_text(_trek(n))
        counts.append(oxygen_review(plan, evaluate_plan(plan))["cylinders"]["cylinders_total"])
    assert counts[1] >= counts[0]


def test_oxygen_review_of_a_trek_with_oxygen():
    from altox.evaluation.evaluate import evaluate_plan
    from altox.evaluation.oxygen_plan import oxygen_review
    from altox.plan.profile import load_plan_text

    plan = load_plan_text(_trek(3))
    rev = oxygen_review(plan, evaluate_plan(plan))
    assert len(rev["planned"]) == 3
    row = rev["planned"][0]
    assert row["device"] == "nasal-cannula" and row["hours"] == 8.0 and row["people"] == 2
    assert row["litres_per_person"] == pytest.approx(1.0 * 8 * 60)
    assert row["fio2_achieved"] > AIR_FIO2 and row["equivalent_altitude_m"] < 5400.0
    assert rev["cylinders"]["cylinders_total"] == 2 * rev["cylinders"]["per_person"][0]["cylinders"]
    assert rev["packing_list"] and rev["caution"].startswith("GUIDANCE ONLY")
