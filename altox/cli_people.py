"""Commands about people: readings against the expected range, the expected range itself, fitness to fly.

They register on the main typer app when this module is imported (``from . import cli_people``
in :mod:`altox.cli`).  Thin: the work is in :mod:`altox.population`, :mod:`altox.readings` and
:mod:`altox.individual`; errors go through :func:`altox.cli.run_guarded` (one message, exit 2).
A progress bar (rich) is shown for the ensemble only when standard error is a terminal.
"""

from __future__ import annotations

import json
import sys
from typing import Optional

import typer

from .cli_base import app, run_guarded
from .defaults import ENSEMBLE_MEMBERS, ENSEMBLE_SEED

_SEED_HELP = "Seed of the ensemble (the same seed gives the same numbers)."


def _progress_callback():
    """(callback, close) for the ensemble: a rich bar on a terminal, nothing when piped."""
    if not sys.stderr.isatty():
        return None, lambda: None
    from .terminal import console as Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    bar = Progress(TextColumn("expected range"), BarColumn(), TextColumn("{task.percentage:>3.0f}%"),
                   TimeRemainingColumn(), console=Console(stderr=True), transient=True)
    bar.start()
    task = bar.add_task("ensemble", total=1.0)

    def update(done, total):
        bar.update(task, completed=done / max(total, 1))

    return update, bar.stop


def _ranges(plan, result, members, seed):
    from .population import expected_range

    update, close = _progress_callback()
    try:
        return expected_range(plan, result, n=members, seed=seed, progress=update)
    finally:
        close()


def _plan_and_ranges(file, members, seed, kind=None):
    """Load and evaluate a plan, then its expected range (with the progress bar); ``kind`` refuses
    a plan of the other kind before any work."""
    from .evaluate import evaluate_plan
    from .profile import load_plan

    from .cli_base import check_seed

    _check_members(members)
    check_seed(seed)
    plan = load_plan(file)
    if kind is not None and plan.kind != kind:
        from .errors import ProfileError

        raise ProfileError(f"{file}: kind: this command reviews {kind} plans; this plan is a {plan.kind} "
                           f"(expected kind: {kind}).", path=file, field="kind", value=plan.kind,
                           expected=f"kind: {kind}")
    from .population import check_ensemble_size

    check_ensemble_size(plan, members)
    result = evaluate_plan(plan)
    return plan, result, _ranges(plan, result, members, seed)


def _jsonable(obj):
    import numpy as np

    if isinstance(obj, dict):
        return {k: _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return obj.item()
    return obj


def _check_members(members: int):
    from .errors import OutOfRangeError

    if not 10 <= members <= 1_000_000:
        raise OutOfRangeError(f"--members: {members} is outside 10 to 1,000,000.", field="--members")


def _pct(x):
    return "-" if x is None else f"{x:.0f} %"


def readings_renderables(plan_name: str, rows: list, notes: list, feet: bool = False) -> list:
    """Rich renderables of a readings review (table, flags, actions, oximetry caveats, notes).

    The caller adds the general caution.  SpO2 readings are shown against the expected SpO2
    range (the SaO2 range widened by the oximeter's published error).
    """
    from rich.table import Table
    from rich.text import Text

    from .readings import FLAG_WORDS, oximetry_caveats
    from .units import altitude_unit, shown_altitude

    unit = altitude_unit(feet)
    table = Table(title=f"Readings: {plan_name}", title_justify="left", pad_edge=False)
    for col in ("Day", "Member", unit, "SpO2", "Expected SpO2", "HR", "LLS", "Flags"):
        table.add_column(col, overflow="fold")
    for r in rows:
        e = r["expected_spo2_pct"]
        ll = r["lake_louise"]
        lls = "-" if ll is None else f"{ll['total']}" + ("" if ll["headache_known"] else " (total)")
        when = f"{r['day']} {int(r['time_h']):02d}:{round(r['time_h'] % 1 * 60):02d}"
        table.add_row(when, r["member"], shown_altitude(r["altitude_m"], feet), _pct(r["spo2_pct"]),
                      ((f"{e['central']:.0f} ({e['low']:.0f}-{e['high']:.0f})" if e["low"] is not None
                        else f"{e['central']:.0f} (-)")
                       if r["expected_sao2_pct"].get("model_valid", True) else "none (outside)")   # no steady state
                      + (" (extrapolated)" if r.get("extrapolated") else ""),
                      "-" if r["heart_rate_per_min"] is None else f"{r['heart_rate_per_min']:.0f}",
                      lls, ", ".join(FLAG_WORDS.get(f["code"], f["code"]) for f in r["flags"]) or "-")
    out = [table if rows else Text("No observations in this plan.")]
    if rows:
        out.append(Text(f"Day and clock time; {unit}: altitude; SpO2 and expected SpO2 in %, central value and "
                        "range; HR: heart rate /min; LLS: 2018 Lake Louise score; AMS: acute mountain sickness; "
                        "HAPE: high-altitude pulmonary oedema.", style="dim"))
    seen = set()
    for r in rows:
        if r.get("extrapolated") and r["member"] not in seen:
            seen.add(r["member"])
            out.append(Text(f"{r['member']}: {r['extrapolated']}."))
    for r in rows:
        for a in r.get("actions", []):
            out.append(Text(f"ACTION day {r['day']} {r['member']}: {a['action']} [{a['source']}]", style="bold"))
    for r in rows:
        for f in r["flags"]:
            line = f"Day {r['day']} {r['member']}: {f['message']}"
            if "recommendation" in f:
                line += f" Recommendation: {f['recommendation']}"
            out.append(Text(f"- {line} [{f['source']}]"))
    if any(r["spo2_pct"] is not None for r in rows):
        c = oximetry_caveats()
        out.append(Text(f"{c['text']} [{c['source']}]", style="dim"))
    out += [Text(n, style="dim") for n in notes]
    return out


@app.command("readings")
def readings_cmd(
    file: str = typer.Argument(..., help="Expedition plan (YAML) with 'observations'."),
    members: int = typer.Option(ENSEMBLE_MEMBERS, "--members", help="Simulated people per person for the "
                                "expected range (the same default as 'altox plan' and 'altox range')."),
    seed: int = typer.Option(ENSEMBLE_SEED, "--seed", help=_SEED_HELP),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of a table."),
):
    """Compare SpO2 and Lake Louise readings with each member's expected range; flag as guidance."""

    def body():
        from .readings import CAUTION, review
        from .render import CAUTION as GENERAL

        plan, result, ranges = _plan_and_ranges(file, members, seed, kind="expedition")
        rows = review(plan, result, ranges)
        if json_out:
            typer.echo(json.dumps(_jsonable({"plan": plan.name, "source": file, "members": members, "seed": seed,
                                             "readings": rows, "notes": ranges["notes"],
                                             "caution": CAUTION + " " + GENERAL}), indent=2))
            return
        from .terminal import console as Console

        from .render import caution_panel

        console = Console()
        for part in readings_renderables(plan.name, rows, ranges["notes"]):
            console.print(part)
        console.print(CAUTION, highlight=False)
        console.print(caution_panel())

    run_guarded(body)


@app.command("range")
def range_cmd(
    file: str = typer.Argument(..., help="Plan file (YAML)."),
    members: int = typer.Option(ENSEMBLE_MEMBERS, "--members", help="Simulated people per person."),
    seed: int = typer.Option(ENSEMBLE_SEED, "--seed", help=_SEED_HELP),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of tables."),
):
    """Expected SaO2 per leg for each person: central value and 5th-95th percentile range."""

    def body():
        from .render import CAUTION

        plan, _result, ranges = _plan_and_ranges(file, members, seed)
        if json_out:
            from .render import range_without_unsteady

            people = [{k: v for k, v in p.items() if k not in ("central_sao2_pct", "sao2_pct_percentiles", "model_valid")}
                      for p in map(range_without_unsteady, ranges["people"])]
            typer.echo(json.dumps(_jsonable({"plan": plan.name, "members": members, "seed": seed,
                                             "percentiles": ranges["percentiles"], "people": people,
                                             "notes": ranges["notes"], "caution": CAUTION}), indent=2))
            return
        from .terminal import console as Console
        from rich.table import Table

        from .render import caution_panel

        console = Console()
        for p in ranges["people"]:
            table = Table(title=f"{p['name']} ({p['role']})", title_justify="left")
            for col in ("Leg", "", "State", "SaO2 central", "Range"):
                table.add_column(col)
            for leg in p["legs"]:
                q = leg["sao2_pct_percentiles"]
                if leg.get("model_valid", True):
                    central, spread = f"{leg['central_sao2_pct']:.0f} %", f"{q[0]:.0f}-{q[-1]:.0f} %"
                else:   # no steady state: no saturation (see the notes)
                    central, spread = "none ?", "-"
                table.add_row(str(leg["leg"]), leg["label"], "asleep" if leg["sleeping"] else "awake",
                              central, spread)
            console.print(table)
        for n in ranges["notes"]:
            console.print(n, style="dim", highlight=False)
        console.print(caution_panel())

    run_guarded(body)


def fitness_lines(results: list) -> list:
    """Plain lines of fitness-to-fly results (shared by this command and `altox plan`): the verdict first."""
    lines = []
    for r in results:
        v = r["verdict"]
        head = r.get("name", "Passenger")
        lines.append(f"{head}: {v['text']} (guidance)")
        lines.append(f"  Path: {v['path']}")
        lines += [f"  Why: {reason}" for reason in v["reasons"]]
        lines += [f"  Source: {src}" for src in v["sources"]]
        if v["must_know"]:
            lines.append("  What must be known: " + "; ".join(v["must_know"]))
        reg = r.get("regression")
        cabin = f"{r['cabin_altitude_ft']:,.0f} ft"
        if reg:
            lines.append(f"  Cabin: the regression is for {reg['valid_at_ft']:,.0f} ft, where it was derived; "
                         f"this flight's cabin is {cabin} (ground values at {r['ground_elevation_ft']:,.0f} ft).")
        else:
            lines.append(f"  Cabin: {cabin} (ground values at {r['ground_elevation_ft']:,.0f} ft).")
        m = r.get("model")
        if m:
            lines.append(f"  Context only (the verdict does not rest on it): {m['method']} at {cabin}: PaO2 {m['pao2_mmhg']:.1f} mmHg "
                         f"({m['pao2_kpa']:.2f} kPa), SaO2 {m['sao2_pct']:.0f} %.")
        if r.get("defaults_used"):
            lines.append("  Defaults used: " + ", ".join(r["defaults_used"]))
        lines += [f"  Note: {n}" for n in r["notes"]]
        lines.append(f"  {r['caution']}")
    import textwrap

    return [w for line in lines for w in textwrap.wrap(line, 80, subsequent_indent="    ", break_on_hyphens=False)]


def _risk_factors(text):
    """--risk-factors: None (unknown), [] ('none') or the named factors; a bad name is a usage error."""
    from .errors import UnitError
    from .individual import coefficients

    if text is None:
        return None
    if text.strip().lower() == "none":
        return []
    known = coefficients()["fitness_to_fly"]["bts_2011_screening"]["risk_factors"]
    names = [w.strip().lower().replace("-", "_") for w in text.split(",") if w.strip()]
    bad = [n for n in names if n not in known]
    if bad:
        raise UnitError(f"--risk-factors: {bad[0]!r} is not a screening risk factor; expected 'none' or some of "
                        + ", ".join(known) + ".")
    return names


@app.command("fitness-to-fly")
def fitness_cmd(
    file: Optional[str] = typer.Argument(None, help="Flight plan (YAML); its people with ground values are assessed."),
    pao2: Optional[str] = typer.Option(None, "--pao2", help="Ground arterial PO2 on air, with unit: 61mmHg, 8.1kPa."),
    fev1: Optional[str] = typer.Option(None, "--fev1", help="FEV1 as a fraction of predicted: 0.45 or '45 %'."),
    spo2: Optional[str] = typer.Option(None, "--spo2", help="Ground SpO2 on air: '91 %' or 0.91."),
    cabin: Optional[str] = typer.Option(None, "--cabin", help="Cabin pressure altitude with unit, without a "
                                        "plan (default 8,000 ft, the maximum in normal operation)."),
    ground: str = typer.Option("0ft", "--ground", help="Elevation where the ground values were measured."),
    age: Optional[str] = typer.Option(None, "--age", help="Age in years (below 16: the paediatric path)."),
    risk: Optional[str] = typer.Option(None, "--risk-factors", help="Screening risk factors present, comma-"
                                       "separated, or 'none' when all were checked: hypercapnia, fev1_below_50, "
                                       "lung_cancer, restrictive, ventilator, cerebrovascular_or_cardiac, "
                                       "recent_exacerbation. Not given: unknown."),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of text."),
):
    """One fitness-to-fly verdict by the published path (BTS screening, regression), with its reason (guidance)."""

    def body():
        from .errors import UnitError
        from .individual import default_cabin_ft, fitness_to_fly, occupant_fitness_to_fly
        from .units import M_PER_FT, parse_fraction, parse_quantity

        if file is not None:
            from .profile import load_plan
            from .timeline import expand

            if cabin is not None:
                raise UnitError(f"--cabin is for a passenger without a plan; {file} sets its own cabin "
                                "altitude. Drop --cabin, or drop the plan file.")
            plan = load_plan(file)
            if plan.kind != "flight":
                raise UnitError(f"{file}: fitness to fly reads a flight plan (kind: flight), not {plan.kind}.")
            cabin_ft = float(expand(plan).cabin_pressure_altitude_ft.max())
            ground_ft = plan.departure_elevation_m / M_PER_FT
            people = [o for o in plan.aboard if o.ground_pao2_mmhg is not None or o.ground_spo2 is not None]
            results = [occupant_fitness_to_fly(o, cabin_ft, ground_ft) for o in people]
            if not results:
                raise UnitError(f"{file}: nobody aboard has a 'ground_pao2' or 'ground_spo2'.")
        else:
            if pao2 is None and spo2 is None:
                raise UnitError("give a plan file, or --pao2 (e.g. 61mmHg) or --spo2 (e.g. '91 %').")
            from .cli_base import _parse_number

            results = [fitness_to_fly(
                pao2_ground_mmhg=None if pao2 is None else parse_quantity(pao2, "pressure", field="--pao2"),
                fev1_fraction=None if fev1 is None else parse_fraction(fev1, field="--fev1"),
                spo2_ground=None if spo2 is None else parse_fraction(spo2, field="--spo2"),
                cabin_altitude_ft=(default_cabin_ft() if cabin is None else
                                   parse_quantity(cabin, "length", field="--cabin") / M_PER_FT),
                ground_elevation_ft=parse_quantity(ground, "length", field="--ground") / M_PER_FT,
                age_y=None if age is None else _parse_number(age, "--age", 0, 110, "years"),
                risk_factors=_risk_factors(risk))]
        if json_out:
            typer.echo(json.dumps(_jsonable(results if file else results[0]), indent=2))
            return
        for line in fitness_lines(results):
            typer.echo(line)

    run_guarded(body)
