"""`altox plan`, `altox check` and `altox schema` driven as real commands."""

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from clirun import run_cli

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))
ENV = {**os.environ, "COLUMNS": "80", "NO_COLOR": "1"}


def run(*args):
    return run_cli(*args, env={"COLUMNS": "80"}, cwd=ROOT)


@pytest.mark.parametrize("demo", DEMOS, ids=[d.stem for d in DEMOS])
def test_plan_demo_tables(demo):
    proc = run("plan", str(demo))
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "GUIDANCE ONLY" in out and "SaO2 %" in out and "PIO2" in out
    assert max(len(line) for line in out.splitlines()) <= 80


def test_plan_json_matches_library():
    from altox.evaluation.evaluate import evaluate_plan
    from altox.plan.profile import load_plan

    demo = ROOT / "profiles" / "trek-teskavor-fast.yaml"
    data = json.loads(run("plan", str(demo), "--json").stdout)
    lib = evaluate_plan(load_plan(demo))
    assert [leg["sao2_pct"] for leg in data["legs"]] == pytest.approx([leg["sao2_pct"] for leg in lib.legs], abs=1e-6)
    assert data["caution"].startswith("GUIDANCE ONLY")
    assert data["summary"]["rules_broken"] >= 1
    assert any(leg["flags"] for leg in data["legs"])


def test_plan_csv_and_timeline():
    demo = str(ROOT / "profiles" / "piston-ridge-crossing.yaml")
    legs = list(csv.DictReader(io.StringIO(run("plan", demo, "--csv").stdout)))
    samples = list(csv.DictReader(io.StringIO(run("plan", demo, "--csv", "--timeline").stdout)))
    assert len(legs) == 7 and len(samples) > len(legs)
    assert {"sao2_pct", "arterial_po2_mmhg", "hypoxic_dose_kmh", "flags"} <= set(legs[0])
    timeline = json.loads(run("plan", demo, "--json", "--timeline").stdout)["timeline"]
    assert len(timeline) == len(samples)


def test_plan_several_files_reports_failures(tmp_path):
    bad = tmp_path / "bad.yaml"
    bad.write_text("kind: expedition\nname: x\nstart_altitude: 1000 m\ndays:\n  - {day: 1, sleep: 3000}\n")
    before = bad.read_bytes()
    good = str(ROOT / "profiles" / "trek-teskavor.yaml")
    proc = run("plan", good, str(bad), "--json")
    assert proc.returncode == 2
    assert "bad.yaml" in proc.stderr and "1 of 2" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert json.loads(proc.stdout)["plan"]            # the plan that worked: one object, one line
    assert bad.read_bytes() == before


def test_plan_json_is_one_object_per_plan_per_line():
    """One documented shape for one file or many: JSON Lines, one object per plan."""
    demo = str(ROOT / "profiles" / "piston-ridge-crossing.yaml")
    one = run("plan", demo, "--json", "--members", "0").stdout.splitlines()
    two = run("plan", demo, demo, "--json", "--members", "0").stdout.splitlines()
    assert len(one) == 1 and len(two) == 2
    assert json.loads(one[0]) == json.loads(two[0]) == json.loads(two[1])


@pytest.mark.parametrize("args, needle", [
    (["--json", "--csv"], "--json and --csv exclude each other"),
    (["--timeline"], "--timeline adds every time sample to --json or --csv"),
])
def test_conflicting_options_are_usage_errors(args, needle):
    proc = run("plan", str(ROOT / "profiles" / "piston-ridge-crossing.yaml"), *args)
    assert proc.returncode == 2 and proc.stdout == ""
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0] and lines[0].startswith("Error:")


def test_check_and_schema():
    proc = run("check", *map(str, DEMOS))
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.count("ok:") == len(DEMOS)
    schema = json.loads(run("schema").stdout)
    assert "expedition" in json.dumps(schema) and "flight" in json.dumps(schema)


def test_rules_option_replaces_plan_rules():
    demo = str(ROOT / "profiles" / "piston-ridge-crossing.yaml")
    data = json.loads(run("plan", demo, "--json", "--rules", "eu-nco").stdout)
    assert data["rule_sets"] == ["eu-nco"]
    proc = run("plan", demo, "--rules", "no-such-rules")
    assert proc.returncode == 2 and "no-such-rules" in proc.stderr


LOCAL_RULES = """\
id: club-local
title: "Flying club local oxygen procedure (invented for the test)"
label: "club procedure"
jurisdiction: "local"
kind: aviation
edition: "test"
citation: "Invented local procedure used only by the test suite"
caution: "Guidance only; the operator's procedures decide."
thresholds:
  - id: crew-above-9000-20min
    applies_to: crew
    quantity: cabin_pressure_altitude
    check: oxygen
    value: "9,000 ft"
    duration: "more than 20 min"
    requirement: "crew use oxygen above 9,000 ft for more than 20 minutes"
    section: "local 1"
    basis: common practice
    where: "test"
"""


def test_users_own_rule_file_from_plan_and_command_line(tmp_path):
    rules = tmp_path / "club.yaml"
    rules.write_text(LOCAL_RULES)
    plan_text = (ROOT / "profiles" / "piston-ridge-crossing.yaml").read_text()
    plan = tmp_path / "crossing.yaml"
    plan.write_text(plan_text.replace("rules: [us-14cfr-91]", "rules: [us-14cfr-91]\nrule_file: club.yaml"))
    data = json.loads(run("plan", str(plan), "--json").stdout)
    assert "club-local" in data["rule_sets"]
    assert any(f["rule_set_id"] == "club-local" for f in data["findings"])
    data = json.loads(run("plan", str(ROOT / "profiles" / "piston-ridge-crossing.yaml"), "--json",
                          "--rules", str(rules)).stdout)
    assert any(f["rule_set_id"] == "club-local" for f in data["findings"])
    broken = tmp_path / "broken.yaml"
    broken.write_text(LOCAL_RULES.replace('value: "9,000 ft"', 'value: "9,000"'))
    proc = run("plan", str(ROOT / "profiles" / "piston-ridge-crossing.yaml"), "--rules", str(broken))
    assert proc.returncode == 2 and "broken.yaml" in proc.stderr and "Traceback" not in proc.stderr


def test_medical_transfer_plan_reports_fitness_to_fly():
    # a patient with lung disease and ground values: altox plan compares the predicted PaO2 at the
    # cabin altitude with the BTS 2022 thresholds (Coker RK et al. Thorax 2022;77:329), as guidance
    data = json.loads(run("plan", str(ROOT / "profiles" / "medevac-transfer.yaml"), "--json", "--members", "0").stdout)
    (fit,) = data["fitness_to_fly"]
    assert fit["lung_disease"] and fit["regression"]["method"].startswith("Dillard")
    assert fit["regression"]["bts"]["checks"]["pao2"]["threshold_kpa"] == 6.6
    assert "not a clearance" in fit["caution"]
    out = run("plan", str(ROOT / "profiles" / "medevac-transfer.yaml"), "--members", "0").stdout
    assert "Fitness to fly" in out and "GUIDANCE ONLY" in out
