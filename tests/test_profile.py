"""Tests of the plan format: demo plans, documented examples, safe loading, error messages, schema."""

from __future__ import annotations

import json
import os
import re
import time
from pathlib import Path

import pytest

from altox.errors import ProfileError, UnitError
from altox.plan.profile import (ExpeditionPlan, FlightPlan, load_plan, load_plan_text, parse_flow,
                                parse_hemoglobin, parse_vertical_speed, plan_from_data,
                                plan_json_schema)
from altox.yamlload import MAX_PLAN_BYTES

ROOT = Path(__file__).resolve().parents[1]
PROFILES = sorted((ROOT / "profiles").glob("*.yaml"))
DOC = ROOT / "docs" / "profiles.md"


def doc_yaml_blocks() -> list[str]:
    return re.findall(r"^```yaml\n(.*?)^```", DOC.read_text(encoding="utf-8"), re.S | re.M)


# -- everything shipped loads ------------------------------------------------------------------
def test_there_are_five_demo_plans():
    names = {p.name for p in PROFILES}
    assert {"trek-teskavor.yaml", "trek-teskavor-fast.yaml", "jet-highcruise.yaml",
            "piston-ridge-crossing.yaml", "medevac-transfer.yaml"} <= names


@pytest.mark.parametrize("path", PROFILES, ids=lambda p: p.name)
def test_demo_plan_loads(path):
    plan = load_plan(path)
    assert isinstance(plan, (ExpeditionPlan, FlightPlan))
    assert plan.source_path == str(path)
    assert plan.total_duration_h > 0


def test_doc_has_complete_examples():
    assert len(doc_yaml_blocks()) >= 4


@pytest.mark.parametrize("index", range(len(doc_yaml_blocks())))
def test_doc_example_loads(index):
    plan = load_plan_text(doc_yaml_blocks()[index], f"docs/profiles.md#{index}")
    assert plan.name


# -- the demo plans say what they claim ---------------------------------------------------------
def test_trek_is_gradual_and_fast_trek_is_not():
    good = load_plan(ROOT / "profiles" / "trek-teskavor.yaml")
    fast = load_plan(ROOT / "profiles" / "trek-teskavor-fast.yaml")
    assert len(good.days) == 16
    assert max(d.high_m or d.sleep_m for d in good.days) == pytest.approx(6112.0)

    def gains(plan):
        sleeps = [plan.start_altitude_m] + [d.sleep_m for d in plan.days]
        return [b - a for a, b in zip(sleeps, sleeps[1:]) if b > 3000.0]

    assert max(gains(good)) <= 500.0
    assert max(gains(fast)) > 500.0
    assert not any(d.activity == "rest" for d in fast.days)
    rest_days = [d.day for d in good.days if d.activity == "rest"]
    assert rest_days and all(b - a <= 4 for a, b in zip([1] + rest_days, rest_days))
    ages = sorted(m.age_y for m in good.party)
    assert len(good.party) == 4 and ages[0] == 24 and ages[-1] == 63
    assert any("ams" in m.history for m in good.party)
    assert any("hape" in m.history for m in good.party)
    assert any(m.acetazolamide for m in good.party)
    assert len({m.hemoglobin_g_dl for m in good.party}) == 4
    assert good.days[0].activity == "fly-in" and 2700 <= good.days[0].sleep_m <= 2900
    assert good.days[-1].sleep_m < 3000


def test_flight_demos():
    jet = load_plan(ROOT / "profiles" / "jet-highcruise.yaml")
    assert jet.aircraft.pressurized and jet.aircraft.max_differential_psi == pytest.approx(8.9)
    assert max(b for _, b in jet.leg_altitudes_m()) == pytest.approx(41000 * 0.3048)
    piston = load_plan(ROOT / "profiles" / "piston-ridge-crossing.yaml")
    assert not piston.aircraft.pressurized
    medevac = load_plan(ROOT / "profiles" / "medevac-transfer.yaml")
    patient = next(p for p in medevac.aboard if p.role == "patient")
    assert patient.ground_spo2 == pytest.approx(0.91)
    assert patient.fev1_fraction == pytest.approx(0.45)
    assert patient.lung_disease == "COPD"


def test_parsed_units():
    plan = load_plan(ROOT / "profiles" / "trek-teskavor.yaml")
    ilse = next(m for m in plan.party if m.name == "Ilse Varnholt")
    assert ilse.hemoglobin_g_dl == pytest.approx(13.4)   # written as 134 g/L
    assert plan.days[3].hours_high_h == pytest.approx(2.0)
    assert plan.days[9].hours_high_h == pytest.approx(1.5)
    assert plan.saturation_levels == pytest.approx([0.90, 0.85, 0.80])
    medevac = load_plan(ROOT / "profiles" / "medevac-transfer.yaml")
    assert medevac.legs[2].duration_h == pytest.approx(1 + 25 / 60)  # "1 h 25 min"
    assert medevac.legs[2].fio2 == pytest.approx(0.28)
    assert medevac.emergency_descent_rate_ft_min == pytest.approx(3000.0)


def test_defaults():
    exp = load_plan_text("kind: expedition\nname: d\nstart_altitude: 100 m\n"
                         "days:\n  - {day: 1, sleep: 3000 m, high: 3500 m}\n")
    assert exp.sample_every_h == 1.0
    assert exp.dose_floor_m == 1500.0
    assert exp.saturation_levels == [0.9, 0.8]
    assert exp.atmosphere == "mountain"
    assert exp.days[0].hours_high_h == 1.0
    assert exp.days[0].activity == "trek"
    assert exp.party == [] and exp.rules == []
    fl = load_plan_text("kind: flight\nname: d\ndeparture_elevation: 0 ft\n"
                        "aircraft: {type: x, pressurized: true, max_differential: 8 psi}\n"
                        "legs: [{phase: ground, duration: 5 min}]\n")
    assert fl.sample_every_h == pytest.approx(10 / 60)
    assert fl.aircraft.max_cabin_altitude_ft == pytest.approx(8000.0)
    assert fl.legs[0].oxygen == "none"


def test_unit_parsers():
    assert parse_hemoglobin("142 g/L") == pytest.approx(14.2)
    assert parse_hemoglobin("14.2 g/dL") == pytest.approx(14.2)
    assert parse_flow("500 mL/min") == pytest.approx(0.5)
    assert parse_vertical_speed("20 m/s") == pytest.approx(20 * 60 / 0.3048)
    for bad in (14.2, "14.2", "14.2 mg", "142 g/dL"):
        with pytest.raises(UnitError):
            parse_hemoglobin(bad)
    with pytest.raises(UnitError):
        parse_flow("2")
    with pytest.raises(UnitError):
        parse_vertical_speed(4000)


def test_plan_from_data_without_positions():
    plan = plan_from_data({"kind": "expedition", "name": "x", "start_altitude": "100 m",
                           "days": [{"day": 1, "sleep": "2,000 m"}]})
    assert plan.days[0].sleep_m == 2000.0
    with pytest.raises(ProfileError) as info:
        plan_from_data({"kind": "expedition", "name": "x", "start_altitude": "100 m",
                        "days": [{"day": 1, "sleep": 2000}]})
    assert info.value.line is None and info.value.field == "days[0].sleep"


def test_rule_file(tmp_path):
    text = ("kind: expedition\nname: r\nstart_altitude: 100 m\nrule_file: mine.yaml\n"
            "days:\n  - {day: 1, sleep: 2000 m}\n")
    plan_path = tmp_path / "plan.yaml"
    plan_path.write_text(text)
    with pytest.raises(ProfileError) as info:
        load_plan(plan_path)
    assert f"{plan_path}:4:" in str(info.value) and "rule_file" in str(info.value)
    (tmp_path / "mine.yaml").write_text("rules: []\n")
    assert load_plan(plan_path).rule_file_path == (tmp_path / "mine.yaml").resolve()


# -- bad input: each gives one located ProfileError and leaves the file alone ----------------------
EXP = "kind: expedition\nname: bad\nstart_altitude: 1,300 m\n"
FLT = ("kind: flight\nname: bad\ndeparture_elevation: 500 ft\n"
       "aircraft: {type: invented, pressurized: true, max_differential: 8 psi}\n")


def line_of(text: str, needle: str) -> int:
    index = text.index(needle)
    return text.count("\n", 0, index) + 1


def expect_error(tmp_path, content, *, line=None, field=None, value=None, words=(), name="plan.yaml"):
    """Write ``content``, load it, check the ProfileError, and that the file is untouched."""
    path = tmp_path / name
    data = content.encode("utf-8") if isinstance(content, str) else content
    path.write_bytes(data)
    before = os.stat(path)
    start = time.perf_counter()
    with pytest.raises(ProfileError) as info:
        load_plan(path)
    elapsed = time.perf_counter() - start
    err = info.value
    message = str(err)
    assert elapsed < 1.0, f"took {elapsed:.2f} s"
    assert "\n" not in message, "the message must be one paragraph"
    assert message.startswith(str(path)), message
    if line is not None:
        assert err.line == line, message
        assert message.startswith(f"{path}:{line}:"), message
    if field is not None:
        assert err.field == field, message
        assert f"{field}:" in message, message
    if value is not None:
        assert value in message, message
    for word in words:
        assert word in message, message
    after = os.stat(path)
    assert path.read_bytes() == data
    assert (after.st_mtime_ns, after.st_size) == (before.st_mtime_ns, before.st_size)
    return err


def test_yaml_syntax_error(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: [3000 m\n"
    err = expect_error(tmp_path, text, words=("YAML syntax error",))
    assert err.line is not None and err.column is not None


def test_yaml_syntax_error_line_and_column(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m: oops\n"
    err = expect_error(tmp_path, text, line=line_of(text, "sleep: 3,000 m: oops"),
                       words=("YAML syntax error",))
    assert err.column == 19


def test_tab_indentation(tmp_path):
    text = EXP + "days:\n\t- day: 1\n"
    expect_error(tmp_path, text, line=line_of(text, "\t"), words=("tab",))


def test_unknown_key_with_suggestion(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleeep: 3,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "sleeep"), field="days[0].sleeep",
                 value="'3,000 m'", words=("Did you mean 'sleep'?",))


def test_unknown_top_level_key(tmp_path):
    text = EXP + "dayz:\n  - {day: 1, sleep: 3000 m}\n"
    expect_error(tmp_path, text, line=line_of(text, "dayz"), field="dayz",
                 words=("Did you mean 'days'?",))


def test_unknown_flight_key(tmp_path):
    text = FLT + "legs:\n  - {phase: ground, duraton: 5 min}\n"
    expect_error(tmp_path, text, line=line_of(text, "phase"), field="legs[0].duraton",
                 value="'5 min'", words=("Did you mean 'duration'?",))


def test_bare_number_altitude(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3000\n"
    expect_error(tmp_path, text, line=line_of(text, "sleep: 3000"), field="days[0].sleep",
                 value="3000", words=("no unit",))


def test_bare_number_duration(tmp_path):
    text = FLT + "legs:\n  - phase: ground\n    duration: 15\n"
    expect_error(tmp_path, text, line=line_of(text, "duration: 15"), field="legs[0].duration",
                 value="15", words=("no unit",))


def test_bare_number_pressure(tmp_path):
    text = FLT.replace("8 psi", "8") + "legs:\n  - {phase: ground, duration: 5 min}\n"
    expect_error(tmp_path, text, line=4, field="aircraft.max_differential", words=("no unit",))


def test_feet_written_as_metres(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n  - day: 2\n    sleep: 12,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "sleep: 12,000 m"), field="days[1].sleep",
                 value="'12,000 m'", words=("did you mean '12,000 ft'",))


def test_expedition_altitude_beyond_model(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    high: 9.4 km\n"
    expect_error(tmp_path, text, line=line_of(text, "high: 9.4 km"), field="days[0].high",
                 value="'9.4 km'", words=("9,000 m",))


def test_expedition_altitude_below_model(tmp_path):
    text = EXP.replace("1,300 m", "-800 m") + "days:\n  - {day: 1, sleep: 3000 m}\n"
    expect_error(tmp_path, text, line=3, field="start_altitude", value="'-800 m'",
                 words=("-500 m",))


def test_flight_altitude_beyond_model(tmp_path):
    text = FLT + "legs:\n  - phase: climb\n    duration: 30 min\n    altitude: FL650\n"
    expect_error(tmp_path, text, line=line_of(text, "FL650"), field="legs[0].altitude",
                 value="'FL650'", words=("60,000 ft",))


def test_flight_metres_that_are_feet(tmp_path):
    text = FLT + "legs:\n  - phase: climb\n    duration: 30 min\n    altitude: 35000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "35000 m"), field="legs[0].altitude",
                 words=("did you mean '35,000 ft'",))


@pytest.mark.parametrize("duration,word", [("0 min", "zero"), ("-20 min", "negative")])
def test_zero_or_negative_leg_duration(tmp_path, duration, word):
    text = FLT + f"legs:\n  - phase: ground\n    duration: {duration}\n"
    expect_error(tmp_path, text, line=line_of(text, f"duration: {duration}"),
                 field="legs[0].duration", value=repr(duration), words=(word,))


@pytest.mark.parametrize("hours,word", [("0 h", "zero"), ("-1 h", "negative")])
def test_zero_or_negative_hours_high(tmp_path, hours, word):
    text = EXP + f"days:\n  - day: 1\n    sleep: 3,000 m\n    high: 3,400 m\n    hours_high: {hours}\n"
    expect_error(tmp_path, text, line=line_of(text, "hours_high"), field="days[0].hours_high",
                 value=repr(hours), words=(word,))


def test_zero_sample_every(tmp_path):
    text = EXP + "sample_every: 0 min\ndays:\n  - {day: 1, sleep: 3000 m}\n"
    expect_error(tmp_path, text, line=line_of(text, "sample_every"), field="sample_every",
                 words=("zero",))


def test_days_out_of_order(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n  - day: 3\n    sleep: 3,200 m\n"
    expect_error(tmp_path, text, line=line_of(text, "day: 3"), field="days[1].day",
                 value="day 3", words=("expected day 2",))


def test_days_repeated(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n  - day: 2\n    sleep: 3,000 m\n" \
                 "  - day: 2\n    sleep: 3,000 m\n"
    expect_error(tmp_path, text, line=text.count("\n") - 1, field="days[2].day",
                 value="day 2", words=("repeats", "expected day 3"))


def test_days_not_starting_at_one(tmp_path):
    text = EXP + "days:\n  - day: 0\n    sleep: 3,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "day: 0"), field="days[0].day",
                 words=("expected day 1",))


@pytest.mark.parametrize("fio2", ["1.5", "0", "-0.2", "'120 %'"])
def test_fio2_outside_unit_interval(tmp_path, fio2):
    text = FLT + f"legs:\n  - phase: ground\n    duration: 5 min\n    oxygen: all\n    fio2: {fio2}\n"
    expect_error(tmp_path, text, line=line_of(text, "fio2"), field="legs[0].fio2")


def test_expedition_oxygen_fio2(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    oxygen: {fio2: 1.3, when: sleep}\n"
    expect_error(tmp_path, text, line=line_of(text, "oxygen"), field="days[0].oxygen.fio2",
                 value="1.3")


def test_empty_file(tmp_path):
    expect_error(tmp_path, b"", words=("empty",))


def test_whitespace_only_file(tmp_path):
    expect_error(tmp_path, "   \n\n", words=("empty",))


def test_comments_only_file(tmp_path):
    expect_error(tmp_path, "# nothing here\n# at all\n", words=("no YAML data",))


def test_directory(tmp_path):
    target = tmp_path / "plans.yaml"
    target.mkdir()
    with pytest.raises(ProfileError) as info:
        load_plan(target)
    assert "directory" in str(info.value) and str(target) in str(info.value)


def test_missing_file(tmp_path):
    with pytest.raises(ProfileError) as info:
        load_plan(tmp_path / "nope.yaml")
    assert "no such plan file" in str(info.value)


def test_binary_file(tmp_path):
    expect_error(tmp_path, b"kind: expedition\n\x00\x01\x02\x89PNG", line=2, words=("binary",))


def test_utf16_file(tmp_path):
    expect_error(tmp_path, "kind: expedition\n".encode("utf-16"), line=1, words=("UTF-16",))


def test_non_utf8_file(tmp_path):
    data = EXP.encode() + "days:\n  - {day: 1, sleep: 3000 m, note: Caf\xe9}\n".encode("latin-1")
    err = expect_error(tmp_path, data, line=5, words=("not valid UTF-8",))
    assert err.column == data.split(b"\n")[4].index(b"\xe9") + 1


def test_utf8_bom_is_accepted(tmp_path):
    path = tmp_path / "bom.yaml"
    path.write_bytes(b"\xef\xbb\xbf" + (EXP + "days:\n  - {day: 1, sleep: 3000 m}\n").encode())
    assert load_plan(path).days[0].sleep_m == 3000.0


def test_control_character(tmp_path):
    text = EXP + "days:\n  - {day: 1, sleep: 3000 m, note: \x07}\n"
    expect_error(tmp_path, text, line=5, words=("not allowed in YAML",))


@pytest.mark.parametrize("tag", ["!!python/object/apply:os.system ['true']",
                                 "!!python/name:os.system", "!!binary aGVsbG8=",
                                 "!custom 3000 m"])
def test_object_constructing_tags(tmp_path, tag):
    text = EXP + f"days:\n  - day: 1\n    sleep: {tag}\n"
    expect_error(tmp_path, text, line=line_of(text, "sleep:"), words=("tag", "not allowed"))


def test_set_tag_on_mapping(tmp_path):
    text = EXP + "days: !!set\n  ? a\n"
    expect_error(tmp_path, text, line=line_of(text, "!!set"), words=("!!set",))


def test_standard_tags_are_fine():
    plan = load_plan_text(EXP + "days:\n  - day: !!int '1'\n    sleep: !!str 3000 m\n")
    assert plan.days[0].day == 1


def test_alias_refused(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    note: *n\n"
    expect_error(tmp_path, text, line=line_of(text, "*n"), value="*n", words=("alias",))


def test_anchor_refused(tmp_path):
    text = EXP + "days:\n  - &d\n    day: 1\n    sleep: 3,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "&d"), value="&d", words=("anchor",))


def test_billion_laughs_refused_fast(tmp_path):
    lines = ['a0: &a0 ["lol","lol","lol","lol","lol","lol","lol","lol","lol"]']
    for i in range(1, 10):
        lines.append(f"a{i}: &a{i} [" + ",".join([f"*a{i - 1}"] * 9) + "]")
    expect_error(tmp_path, "\n".join(lines) + "\n", line=1, words=("anchor",))


def test_merge_key_refused(tmp_path):
    text = EXP + "days:\n  - <<: {day: 1}\n    sleep: 3,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "<<"), words=("merge",))


def test_duplicate_key(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    sleep: 3,500 m\n"
    expect_error(tmp_path, text, line=line_of(text, "sleep: 3,500 m"), field="days[0].sleep",
                 words=("second time",))


def test_more_than_one_document(tmp_path):
    text = EXP + "days:\n  - {day: 1, sleep: 3000 m}\n---\nkind: flight\n"
    expect_error(tmp_path, text, line=line_of(text, "---"), words=("more than one",))


@pytest.mark.parametrize("depth", [40, 5000])
def test_deep_nesting(tmp_path, depth):
    expect_error(tmp_path, "a: " + "[" * depth + "]" * depth + "\n", line=1, words=("nest",))


def test_file_too_large_refused_before_parsing(tmp_path):
    data = (EXP + "description: |\n" + ("  " + "x" * 78 + "\n") * 30000).encode()
    assert len(data) > MAX_PLAN_BYTES
    expect_error(tmp_path, data, words=("limit", "bytes"))


def test_text_too_large():
    with pytest.raises(ProfileError):
        load_plan_text("a: " + "x" * (MAX_PLAN_BYTES + 1))


def test_comma_split_in_flow_mapping(tmp_path):
    text = EXP + "days:\n  - {day: 1, sleep: 2,810 m}\n"
    expect_error(tmp_path, text, line=5, field="days[0].sleep", value='"2,810 m"',
                 words=("comma",))


def test_comma_split_in_flow_list(tmp_path):
    text = EXP + "saturation_levels: [90 %, 1,500 m]\ndays:\n  - {day: 1, sleep: 2810 m}\n"
    expect_error(tmp_path, text, line=4, field="saturation_levels[1]", words=("comma",))


def test_top_level_not_a_mapping(tmp_path):
    expect_error(tmp_path, "- kind: expedition\n", line=1, words=("not a mapping",))


def test_missing_kind(tmp_path):
    expect_error(tmp_path, "name: x\n", field="kind", words=("'kind' is missing",))


def test_unknown_kind(tmp_path):
    expect_error(tmp_path, "kind: expediton\nname: x\n", line=1, field="kind",
                 value="'expediton'", words=("Did you mean 'expedition'?",))


def test_missing_required_field(tmp_path):
    text = EXP + "days:\n  - day: 1\n    high: 3,000 m\n"
    expect_error(tmp_path, text, line=line_of(text, "day: 1"), field="days[0].sleep",
                 words=("'sleep'", "missing"))


def test_bad_choice_with_suggestion(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    activity: trekking\n"
    expect_error(tmp_path, text, line=line_of(text, "trekking"), field="days[0].activity",
                 value="'trekking'", words=("Did you mean 'trek'?",))


def test_age_must_be_plain_number(tmp_path):
    text = EXP + "party:\n  - {name: Ada, age: 45 y}\ndays:\n  - {day: 1, sleep: 3000 m}\n"
    expect_error(tmp_path, text, line=5, field="party[0].age", value="'45 y'")


def test_hemoglobin_needs_unit(tmp_path):
    text = EXP + "party:\n  - name: Ada\n    age: 45\n    hemoglobin: 14.2\n" \
                 "days:\n  - {day: 1, sleep: 3000 m}\n"
    expect_error(tmp_path, text, line=line_of(text, "hemoglobin"), field="party[0].hemoglobin",
                 value="14.2", words=("g/dL",))


def test_measured_pressure_inconsistent(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 5,000 m\n    pressure: 540 mmHg\n"
    expect_error(tmp_path, text, line=line_of(text, "pressure"), field="days[0].pressure",
                 value="'540 mmHg'")


def test_hours_high_without_high(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3,000 m\n    hours_high: 2 h\n"
    expect_error(tmp_path, text, line=line_of(text, "hours_high"), field="days[0].hours_high",
                 value="'2 h'")


def test_climb_that_goes_down(tmp_path):
    text = FLT + "legs:\n  - {phase: climb, duration: 10 min, altitude: FL100}\n" \
                 "  - {phase: climb, duration: 10 min, altitude: FL080}\n"
    expect_error(tmp_path, text, line=line_of(text, "FL080"), field="legs[1].altitude",
                 value="'FL080'", words=("climb",))


def test_cruise_altitude_jump(tmp_path):
    text = FLT + "legs:\n  - {phase: climb, duration: 10 min, altitude: FL100}\n" \
                 "  - {phase: cruise, duration: 10 min, altitude: FL120}\n"
    expect_error(tmp_path, text, line=line_of(text, "FL120"), field="legs[1].altitude")


def test_pressurized_without_differential(tmp_path):
    text = ("kind: flight\nname: x\ndeparture_elevation: 0 ft\n"
            "aircraft:\n  type: invented\n  pressurized: true\n"
            "legs:\n  - {phase: climb, duration: 10 min, altitude: FL100}\n")
    expect_error(tmp_path, text, line=line_of(text, "type"), field="aircraft.max_differential",
                 words=("max_differential",))


def test_stated_cabin_beyond_differential(tmp_path):
    text = FLT + "legs:\n  - {phase: climb, duration: 20 min, altitude: FL410, cabin: 2000 ft}\n"
    expect_error(tmp_path, text, line=line_of(text, "phase"), field="legs[0].cabin",
                 value="'2000 ft'", words=("psi",))


def test_cabin_on_unpressurized(tmp_path):
    text = FLT.replace("true", "false").replace(", max_differential: 8 psi", "") + \
        "legs:\n  - {phase: climb, duration: 20 min, altitude: FL100, cabin: 5000 ft}\n"
    expect_error(tmp_path, text, field="legs[0].cabin", words=("unpressurized",))


def test_too_many_samples(tmp_path):
    text = EXP + "sample_every: 1 s\ndays:\n" + "".join(
        f"  - {{day: {i}, sleep: 3000 m}}\n" for i in range(1, 8))
    expect_error(tmp_path, text, line=line_of(text, "sample_every"), field="sample_every",
                 words=("500,000",))


def test_several_problems_are_counted(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3000\n    high: 4000\n"
    err = expect_error(tmp_path, text, line=line_of(text, "sleep: 3000"), field="days[0].sleep")
    assert "1 more problem" in str(err)


def test_error_attributes(tmp_path):
    text = EXP + "days:\n  - day: 1\n    sleep: 3000\n"
    err = expect_error(tmp_path, text)
    assert err.path == str(tmp_path / "plan.yaml")
    assert (err.line, err.column) == (6, 12)
    assert err.value == 3000
    assert "m, km or ft" in err.expected
    assert err.location() == f"{err.path}:6:12"


def test_keys_stay_text():
    # YAML 1.1 reads 'no' and 'on' as booleans; as keys they stay names (and are unknown here)
    with pytest.raises(ProfileError) as info:
        load_plan_text(EXP + "no: 1\ndays:\n  - {day: 1, sleep: 3000 m}\n")
    assert info.value.field == "no"


# -- JSON Schema ---------------------------------------------------------------------------------
def _mini_validate(schema, instance, root, path="$"):
    """A small JSON-Schema checker (the subset the plan schema uses), when jsonschema is absent."""
    if "$ref" in schema:
        name = schema["$ref"].split("/")[-1]
        return _mini_validate(root["$defs"][name], instance, root, path)
    if "oneOf" in schema or "anyOf" in schema:
        options = schema.get("oneOf") or schema["anyOf"]
        if "discriminator" in schema:
            target = schema["discriminator"]["mapping"][instance["kind"]]
            return _mini_validate({"$ref": target}, instance, root, path)
        errors = []
        for option in options:
            try:
                _mini_validate(option, instance, root, path)
                return
            except AssertionError as exc:
                errors.append(str(exc))
        raise AssertionError(f"{path}: no option matched: {errors}")
    types = {"object": dict, "array": list, "string": str, "boolean": bool, "null": type(None)}
    kind = schema.get("type")
    if kind == "integer":
        assert isinstance(instance, int) and not isinstance(instance, bool), path
    elif kind == "number":
        assert isinstance(instance, (int, float)) and not isinstance(instance, bool), path
    elif kind is not None:
        assert isinstance(instance, types[kind]), f"{path}: {instance!r} is not {kind}"
    if "enum" in schema:
        assert instance in schema["enum"], path
    if "const" in schema:
        assert instance == schema["const"], path
    if "pattern" in schema:
        assert re.search(schema["pattern"], instance), f"{path}: {instance!r} !~ {schema['pattern']}"
    if kind == "object":
        props = schema.get("properties", {})
        for key in schema.get("required", []):
            assert key in instance, f"{path}: missing {key}"
        for key, value in instance.items():
            if key in props:
                _mini_validate(props[key], value, root, f"{path}.{key}")
            else:
                assert schema.get("additionalProperties", True) is not False, f"{path}: extra {key}"
    if kind == "array" and "items" in schema:
        for i, item in enumerate(instance):
            _mini_validate(schema["items"], item, root, f"{path}[{i}]")


def _validate(schema, instance):
    try:
        import jsonschema
    except ImportError:
        _mini_validate(schema, instance, schema)
    else:
        jsonschema.validate(instance, schema)


def test_schema_is_json():
    schema = plan_json_schema()
    again = json.loads(json.dumps(schema))
    assert again == schema
    assert schema["$schema"].endswith("2020-12/schema")
    assert {"ExpeditionPlan", "FlightPlan", "Day", "Leg", "Aircraft"} <= set(schema["$defs"])
    day = schema["$defs"]["Day"]
    assert day["additionalProperties"] is False and set(day["required"]) == {"day", "sleep"}
    assert schema["$defs"]["FlightPlan"]["properties"]["sample_every"]["default"] == "10 min"


@pytest.mark.parametrize("path", PROFILES, ids=lambda p: p.name)
def test_schema_validates_demo_plans(path):
    import yaml

    _validate(plan_json_schema(), yaml.safe_load(path.read_text(encoding="utf-8")))


@pytest.mark.parametrize("index", range(len(doc_yaml_blocks())))
def test_schema_validates_doc_examples(index):
    import yaml

    _validate(plan_json_schema(), yaml.safe_load(doc_yaml_blocks()[index]))


def test_schema_rejects_unknown_key():
    import yaml

    data = yaml.safe_load((ROOT / "profiles" / "jet-highcruise.yaml").read_text())
    data["legs"][0]["altitudee"] = "FL100"
    with pytest.raises(Exception):
        _validate(plan_json_schema(), data)
