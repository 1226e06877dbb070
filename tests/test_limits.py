"""Every documented limit (docs/profiles.md, "Limits") at its boundary: the last value inside is accepted,
the first outside is refused with exit status 2 and a message naming the limit."""

import pytest
from typer.testing import CliRunner

from altox.evaluation import population

from altox.plan import profile
from altox.cli.main import MAX_SEED, app, check_seed
from altox.cli.people import _check_members
from altox.errors import AltoxError, OutOfRangeError, ProfileError
from altox.plan.profile import load_plan, load_plan_text
from altox.guidance.loader import MAX_RULE_BYTES, load_rule_set
from altox.yamlload import MAX_DEPTH, MAX_PLAN_BYTES
from test_rules import _GOOD_USER_FILE

RUN = CliRunner()


def test_documented_limits_are_the_enforced_ones():
    """The page states the numbers the code enforces (one table, kept in step)."""
    from pathlib import Path

    page = (Path(__file__).resolve().parent.parent / "docs" / "profiles.md").read_text()
    for number in (MAX_PLAN_BYTES, MAX_RULE_BYTES, profile.MAX_DAYS, profile.MAX_LEGS, profile.MAX_PEOPLE,
                   profile.MAX_SAMPLES, profile.MAX_PERSON_SAMPLES, population.MAX_ENSEMBLE_SOLVES, MAX_SEED):
        assert f"{number:,}" in page, number
    assert f"{MAX_DEPTH} levels" in page


def _expedition(days=1, people=0, every=None):
    head = ["kind: expedition", "name: limits", "start_altitude: 650 m"]
    if every:
        head.append(f"sample_every: {every}")
    if people:
        head.append("party:")
        head += [f"  - {{name: P{i}, age: 30}}" for i in range(people)]
    head.append("days:")
    head += [f"  - {{day: {d}, sleep: 900 m}}" for d in range(1, days + 1)]
    return "\n".join(head) + "\n"


def _flight(legs=1, people=0):
    head = ["kind: flight", "name: limits", "aircraft: {type: invented trainer, pressurized: false}",
            "departure_elevation: 410 ft"]
    if people:
        head.append("aboard:")
        head += [f"  - {{name: P{i}, role: passenger}}" for i in range(people)]
    head.append("legs:")
    head += ["  - {phase: ground, duration: 1 min}"] * legs
    return "\n".join(head) + "\n"


def _refused(text, *words):
    with pytest.raises(ProfileError) as err:
        load_plan_text(text, "plan.yaml")
    for w in words:
        assert w in err.value.message, err.value.message
    return err.value


def test_plan_file_size(tmp_path):
    body = _expedition()
    inside = tmp_path / "inside.yaml"
    inside.write_text(body + "#" * (MAX_PLAN_BYTES - len(body) - 1) + "\n")
    assert inside.stat().st_size == MAX_PLAN_BYTES
    load_plan(inside)
    outside = tmp_path / "outside.yaml"
    outside.write_text(body + "#" * (MAX_PLAN_BYTES - len(body)) + "\n")
    res = RUN.invoke(app, ["check", str(outside)])
    assert res.exit_code == 2 and f"{MAX_PLAN_BYTES:,}-byte limit" in res.output


def test_rule_file_size(tmp_path):
    inside = tmp_path / "inside.yaml"
    inside.write_text(_GOOD_USER_FILE + "#" * (MAX_RULE_BYTES - len(_GOOD_USER_FILE) - 1) + "\n")
    assert inside.stat().st_size == MAX_RULE_BYTES
    assert load_rule_set(inside).id == "club-rules"
    outside = tmp_path / "outside.yaml"
    outside.write_text(_GOOD_USER_FILE + "#" * (MAX_RULE_BYTES - len(_GOOD_USER_FILE)) + "\n")
    with pytest.raises(ProfileError, match=f"{MAX_RULE_BYTES:,}-byte limit"):
        load_rule_set(outside)


def test_nesting_depth():
    def nested(depth):  # the plan's own mapping is the first level
        return _expedition() + "note: " + "[" * (depth - 1) + "]" * (depth - 1) + "\n"
    _refused(nested(MAX_DEPTH), "unknown key")          # read (then refused as an unknown key)
    _refused(nested(MAX_DEPTH + 1), f"more than {MAX_DEPTH} levels")


def test_name_length():
    ok = _expedition().replace("name: limits", "name: " + "n" * 200)
    assert load_plan_text(ok).name == "n" * 200
    _refused(_expedition().replace("name: limits", "name: " + "n" * 201), "200")


def test_days():
    assert len(load_plan_text(_expedition(days=profile.MAX_DAYS)).days) == profile.MAX_DAYS
    _refused(_expedition(days=profile.MAX_DAYS + 1), f"{profile.MAX_DAYS}")


def test_legs():
    assert len(load_plan_text(_flight(legs=profile.MAX_LEGS)).legs) == profile.MAX_LEGS
    _refused(_flight(legs=profile.MAX_LEGS + 1), f"{profile.MAX_LEGS}")


def test_people():
    assert len(load_plan_text(_expedition(people=profile.MAX_PEOPLE)).party) == profile.MAX_PEOPLE
    _refused(_expedition(people=profile.MAX_PEOPLE + 1), f"{profile.MAX_PEOPLE}")
    assert len(load_plan_text(_flight(people=profile.MAX_PEOPLE)).aboard) == profile.MAX_PEOPLE
    _refused(_flight(people=profile.MAX_PEOPLE + 1), f"{profile.MAX_PEOPLE}")


def test_samples():
    # 24 h at 0.1728 s is exactly 500,000 samples; one sample more is refused
    load_plan_text(_expedition(every="0.1728 s"))
    _refused(_expedition(every="0.1727 s"), f"{profile.MAX_SAMPLES:,}")


def test_person_samples():
    # one day at 1 s: 86,400 samples + 6 cuts; 57 people (56 members and the reference) make 4,925,142
    # person-samples, 58 make 5,011,548 (over 5,000,000)
    assert 57 * 86_406 <= profile.MAX_PERSON_SAMPLES < 58 * 86_406
    load_plan_text(_expedition(people=56, every="1 s"))
    err = _refused(_expedition(people=57, every="1 s"), f"{profile.MAX_PERSON_SAMPLES:,}")
    assert err.field == "sample_every"


def test_ensemble_solves():
    plan = load_plan_text(_expedition(days=2, people=1))
    from altox.plan.timeline import expand

    knots = len(population._knots_of(expand(plan)))
    fits = population.MAX_ENSEMBLE_SOLVES // (2 * knots)
    population.check_ensemble_size(plan, fits)
    with pytest.raises(OutOfRangeError, match=f"--members {fits:,} or fewer"):
        population.check_ensemble_size(plan, fits + 1)


def test_ensemble_refused_up_front_by_the_commands(tmp_path):
    path = tmp_path / "p.yaml"
    path.write_text(_expedition(days=20, people=5))
    for command, members in (("plan", "100000"), ("range", "1000000"), ("readings", "1000000")):
        res = RUN.invoke(app, [command, str(path), "--members", members])
        assert res.exit_code == 2, res.output
        assert "--members" in res.output and f"{population.MAX_ENSEMBLE_SOLVES:,}" in res.output


def test_members_ranges(tmp_path):
    _check_members(10)
    _check_members(1_000_000)
    for bad in (9, 1_000_001):
        with pytest.raises(OutOfRangeError, match="--members"):
            _check_members(bad)
    path = tmp_path / "p.yaml"
    path.write_text(_expedition())
    assert RUN.invoke(app, ["plan", str(path), "--members", "0"]).exit_code == 0
    for bad in ("-1", "100001"):
        res = RUN.invoke(app, ["plan", str(path), "--members", bad])
        assert res.exit_code == 2 and "--members" in res.output


def test_seed_range():
    check_seed(0)
    check_seed(MAX_SEED)
    for bad in (-1, MAX_SEED + 1):
        with pytest.raises(AltoxError, match="--seed"):
            check_seed(bad)
