"""Smaller guidance fixes: the very-rapid-ascent row, the packing list, flight levels in `point`."""

import json

import pytest
from typer.testing import CliRunner

from altox.cli.main import app
from altox.guidance.checker import risk_category


# -- WMS risk table, very rapid ascent (Luks 2019 and 2024 table: "very rapid ascents, e.g. < 7 day
# ascents of Mt Kilimanjaro", 5,895 m); altox's reading: 5,500 m or more before day 7 (docs/rules.md)
def _risk(day_of_top, top_m, rule_set="wms-2024"):
    days = list(range(1, day_of_top + 1))
    sleep = [1500.0] * len(days)                 # gentle sleeping profile: no other row applies
    high = [1500.0] * (len(days) - 1) + [top_m]
    return risk_category(set(), days, sleep, 1000.0, rule_set, high_altitude_m=high)


@pytest.mark.parametrize("rule_set", ["wms-2019", "wms-2024"])
@pytest.mark.parametrize("day,top_m,expected", [
    (6, 5500.0, "high"),          # reached on day 6: less than 7 days
    (6, 5499.0, "low"),
    (7, 5895.0, "low"),           # day 7 is not "less than 7 days"
    (5, 5895.0, "high"),
])
def test_very_rapid_ascent_row_boundaries(rule_set, day, top_m, expected):
    category, reasons, _ = _risk(day, top_m, rule_set)
    assert category == expected
    assert any("Very rapid ascent" in r for r in reasons) == (expected == "high")


# -- packing list: everyone on oxygen at the same time ----------------------------------------
ALL_ON_OXYGEN = """\
kind: flight
name: all on oxygen
aircraft: {type: test, pressurized: false}
departure_elevation: 1,000 ft
aboard:
  - {name: P1, role: crew}
  - {name: P2, role: crew}
  - {name: A, role: passenger}
  - {name: B, role: passenger}
  - {name: C, role: passenger}
legs:
  - {phase: climb, duration: 20 min, altitude: "16,000 ft", oxygen: all}
  - {phase: cruise, duration: 30 min, oxygen: all}
  - {phase: descent, duration: 20 min, altitude: "1,000 ft"}
"""


def test_packing_list_counts_everyone_on_oxygen_at_once(tmp_path):
    path = tmp_path / "p.yaml"
    path.write_text(ALL_ON_OXYGEN)
    res = CliRunner().invoke(app, ["plan", str(path), "--json", "--members", "0"])
    assert res.exit_code == 0, res.output
    packing = json.loads(res.output)["oxygen"]["packing_list"]
    regulators = next(p for p in packing if p["item"].startswith("regulator"))
    assert regulators["quantity"] == 5          # 2 crew + 3 passengers, all at once
    masks = sum(p["quantity"] for p in packing if "one per person using it" in p["note"])
    assert masks >= 5


# -- point: a flight level is a pressure altitude ---------------------------------------------
def test_point_reads_a_flight_level_as_pressure_altitude():
    # ICAO standard atmosphere: 25,000 ft pressure altitude is 37.60 kPa = 282.03 mmHg (Doc 7488/3)
    res = CliRunner().invoke(app, ["point", "--altitude", "FL250", "--json"])
    assert res.exit_code == 0, res.output
    data = json.loads(res.output)
    assert data["barometric_mmhg"] == pytest.approx(282.03, abs=0.01)
    assert "pressure altitude" in data["altitude_reading"]
    plain = json.loads(CliRunner().invoke(app, ["point", "--altitude", "25,000 ft", "--json"]).output)
    assert "geometric" in plain["altitude_reading"] and plain["barometric_mmhg"] > 282.2
    refused = CliRunner().invoke(app, ["point", "--altitude", "FL250", "--atmosphere", "mountain"])
    assert refused.exit_code == 2 and "flight level" in refused.output


# -- cautions -------------------------------------------------------------------------------------
def test_tuc_above_the_table_is_flagged_not_held_flat():
    # FAA AC 61-107B Table 1-1 ends at 45,000 ft (9-15 s); above it altox says "shorter than"
    res = CliRunner().invoke(app, ["decompress", "--altitude", "FL500", "--rate", "4,000 ft/min"],
                             env={"COLUMNS": "80", "NO_COLOR": "1"})
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split())
    assert "shorter than" in text and "not extrapolated" in text
    inside = CliRunner().invoke(app, ["decompress", "--altitude", "FL410", "--rate", "4,000 ft/min"],
                                env={"COLUMNS": "80", "NO_COLOR": "1"})
    assert "shorter than" not in " ".join(inside.output.split())


def test_flight_outputs_carry_the_diving_and_decompression_sickness_cautions(tmp_path):
    path = tmp_path / "p.yaml"
    path.write_text(ALL_ON_OXYGEN)
    data = json.loads(CliRunner().invoke(app, ["plan", str(path), "--json", "--members", "0"]).output)
    notes = " ".join(data["notes"])
    assert "Flying after diving" in notes and "AIM 8-1-2" in notes and "Decompression sickness" in notes
