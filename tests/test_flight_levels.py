"""Rules that turn on the aircraft's flight level: pilots' masks and the 10-minute supply.

Rule texts as encoded in altox/data/rules (14 CFR 91.211(b)(1)(i)-(ii), 135.89(b)(2)-(3),
135.157(b)(1)); each is tested at its boundary values ("above" is strictly above; the
exception of 91.211(b)(1)(ii) holds "at or below flight level 410").
"""

import numpy as np
import pytest

from altox.evaluation.evaluate import guidance_findings, select_rule_sets
from altox.plan.profile import load_plan_text
from altox.guidance import load_rule_set
from altox.guidance.checker import check_flight_levels


def _check(ft, rule_set, *, use="none", pressurized=True, pilots=1, quick=False, carried_h=None):
    found = check_flight_levels(np.array([0.5]), np.array([float(ft)]), np.array([1]), np.array([use], dtype=object),
                                rule_set, pressurized=pressurized, pilots_at_controls=pilots,
                                quick_donning=quick, oxygen_carried_h=carried_h)
    return {f.section: f.status for f in found}


# -- 14 CFR 91.211(b)(1)(ii): a pilot's mask above FL350, two-pilot exception up to FL410 -----
@pytest.mark.parametrize("ft,pilots,quick,use,expected", [
    (35_000, 1, False, "none", None),                       # at FL350: not above it
    (35_001, 1, False, "none", "required-not-planned"),
    (35_001, 1, False, "crew", "required-planned"),
    (39_000, 2, True, "none", "required-planned"),          # the exception
    (39_000, 1, True, "none", "required-not-planned"),      # one pilot: no exception
    (39_000, 2, False, "none", "required-not-planned"),     # no quick-donning masks
    (41_000, 2, True, "none", "required-planned"),          # "at or below flight level 410"
    (41_001, 2, True, "none", "required-not-planned"),
    (43_000, 2, True, "all", "required-planned"),
])
def test_91_211_b_1_ii_boundaries(ft, pilots, quick, use, expected):
    got = _check(ft, "us-14cfr-91", use=use, pilots=pilots, quick=quick, carried_h=1.0)
    assert got.get("91.211(b)(1)(ii)") == expected


def test_flight_level_rules_skip_unpressurized_aircraft():
    assert _check(43_000, "us-14cfr-91", pressurized=False) == {}


# -- 14 CFR 91.211(b)(1)(i) and 135.157(b)(1): 10-minute supply above FL250 / 25,000 ft --------
@pytest.mark.parametrize("rule_set,section", [("us-14cfr-91", "91.211(b)(1)(i)"),
                                              ("us-14cfr-135", "135.157(b)(1)")])
@pytest.mark.parametrize("ft,carried_min,expected", [
    (25_000, None, None),                                   # at FL250: not above it
    (25_001, None, "required-not-planned"),                 # not stated
    (25_001, 9.9, "required-not-planned"),
    (25_001, 10, "required-planned"),                       # exactly 10 minutes is "at least"
])
def test_ten_minute_supply_boundaries(rule_set, section, ft, carried_min, expected):
    carried = None if carried_min is None else carried_min / 60
    got = _check(ft, rule_set, use="all", pilots=2, quick=True, carried_h=carried)
    assert got.get(section) == expected


# -- 14 CFR 135.89(b)(2)-(3) --------------------------------------------------------------------
@pytest.mark.parametrize("ft,quick,use,b2,b3", [
    (25_000, False, "none", None, None),
    (25_001, False, "none", "required-not-planned", None),
    (25_001, True, "none", "required-planned", None),       # each pilot has a quick-donning mask
    (35_000, False, "none", "required-not-planned", None),  # "through 35,000 feet"
    (35_001, True, "none", None, "required-not-planned"),   # above 35,000 ft: no exception
    (35_001, True, "crew", None, "required-planned"),
])
def test_135_89_b_boundaries(ft, quick, use, b2, b3):
    got = _check(ft, "us-14cfr-135", use=use, quick=quick, carried_h=1.0)
    assert got.get("135.89(b)(2)(i)") == b2
    assert got.get("135.89(b)(3)") == b3


# -- whole plans: the cases -------------------------------------------------------------
JET = """\
kind: flight
name: high jet
rules: [us-14cfr-91]
aircraft: {{type: test jet, pressurized: true, max_differential: 9.5 psi}}
departure_elevation: 0 ft
{crew}
legs:
  - {{phase: climb, duration: 25 min, altitude: {fl}}}
  - {{phase: cruise, duration: 1 h}}
  - {{phase: descent, duration: 25 min, altitude: 0 ft}}
"""


def _plan_status(fl, crew=""):
    found, _ = guidance_findings(load_plan_text(JET.format(fl=fl, crew=crew)))
    return {f.section: (f.status, f.message) for f in found}


def test_fl430_with_no_one_on_oxygen_is_flagged():
    got = _plan_status("FL430", "pilots_at_controls: 2\nquick_donning_masks: true")
    assert got["91.211(b)(1)(ii)"][0] == "required-not-planned"


def test_fl390_two_pilots_quick_donning_is_not_flagged_one_pilot_is():
    two = _plan_status("FL390", "pilots_at_controls: 2\nquick_donning_masks: true")
    assert two["91.211(b)(1)(ii)"][0] == "required-planned"
    one = _plan_status("FL390", "quick_donning_masks: true")       # default: one pilot
    assert one["91.211(b)(1)(ii)"][0] == "required-not-planned"


def test_above_fl250_names_the_ten_minute_supply_rule():
    got = _plan_status("FL260")
    status, message = got["91.211(b)(1)(i)"]
    assert status == "required-not-planned" and "10 minutes of oxygen for each occupant" in message
    ok = _plan_status("FL260", "oxygen_carried: 15 min")
    assert ok["91.211(b)(1)(i)"][0] == "required-planned"
    assert "91.211(b)(1)(i)" not in _plan_status("FL250")


def test_every_rule_set_lists_what_it_does_not_encode_and_outputs_say_so():
    plan = load_plan_text(JET.format(fl="FL390", crew=""))
    _, notes = select_rule_sets(plan)
    not_checked = [n for n in notes if n.startswith("Not checked:")]
    assert [n for n in not_checked if "91.211(b)(2)" in n]
    assert len(not_checked) == len(load_rule_set("us-14cfr-91").not_encoded)
    for note in not_checked:                           # no maintainers' notes in user text
        assert "where" not in note and ".com" not in note and "from memory" not in note
