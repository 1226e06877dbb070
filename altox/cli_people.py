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

from .cli import app, run_guarded
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


def _plan_and_ranges(file, members, seed):
    """Load and evaluate a plan, then its expected range (with the progress bar)."""
    from .evaluate import evaluate_plan
    from .profile import load_plan

    from .cli import check_seed

    _check_members(members)
    check_seed(seed)
    plan = load_plan(file)
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


def readings_renderables(plan_name: str, rows: list, notes: list) -> list:
    """Rich renderables of a readings review (table, flags, actions, oximetry caveats, notes).

    The caller adds the general caution.  SpO2 readings are shown against the expected SpO2
    range (the SaO2 range widened by the oximeter's published error).
    """
    from rich.table import Table
    from rich.text import Text

    from .readings import FLAG_WORDS, oximetry_caveats

    table = Table(title=f"Readings: {plan_name}", title_justify="left", pad_edge=False)
    for col in ("Day", "Member", "m", "SpO2", "Expected SpO2", "HR", "LLS", "Flags"):
        table.add_column(col, overflow="fold")
    for r in rows:
        e = r["expected_spo2_pct"]
        ll = r["lake_louise"]
        lls = "-" if ll is None else f"{ll['total']}" + ("" if ll["headache_known"] else " (total)")
        when = f"{r['day']} {int(r['time_h']):02d}:{round(r['time_h'] % 1 * 60):02d}"
        table.add_row(when, r["member"], f"{r['altitude_m']:,.0f}", _pct(r["spo2_pct"]),
                      (f"{e['central']:.0f} ({e['low']:.0f}-{e['high']:.0f})" if e["low"] is not None
                       else f"{e['central']:.0f} (-)")
                      + ("" if r["expected_sao2_pct"].get("model_valid", True) else " ?"),
                      "-" if r["heart_rate_per_min"] is None else f"{r['heart_rate_per_min']:.0f}",
                      lls, ", ".join(FLAG_WORDS.get(f["code"], f["code"]) for f in r["flags"]) or "-")
    out = [table if rows else Text("No observations in this plan.")]
    if rows:
        out.append(Text("Day and clock time; m: altitude; SpO2 and expected SpO2 in %, central value and "
                        "range; HR: heart rate /min; LLS: 2018 Lake Louise score; AMS: acute mountain sickness; "
                        "HAPE: high-altitude pulmonary oedema.", style="dim"))
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

        plan, result, ranges = _plan_and_ranges(file, members, seed)
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
            people = [{k: v for k, v in p.items() if k not in ("central_sao2_pct", "sao2_pct_percentiles", "model_valid")}
                      for p in ranges["people"]]
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
                mark = "" if leg.get("model_valid", True) else " ?"
                table.add_row(str(leg["leg"]), leg["label"], "asleep" if leg["sleeping"] else "awake",
                              f"{leg['central_sao2_pct']:.0f} %{mark}", f"{q[0]:.0f}-{q[-1]:.0f} %{mark}")
            console.print(table)
        for n in ranges["notes"]:
            console.print(n, style="dim", highlight=False)
        console.print(caution_panel())

    run_guarded(body)


def fitness_lines(results: list) -> list:
    """Plain lines of fitness-to-fly results (shared by this command and `altox plan`)."""
    lines = []
    for r in results:
        head = r.get("name", "Passenger")
        lines.append(f"{head}: cabin {r['cabin_altitude_ft']:,.0f} ft (ground values at "
                     f"{r['ground_elevation_ft']:,.0f} ft)")
        for key in ("regression", "model"):
            est = r.get(key)
            if not est:
                continue
            s = f", SaO2 {est['sao2_pct']:.0f} %" if "sao2_pct" in est else ""
            lines.append(f"  {est['method']}: PaO2 {est['pao2_mmhg']:.1f} mmHg ({est['pao2_kpa']:.2f} kPa){s}; "
                         f"BTS 2022: {est['bts']['reading']}")
        lines += [f"  note: {n}" for n in r["notes"]]
        lines.append(f"  {r['caution']}")
    return lines


@app.command("fitness-to-fly")
def fitness_cmd(
    file: Optional[str] = typer.Argument(None, help="Flight plan (YAML); its people with ground values are assessed."),
    pao2: Optional[str] = typer.Option(None, "--pao2", help="Ground arterial PO2 on air, with unit: 61mmHg, 8.1kPa."),
    fev1: Optional[str] = typer.Option(None, "--fev1", help="FEV1 as a fraction of predicted: 0.45 or '45 %'."),
    spo2: Optional[str] = typer.Option(None, "--spo2", help="Ground SpO2 on air: '91 %' or 0.91."),
    cabin: str = typer.Option("8000ft", "--cabin", help="Cabin pressure altitude with unit (without a plan)."),
    ground: str = typer.Option("0ft", "--ground", help="Elevation where the ground values were measured."),
    age: Optional[str] = typer.Option(None, "--age", help="Age in years."),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of text."),
):
    """Predicted PaO2/SpO2 at cabin altitude for passengers with lung disease, against BTS 2022 (guidance)."""

    def body():
        from .errors import UnitError
        from .individual import fitness_to_fly, occupant_fitness_to_fly
        from .units import M_PER_FT, parse_fraction, parse_quantity

        if file is not None:
            from .profile import load_plan
            from .timeline import expand

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
            from .cli import _parse_number

            results = [fitness_to_fly(
                pao2_ground_mmhg=None if pao2 is None else parse_quantity(pao2, "pressure", field="--pao2"),
                fev1_fraction=None if fev1 is None else parse_fraction(fev1, field="--fev1"),
                spo2_ground=None if spo2 is None else parse_fraction(spo2, field="--spo2"),
                cabin_altitude_ft=parse_quantity(cabin, "length", field="--cabin") / M_PER_FT,
                ground_elevation_ft=parse_quantity(ground, "length", field="--ground") / M_PER_FT,
                age_y=40.0 if age is None else _parse_number(age, "--age", 0, 110, "years"))]
        if json_out:
            typer.echo(json.dumps(_jsonable(results if file else results[0]), indent=2))
            return
        for line in fitness_lines(results):
            typer.echo(line)

    run_guarded(body)
