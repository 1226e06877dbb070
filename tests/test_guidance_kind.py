"""Guidance of the wrong kind: refused when nothing fits, said out loud when part does not.

Also: `altox check` validates rule ids and rule files, and docs/profiles.md states the default
rule sets per kind as the code has them.
"""

import csv
import io
import json
import re
from pathlib import Path

import pytest
from typer.testing import CliRunner

from altox.cli.main import app
from altox.evaluation.evaluate import DEFAULT_RULES, RULE_KIND_FOR_PLAN, select_rule_sets
from altox.plan.profile import load_plan_text
from altox.guidance import load_rule_set

ROOT = Path(__file__).resolve().parents[1]

FLIGHT = """\
kind: flight
name: wrong kind
{rules}
aircraft: {{type: test aircraft, pressurized: false}}
departure_elevation: 1,000 ft
legs:
  - {{phase: climb, duration: 20 min, altitude: "15,500 ft"}}
  - {{phase: cruise, duration: 40 min}}
  - {{phase: descent, duration: 20 min, altitude: "1,000 ft"}}
"""
TREK = """\
kind: expedition
name: wrong kind trek
{rules}
start_altitude: 1,000 m
days:
  - {{day: 1, sleep: "3,000 m"}}
  - {{day: 2, sleep: "3,700 m"}}
"""


def _invoke(*args):
    return CliRunner().invoke(app, list(args), env={"COLUMNS": "80", "NO_COLOR": "1"})


def _write(tmp_path, text, name="plan.yaml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.mark.parametrize("template,rules,kind", [
    (FLIGHT, "rules: [wms-2024]", "flight"),
    (FLIGHT, "rules: [wms-2019, wms-2024]", "flight"),
    (TREK, "rules: [us-14cfr-91]", "expedition"),
])
@pytest.mark.parametrize("command", ["plan", "check"])
def test_no_fitting_rule_set_is_refused_naming_them(tmp_path, template, rules, kind, command):
    path = _write(tmp_path, template.format(rules=rules))
    res = _invoke(command, path)
    assert res.exit_code == 2
    for rid in re.findall(r"[a-z0-9-]+\d", rules):
        assert rid in res.output
    assert f"fits a {kind} plan" in res.output and ":3:" in res.output   # the line of `rules`
    assert "0 not met" not in res.output and "Internal error" not in res.output


def test_cli_rules_option_of_the_wrong_kind_is_refused(tmp_path):
    res = _invoke("plan", str(ROOT / "profiles" / "trek-teskavor.yaml"), "--rules", "us-14cfr-91")
    assert res.exit_code == 2 and "us-14cfr-91" in res.output


def test_a_rule_set_that_does_not_fit_is_named_in_every_output(tmp_path):
    path = _write(tmp_path, FLIGHT.format(rules="rules: [wms-2024, us-14cfr-91]"))
    out = _invoke("plan", path, "--members", "0")
    assert out.exit_code == 0, out.output
    text = " ".join(out.output.split())
    assert "(!) Not applied: wms-2024" in text and "checked against us-14cfr-91 only" in text
    data = json.loads(_invoke("plan", path, "--members", "0", "--json").output)
    assert data["rule_sets"] == ["us-14cfr-91"]
    assert any("wms-2024" in n for n in data["guidance_notes"])
    rows = list(csv.DictReader(io.StringIO(_invoke("plan", path, "--members", "0", "--csv").output)))
    assert rows and all("wms-2024" in r["guidance_notes"] for r in rows)
    report = tmp_path / "r.html"
    assert _invoke("plan", path, "--members", "0", "--report", str(report)).exit_code == 0
    assert "Not applied: wms-2024" in report.read_text()
    check = _invoke("check", path)
    assert check.exit_code == 0 and "Not applied: wms-2024" in check.output


def test_no_note_when_everything_fits():
    plan = load_plan_text(FLIGHT.format(rules="rules: [us-14cfr-91, eu-nco]"))
    applied, notes = select_rule_sets(plan)
    assert [rs.id for rs in applied] == ["us-14cfr-91", "eu-nco"]
    assert not [n for n in notes if n.startswith("Not applied")]


def test_check_refuses_an_unknown_rule_id_with_its_line(tmp_path):
    path = _write(tmp_path, FLIGHT.format(rules="rules: [us-14cfr-91, us-14cfr-9]"))
    res = _invoke("check", path)
    assert res.exit_code == 2
    assert ":3:" in res.output and "rules[1]" in res.output and "us-14cfr-91" in res.output


def test_check_validates_the_plans_rule_file(tmp_path):
    _write(tmp_path, "id: mine\ntitle: x\n", name="mine.yaml")
    path = _write(tmp_path, FLIGHT.format(rules="rule_file: mine.yaml"))
    res = _invoke("check", path)
    assert res.exit_code == 2 and "mine.yaml" in res.output and "Internal error" not in res.output


def test_defaults_per_kind_fit_and_are_documented():
    doc = (ROOT / "docs" / "profiles.md").read_text()
    for kind, ids in DEFAULT_RULES.items():
        for rid in ids:
            assert load_rule_set(rid).kind == RULE_KIND_FOR_PLAN[kind]
        row = next(line for line in doc.splitlines() if line.startswith(f"| `{kind}` |"))
        documented = re.findall(r"`([a-z0-9-]+)`", row.split("|")[3])
        assert documented == list(ids), row
