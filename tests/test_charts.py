"""Charts of evaluated plans (altox.present.charts): files that decode, what they show, and how they are drawn."""

import os
import struct
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from clirun import run_cli

from altox.present.charts import (CHART_DPI, CHART_SIZE_IN, applied_rule_sets, plan_figure, render_chart,
                                  saturation_levels_pct, threshold_lines)
from altox.evaluation.evaluate import evaluate_plan
from altox.plan.profile import load_plan, load_plan_text

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))
ENV = {**os.environ, "COLUMNS": "80", "NO_COLOR": "1"}
SVG_NS = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def results():
    return {d.stem: evaluate_plan(load_plan(d)) for d in DEMOS}


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from the PNG signature and IHDR chunk (PNG spec, section 11.2.2)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    length, kind = struct.unpack(">I4s", data[8:16])
    assert kind == b"IHDR" and length == 13
    return struct.unpack(">II", data[16:24])


def svg_text(data: bytes) -> str:
    root = ET.fromstring(data)            # raises if the SVG is not well-formed XML
    assert root.tag == SVG_NS + "svg"
    return " ".join(" ".join(t.itertext()) for t in root.iter(SVG_NS + "text"))


def svg_ids(data: bytes) -> set[str]:
    return {el.get("id") for el in ET.fromstring(data).iter() if el.get("id")}


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_png_decodes_to_requested_size(results, demo):
    data = render_chart(results[demo], "png", figsize=(6.4, 4.8), dpi=50)
    assert png_size(data) == (320, 240)


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_svg_parses_with_title_and_units(results, demo):
    r = results[demo]
    text = svg_text(render_chart(r, "svg"))
    assert r.name in text
    assert "(%)" in text and "SaO2" in text
    if r.kind == "flight":
        assert "Pressure altitude (ft)" in text and "Pressure altitude (m)" in text and "(h:min)" in text
    else:
        assert "Altitude (m)" in text and "Altitude (ft)" in text and "(days)" in text
    assert "never a clearance" in text


def test_feet_puts_feet_on_the_main_axis(results):
    r = results["trek-teskavor"]
    fig_m, fig_ft = plan_figure(r), plan_figure(r, feet=True)
    assert fig_m.axes[0].get_ylabel() == "Altitude (m)"
    assert fig_ft.axes[0].get_ylabel() == "Altitude (ft)"
    assert fig_ft.axes[0].get_ylim()[1] == pytest.approx(fig_m.axes[0].get_ylim()[1] / 0.3048)
    # flights are in feet of pressure altitude either way, as in the tables
    jet = results["jet-highcruise"]
    assert plan_figure(jet).axes[0].get_ylabel() == plan_figure(jet, feet=True).axes[0].get_ylabel() \
        == "Pressure altitude (ft)"


def test_pdf_is_a_pdf(results):
    assert render_chart(results["piston-ridge-crossing"], "pdf").startswith(b"%PDF-")


def test_agg_canvas_and_no_display():
    code = ("import sys; from altox.plan.profile import load_plan; from altox.evaluation.evaluate import evaluate_plan; "
            "from altox.present.charts import plan_figure; "
            "fig = plan_figure(evaluate_plan(load_plan(sys.argv[1]))); "
            "print(type(fig.canvas).__name__, 'matplotlib.pyplot' in sys.modules)")
    env = {k: v for k, v in ENV.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "MPLBACKEND")}
    proc = subprocess.run([sys.executable, "-c", code, str(DEMOS[0])], capture_output=True, text=True, env=env)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.split() == ["FigureCanvasAgg", "False"]


def test_plan_without_chart_imports_no_matplotlib():
    code = ("import sys; from typer.testing import CliRunner; from altox.cli.main import app; import altox.present.charts, "
            "altox.present.report; r = CliRunner().invoke(app, ['plan', sys.argv[1]]); assert r.exit_code == 0, r.output; "
            "print('matplotlib' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code, str(DEMOS[0])], capture_output=True, text=True, env=ENV)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "False"


def test_threshold_lines_come_from_the_rule_data(results):
    from altox.guidance import load_rule_set

    for demo in ("piston-ridge-crossing", "jet-highcruise", "medevac-transfer"):
        r = results[demo]
        want = {round(th.lower_ft) for rid in r.rule_sets for th in load_rule_set(rid).thresholds
                if th.check not in ("mask", "supply")}   # flight-level rules are not cabin lines
        assert {round(ln["altitude_ft"]) for ln in threshold_lines(r, applied_rule_sets(r)[0])} == want
        drawn = [ln for ln in plan_figure(r).axes[0].get_lines() if (ln.get_gid() or "").startswith("altox-threshold")]
        assert drawn and {round(ln.get_ydata()[0]) for ln in drawn} <= want
    # piston crossing: every threshold of 14 CFR 91.211 is near the profile and drawn
    drawn = [ln for ln in plan_figure(results["piston-ridge-crossing"]).axes[0].get_lines()
             if (ln.get_gid() or "").startswith("altox-threshold")]
    assert sorted(round(ln.get_ydata()[0]) for ln in drawn) == [12500, 14000, 15000]
    # expeditions: the sleeping altitude above which the guideline applies (3,000 m in wms-2024)
    trek = results["trek-teskavor"]
    above = {th.above_m for th in load_rule_set("wms-2024").thresholds}
    assert [ln["altitude_m"] for ln in threshold_lines(trek, applied_rule_sets(trek)[0])] == sorted(above)


def test_saturation_lines_at_the_plans_levels(results):
    trek = results["trek-teskavor"]
    assert saturation_levels_pct(trek) == [90.0, 85.0, 80.0]            # the plan's saturation_levels
    ys = {round(ln.get_ydata()[0], 6) for ln in plan_figure(trek).axes[1].get_lines()
          if ln.get_linestyle() not in ("-", "None") and len(set(ln.get_ydata())) == 1}
    assert {90.0, 85.0, 80.0} <= ys


def test_rest_days_oxygen_and_broken_legs_are_marked(results):
    trek_ids = svg_ids(render_chart(results["trek-teskavor"], "svg"))
    rest_legs = [leg["leg"] for leg in results["trek-teskavor"].legs if leg.get("activity") == "rest"]
    assert rest_legs == [4, 7, 10]
    assert {f"altox-rest-leg-{n}-alt" for n in rest_legs} <= trek_ids
    assert "altox-broken-leg-6-alt" in trek_ids                    # X1: no extra day by day 6
    piston = results["piston-ridge-crossing"]
    ids = svg_ids(render_chart(piston, "svg"))
    assert "altox-oxygen-leg-5" in ids                             # crew oxygen on leg 5
    assert {"altox-broken-leg-4-alt", "altox-broken-leg-6-sat"} <= ids
    assert not any(i.startswith("altox-broken-leg-5") for i in ids)


def _signature(handle):
    from matplotlib.colors import to_rgba
    from matplotlib.lines import Line2D

    if isinstance(handle, Line2D):
        ls = handle.get_linestyle()
        dashes = tuple(round(x, 1) for x in (getattr(handle, "_unscaled_dash_pattern", handle._dash_pattern)[1] or ())) if ls != "None" else "none"
        return ("line", dashes, round(handle.get_linewidth(), 1), handle.get_marker() or "None")
    r, g, b, a = to_rgba(handle.get_facecolor())
    lum = round((0.2126 * r + 0.7152 * g + 0.0722 * b) * a + (1 - a), 1)
    return ("patch", handle.get_hatch() or "", lum)


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_every_legend_entry_differs_in_greyscale(results, demo):
    """Colour is never the only difference: line style, width, marker, hatch or grey level."""
    fig = plan_figure(results[demo])
    handles = fig.legends[0].legend_handles
    sigs = [_signature(h) for h in handles]
    assert len(handles) >= 5
    assert len(set(sigs)) == len(sigs), sigs


def test_odd_plan_names_are_drawn_as_written(tmp_path):
    text = ("kind: expedition\nname: 'Costs $5 & <b>not</b> $10'\nstart_altitude: 800 m\n"
            "days:\n  - {day: 1, sleep: 2000 m}\n  - {day: 2, sleep: 2400 m}\n")
    r = evaluate_plan(load_plan_text(text))
    assert not r.members
    data = render_chart(r, "svg")
    assert "Costs $5 & <b>not</b> $10" in svg_text(data)          # not read as mathematics or markup
    assert png_size(render_chart(r, "png", figsize=(4, 3), dpi=40)) == (160, 120)


def test_cli_chart_default_size_and_formats(tmp_path):
    out = tmp_path / "trek.png"
    proc = run_cli("plan", ROOT / "profiles" / "trek-teskavor.yaml", "--chart", out, "--feet", "--json",
                   "--members", "0", env={"COLUMNS": "80"}, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.lstrip().startswith("{")                   # --json output stays clean
    assert png_size(out.read_bytes()) == (round(CHART_SIZE_IN[0] * CHART_DPI), round(CHART_SIZE_IN[1] * CHART_DPI))
    assert [p.name for p in tmp_path.iterdir()] == ["trek.png"]    # no temporary file left behind
    bad = run_cli("plan", DEMOS[0], "--chart", tmp_path / "x.jpg", "--members", "0")
    assert bad.returncode == 2 and "--chart" in bad.stderr and "x.jpg" in bad.stderr
    assert len(bad.stderr.strip().splitlines()) == 1
