"""Readings: 2018 Lake Louise scoring, review against the expected range, plan fields, the commands."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from altox.evaluation import population, readings
from altox.errors import OutOfRangeError, ProfileError
from altox.plan.profile import load_plan, load_plan_text


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
    assert {"spo2-below-range", "ams", "ams-low-spo2-ascent", "hape-suspected"} <= {f["code"] for f in a["flags"]}
    assert a["spo2_pct"] < a["expected_spo2_pct"]["low"] < a["expected_sao2_pct"]["low"]
    assert any("descend" in x["action"] for x in a["actions"])
    combined = next(f for f in a["flags"] if f["code"] == "ams-low-spo2-ascent")
    assert "do not ascend further" in combined["recommendation"].lower()
    assert "descend" in combined["recommendation"] and "Wilderness Medical Society" in combined["source"]


def test_demo_trek_other_readings_within_range(reviewed):
    assert len(reviewed) >= 5
    quiet = [r for r in reviewed if not r["flags"]]
    assert len(quiet) >= 4
    for r in quiet:
        if r["spo2_pct"] is not None:
            assert r["expected_spo2_pct"]["low"] <= r["spo2_pct"]


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
    import altox.cli.people  # noqa: F401  registers the commands
    from altox.cli.main import app

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


# -- a medic's review: expected SpO2 range, published levels, pulmonary oedema ------------------------------------
_MEDIC = """kind: expedition
name: medic check at 3,500 m
start_altitude: 300 m
party:
  - {name: Ada, age: 35}
  - {name: Ben, age: 30, history: [hape]}
  - {name: Cy, age: 40}
days:
  - {day: 1, sleep: 3500 m}
  - {day: 2, sleep: 3500 m}
  - {day: 3, sleep: 3500 m}
  - {day: 4, sleep: 3500 m}
  - {day: 5, sleep: 3500 m}
  - {day: 6, sleep: 3900 m}
observations:
  - {day: 2, member: Ada, spo2: 80 %}
  - {day: 2, member: Ben, spo2: 66 %, heart_rate: 118 /min, lake_louise: 5, symptoms: [dyspnoea at rest, cough]}
  - {day: 2, member: Cy, spo2: 89 %}
  - {day: 5, member: Ada, spo2: 90 %}
"""


@pytest.fixture(scope="module")
def medic():
    plan = load_plan_text(_MEDIC)
    return {(r["day"], r["member"]): r for r in readings.review(plan, None, population.expected_range(plan))}


def test_awake_80_pct_at_3500_m_day_2_is_flagged(medic):
    # Published resting SpO2 at about 3,500 m in the first days are means of 88.5-93 % (see
    # tests/reference_data/spo2_altitude.csv); 80 % with no symptoms lies below the expected SpO2 range.
    r = medic[(2, "Ada")]
    assert not r["sleeping"] and r["spo2_pct"] == 80.0
    assert [f["code"] for f in r["flags"]] == ["spo2-below-range"]
    assert r["actions"] and "Recheck" in r["actions"][0]["action"]


def test_90_pct_on_day_5_is_not_flagged(medic):
    r = medic[(5, "Ada")]
    assert r["flags"] == [] and r["actions"] == []


def test_hape_history_66_pct_raises_suspected_hape_with_wms_actions(medic):
    # Lake Louise consensus definition (Hackett & Roach, N Engl J Med 2001;345:107-114): two symptoms
    # (dyspnoea at rest, cough) and one sign (tachycardia, HR 118 > 100 /min, common practice): partly met;
    # with SpO2 >= 10 points below expectation (Goyal, Medscape 2020: 10-20 points) and a HAPE history:
    # suspected.  Actions of the WMS 2019 guidelines (descend, oxygen to SpO2 > 90 %).
    r = medic[(2, "Ben")]
    assert r["hape"]["partly_met"] and not r["hape"]["met"] and r["hape"]["suspected"]
    assert r["hape"]["signs"] == ["tachycardia"]
    codes = {f["code"] for f in r["flags"]}
    assert {"hape-suspected", "spo2-well-below-expected", "spo2-below-party", "spo2-low-accuracy"} <= codes
    action = r["actions"][0]
    assert "descend" in action["action"] and "above 90 %" in action["action"]
    assert "Wilderness Medical Society" in action["source"] and "2019" in action["source"]
    # the same person without the history is not raised from partial criteria
    plan = load_plan_text(_MEDIC.replace("history: [hape]", "history: []"))
    rows = readings.review(plan, None, population.expected_range(plan, n=100))
    ben = next(x for x in rows if x["member"] == "Ben")
    assert not ben["hape"]["suspected"] and "hape-partial" in {f["code"] for f in ben["flags"]}


@pytest.mark.parametrize("symptoms, signs, hr, met, partly", [
    (["dyspnoea_at_rest", "cough"], ["crackles", "central_cyanosis"], None, True, False),  # 2 + 2: met
    (["cough"], ["crackles", "tachypnoea"], None, False, True),                            # 1 + 2: partly
    (["cough", "weakness"], ["crackles"], 101, True, False),                               # HR > 100: tachycardia
    (["cough", "weakness"], ["crackles"], 100, False, True),                               # 100 is not above 100
    (["cough"], [], None, False, False),
], ids=["HackettRoach2001-met", "HackettRoach2001-partly", "tachycardia-above-100",
        "tachycardia-not-at-100", "one-item"])
def test_hape_consensus_counts(symptoms, signs, hr, met, partly):
    # Hackett PH, Roach RC. N Engl J Med 2001;345:107-114: at least two symptoms and two signs.
    r = readings.hape_criteria(symptoms, signs, hr)
    assert (r["met"], r["partly_met"]) == (met, partly)


@pytest.mark.parametrize("sao2, precision", [(99.0, 2.0), (83.0, 2.0), (55.0, 5.0), (40.0, 5.0), (69.0, 3.5)],
                         ids=["Hannhart1991-high", "Hannhart1991-83", "Hannhart1991-55", "below-55-held",
                              "interpolated"])
def test_oximeter_error_knots(sao2, precision):
    # Hannhart B et al. Eur Respir J 1991;4:115-119 (abstract): precision below 3 % above SaO2 83 %
    # (2 points used, common practice), up to 5 % in deeper hypoxia down to 55 %; linear in between.
    assert readings.oximeter_error(sao2)[1] == pytest.approx(precision)


def test_expected_spo2_range_is_wider_than_sao2_range():
    r = readings.expected_spo2_range(85.0, 78.0, 90.0)
    assert r["low"] < 78.0 and r["high"] > 90.0 and r["central"] == 85.0


def test_symptom_words_and_errors():
    ok = load_plan_text(_PLAN.replace("OBS", "{day: 2, member: Pia, symptoms: [Dyspnea at rest, chest-tightness], "
                                             "signs: [tachypnea]}"))
    assert ok.observations[0].symptoms == ["dyspnoea_at_rest", "chest_tightness"]
    assert ok.observations[0].signs == ["tachypnoea"]
    with pytest.raises(ProfileError, match="symptoms"):
        load_plan_text(_PLAN.replace("OBS", "{day: 2, member: Pia, symptoms: [sneezing]}"))


# -- one default for simulated people; --members 0 skips only the simulation -----------------------------------
def test_plan_range_and_readings_share_one_default_and_agree(tmp_path):
    import inspect

    from altox.cli import main as cli

    from altox.cli import people as cli_people
    from altox.evaluation.defaults import ENSEMBLE_MEMBERS, ENSEMBLE_SEED

    for fn in (cli.plan, cli_people.readings_cmd, cli_people.range_cmd):
        params = inspect.signature(fn).parameters
        assert params["members"].default.default == ENSEMBLE_MEMBERS, fn.__name__
        assert params["seed"].default.default == ENSEMBLE_SEED, fn.__name__
    path = tmp_path / "medic.yaml"
    path.write_text(_MEDIC)
    runner = CliRunner()
    out = {cmd: json.loads(runner.invoke(_app(), [cmd, str(path), "--json", "--members", "50"]).stdout)
           for cmd in ("plan", "range", "readings")}
    legs = lambda people: {p["name"]: np.round([leg["sao2_pct_percentiles"] for leg in p["legs"]], 4)  # noqa: E731
                           for p in people}
    plan_legs, range_legs = legs(out["plan"]["ranges"]["people"]), legs(out["range"]["people"])
    assert plan_legs.keys() == range_legs.keys()
    for name in plan_legs:
        np.testing.assert_array_equal(plan_legs[name], range_legs[name])
    for a, b in zip(out["plan"]["readings"], out["readings"]["readings"]):
        assert a["expected_spo2_pct"]["low"] == pytest.approx(b["expected_spo2_pct"]["low"], abs=1e-5)


def test_members_0_keeps_readings_and_says_so(tmp_path):
    path = tmp_path / "medic.yaml"
    path.write_text(_MEDIC)
    res = CliRunner().invoke(_app(), ["plan", str(path), "--json", "--members", "0"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert "ranges" not in data
    ben = next(r for r in data["readings"] if r["member"] == "Ben")
    assert ben["hape"]["suspected"] and ben["expected_spo2_pct"]["low"] is None
    assert any("members 0" in n for n in data["notes"])


def test_a_child_reading_is_marked_extrapolated():
    # the model is checked against adults (altox/data/validity.yaml); a child's range is extrapolated
    plan = load_plan_text(_MEDIC.replace("{name: Cy, age: 40}", "{name: Cy, age: 8}"))
    rows = readings.review(plan, None, population.expected_range(plan, n=50))
    cy = next(r for r in rows if r["member"] == "Cy")
    assert "extrapolated" in cy["extrapolated"] and "age 8" in cy["extrapolated"]
    assert all("extrapolated" not in r for r in rows if r["member"] != "Cy")
    text = "\n".join(str(x) for x in readings_text(plan.name, rows))
    assert "Cy: age 8" in text


def readings_text(name, rows):
    from altox.cli.people import readings_renderables

    return [p for p in readings_renderables(name, rows, []) if not hasattr(p, "columns")]
