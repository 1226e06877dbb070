"""Readings: 2018 Lake Louise scoring, review against the expected range, plan fields, the commands."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from altox import population, readings
from altox.errors import OutOfRangeError, ProfileError
from altox.profile import load_plan, load_plan_text


# -- Lake Louise 2018 -----------------------------------------------------------------------------------
# Roach RC, Hackett PH, Oelz O, et al. The 2018 Lake Louise Acute Mountain Sickness Score. High Alt
# Med Biol 2018;19:4-6: four items 0-3 (headache, GI, fatigue/weakness, dizziness/light-headedness);
# AMS = headache >= 1 and total >= 3 after a recent gain in altitude; mild 3-5, moderate 6-9, severe
# 10-12 (read in the 2018 score's reproductions, see altox/data/individual.yaml).
@pytest.mark.parametrize("items, total, meets, severity", [
    ((1, 1, 1, 0), 3, True, "mild"),        # the threshold itself
    ((1, 1, 0, 0), 2, False, "none"),       # below the total
    ((0, 2, 2, 1), 5, False, "mild"),       # no headache: not AMS by the definition
    ((3, 0, 0, 0), 3, True, "mild"),        # a severe headache alone meets it
    ((2, 2, 2, 0), 6, True, "moderate"),
    ((3, 3, 3, 0), 9, True, "moderate"),
    ((3, 3, 3, 1), 10, True, "severe"),
    ((3, 3, 3, 3), 12, True, "severe"),
])
def test_lake_louise_2018(items, total, meets, severity):
    r = readings.lake_louise(*items)
    assert (r["total"], r["meets_definition"], r["severity"]) == (total, meets, severity)


def test_lake_louise_vectorised_total_only_and_bad_items():
    r = readings.lake_louise(np.array([0, 1, 2]), np.array([0, 1, 2]), np.array([0, 1, 2]), np.array([0, 0, 0]))
    assert r["total"].tolist() == [0, 3, 6] and r["meets_definition"].tolist() == [False, True, True]
    assert readings.lake_louise(total=4)["meets_definition"] is None     # headache unknown
    assert readings.lake_louise(total=2)["meets_definition"] is False
    for bad in [dict(headache=4, gi=0, fatigue=0, dizziness=0), dict(headache=1, gi=0, fatigue=0),
                dict(total=13), dict()]:
        with pytest.raises(OutOfRangeError):
            readings.lake_louise(**bad)


# -- review of the demo trek --------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def trek():
    return load_plan("profiles/trek-teskavor.yaml")


@pytest.fixture(scope="module")
def reviewed(trek):
    return readings.review(trek, None, population.expected_range(trek, n=300))


def test_demo_trek_alarming_reading(reviewed):
    alarm = [r for r in reviewed if any(f["code"] == "ams-low-spo2-ascent" for f in r["flags"])]
    assert len(alarm) == 1
    a = alarm[0]
    assert a["member"] == "Joren Pask" and a["day"] == 8 and a["ascent_continues"]
    assert {f["code"] for f in a["flags"]} == {"spo2-below-range", "ams", "ams-low-spo2-ascent"}
    assert a["spo2_pct"] < a["expected_sao2_pct"]["low"]
    combined = next(f for f in a["flags"] if f["code"] == "ams-low-spo2-ascent")
    assert "do not ascend further" in combined["recommendation"].lower()
    assert "descend" in combined["recommendation"] and "Wilderness Medical Society" in combined["source"]


def test_demo_trek_other_readings_within_range(reviewed):
    assert len(reviewed) >= 5
    quiet = [r for r in reviewed if not r["flags"]]
    assert len(quiet) >= 4
    for r in quiet:
        if r["spo2_pct"] is not None:
            assert r["expected_sao2_pct"]["low"] <= r["spo2_pct"]


def test_review_refuses_flights():
    with pytest.raises(OutOfRangeError):
        readings.review(load_plan("profiles/medevac-transfer.yaml"))


# -- plan fields ---------------------------------------------------------------------------------------------
_PLAN = """kind: expedition
name: readings check
start_altitude: 650 m
party:
  - {name: Pia, age: 31, hvr: high, home_spo2: 97 %}
days:
  - {day: 1, sleep: 2400 m}
  - {day: 2, sleep: 2900 m}
observations:
  - OBS
"""


def test_observation_errors_name_the_field():
    ok = load_plan_text(_PLAN.replace("OBS", "{day: 2, member: Pia, spo2: 91 %, heart_rate: 88 bpm, lake_louise: 2}"))
    assert ok.observations[0].heart_rate_per_min == 88.0 and ok.observations[0].spo2 == pytest.approx(0.91)
    for obs, words in [("{day: 3, member: Pia, spo2: 90 %}", "day 3 is not in the plan"),
                       ("{day: 1, member: Pai, spo2: 90 %}", "Did you mean 'Pia'"),
                       ("{day: 1, member: Pia}", "at least one of"),
                       ("{day: 1, member: Pia, heart_rate: 90}", "not a heart rate"),
                       ("{day: 1, member: Pia, time: 7, spo2: 90 %}", "not a clock time")]:
        with pytest.raises(ProfileError, match="observations") as exc:
            load_plan_text(_PLAN.replace("OBS", obs))
        assert words in str(exc.value)


# -- commands --------------------------------------------------------------------------------------------------
def _app():
    import altox.cli_people  # noqa: F401  registers the commands
    from altox.cli import app

    return app


def test_readings_command_json():
    res = CliRunner().invoke(_app(), ["readings", "profiles/trek-teskavor.yaml", "--members", "100", "--json"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert data["seed"] == 20240601 and "not a diagnosis" in data["caution"]
    assert any(f["code"] == "ams-low-spo2-ascent" for r in data["readings"] for f in r["flags"])


def test_fitness_command_json_and_errors():
    res = CliRunner().invoke(_app(), ["fitness-to-fly", "--pao2", "72.4mmHg", "--fev1", "31 %", "--json"])
    assert res.exit_code == 0, res.output
    assert json.loads(res.stdout)["regression"]["pao2_mmhg"] == pytest.approx(47.2, abs=0.05)
    res = CliRunner().invoke(_app(), ["fitness-to-fly", "profiles/medevac-transfer.yaml", "--json"])
    assert res.exit_code == 0 and json.loads(res.stdout)[0]["name"] == "Patient M."
    for args in (["fitness-to-fly"], ["fitness-to-fly", "--pao2", "61"], ["readings", "nope.yaml"],
                 ["fitness-to-fly", "profiles/trek-teskavor.yaml"]):
        res = CliRunner().invoke(_app(), args)
        assert res.exit_code == 2, (args, res.output)
