"""Plans say when a number is not a prediction: per leg and per person, in every output.

The fixture tests/fixtures/cabin-failure-fl390.yaml (invented) loses its cabin pressure at FL390
for two minutes (leg 4). Breathing air at a 39,000 ft cabin there is no resting steady state: the
time of useful consciousness is seconds (FAA AC 61-107B Change 1, Table 1-1: 30-60 s at 35,000 ft,
15-20 s at 40,000 ft, from memory; interpolated 17-25 s at 39,000 ft). No summary, headline,
people table, JSON, CSV, report or chart may show a saturation for that leg.
"""

import csv
import io
import json
from pathlib import Path

import numpy as np
import pytest

from altox.evaluation.evaluate import evaluate_plan
from altox.plan.profile import load_plan
from clirun import run_cli

FIXTURE = Path(__file__).resolve().parent / "fixtures" / "cabin-failure-fl390.yaml"
DEMOS = Path(__file__).resolve().parents[1] / "profiles"
FAILURE_LEG = 4


@pytest.fixture(scope="module")
def failed():
    return evaluate_plan(load_plan(FIXTURE))


def test_fixture_leg_is_the_cabin_failure(failed):
    leg = failed.legs[FAILURE_LEG - 1]
    assert leg["max_cabin_pressure_altitude_ft"] == pytest.approx(39000, abs=1)
    assert leg["validity_status"] == "no_steady_state" and leg["outside_validated_range"]
    assert not leg["model_valid"]
    # seconds, not minutes: FAA AC 61-107B Table 1-1 between 35,000 and 40,000 ft
    assert leg["time_limited"] == "no steady state: time of useful consciousness 17-25 s"
    # every other leg has a steady state (cabin 8,000 ft, then 15,000 ft after the descent)
    assert all(other["time_limited"] is None for other in failed.legs if other["leg"] != FAILURE_LEG)


def test_summary_headline_is_the_time_limited_state(failed):
    s = failed.summary
    assert s["worst_leg"] == FAILURE_LEG
    assert s["worst_sao2_pct"] is None
    assert s["worst_time_limited"].startswith("no steady state: time of useful consciousness")
    assert s["no_steady_state_legs"] == [FAILURE_LEG] and s["outside_validated_range"]


def test_people_have_no_saturation_but_the_time_limited_state(failed):
    for m in failed.members:
        assert m["min_sao2_pct"] is None and m["min_o2_content_ml_dl"] is None
        assert m["min_sao2_leg"] == FAILURE_LEG and m["legs_without_steady_state"] == [FAILURE_LEG]
        assert m["time_limited"].startswith("no steady state")
    child = next(m for m in failed.members if m["age_y"] < 18)
    assert any(n.startswith("Extrapolated: age 8 years") for n in child["validity_notes"])


def test_terminal_never_shows_a_saturation_for_the_leg():
    res = run_cli("plan", FIXTURE, "--members", "10")
    assert res.returncode == 0, res.stderr
    out = res.stdout
    worst = next(line for line in out.splitlines() if line.startswith("Verdict. Worst moment:"))
    assert "no steady state" in worst and "SaO2" not in worst
    per_person = [line for line in out.splitlines()           # the table's rows (columns apart by spaces)
                  if line.startswith(("reference adult ", "Mira", "Jory", "Pim")) and "   " in line]
    assert len(per_person) == 4 and all(" none " in line for line in per_person)
    row = next(line for line in out.splitlines() if line.strip("│ ").startswith(f"{FAILURE_LEG} ")
               and "none" in line)
    assert "outside" in row   # the flag word (altox.present.legend)
    assert f"Leg {FAILURE_LEG}: no steady state: time of useful consciousness 17-25 s." in out
    people = [line for line in out.splitlines() if any(n in line for n in ("Mira Tolland", "Jory Falk", "Pim Falk"))
              and "│" in line]
    assert people and all("none" in line for line in people[:3])
    assert "OUTSIDE THE MODEL on leg(s) 4" in out


def test_json_and_csv_carry_validity_and_no_saturation():
    res = run_cli("plan", FIXTURE, "--json", "--members", "10")
    data = json.loads(res.stdout)
    leg = data["legs"][FAILURE_LEG - 1]
    assert leg["sao2_pct"] is None and leg["arterial_po2_mmhg"] is None and leg["o2_content_ml_dl"] is None
    assert leg["validity_status"] == "no_steady_state" and leg["outside_validated_range"] is True
    assert leg["validity_notes"] and leg["time_limited"]
    assert data["legs"][0]["validity_status"] == "validated" and data["legs"][0]["outside_validated_range"] is False
    assert data["summary"]["worst_sao2_pct"] is None
    assert all(m["min_sao2_pct"] is None for m in data["members"])
    for person in data["ranges"]["people"]:
        rleg = person["legs"][FAILURE_LEG - 1]
        assert not rleg["model_valid"] and rleg["central_sao2_pct"] is None

    rows = list(csv.DictReader(io.StringIO(run_cli("plan", FIXTURE, "--csv", "--members", "0").stdout)))
    row = rows[FAILURE_LEG - 1]
    assert row["sao2_pct"] == "" and row["validity_status"] == "no_steady_state"
    assert row["outside_validated_range"] == "True" and "time of useful consciousness" in row["validity_notes"]
    assert rows[0]["validity_status"] == "validated" and rows[0]["sao2_pct"] != ""

    timeline = list(csv.DictReader(io.StringIO(run_cli("plan", FIXTURE, "--csv", "--timeline",
                                                       "--members", "0").stdout)))
    unsteady = [r for r in timeline if r["validity_status"] == "no_steady_state"]
    assert unsteady and all(r["sao2_pct"] == "" and r["leg"] == str(FAILURE_LEG) for r in unsteady)


def test_report_and_chart_show_the_gap(tmp_path, failed):
    from altox.present.report import build_report

    html = build_report(failed)
    summary = html[html.index('id="summary"'):html.index("</section>", html.index('id="summary"'))]
    worst = summary[summary.index("Worst moment:"):summary.index("</p>", summary.index("Worst moment:"))]
    assert "no steady state: time of useful consciousness 17-25 s" in worst and "SaO2" not in worst
    assert summary.count("no steady state: time of useful consciousness 17-25 s") == 5   # worst + 4 people
    legs = html[html.index('id="legs"'):]
    assert "no steady state: time of useful consciousness 17-25 s" in legs

    from altox.present.charts import plan_figure

    fig = plan_figure(failed)
    ax_sat = fig.axes[1]
    ref = next(line for line in ax_sat.get_lines() if line.get_linewidth() == 2.0)
    y = np.asarray(ref.get_ydata(), dtype=float)
    at_leg = np.asarray(failed.samples["leg"]) == FAILURE_LEG
    assert np.all(np.isnan(y[at_leg])) and np.all(np.isfinite(y[~at_leg]))
    assert ax_sat.get_ylim()[0] > 50.0          # no axis stretched down to a 2 % "saturation"
    assert any("no steady state" in t.get_text() for t in ax_sat.texts)


def test_demo_with_a_child_is_extrapolated_for_the_child_only():
    r = evaluate_plan(load_plan(DEMOS / "jet-highcruise.yaml"))
    by_name = {m["name"]: m for m in r.members}
    assert by_name["Tavi Hennart"]["validity_status"] == "extrapolated"       # age 9
    assert by_name["Rik Arvesen"]["validity_status"] == "validated"
    assert all(leg["validity_status"] == "validated" for leg in r.legs)       # cabin 8,000 ft
    assert any(n.startswith("Tavi Hennart: Extrapolated: age 9") for n in r.notes)


def test_acclimatized_trek_days_are_validated_new_high_camps_not_yet():
    # an invented trek: a week at 4,000 m, then 5,400 m. The week makes the climber acclimatized
    # (altox.physiology.validity: 7 days' ventilatory acclimatization, Huang 1984); the first day at 5,400 m
    # is above the ~5,000 m acute data with partial acclimatization: extrapolated, not validated
    from altox.plan.profile import load_plan_text

    days = "\n".join(f"  - {{day: {d}, sleep: '4,000 m'}}" for d in range(1, 9))
    text = f"""kind: expedition
name: Invented trek
start_altitude: 4,000 m
days:
{days}
  - {{day: 9, sleep: '5,400 m'}}
"""
    r = evaluate_plan(load_plan_text(text))
    assert r.legs[7]["validity_status"] == "validated"
    assert r.legs[8]["validity_status"] == "extrapolated"


def test_fleet_review_gives_no_saturation_for_the_cabin_failure(tmp_path):
    from altox.evaluation import fleet

    (tmp_path / "failure.yaml").write_text(FIXTURE.read_text())
    (tmp_path / "jet.yaml").write_text((DEMOS / "jet-highcruise.yaml").read_text())
    lines = {Path(x["source"]).name: x for x in fleet.review_plans([tmp_path], batch=4)}
    bad, good = lines["failure.yaml"], lines["jet.yaml"]
    assert bad["status"] == "ok" and not bad["model_valid"]
    assert bad["worst_sao2_pct"] is None and bad["worst_leg"] == FAILURE_LEG
    assert bad["worst_time_limited"] == "no steady state: time of useful consciousness 17-25 s"
    assert good["worst_sao2_pct"] is not None and good["worst_time_limited"] is None
    summary = fleet.FleetSummary(worst=2)
    for line in lines.values():
        summary.add(line)
    d = summary.as_dict()
    assert d["worst_plans"][0]["worst_sao2_pct"] is None          # ranked first, without a number
    text = summary.text()
    row = next(t for t in text.splitlines() if "failure.yaml" in t)
    assert "none" in row and "%" not in row
    assert "time of useful consciousness 17-25 s" in text
