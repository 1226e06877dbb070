"""The ``fix`` command: the smallest repair of a plan (:mod:`altox.evaluation.repair`), registered on the main app.

Thin: parse options, call :func:`altox.evaluation.repair.repair_plan`, render; errors through
:func:`altox.cli.main.run_guarded` (one message, exit 2).
"""

from __future__ import annotations

from typing import Optional

import typer

from altox.cli.app import app, run_guarded
from altox.evaluation.defaults import ENSEMBLE_MEMBERS


#: seconds before a progress bar appears
PROGRESS_AFTER_S = 1.0


def _delayed_progress():
    """(callback, close): a rich bar on a terminal, shown only once the work has taken a second."""
    import sys
    import time

    if not sys.stderr.isatty():
        return None, lambda: None
    start = time.monotonic()
    state: dict = {}

    def update(done, total):
        if "bar" not in state:
            if time.monotonic() - start < PROGRESS_AFTER_S:
                return
            from rich.console import Console
            from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn

            bar = Progress(SpinnerColumn(), TextColumn("searching for a repair"), BarColumn(),
                           console=Console(stderr=True), transient=True)
            bar.start()
            state.update(bar=bar, task=bar.add_task("repair", total=1.0))
        state["bar"].update(state["task"], completed=min(1.0, done / max(total, 1)))

    def close():
        if "bar" in state:
            state["bar"].stop()

    return update, close


@app.command()
def fix(
    file: str = typer.Argument(..., help="The plan file (YAML); it is only read."),
    goal: Optional[str] = typer.Option(None, "--goal", help="Expected-SaO2 goal, e.g. 'night SaO2 >= 75 % for "
                                                            "every member at the 5th percentile'."),
    keep: str = typer.Option("all", "--keep", help="High points that must stay: all (every day's high "
                                                   "point), highest (only the plan's highest) or none."),
    max_days: Optional[int] = typer.Option(None, "--max-days", help="Longest the itinerary may become "
                                                                    "(default: the plan's max_days)."),
    no_oxygen: bool = typer.Option(False, "--no-oxygen", help="Do not add planned oxygen."),
    write: Optional[str] = typer.Option(None, "--write", help="Write the repaired plan to this new .yaml file."),
    force: bool = typer.Option(False, "--force", help="Replace an existing --write file (never the input)."),
    json_out: bool = typer.Option(False, "--json", help="Print JSON instead of tables."),
    members: int = typer.Option(ENSEMBLE_MEMBERS, "--members", help="Simulated people per person for --goal "
                                                                    "(as altox plan)."),
    seed: Optional[int] = typer.Option(None, "--seed", help="Seed of the expected range for --goal "
                                                            "(default: altox plan's)."),
):
    """Propose the smallest change that makes a plan meet its guidance (and a goal): fewest added days
    then least oxygen for an itinerary; fewest changed legs, then least altitude change, then least oxygen
    for a flight."""

    def body():
        from altox.errors import AltoxError
        from altox.plan.profile import load_plan
        from altox.present.outfiles import check_output, write_atomic
        from altox.evaluation import repair as rp

        if write is not None:
            check_output(write, option="--write", suffixes=(".yaml", ".yml"), force=force, inputs=[file])
        if max_days is not None and not 1 <= max_days <= 1000:
            raise AltoxError(f"--max-days: {max_days} is outside 1-1,000.", field="--max-days")
        if not 10 <= members <= 100_000:
            raise AltoxError(f"--members: {members} is outside the accepted range; expected 10 to 100,000.",
                             field="--members")
        original = load_plan(file)
        update, close = _delayed_progress()
        try:
            result = rp.repair_plan(file, goal=goal, keep=keep, max_days=max_days, allow_oxygen=not no_oxygen,
                                    members=members, seed=seed, progress=update)
        finally:
            close()
        summary = rp.compare(original, result.plan, result.goal, members=members, seed=seed)
        if write is not None:
            write_atomic(write, result.text.encode("utf-8"))
        if json_out:
            from altox.present.render import CAUTION, to_json

            data = rp.repair_to_dict(original, result, summary)
            data["written"] = write
            data["caution"] = CAUTION
            typer.echo(to_json(data))
        else:
            from altox.present.render_repair import repair_renderables
            from altox.present.terminal import console as Console

            console = Console()
            for part in repair_renderables(original, result, summary, written=write):
                console.print(part)
        if not result.found:
            raise typer.Exit(3)

    run_guarded(body)
