"""The oxygen commands, driven through the real app after importing altox.cli.oxygen; and the plan sections."""

import json
import os
import subprocess
import sys

import pytest
from clirun import run_cli

ENV = {**os.environ, "COLUMNS": "80", "NO_COLOR": "1"}
RUN = "import altox.cli.oxygen, altox.cli.main as c; c.main()"


def run(*args):
    return run_cli(*args, env={"COLUMNS": "80"})


def invoke(*args):
    from typer.testing import CliRunner

    import altox.cli.oxygen  # noqa: F401  registers the commands
    from altox.cli.main import app

    return CliRunner().invoke(app, list(args), env={"COLUMNS": "80", "NO_COLOR": "1"})


def test_o2_target_json():
    r = invoke("o2-target", "--altitude", "5500m", "--atmosphere", "mountain", "--hold-altitude", "3000m",
               "--activity", "sleep", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert 0.25 < data["fio2_needed"] < 0.35 and data["device_reaches_target"]
    assert data["caution"].startswith("GUIDANCE ONLY")


def test_o2_target_table_ends_with_caution():
    r = invoke("o2-target", "--altitude", "FL350", "--hold-sao2", "90 %", "--device", "diluter-demand")
    assert r.exit_code == 0, r.output
    assert "FiO2 needed" in r.output and r.output.rstrip().endswith("╯")
    assert "GUIDANCE ONLY" in r.output
    assert max(len(line) for line in r.output.splitlines()) <= 80


def test_o2_flow_json():
    r = invoke("o2-flow", "--altitude", "0m", "--flow", "2 L/min", "--json")
    data = json.loads(r.output)
    # rule of thumb (common practice): 2 L/min on a cannula ~ 27-29 % at sea level
    assert data["fio2"] == pytest.approx(0.29, abs=0.02)


def test_cylinders_json_worked_example():
    r = invoke("cylinders", "--water", "10 L", "--fill", "200 bar", "--flow", "2 L/min", "--hours", "8 h",
               "--people", "4", "--margin", "0 %", "--json")
    data = json.loads(r.output)
    assert data["gas_l"] == pytest.approx(2000.0 / 1.01325, rel=1e-6)
    assert data["cylinders_per_person"] == 1 and data["cylinders_total"] == 4


def test_room_both_ways():
    a = json.loads(invoke("room", "--site", "0m", "--target", "3000m", "--json").output)
    b = json.loads(invoke("room", "--site", "0m", "--o2", f"{100 * a['o2_fraction']:.6f} %", "--json").output)
    assert b["equivalent_altitude_m"] == pytest.approx(3000.0, abs=1.0)
    c = invoke("room", "--site", "4500m", "--o2", "27 %")
    assert "fire codes" in c.output and "GUIDANCE ONLY" in c.output


def test_decompress_json():
    data = json.loads(invoke("decompress", "--altitude", "FL350", "--rate", "4,000 ft/min", "--json").output)
    assert data["tuc_min_s"] == 30.0 and data["tuc_max_s"] == 60.0
    assert data["minutes_to"]["10000"] == pytest.approx(25000.0 / 4000.0)
    assert data["crew"]["oxygen_l"] > 0


@pytest.mark.parametrize("args, needle", [
    (["o2-target", "--altitude", "5500", "--hold-altitude", "3000m"], "--altitude"),
    (["o2-target", "--altitude", "5500m"], "exactly one target"),
    (["o2-target", "--altitude", "5500m", "--hold-altitude", "3000m", "--device", "cannula"], "--device"),
    (["o2-flow", "--altitude", "5500m", "--flow", "2"], "flow"),
    (["cylinders", "--water", "10", "--fill", "200 bar"], "--water"),
    (["cylinders", "--water", "10 L", "--fill", "200"], "--fill"),
    (["room", "--site", "4500m"], "--o2"),
    (["decompress", "--altitude", "FL410", "--rate", "fast"], "--rate"),
])
def test_bad_input_one_error_line_exit_2(args, needle):
    proc = run(*args)
    assert proc.returncode == 2, (proc.stdout, proc.stderr)
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error:") and needle in lines[0]


def test_help_does_not_import_numpy():
    code = ("import sys, altox.cli.oxygen, altox.cli.main; "
            "bad = [m for m in ('scipy', 'ambiance', 'matplotlib', 'numpy') if m in sys.modules]; print(bad)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=ENV).stdout
    assert out.strip() == "[]"


@pytest.mark.parametrize("name", ["jet-highcruise.yaml", "trek-teskavor.yaml"])
def test_plan_sections_render(name):
    from pathlib import Path

    from rich.console import Console

    from altox.evaluation.evaluate import evaluate_plan
    from altox.evaluation.oxygen_plan import decompression_review, oxygen_review
    from altox.plan.profile import load_plan
    from altox.present.render import to_json
    from altox.present.render_oxygen import plan_sections

    plan = load_plan(Path(__file__).parent.parent / "profiles" / name)
    result = evaluate_plan(plan)
    ox, dec = oxygen_review(plan, result), decompression_review(plan, result)
    json.loads(to_json({"oxygen": ox, "decompression": dec}))
    console = Console(width=80, record=True, color_system=None)
    for part in plan_sections(ox, dec):
        console.print(part)
    text = console.export_text()
    assert "GUIDANCE ONLY" in text
    if name.startswith("jet"):
        assert dec["applicable"] and dec["legs"] and "After a rapid decompression" in text
        assert dec["descent_rate_ft_min"] == 4500.0
    else:
        assert not dec["applicable"] and ox["would_need"]
