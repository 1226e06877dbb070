"""Tests of the guidance rule sets (altox/data/rules) and the pure checker (altox.guidance).

Each shipped threshold gets a plan that just complies and one that just breaks it; the test
ids name the rule set and the section of the source (e.g. ``us-14cfr-91:91.211(a)(1)``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from altox.errors import AltoxError, ProfileError
from altox.guidance import (Finding, available_rule_sets, check_flight, check_itinerary,
                            load_rule_set, risk_category)

MIN = 1.0 / 60.0
RULES_DIR = Path(__file__).resolve().parents[1] / "altox" / "data" / "rules"
SHIPPED = ["eu-nco", "icao-annex6", "us-14cfr-121", "us-14cfr-135", "us-14cfr-25",
           "us-14cfr-91", "wms-2019", "wms-2024"]


# -- plan builders ----------------------------------------------------------------------------
def flight(*segments):
    """Profile from (cabin_ft, minutes, oxygen_use[, leg]) segments, sampled each minute."""
    alt, use, leg = [], [], []
    for seg in segments:
        ft, minutes, o2 = seg[:3]
        lg = seg[3] if len(seg) > 3 else 0
        n = int(round(minutes))
        alt += [ft] * n
        use += [o2] * n
        leg += [lg] * n
    n = len(alt)
    return (np.arange(n) * MIN, np.full(n, MIN), np.array(alt, float), np.array(leg),
            np.array(use, dtype=object))


def by_id(findings, threshold_id):
    return [f for f in findings if f.threshold_id == threshold_id]


def thresholds(kind, check=None):
    out = []
    for rid in available_rule_sets():
        rs = load_rule_set(rid)
        if rs.kind != kind:
            continue
        for th in rs.thresholds:
            if check is None or th.check in check:
                out.append(pytest.param(rs, th, id=f"{rs.id}:{th.section}:{th.id}"))
    return out


# -- the data files ---------------------------------------------------------------------------
def test_shipped_rule_sets_are_all_there():
    assert available_rule_sets() == sorted(SHIPPED)


@pytest.mark.parametrize("rule_id", SHIPPED)
def test_every_file_loads_and_every_threshold_is_sourced(rule_id):
    rs = load_rule_set(rule_id)
    assert rs.id == rule_id
    assert rs.citation and rs.title and rs.jurisdiction and rs.edition and rs.label
    assert "guidance" in rs.caution.lower()
    assert rs.kind in ("aviation", "expedition")
    for th in rs.thresholds:
        assert th.value and th.unit, th.id
        assert th.section and th.citation and th.requirement and th.where, th.id
        assert th.basis in ("read", "from memory"), th.id
    for item in rs.not_encoded:
        assert item.basis in ("read", "from memory") and item.reason
    if rs.kind == "expedition":
        assert rs.risk_table is not None and rs.prophylaxis is not None
        assert rs.risk_table.basis in ("read", "from memory")
        for cat in ("low", "moderate", "high"):
            assert getattr(rs.prophylaxis, cat).basis in ("read", "from memory")


def test_units_written_as_in_the_source():
    th = load_rule_set("us-14cfr-91").threshold("crew-above-12500-30min")
    assert (th.value, th.unit, th.lower_ft, th.top_ft) == ("12,500 ft", "ft", 12500.0, 14000.0)
    assert th.duration_h == pytest.approx(0.5)
    icao = load_rule_set("icao-annex6").threshold("crew-below-700hpa-30min")
    assert icao.unit == "hPa"
    assert icao.lower_ft == pytest.approx(9882, abs=2)      # 700 hPa in the ISA
    assert icao.top_ft == pytest.approx(12977, abs=2)       # 620 hPa in the ISA


def test_unknown_rule_id_is_a_helpful_error():
    with pytest.raises(AltoxError) as err:
        load_rule_set("us-14cfr-9")
    msg = str(err.value)
    assert "Did you mean 'us-14cfr-91'" in msg
    for rid in SHIPPED:
        assert rid in msg
    assert not isinstance(err.value, ProfileError)


def test_unknown_threshold_id_lists_valid_ones():
    with pytest.raises(AltoxError, match="crew-above-14000"):
        load_rule_set("us-14cfr-91").threshold("nope")


def _user_file(tmp_path, text):
    path = tmp_path / "mine.yaml"
    path.write_text(text, encoding="utf-8")
    return path


_GOOD_USER_FILE = """\
id: club-rules
title: "Club oxygen rule"
label: "Club SOP"
jurisdiction: "Flying club"
kind: aviation
edition: "2025"
effective: "2025-01-01"
citation: "Club SOP 4.2"
caution: "Guidance only; the club's chief pilot decides."
thresholds:
  - id: crew-above-10000
    applies_to: flight crew
    quantity: cabin_pressure_altitude
    check: oxygen
    value: "10,000 ft"
    requirement: "pilot uses oxygen above 10,000 ft"
    section: "4.2"
    basis: read
    where: "club manual"
"""


def test_user_rule_file_loads_and_checks(tmp_path):
    rs = load_rule_set(_user_file(tmp_path, _GOOD_USER_FILE))
    assert rs.id == "club-rules"
    found = check_flight(*flight((10_001, 1, "none")), rs)
    assert [f.status for f in found] == ["required-not-planned"]
    assert load_rule_set(str(tmp_path / "mine.yaml")).id == "club-rules"


def test_user_rule_file_bad_unit_reports_file_and_line(tmp_path):
    text = _GOOD_USER_FILE.replace('value: "10,000 ft"', 'value: "10,000 furlongs"')
    path = _user_file(tmp_path, text)
    with pytest.raises(ProfileError) as err:
        load_rule_set(path)
    line = text.splitlines().index('    value: "10,000 furlongs"') + 1
    assert err.value.line == line
    assert err.value.path == str(path)
    assert f"{path}:{line}" in str(err.value)
    assert "thresholds[0].value" in str(err.value)


def test_user_rule_file_missing_field_and_typo(tmp_path):
    text = _GOOD_USER_FILE.replace("    basis: read\n", "    basys: read\n")
    with pytest.raises(ProfileError) as err:
        load_rule_set(_user_file(tmp_path, text))
    msg = str(err.value)
    # the misspelling first (the missing key is its echo), with the count of the rest
    assert "thresholds[0].basys" in msg and "did you mean 'basis'" in msg and "1 more problem" in msg
    assert err.value.line is not None


def test_user_rule_file_yaml_syntax_error(tmp_path):
    with pytest.raises(ProfileError) as err:
        load_rule_set(_user_file(tmp_path, "id: x\nthresholds: [\n  - a: b\n"))
    assert err.value.line is not None and "mine.yaml" in str(err.value)


def test_user_rule_file_band_below_value_is_rejected(tmp_path):
    text = _GOOD_USER_FILE.replace('    value: "10,000 ft"\n', '    value: "10,000 ft"\n    band_top: "9,000 ft"\n')
    with pytest.raises(ProfileError, match="band_top"):
        load_rule_set(_user_file(tmp_path, text))


def test_missing_rule_file_is_a_profile_error(tmp_path):
    with pytest.raises(ProfileError, match="no such rule file"):
        load_rule_set(tmp_path / "absent.yaml")


# -- aviation: the cases named in the brief ----------------------------------------------------
def test_45_min_at_11000_ft_flags_crew_under_eu_nco_not_us_91():
    plan = flight((11_000, 45, "none"))
    eu = check_flight(*plan, "eu-nco")
    assert [(f.threshold_id, f.status) for f in eu] == [("crew-above-10000-30min", "required-not-planned")]
    assert eu[0].section == "NCO.OP.190(b)(1)"
    assert check_flight(*plan, "us-14cfr-91") == []


def test_45_min_at_13000_ft_flags_crew_under_both():
    plan = flight((13_000, 45, "none"))
    eu = check_flight(*plan, "eu-nco")
    us = check_flight(*plan, "us-14cfr-91")
    assert [(f.threshold_id, f.status) for f in eu] == [("crew-above-10000-30min", "required-not-planned")]
    assert [(f.threshold_id, f.status) for f in us] == [("crew-above-12500-30min", "required-not-planned")]
    assert "91.211(a)(1)" in us[0].message and "Guidance" in us[0].message


# -- aviation: every oxygen threshold, just complying and just breaking -----------------------
def _covering(applies_to):
    return "crew" if applies_to in ("crew", "flight crew") else "all"


@pytest.mark.parametrize("rs, th", thresholds("aviation", {"oxygen"}))
def test_oxygen_threshold_at_its_value_complies(rs, th):
    # at exactly the threshold ("above" is strict) for two hours: not triggered
    assert by_id(check_flight(*flight((th.lower_ft, 120, "none")), rs), th.id) == []


@pytest.mark.parametrize("rs, th", thresholds("aviation", {"oxygen"}))
def test_oxygen_threshold_just_above_breaks(rs, th):
    minutes = 1 if th.duration_h is None else th.duration_h * 60 + 1
    found = by_id(check_flight(*flight((th.lower_ft + 1, minutes, "none")), rs), th.id)
    assert len(found) == 1
    f = found[0]
    assert isinstance(f, Finding)
    assert (f.status, f.legs, f.section, f.basis) == ("required-not-planned", [0], th.section, th.basis)
    assert f.rule_set_id == rs.id and f.citation == th.citation and f.applies_to == th.applies_to


@pytest.mark.parametrize("rs, th", thresholds("aviation", {"oxygen"}))
def test_oxygen_threshold_met_by_planned_oxygen(rs, th):
    minutes = 1 if th.duration_h is None else th.duration_h * 60 + 1
    plan = flight((th.lower_ft + 1, minutes, _covering(th.applies_to)))
    found = by_id(check_flight(*plan, rs), th.id)
    assert [f.status for f in found] == ["required-planned"]


@pytest.mark.parametrize("rs, th", [p for p in thresholds("aviation", {"oxygen"})
                                    if p.values[1].duration_h is not None])
def test_oxygen_band_for_exactly_its_duration_complies(rs, th):
    # "more than 30 minutes": exactly 30 min in the band needs no oxygen
    mid = th.lower_ft + 1
    assert by_id(check_flight(*flight((mid, th.duration_h * 60, "none")), rs), th.id) == []


@pytest.mark.parametrize("rs, th", [p for p in thresholds("aviation", {"oxygen"})
                                    if p.values[1].top_ft is not None])
def test_oxygen_band_top_is_inclusive(rs, th):
    minutes = 1 if th.duration_h is None else th.duration_h * 60 + 1
    at_top = by_id(check_flight(*flight((th.top_ft, minutes, "none")), rs), th.id)
    assert [f.status for f in at_top] == ["required-not-planned"]
    above_top = by_id(check_flight(*flight((th.top_ft + 1, minutes, "none")), rs), th.id)
    assert above_top == []


# -- aviation: every limit threshold ----------------------------------------------------------
@pytest.mark.parametrize("rs, th", thresholds("aviation", {"limit"}))
def test_limit_threshold_at_its_value_complies(rs, th):
    assert by_id(check_flight(*flight((th.lower_ft, 120, "all")), rs), th.id) == []


@pytest.mark.parametrize("rs, th", thresholds("aviation", {"limit"}))
def test_limit_threshold_just_above_breaks(rs, th):
    minutes = 1 if th.duration_h is None else th.duration_h * 60 + 1
    found = by_id(check_flight(*flight((th.lower_ft + 1, minutes, "all")), rs), th.id)
    assert [(f.status, f.legs) for f in found] == [("limit-exceeded", [0])]


def test_25841_decompression_for_exactly_2_min_complies():
    found = check_flight(*flight((30_000, 2, "all")), "us-14cfr-25")
    assert by_id(found, "decompression-25000-2min") == []
    assert by_id(found, "normal-operation-8000")  # the normal-operation limit still applies


# -- aviation: the duration logic and coverage -------------------------------------------------
def test_time_in_band_adds_up_across_separate_stretches():
    # 20 min + 20 min at 13,000 ft, split by 20 min at 10,000 ft: 40 min > 30 min (91.211(a)(1))
    plan = flight((13_000, 20, "none", 0), (10_000, 20, "none", 1), (13_000, 20, "none", 2))
    found = by_id(check_flight(*plan, "us-14cfr-91"), "crew-above-12500-30min")
    assert [(f.status, f.legs) for f in found] == [("required-not-planned", [2])]


def test_oxygen_needed_only_beyond_the_first_30_min():
    # crew oxygen for the last 15 of 45 minutes at 13,000 ft meets 91.211(a)(1)
    plan = flight((13_000, 30, "none"), (13_000, 15, "crew"))
    found = check_flight(*plan, "us-14cfr-91")
    assert [(f.threshold_id, f.status) for f in found] == [("crew-above-12500-30min", "required-planned")]
    late = flight((13_000, 31, "none"), (13_000, 14, "crew"))
    assert [f.status for f in check_flight(*late, "us-14cfr-91")] == ["required-not-planned"]


def test_crew_oxygen_does_not_cover_passenger_rules():
    # 14 CFR 121.329(c)(3): each passenger above 15,000 ft
    found = check_flight(*flight((15_500, 10, "crew")), "us-14cfr-121")
    status = {f.threshold_id: f.status for f in found}
    assert status["crew-above-12000"] == "required-planned"
    assert status["passengers-above-15000"] == "required-not-planned"


def test_findings_name_the_legs_that_fall_short():
    plan = flight((14_500, 5, "crew", 0), (14_500, 5, "none", 1), (14_500, 5, "none", 3))
    found = by_id(check_flight(*plan, "us-14cfr-91"), "crew-above-14000")
    assert found[0].legs == [1, 3]


def test_check_flight_rejects_bad_input():
    t, d, a, lg, use = flight((13_000, 5, "none"))
    with pytest.raises(AltoxError, match="oxygen_use"):
        check_flight(t, d, a, lg, np.array(["none"] * 4 + ["mask"], dtype=object), "eu-nco")
    with pytest.raises(AltoxError, match="duration_h"):
        check_flight(t, d[:-1], a, lg, use, "eu-nco")
    with pytest.raises(AltoxError, match="time_h"):
        check_flight(t[::-1], d, a, lg, use, "eu-nco")
    with pytest.raises(AltoxError, match="expedition"):
        check_flight(t, d, a, lg, use, "wms-2019")
    a_bad = a.copy()
    a_bad[0] = np.nan
    with pytest.raises(AltoxError, match="finite"):
        check_flight(t, d, a_bad, lg, use, "eu-nco")


# -- expedition: every threshold, just complying and just breaking -----------------------------
WMS = ["wms-2019", "wms-2024"]


@pytest.mark.parametrize("rule_id", WMS)
def test_sleep_gain_500_m_per_day_above_3000_m(rule_id):
    th_id = "sleep-gain-500m-above-3000m"
    ok = check_itinerary([1, 2], [3_100, 3_600], [3_300, 3_900], 2_900, rule_id)
    assert by_id(ok, th_id) == []
    bad = check_itinerary([1, 2], [3_100, 3_601], [3_300, 3_900], 2_900, rule_id)
    assert [(f.status, f.legs) for f in by_id(bad, th_id)] == [("limit-exceeded", [2])]
    # below 3,000 m the per-day limit does not apply
    low = check_itinerary([1], [2_999], [3_200], 1_000, rule_id)
    assert by_id(low, th_id) == []


@pytest.mark.parametrize("rule_id", WMS)
def test_rest_day_every_3_to_4_days(rule_id):
    th_id = "rest-day-every-3-4-days"
    ok = check_itinerary([1, 2, 3, 4, 5], [3_200, 3_500, 3_800, 3_800, 4_100], [0] * 5, 2_900, rule_id)
    assert by_id(ok, th_id) == []
    bad = check_itinerary([1, 2, 3, 4], [3_200, 3_500, 3_800, 4_100], [0] * 4, 2_900, rule_id)
    assert [(f.status, f.legs) for f in by_id(bad, th_id)] == [("required-not-planned", [4])]


@pytest.mark.parametrize("rule_id", WMS)
def test_extra_day_every_1000_m(rule_id):
    th_id = "extra-day-every-1000m"
    ok = check_itinerary([1, 2, 3, 4, 5], [3_400, 3_800, 4_200, 4_200, 4_600], [0] * 5, 3_000, rule_id)
    assert by_id(ok, th_id) == []
    bad = check_itinerary([1, 2, 3, 4], [3_400, 3_800, 4_200, 4_600], [0] * 4, 3_000, rule_id)
    assert [(f.status, f.legs) for f in by_id(bad, th_id)] == [("required-not-planned", [4])]


def test_missing_days_count_as_rest_days():
    # day 4 is not listed: the party stays at 4,200 m, which pays the extra day
    found = check_itinerary([1, 2, 3, 5], [3_400, 3_800, 4_200, 4_600], [0] * 4, 3_000, "wms-2019")
    assert by_id(found, "extra-day-every-1000m") == []


def test_first_night_gain_counts_from_start_altitude():
    found = check_itinerary([1], [3_650], [3_650], 1_400, "wms-2024")
    assert [f.legs for f in by_id(found, "sleep-gain-500m-above-3000m")] == [[1]]


def test_itinerary_messages_are_guidance_and_name_the_source():
    found = check_itinerary([1, 2], [3_100, 3_700], [0, 0], 2_900, "wms-2019")
    assert found and all(f.message.startswith("Guidance from WMS 2019") for f in found)
    assert all("Luks" in f.citation for f in found)


def test_check_itinerary_rejects_bad_input():
    with pytest.raises(AltoxError, match="day"):
        check_itinerary([2, 1], [3_000, 3_100], [0, 0], 1_000, "wms-2019")
    with pytest.raises(AltoxError, match="sleep_altitude_m"):
        check_itinerary([1, 2], [3_000], [0, 0], 1_000, "wms-2019")
    with pytest.raises(AltoxError, match="aviation"):
        check_itinerary([1], [3_000], [0], 1_000, "eu-nco")


# -- the risk tables ---------------------------------------------------------------------------
SLOW = ([1, 2, 3, 4, 5, 6, 7, 8, 9],                       # gradual, with the extra day
        [2_000, 2_400, 2_800, 3_200, 3_600, 3_900, 4_200, 4_200, 4_500], 500)
FAST_WITH_REST = ([1, 2, 3, 4, 5], [2_400, 2_900, 3_450, 3_450, 3_700], 1_000)
FAST_NO_REST = ([1, 2, 3, 4, 5], [2_400, 2_900, 3_500, 4_100, 4_400], 1_000)


def one_day(alt):
    return [1], [alt], 500


@pytest.mark.parametrize("history, plan, expected", [
    pytest.param(set(), one_day(2_800), "low", id="wms-2019:low:no-history-to-2800m"),
    pytest.param(set(), SLOW, "low", id="wms-2019:low:gradual-with-extra-days"),
    pytest.param({"ams"}, SLOW, "low", id="wms-2019:low:gradual-even-with-ams-history"),
    pytest.param({"ams"}, one_day(2_600), "moderate", id="wms-2019:moderate:ams-to-2500-2800m-in-1d"),
    pytest.param(set(), one_day(2_801), "moderate", id="wms-2019:moderate:no-ams-above-2800m-in-1d"),
    pytest.param(set(), FAST_WITH_REST, "moderate", id="wms-2019:moderate:over-500m-per-day-with-extra-days"),
    pytest.param({"ams"}, one_day(2_800), "high", id="wms-2019:high:ams-to-2800m-in-1d"),
    pytest.param({"ams"}, one_day(2_499), "low", id="wms-2019:low:ams-below-2500m"),
    pytest.param({"hape"}, one_day(2_000), "high", id="wms-2019:high:hape-history"),
    pytest.param({"hace"}, one_day(2_000), "high", id="wms-2019:high:hace-history"),
    pytest.param(set(), one_day(3_500), "moderate", id="wms-2019:moderate:3500m-in-1d"),
    pytest.param(set(), one_day(3_501), "high", id="wms-2019:high:above-3500m-in-1d"),
    pytest.param(set(), FAST_NO_REST, "high", id="wms-2019:high:over-500m-per-day-without-extra-days"),
])
def test_wms_2019_risk_table_rows(history, plan, expected):
    day, sleep, start = plan
    category, reasons, prophylaxis = risk_category(history, day, sleep, start, "wms-2019")
    assert category == expected, reasons
    assert reasons
    assert "Wilderness Environ Med 2019" in prophylaxis and "Guidance only" in prophylaxis


@pytest.mark.parametrize("history, plan, expected", [
    pytest.param(set(), one_day(2_799), "low", id="wms-2024:low:day1-below-2800m"),
    pytest.param(set(), one_day(2_800), "moderate", id="wms-2024:moderate:day1-2800-3500m"),
    pytest.param(set(), one_day(3_500), "moderate", id="wms-2024:moderate:day1-3500m"),
    pytest.param(set(), one_day(3_501), "high", id="wms-2024:high:day1-above-3500m"),
    pytest.param({"ams"}, one_day(2_000), "moderate", id="wms-2024:moderate:ams-history"),
    pytest.param({"hape"}, one_day(2_000), "high", id="wms-2024:high:hape-history"),
    pytest.param({"hace"}, one_day(2_000), "high", id="wms-2024:high:hace-history"),
    pytest.param(set(), SLOW, "low", id="wms-2024:low:500m-per-day-with-extra-days"),
    pytest.param(set(), FAST_WITH_REST, "moderate", id="wms-2024:moderate:over-500m-per-day-with-extra-days"),
    pytest.param(set(), FAST_NO_REST, "high", id="wms-2024:high:over-500m-per-day-without-extra-days"),
])
def test_wms_2024_risk_table_rows(history, plan, expected):
    day, sleep, start = plan
    category, reasons, prophylaxis = risk_category(history, day, sleep, start, "wms-2024")
    assert category == expected, reasons
    assert "2024" in prophylaxis


def test_exactly_500_m_per_day_is_low_in_2024_table():
    day, sleep = [1, 2, 3], [2_500, 3_000, 3_500]
    assert risk_category(set(), day, sleep, 500, "wms-2024")[0] == "low"
    assert risk_category(set(), day, [2_500, 3_000, 3_501], 500, "wms-2024")[0] == "moderate"


def test_prophylaxis_text_follows_category_and_history():
    _, _, low = risk_category(set(), *one_day(2_000)[:2], 500, "wms-2019")
    assert "acetazolamide" not in low.lower() and "moderate or high risk" in low
    _, _, high = risk_category({"hape"}, *one_day(2_000)[:2], 500, "wms-2019")
    assert "acetazolamide" in high and "nifedipine" in high
    # the dose was not checked against the guideline: no number, a pointer to its table, and
    # no maintainer note (where it was read, "from memory") in the user's text
    assert "125 mg" not in high and "dosing table" in high
    assert "basis" not in high and "from memory" not in high and "read" not in high.replace("already", "")


def test_a_dose_checked_against_its_source_is_shown(tmp_path):
    import yaml

    data = yaml.safe_load((RULES_DIR / "wms-2019.yaml").read_text())
    data["id"] = "wms-checked"
    data["prophylaxis"]["high"]["dose"]["basis"] = "read"
    path = tmp_path / "wms-checked.yaml"
    path.write_text(yaml.safe_dump(data))
    _, _, high = risk_category({"hape"}, *one_day(2_000)[:2], 500, str(path))
    assert "125 mg" in high and "dosing table" not in high


def test_a_threshold_not_checked_shows_no_figure():
    # ICAO Annex 6 figures are marked from memory in the data: the finding names the section only
    t = [0.0, 1.0]
    found = check_flight(t, [1.0, 1.0], [13_500.0, 13_500.0], [0, 0], "none", "icao-annex6")
    assert found
    for f in found:
        assert "hPa" not in f.message and "ft" not in f.message.replace("aft", "")
        assert "read the section itself" in f.message and f.section in f.message


def test_risk_notes_a_start_above_1200_m():
    _, reasons, _ = risk_category(set(), [1], [2_000], 1_500, "wms-2019")
    assert any("1,200 m" in r for r in reasons)


def test_risk_category_rejects_unknown_history_and_aviation_sets():
    with pytest.raises(AltoxError, match="member_history"):
        risk_category({"copd"}, [1], [2_000], 500, "wms-2019")
    with pytest.raises(AltoxError, match="aviation"):
        risk_category(set(), [1], [2_000], 500, "us-14cfr-91")
