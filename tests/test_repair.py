"""altox fix: minimal repairs (brute force over the same space agrees), fixed days, limits, goals, files.

Verdicts are always the rule checker's (relations: a repaired plan passes the checker), never
hard-coded minutes or counts from a particular reading of a rule.
"""

import hashlib
import itertools
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

pytest.importorskip("ruamel.yaml", reason="ruamel.yaml (a dependency of altox) not installed; pip install -e .")

from altox.evaluation import repair as rp
from altox.cli.main import app  # noqa: E402
from altox.evaluation.evaluate import evaluate_plan  # noqa: E402
from altox.plan.profile import load_plan, load_plan_text  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("trek-teskavor*.yaml"))
runner = CliRunner()


def _plan_file(tmp_path, sleeps, *, start="1,000 m", extra="", day_extra=None, name="p.yaml"):
    day_extra = day_extra or {}
    lines = ["kind: expedition", "name: test itinerary", "rules: [wms-2024]", f"start_altitude: {start}",
             "sample_every: 2 h", extra, "days:"]
    for i, s in enumerate(sleeps, start=1):
        more = day_extra.get(i, "")
        lines.append(f'  - {{day: {i}, sleep: "{s:,} m"{more}}}   # day {i} comment')
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _broken(plan):
    return [f for f in evaluate_plan(plan).findings if f.status in rp.BROKEN]


# -- brute force over the same moves ----------------------------------------------------------------
def _brute_force_min_added(plan, max_insert=4):
    """Fewest added days over every placement of up to ``max_insert`` added days (rest or camp) and lowerings.

    Not lazy: added days may go before any day, needed or not.  Same moves, same checker, same
    climb bound as the search.
    """
    rule_sets = rp._expedition_rule_sets(plan)
    start = float(plan.start_altitude_m)
    limit = rp._gain_limit_m(rule_sets)
    max_climb = rp._largest_day_climb_m(plan)
    days = plan.days
    n = len(days)

    def clean(sleeps, highs, carried):
        prev = start
        for s, h, c in zip(sleeps, highs, carried):
            if not c and max(s, h) - prev > max_climb + 1e-6:
                return False
            prev = s
        return not rp._broken_findings(sleeps, start, rule_sets)

    best = None
    # per gap: a word over {r, c} of length <= max_insert; per day: lowered or not
    words = [w for k in range(max_insert + 1) for w in itertools.product("rc", repeat=k)]
    for total in range(max_insert + 1):
        for split in itertools.product(range(total + 1), repeat=n):
            if sum(split) != total:
                continue
            for lowered in itertools.product((False, True), repeat=n):
                def build():
                    for choice in itertools.product(*[[w for w in words if len(w) == k] for k in split]):
                        sleeps, highs, carried = [], [], []
                        prev = start
                        ok = True
                        for i, d in enumerate(days):
                            for move in choice[i]:
                                if move == "r":
                                    sleeps.append(prev)
                                else:
                                    if not d.sleep_m > prev:
                                        ok = False
                                        break
                                    prev = rp._camp_m(prev, d.sleep_m, limit)
                                    sleeps.append(prev)
                                highs.append(prev)
                                carried.append(False)
                            if not ok:
                                break
                            high = max(d.sleep_m, d.high_m or d.sleep_m)
                            if lowered[i]:
                                if not d.sleep_m > prev or d.activity == "fly-in":
                                    ok = False
                                    break
                                camp = rp._camp_m(prev, d.sleep_m, limit)
                                sleeps.append(camp)
                            else:
                                sleeps.append(d.sleep_m)
                            highs.append(high)
                            carried.append(d.activity in ("fly-in", "drive"))
                            prev = sleeps[-1]
                        if ok:
                            yield sleeps, highs, carried
                for sleeps, highs, carried in build():
                    if clean(sleeps, highs, carried):
                        return total
    return best


@pytest.mark.parametrize("sleeps", [
    pytest.param([2800, 3300, 3700, 4100, 4500], id="one-rest-due"),
    pytest.param([2800, 3700, 4200], id="gain-too-large"),
    pytest.param([3200, 3600, 4000, 4400, 4800, 5200], id="rest-interval-and-extra-days"),
    pytest.param([2900, 3900, 3900, 4700], id="two-large-gains"),
])
def test_search_is_minimal_brute_force_agrees(tmp_path, sleeps):
    path = _plan_file(tmp_path, sleeps)
    plan = load_plan(path)
    result = rp.repair_plan(path)
    assert result.found
    assert _broken(result.plan) == []
    assert result.added_days == _brute_force_min_added(plan)


def test_already_compliant_plan_is_unchanged(tmp_path):
    path = _plan_file(tmp_path, [2000, 2500, 2900])
    result = rp.repair_plan(path)
    assert result.found and result.added_days == 0 and result.changes == []


def test_fixed_day_keeps_its_number_and_content(tmp_path):
    # a rest day must be added on the way up; the fly-out day (fixed) keeps its number: a descent day goes
    sleeps = [2800, 3300, 3700, 4100, 4500, 3600, 2800, 1200]
    path = _plan_file(tmp_path, sleeps, day_extra={8: ", fixed: true, activity: drive"})
    plan = load_plan(path)
    result = rp.repair_plan(path)
    assert result.found, result.reasons
    assert _broken(result.plan) == []
    assert len(result.plan.days) == 8
    assert result.plan.days[7].fixed and result.plan.days[7].sleep_m == plan.days[7].sleep_m
    assert result.plan.days[7].activity == "drive"
    assert any("dropped" in c for c in result.changes)


def test_fixed_day_that_cannot_be_kept_says_why(tmp_path):
    sleeps = [2800, 3300, 3700, 4100, 4500]
    path = _plan_file(tmp_path, sleeps, day_extra={5: ", fixed: true"})
    result = rp.repair_plan(path)
    assert not result.found
    assert any("fixed" in r and "day 5" in r for r in result.reasons)
    assert _broken(result.plan) == []          # the closest plan meets the rules, not the fixed day


def test_day_limit(tmp_path):
    sleeps = [2800, 3300, 3700, 4100, 4500]
    path = _plan_file(tmp_path, sleeps, extra="max_days: 5")
    result = rp.repair_plan(path)
    assert not result.found
    assert any("day limit of 5 days" in r for r in result.reasons)
    assert rp.repair_plan(path, max_days=6).found


def test_high_points_are_kept(tmp_path):
    path = ROOT / "profiles" / "trek-teskavor-fast.yaml"
    plan = load_plan(path)
    result = rp.repair_plan(path)
    highs = sorted(d.high_m for d in plan.days if d.high_m is not None)
    kept = [d.high_m for d in result.plan.days if d.high_m is not None]
    assert all(h in kept for h in highs)


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.stem)
def test_demo_repairs_pass_altox_plan_and_leave_the_original(tmp_path, demo):
    src = tmp_path / demo.name
    shutil.copy(demo, src)
    digest = hashlib.sha256(src.read_bytes()).hexdigest()
    out = tmp_path / "fixed.yaml"
    r = runner.invoke(app, ["fix", str(src), "--write", str(out)])
    assert r.exit_code == 0, r.output
    assert "day " in r.output and "GUIDANCE ONLY" in r.output
    assert hashlib.sha256(src.read_bytes()).hexdigest() == digest
    r = runner.invoke(app, ["plan", str(out), "--json", "--members", "0"])
    assert r.exit_code == 0, r.output
    import json

    data = json.loads(r.output)
    assert [f for f in data["findings"] if f["status"] in rp.BROKEN] == []
    # comments of the original are kept
    text = out.read_text(encoding="utf-8")
    for line in src.read_text(encoding="utf-8").splitlines():
        if line.lstrip().startswith("#"):
            assert line.strip() in text


def test_observations_move_with_their_day(tmp_path):
    demo = ROOT / "profiles" / "trek-teskavor.yaml"
    plan = load_plan(demo)
    result = rp.repair_plan(demo)
    assert result.added_days >= 1
    where = {(o.member, o.spo2): plan.days[o.day - 1].sleep_m for o in plan.observations}
    moved = False
    for o in result.plan.observations:
        assert result.plan.days[o.day - 1].sleep_m == where[(o.member, o.spo2)]
        moved |= o.day != next(p.day for p in plan.observations if (p.member, p.spo2) == (o.member, o.spo2))
    assert moved


def test_write_refuses_the_input_and_existing_files(tmp_path):
    src = tmp_path / "t.yaml"
    shutil.copy(ROOT / "profiles" / "trek-teskavor.yaml", src)
    r = runner.invoke(app, ["fix", str(src), "--write", str(src), "--force"])
    assert r.exit_code == 2 and "input plan" in r.output
    other = tmp_path / "o.yaml"
    other.write_text("keep me\n")
    r = runner.invoke(app, ["fix", str(src), "--write", str(other)])
    assert r.exit_code == 2 and "--force" in r.output
    assert other.read_text() == "keep me\n"
    r = runner.invoke(app, ["fix", str(src), "--write", str(other), "--force"])
    assert r.exit_code == 0 and load_plan(other).kind == "expedition"


def test_bad_goal_and_keep_are_one_message(tmp_path):
    src = ROOT / "profiles" / "trek-teskavor.yaml"
    r = runner.invoke(app, ["fix", str(src), "--goal", "be fine"])
    assert r.exit_code == 2 and "--goal" in r.output and "Traceback" not in r.output
    r = runner.invoke(app, ["fix", str(src), "--keep", "some"])
    assert r.exit_code == 2 and "--keep" in r.output


def test_goal_parsing():
    g = rp.parse_goal("night SaO2 >= 75 % for every member at the 5th percentile")
    assert (g.when, g.sao2_pct, g.percentile) == ("night", 75.0, 5.0)
    assert rp.parse_goal("SaO2 >= 80 %").percentile == 50.0
    with pytest.raises(rp.AltoxError):
        rp.parse_goal("SaO2 >= 120 %")


def test_goal_met_with_oxygen_and_checked_by_the_range(tmp_path):
    path = _plan_file(tmp_path, [2800, 3300, 3700, 3700, 4100],
                      extra="party:\n  - {name: Ada, age: 40}\n  - {name: Bo, age: 60, hvr: low}")
    goal = "night SaO2 >= 80 % for every member at the 10th percentile"
    before = rp._goal_misses(load_plan(path), rp.parse_goal(goal), 50, 1)
    assert before                                  # the plan misses it on air
    result = rp.repair_plan(path, goal=goal, members=50, seed=1)
    assert result.found, result.reasons
    assert rp._goal_misses(result.plan, rp.parse_goal(goal), 50, 1) == {}
    assert _broken(result.plan) == []
    assert any("oxygen" in c for c in result.changes)
    assert any(d.oxygen is not None for d in result.plan.days)
    summary = rp.compare(load_plan(path), result.plan, rp.parse_goal(goal), members=50, seed=1)
    assert all(w["sao2_pct"] >= 80.0 for w in summary["after"]["goal_worst"])
    assert any(w["sao2_pct"] < 80.0 for w in summary["before"]["goal_worst"])


@pytest.mark.parametrize("goal, options, needle", [
    ("night SaO2 >= 100 % for every member at the 50th percentile", {}, "does not reach it"),
    ("night SaO2 >= 85 % for every member at the 10th percentile", {"allow_oxygen": False}, "--no-oxygen"),
])
def test_impossible_goal_says_why(tmp_path, goal, options, needle):
    path = _plan_file(tmp_path, [2800, 3300, 3700, 3700, 4100], extra="party:\n  - {name: Ada, age: 40}")
    result = rp.repair_plan(path, goal=goal, members=20, seed=1, **options)
    assert not result.found
    assert any(needle in r and "Ada" in r and "day " in r for r in result.reasons)
    if options:   # the command says the same, with its own exit status
        r = runner.invoke(app, ["fix", str(path), "--goal", goal, "--members", "20", "--no-oxygen"])
        assert r.exit_code == 3 and "No repair" in r.output and "Ada" in r.output


# -- flights ------------------------------------------------------------------------------------
FLIGHT = """kind: flight
name: small crossing   # a comment to keep
rules: [us-14cfr-91]
sample_every: 5 min
aircraft: {type: invented single, pressurized: false}
departure_elevation: 2,000 ft
aboard:
  - {name: P, role: crew, age: 50}
  - {name: Q, role: passenger, age: 30}
legs:
  - {phase: climb, duration: 15 min, altitude: "14,500 ft"}
  - {phase: cruise, duration: 40 min}
  - {phase: descent, duration: 15 min, altitude: "2,000 ft"}
"""


def test_flight_demo_breaking_91_211a_is_repaired(tmp_path):
    src = tmp_path / "piston.yaml"
    shutil.copy(ROOT / "profiles" / "piston-ridge-crossing.yaml", src)
    digest = hashlib.sha256(src.read_bytes()).hexdigest()
    before = _broken(load_plan(src))
    assert any(f.section.startswith("91.211(a)") for f in before)
    out = tmp_path / "fixed.yaml"
    r = runner.invoke(app, ["fix", str(src), "--write", str(out)])
    assert r.exit_code == 0, r.output
    assert "leg " in r.output
    assert hashlib.sha256(src.read_bytes()).hexdigest() == digest
    assert _broken(load_plan(out)) == []
    assert "# An unpressurized single-engine" in out.read_text(encoding="utf-8")


def test_flight_repair_is_minimal_brute_force_agrees(tmp_path):
    from altox.evaluation import repair_flight as rf
    from altox.evaluation.evaluate import _rule_sets, guidance_findings
    from altox.plan.profile import plan_from_data
    from altox.yamlload import parse_yaml

    path = tmp_path / "f.yaml"
    path.write_text(FLIGHT, encoding="utf-8")
    plan = load_plan(path)
    result = rp.repair_plan(path)
    assert result.found and _broken(result.plan) == []
    # every assignment of an option (or none) to every leg, all at once
    rule_sets = [rs for rs in _rule_sets(plan) if rs.kind == "aviation"]
    thresholds = rf._thresholds_ft(rule_sets)
    alts0, cabin0 = rf._flown_ft(plan)
    per_leg = [[None] + rf._leg_options(plan, i, thresholds, min(thresholds), cabin0) for i in range(len(plan.legs))]
    data, _ = parse_yaml(FLIGHT)
    best = None
    for combo in itertools.product(*per_leg):
        legs = [dict(x) for x in data["legs"]]
        for i, option in enumerate(combo):
            if option:
                rf._apply(legs, i, option, altitudes_ft=alts0)
        try:
            cand = plan_from_data({**data, "legs": legs})
        except Exception:
            continue
        if [f for f in guidance_findings(cand, rule_sets)[0] if f.status in rp.BROKEN]:
            continue
        cost = rf._cost(plan, alts0, cabin0, cand)
        best = cost if best is None or cost < best else best
    assert best is not None
    assert rf._cost(plan, alts0, cabin0, result.plan) == best
    assert "# a comment to keep" in result.text


def test_pressurized_flight_over_its_cabin_limit_gets_a_lower_cruise(tmp_path):
    # the differential runs out above about FL300: the cabin passes 8,000 ft; oxygen cannot fix a limit
    text = """kind: flight
name: small jet
rules: [us-14cfr-25]
sample_every: 5 min
aircraft: {type: invented jet, pressurized: true, max_differential: 6.0 psi, max_cabin_altitude: "8,000 ft"}
departure_elevation: 500 ft
aboard:
  - {name: P, role: crew, age: 50}
legs:
  - {phase: climb, duration: 20 min, altitude: FL370}
  - {phase: cruise, duration: 40 min, altitude: FL370}
  - {phase: descent, duration: 20 min, altitude: 500 ft}
"""
    path = tmp_path / "jet.yaml"
    path.write_text(text, encoding="utf-8")
    assert _broken(load_plan(path))
    result = rp.repair_plan(path)
    assert result.found, result.reasons
    assert _broken(result.plan) == []
    assert result.altitude_change_ft > 0
    assert result.plan.legs[0].pressure_altitude_m < load_plan(path).legs[0].pressure_altitude_m
    assert any("terrain" in n for n in result.notes)


def test_json_output_has_the_summary_and_the_caution():
    import json

    r = runner.invoke(app, ["fix", str(ROOT / "profiles" / "trek-teskavor.yaml"), "--json"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert data["found"] and data["added_days"] >= 1 and data["changes"]
    assert data["summary"]["before"]["not_met"] and data["summary"]["after"]["not_met"] == []
    assert data["summary"]["after"]["days"] == data["summary"]["before"]["days"] + data["added_days"]
    assert "GUIDANCE ONLY" in data["caution"]
    assert load_plan_text(data["plan_yaml"]).kind == "expedition"


def test_search_bound_says_it_stopped():
    result = rp.repair_plan(ROOT / "profiles" / "trek-teskavor-fast.yaml", max_states=3)
    assert not result.found and not result.complete
    assert any("stopped after 3 states" in r for r in result.reasons)


def test_keep_decides_whether_a_day_with_a_high_point_may_go(tmp_path):
    # the fixed fly-out needs one day made up on the way down; day 7 holds a reading (never dropped),
    # day 6 has a high point of its own (not the plan's highest)
    sleeps = [2800, 3300, 3700, 4100, 4500, 3600, 2800, 1200]
    extra = ("party:\n  - {name: Ada, age: 40}\n"
             "observations:\n  - {day: 7, member: Ada, spo2: 95 %}")
    path = _plan_file(tmp_path, sleeps, extra=extra,
                      day_extra={6: ', high: "3,900 m"', 8: ", fixed: true, activity: drive"})
    assert not rp.repair_plan(path).found
    result = rp.repair_plan(path, keep="highest")
    assert result.found, result.reasons
    assert _broken(result.plan) == [] and len(result.plan.days) == 8
    day = result.plan.observations[0].day          # the reading stays with its day (at 2,800 m)
    assert result.plan.days[day - 1].sleep_m == 2800.0
    assert all(d.high_m is None for d in result.plan.days)
    assert any("dropped" in c for c in result.changes)
