"""The real `altox` command, driven as a subprocess: exit status, message, JSON."""

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from clirun import run_cli

ENV = {**os.environ, "COLUMNS": "100", "NO_COLOR": "1"}


def run(*args, timeout=60):
    return run_cli(*args)


def run_process(*args, timeout=60):
    """The console entry point in a new interpreter (smoke tests only)."""
    return subprocess.run([sys.executable, "-m", "altox", *args], capture_output=True, text=True,
                          env=ENV, timeout=timeout)


def test_point_json_contract():
    proc = run("point", "--altitude", "5000m", "--json")
    assert proc.returncode == 0, proc.stderr
    data = json.loads(proc.stdout)
    for key in ("altitude_m", "atmosphere", "barometric_mmhg", "fio2", "inspired_po2_mmhg",
                "alveolar_pco2_mmhg", "alveolar_po2_mmhg", "arterial_po2_mmhg", "arterial_ph",
                "sao2_pct", "o2_content_ml_dl", "equivalent_altitude_m"):
        assert key in data
    assert data["altitude_m"] == 5000.0
    # ICAO standard atmosphere at 5000 m: 54048 Pa = 405.4 mmHg (U.S. Standard Atmosphere 1976)
    assert data["barometric_mmhg"] == pytest.approx(405.4, abs=0.1)


def test_point_table_has_units_and_caution():
    proc = run("point", "--altitude", "14,800 ft", "--atmosphere", "mountain", "--days", "5")
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    assert "mmHg" in out and "kPa" in out and "Expected saturation" in out
    assert "GUIDANCE ONLY" in out


def test_point_units_agree():
    a = json.loads(run("point", "--altitude", "4.5km", "--json").stdout)
    b = json.loads(run("point", "--altitude", "4500 m", "--json").stdout)
    c = json.loads(run("point", "--pressure", f"{a['barometric_mmhg'] * 0.133322387415:.6f} kPa", "--json").stdout)
    assert a["sao2_pct"] == b["sao2_pct"]
    assert c["altitude_m"] == pytest.approx(4500.0, abs=0.5)


def test_point_measured_overrides():
    data = json.loads(run("point", "--altitude", "5000m", "--paco2", "30", "--ph", "7.45", "--json").stdout)
    assert data["alveolar_pco2_mmhg"] == 30.0 and data["arterial_ph"] == 7.45


@pytest.mark.parametrize("args, needle", [
    (["--altitude", "5000"], "--altitude"),                 # bare number: ambiguous unit
    (["--altitude", "5000 parsecs"], "unknown unit"),
    (["--altitude", "high"], "--altitude"),
    (["--altitude", "5000m", "--fio2", "21"], "percentage"),
    (["--altitude", "5000m", "--fio2", "0"], "--fio2"),
    (["--altitude", "5000m", "--fio2", "1.5"], "--fio2"),
    (["--altitude", "90000m"], "outside"),
    (["--altitude", "12000m", "--atmosphere", "mountain"], "feet"),
    (["--pressure", "40 mmHg"], "water vapour"),
    (["--pressure", "nan kPa"], "--pressure"),
    (["--altitude", "5000m", "--days", "nan"], "--days"),
    (["--altitude", "5000m", "--atmosphere", "mars"], "--atmosphere"),
    ([], "--altitude"),
])
def test_point_bad_input(args, needle):
    proc = run("point", *args)
    assert proc.returncode == 2
    assert needle in proc.stderr
    assert "Traceback" not in proc.stderr and "Traceback" not in proc.stdout
    assert len(proc.stderr.strip().splitlines()) == 1


def test_console_entry_point_smoke():
    # one real new interpreter per entry point: `python -m altox`, as the console script runs it
    ok = run_process("point", "--altitude", "5000m", "--json")
    assert ok.returncode == 0, ok.stderr
    assert json.loads(ok.stdout)["barometric_mmhg"] == pytest.approx(405.4, abs=0.1)   # ICAO 5000 m, as above
    bad = run_process("point", "--altitude", "5000")
    assert bad.returncode == 2 and bad.stderr.startswith("Error: ") and "Traceback" not in bad.stderr
    plan = run_process("plan", str(Path(__file__).resolve().parents[1] / "profiles" / "trek-teskavor.yaml"), "--members", "0")
    assert plan.returncode == 0 and "GUIDANCE ONLY" in plan.stdout


def test_help_is_fast_path():
    # --help must not import the heavy modules
    code = ("import sys; from altox.cli.main import app; from typer.testing import CliRunner; "
            "r = CliRunner().invoke(app, ['point', '--help']); assert r.exit_code == 0, r.output; "
            "bad = [m for m in ('scipy', 'ambiance', 'matplotlib', 'numpy') if m in sys.modules]; "
            "print(','.join(bad))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=ENV)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == ""


def test_every_command_has_help_and_is_documented():
    from pathlib import Path

    from altox.cli.main import app

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for command in app.registered_commands:
        name = command.name or command.callback.__name__
        assert command.callback.__doc__, name
        assert f"altox {name}" in readme, f"README does not document `altox {name}`"
        assert run(name, "--help").returncode == 0
