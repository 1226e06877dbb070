"""The altox command line: thin commands over the library; errors become one message and exit status 2."""

from __future__ import annotations

from typing import Optional

import typer

from altox.evaluation.defaults import ENSEMBLE_MEMBERS, ENSEMBLE_SEED
from altox.errors import AltoxError, ProfileError  # noqa: F401
from altox.cli.app import (_DEBUG, MAX_SEED, _fail, _parse_number, app, check_seed,  # noqa: F401  (re-exported)
                       run_guarded)


@app.command()
def point(
    altitude: Optional[str] = typer.Option(None, "--altitude", help="Altitude with unit: 4500m, 14800ft, 4.5km."),
    atmosphere: str = typer.Option("isa", "--atmosphere", help="isa (ICAO standard) or mountain (West 1996)."),
    pressure: Optional[str] = typer.Option(None, "--pressure",
                                           help="Measured pressure with unit (mmHg, Torr, kPa, hPa, inHg); "
                                                "overrides the atmosphere model."),
    fio2: str = typer.Option("0.2095", "--fio2", help="Inspired O2 fraction in (0, 1], e.g. 0.21 or '30 %'."),
    days: str = typer.Option("0", "--days", help="Days at this altitude (0 = acute)."),
    age: str = typer.Option("40", "--age", help="Age in years."),
    hb: Optional[str] = typer.Option(None, "--hb", help="Hemoglobin in g/dL (default 14.5)."),
    rq: str = typer.Option("0.8", "--rq", help="Respiratory exchange ratio."),
    paco2: Optional[str] = typer.Option(None, "--paco2", help="Measured arterial PCO2 in mmHg (replaces the model)."),
    ph: Optional[str] = typer.Option(None, "--ph", help="Measured arterial pH (replaces the acid-base model)."),
    json_out: bool = typer.Option(False, "--json", help="Print one JSON object instead of the table."),
):
    """The whole resting physiology chain at one place: pressure, PIO2, PAO2, PaO2, pH, SaO2, O2 content."""

    def body():
        from altox.units import parse_fraction, parse_quantity

        if atmosphere not in ("isa", "mountain"):
            from altox.errors import UnitError
            raise UnitError(f"--atmosphere: {atmosphere!r} is not a model; expected isa or mountain.")
        if altitude is None and pressure is None:
            from altox.errors import UnitError
            raise UnitError("give --altitude (e.g. 4500m) or --pressure (e.g. 430mmHg), or both.")
        alt_m = parse_quantity(altitude, "length", field="--altitude") if altitude is not None else None
        pb = parse_quantity(pressure, "pressure", field="--pressure") if pressure is not None else None
        from altox.units import is_flight_level

        reading = None
        if altitude is not None and is_flight_level(altitude):
            # a flight level is a pressure altitude: its pressure in the standard atmosphere
            from altox.physiology.atmosphere import altitude_for_pressure, pressure_altitude_ft_to_mmhg
            from altox.units import M_PER_FT

            if atmosphere != "isa":
                from altox.errors import UnitError
                raise UnitError(f"--altitude: {altitude!r} is a flight level, a pressure altitude in the "
                                "standard atmosphere; expected --atmosphere isa (or an altitude in m or ft).")
            fl_pb = float(pressure_altitude_ft_to_mmhg(alt_m / M_PER_FT))
            reading = (f"Altitude: {altitude.strip().upper()} read as a pressure altitude "
                       f"({alt_m / M_PER_FT:,.0f} ft in the ICAO standard atmosphere, {fl_pb:.2f} mmHg).")
            alt_m = float(altitude_for_pressure(fl_pb, "isa"))
            if pb is None:
                pb = fl_pb
        elif altitude is not None:
            reading = (f"Altitude: {altitude.strip()} read as a geometric altitude in the "
                       f"{'ICAO standard' if atmosphere == 'isa' else 'mountain model'} atmosphere.")
        fio2_v = parse_fraction(fio2, field="--fio2")
        opts = dict(
            days=_parse_number(days, "--days", 0, 3650, "days"),
            age_y=_parse_number(age, "--age", 0, 110, "years"),
            rq=_parse_number(rq, "--rq", 0.6, 1.2),
        )
        if hb is not None:
            opts["hb_g_dl"] = _parse_number(hb, "--hb", 3, 25, "g/dL")
        if paco2 is not None:
            opts["paco2_mmhg"] = _parse_number(paco2, "--paco2", 5, 120, "mmHg")
        if ph is not None:
            opts["ph"] = _parse_number(ph, "--ph", 6.5, 8.0)
        if alt_m is not None and alt_m > 9000 and atmosphere == "mountain":
            from altox.errors import OutOfRangeError
            raise OutOfRangeError(f"--altitude: {altitude!r} is {alt_m:,.0f} m, above the mountain model's "
                                  "range (-500 to 9,000 m); did you mean feet?")
        from altox.physiology.chain import assess

        try:
            result = assess(alt_m, atmosphere=atmosphere, pb_mmhg=pb, fio2=fio2_v, **opts)
        except AltoxError as exc:
            field = {"altitude": "--altitude", "pressure": "--pressure"}.get(exc.field or "", None)
            if field:
                shown = altitude if field == "--altitude" else pressure
                raise type(exc)(f"{field}: {shown!r}: {exc.message}", field=field) from None
            raise
        from altox.present import render
        from altox.physiology.validity import describe

        state = describe(result["validity_status"], result["validity_reasons"],
                         inspired_po2_mmhg=result["inspired_po2_mmhg"], age_y=opts["age_y"])
        if json_out:
            data = {k: v for k, v in result.items() if k not in ("validity_status", "validity_reasons")}
            if reading:
                data["altitude_reading"] = reading
            data.update(validity_status=state["validity_status"],
                        outside_validated_range=state["outside_validated_range"],
                        validity_notes=state["validity_notes"], time_limited=state["time_limited"])
            typer.echo(render.to_json(data))
            return
        from altox.present.terminal import console as Console

        exposure = ("acute exposure (first hours)" if opts["days"] == 0
                    else f"{opts['days']:g} days at this altitude")
        model = {"isa": " (ICAO standard, Doc 7488)", "mountain": " (West 1996 model for mountain sites)"}
        assumptions = ([reading] if reading else []) + [
            f"Atmosphere: {result['atmosphere']}{model.get(result['atmosphere'], '')}",
            f"Resting, awake, {exposure}; age {opts['age_y']:g}; respiratory exchange ratio {opts['rq']:g}.",
            "PaCO2 taken equal to PACO2; body temperature 37 degC.",
        ]
        if paco2 is not None:
            assumptions.append("PaCO2 as measured (ventilation model not used).")
        if ph is not None:
            assumptions.append("pH as measured (acid-base model not used).")
        Console().print(render.point_table(result, assumptions, validity=state))

    run_guarded(body)


def _load_and_evaluate(path: str, rules: list[str], members: Optional[int] = None, seed: Optional[int] = None):
    """Load a plan, apply --rules, evaluate it and attach the reviews; returns (plan, result)."""
    from altox.evaluation.evaluate import evaluate_plan, plan_extras
    from altox.plan.profile import load_plan

    plan = load_plan(path)
    if members:
        from altox.evaluation.population import check_ensemble_size

        check_ensemble_size(plan, members)
    if rules:
        plan = plan.model_copy(update={"rules": [r for r in rules if not _is_file(r)] or list(plan.rules)})
        files = [r for r in rules if _is_file(r)]
        if files:
            from pathlib import Path

            plan = plan.model_copy(update={"rule_file": str(Path(files[0]).resolve())})
    result = evaluate_plan(plan)
    from altox.cli.people import _progress_callback

    update, close = _progress_callback()
    try:
        result.extras = plan_extras(plan, result, members=members, seed=seed, progress=update)
    finally:
        close()
    return plan, result


def _is_file(text: str) -> bool:
    return text.endswith((".yaml", ".yml")) or "/" in text


@app.command()
def plan(
    files: list[str] = typer.Argument(..., help="Plan files (YAML)."),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of tables: one object per plan, "
                                                      "one line each (JSON Lines), for one file or many."),
    csv_out: bool = typer.Option(False, "--csv", help="Print CSV, one row per leg (not with --json)."),
    timeline: bool = typer.Option(False, "--timeline", help="With --json or --csv: include every time sample."),
    feet: bool = typer.Option(False, "--feet", help="Show every altitude in feet (tables, chart, report); "
                                                    "flights are in feet already."),
    rules: list[str] = typer.Option([], "--rules", help="Rule-set id or your own rule file; repeat for "
                                                        "several. Replaces the plan's own list."),
    chart: Optional[str] = typer.Option(None, "--chart", help="Also draw the plan's chart to this file "
                                                               "(.png, .svg or .pdf)."),
    report: Optional[str] = typer.Option(None, "--report", help="Also write a self-contained HTML report "
                                                                 "(.html) to share."),
    force: bool = typer.Option(False, "--force", help="Replace an existing --chart or --report file."),
    members: int = typer.Option(ENSEMBLE_MEMBERS, "--members", help="Simulated people per person for the "
                                "expected SaO2 range, as in 'altox range' and 'altox readings' (0 skips "
                                "the simulation only; readings are still reviewed)."),
    seed: int = typer.Option(ENSEMBLE_SEED, "--seed", help="Seed of the expected range (the same default "
                             "as 'altox range' and 'altox readings')."),
):
    """Evaluate plans leg by leg: pressures, PIO2, PAO2, PaO2, expected SaO2, dose and guidance flags."""
    from altox.present import render

    if json_out and csv_out:
        _fail("--json and --csv exclude each other; give one of them.")
    if timeline and not (json_out or csv_out):
        _fail("--timeline adds every time sample to --json or --csv output; give one of them with it.")
    outputs = [(opt, path) for opt, path in (("--chart", chart), ("--report", report)) if path]
    if outputs:
        def check_outputs():
            from altox.present.charts import CHART_FORMATS
            from altox.errors import AltoxError
            from altox.present.outfiles import check_output
            from altox.present.report import REPORT_SUFFIXES

            if len(files) != 1:
                raise AltoxError(f"{outputs[0][0]} draws one plan; got {len(files)} files (run altox plan "
                                 "once per plan)", field=outputs[0][0])
            for opt, path in outputs:
                check_output(path, option=opt, force=force, inputs=files,
                             suffixes=tuple(CHART_FORMATS) if opt == "--chart" else REPORT_SUFFIXES)
        run_guarded(check_outputs)

    if not 0 <= members <= 100_000:
        _fail(f"--members: {members} is outside the accepted range; expected 0 to 100,000.")
    run_guarded(lambda: check_seed(seed))
    results, plans, failed = [], [], []
    for path in files:
        try:
            plan_obj, result = run_guarded(lambda: _load_and_evaluate(path, rules, members, seed))
            results.append(result)
            plans.append(plan_obj)
        except typer.Exit as exc:
            if exc.exit_code == 0:
                raise
            failed.append(path)
    if json_out:
        # one documented shape for one file or many: one JSON object per plan, one line each
        for r in results:
            typer.echo(render.to_json(render.plan_to_dict(r, timeline=timeline), indent=None))
    elif csv_out:
        rows = [row for r in results for row in render.plan_csv_rows(r, timeline=timeline)]
        typer.echo(render.to_csv(rows), nl=False)
    else:
        from altox.present.terminal import console as Console

        console = Console()
        for r in results:
            for part in render.plan_renderables(r, feet=feet):
                console.print(part)
            console.print()
    if outputs and results:
        def write_outputs():
            from altox.guidance.applied import applied_rule_sets
            from altox.present.charts import save_chart
            from altox.present.report import write_report

            rule_files = [r for r in rules if _is_file(r)]
            rule_sets, _missing = applied_rule_sets(results[0], rule_files)
            if chart:
                with _write_errors("--chart", chart):
                    save_chart(results[0], chart, feet=feet, rule_sets=rule_sets)
                typer.echo(f"altox: wrote chart {chart}", err=True)
            if report:
                with _write_errors("--report", report):
                    write_report(results[0], report, plan=plans[0], feet=feet, rule_sets=rule_sets)
                typer.echo(f"altox: wrote report {report}", err=True)
        run_guarded(write_outputs)
    if failed:
        typer.echo(f"Error: {len(failed)} of {len(files)} plan(s) failed: {', '.join(failed)}", err=True)
        raise typer.Exit(2)


class _write_errors:
    """Context manager: an OSError while writing an output file becomes one message naming the option."""

    def __init__(self, option: str, path: str):
        self.option, self.path = option, path

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        if exc is not None and isinstance(exc, OSError):
            reason = exc.strerror or type(exc).__name__
            raise AltoxError(f"{self.option}: cannot write {self.path!r}: {reason} (nothing was written); "
                             "expected a writable folder with free space.", field=self.option,
                             value=self.path) from None
        return False


@app.command()
def check(files: list[str] = typer.Argument(..., help="Plan files (YAML).")):
    """Validate plan files without computing: format, units, order of days and legs, rule sets."""
    failed = []
    for path in files:
        def body(path=path):
            from altox.evaluation.evaluate import select_rule_sets
            from altox.plan.profile import load_plan

            p = load_plan(path)
            applied, notes = select_rule_sets(p)
            n = len(p.days) if p.kind == "expedition" else len(p.legs)
            typer.echo(f"ok: {path} ({p.kind}, {n} {'days' if p.kind == 'expedition' else 'legs'}; "
                       f"guidance: {', '.join(rs.id for rs in applied)})")
            for note in notes:
                typer.echo(f"  (!) {note}")
        try:
            run_guarded(body)
        except typer.Exit:
            failed.append(path)
    if failed:
        typer.echo(f"Error: {len(failed)} of {len(files)} plan(s) failed the check: {', '.join(failed)}", err=True)
        raise typer.Exit(2)


@app.command()
def schema():
    """Print the JSON Schema of the plan format, for editors that validate YAML."""
    def body():
        import json

        from altox.plan.profile import plan_json_schema

        typer.echo(json.dumps(plan_json_schema(), indent=2))
    run_guarded(body)


# commands in their own modules register themselves on `app`
from altox.cli import oxygen as cli_oxygen
from altox.cli import people as cli_people
from altox.cli import fix as cli_fix
from altox.cli import fleet as cli_fleet


def main() -> None:  # console-script entry point
    app(prog_name="altox")


if __name__ == "__main__":  # pragma: no cover
    main()
