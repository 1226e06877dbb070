"""Commands about people: readings against the expected range, the expected range itself, fitness to fly.

They register on the main typer app when this module is imported (``from . import cli_people``
in :mod:`altox.cli.main`).  Thin: the work is in :mod:`altox.evaluation.population`, :mod:`altox.evaluation.readings` and
:mod:`altox.evaluation.individual`; errors go through :func:`altox.cli.main.run_guarded` (one message, exit 2).
A progress bar (rich) is shown for the ensemble only when standard error is a terminal.
"""

from __future__ import annotations

import json
import sys
from typing import Optional

import typer

from altox.cli.app import app, run_guarded
from altox.evaluation.defaults import ENSEMBLE_MEMBERS, ENSEMBLE_SEED
from altox.present.render_people import fitness_lines, readings_renderables  # noqa: E402,F401  (re-exported)

_SEED_HELP = "Seed of the ensemble (the same seed gives the same numbers)."


def _progress_callback():
    """(callback, close) for the ensemble: a rich bar on a terminal, nothing when piped."""
    if not sys.stderr.isatty():
        return None, lambda: None
    from altox.present.terminal import console as Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    bar = Progress(TextColumn("expected range"), BarColumn(), TextColumn("{task.percentage:>3.0f}%"),
                   TimeRemainingColumn(), console=Console(stderr=True), transient=True)
    bar.start()
    task = bar.add_task("ensemble", total=1.0)

    def update(done, total):
        bar.update(task, completed=done / max(total, 1))

    return update, bar.stop


def _ranges(plan, result, members, seed):
    from altox.evaluation.population import expected_range

    update, close = _progress_callback()
    try:
        return expected_range(plan, result, n=members, seed=seed, progress=update)
    finally:
        close()


def _plan_and_ranges(file, members, seed, kind=None):
    """Load and evaluate a plan, then its expected range (with the progress bar); ``kind`` refuses
    a plan of the other kind before any work."""
    from altox.evaluation.evaluate import evaluate_plan
    from altox.plan.profile import load_plan

    from altox.cli.app import check_seed

    _check_members(members)
    check_seed(seed)
    plan = load_plan(file)
    if kind is not None and plan.kind != kind:
        from altox.errors import ProfileError

        raise ProfileError(f"{file}: kind: this command reviews {kind} plans; this plan is a {plan.kind} "
                           f"(expected kind: {kind}).", path=file, field="kind", value=plan.kind,
                           expected=f"kind: {kind}")
    from altox.evaluation.population import check_ensemble_size

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
    from altox.errors import OutOfRangeError

    if not 10 <= members <= 1_000_000:
        raise OutOfRangeError(f"--members: {members} is outside 10 to 1,000,000.", field="--members")


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
        from altox.evaluation.readings import CAUTION, review
        from altox.present.render import CAUTION as GENERAL

        plan, result, ranges = _plan_and_ranges(file, members, seed, kind="expedition")
        rows = review(plan, result, ranges)
        if json_out:
            typer.echo(json.dumps(_jsonable({"plan": plan.name, "source": file, "members": members, "seed": seed,
                                             "readings": rows, "notes": ranges["notes"],
                                             "caution": CAUTION + " " + GENERAL}), indent=2))
            return
        from altox.present.terminal import console as Console

        from altox.present.terminal import caution_panel

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
        from altox.present.render import CAUTION

        plan, _result, ranges = _plan_and_ranges(file, members, seed)
        if json_out:
            from altox.present.render import range_without_unsteady

            people = [{k: v for k, v in p.items() if k not in ("central_sao2_pct", "sao2_pct_percentiles", "model_valid")}
                      for p in map(range_without_unsteady, ranges["people"])]
            typer.echo(json.dumps(_jsonable({"plan": plan.name, "members": members, "seed": seed,
                                             "percentiles": ranges["percentiles"], "people": people,
                                             "notes": ranges["notes"], "caution": CAUTION}), indent=2))
            return
        from altox.present.terminal import console as Console
        from rich.table import Table

        from altox.present.terminal import caution_panel

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


def _risk_factors(text):
    """--risk-factors: None (unknown), [] ('none') or the named factors; a bad name is a usage error."""
    from altox.errors import UnitError
    from altox.evaluation.individual import coefficients

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
        from altox.errors import UnitError
        from altox.evaluation.individual import default_cabin_ft, fitness_to_fly, occupant_fitness_to_fly
        from altox.units import M_PER_FT, parse_fraction, parse_quantity

        if file is not None:
            from altox.plan.profile import load_plan
            from altox.plan.timeline import expand

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
            from altox.cli.app import _parse_number

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
