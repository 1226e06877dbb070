"""`altox review`: the fleet review command (thin; the work is in :mod:`altox.evaluation.fleet`)."""

from __future__ import annotations

import sys
from typing import Optional

import typer

from altox.cli.app import app, run_guarded

_FORMATS = ("jsonl", "csv")
_ENGINES = ("local", "dask")


def _progress():
    """(advance, close): a rich counter on a terminal (stderr), nothing when piped."""
    if not sys.stderr.isatty():
        return (lambda n=1: None), (lambda: None)
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    bar = Progress(TextColumn("fleet review"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                   console=Console(stderr=True), transient=True)
    bar.start()
    task = bar.add_task("plans", total=None)
    return (lambda n=1: bar.advance(task, n)), bar.stop


@app.command()
def review(
    inputs: list[str] = typer.Argument(..., help="Plan files, directories, glob patterns ('fleet/*.yaml', "
                                                 "quoted), JSON Lines files of plans (.jsonl), or - for "
                                                 "JSON Lines on standard input."),
    fmt: str = typer.Option("jsonl", "--format", help="Result lines as jsonl (one JSON object per plan) "
                                                      "or csv."),
    output: Optional[str] = typer.Option(None, "--output", "-o", help="Write the result lines to this file "
                                                                      "(the summary then goes to the "
                                                                      "terminal); default standard output."),
    summary_json: Optional[str] = typer.Option(None, "--summary-json", help="Also write the fleet summary "
                                                                            "as JSON to this file."),
    rules: list[str] = typer.Option([], "--rules", help="Rule-set id or your own rule file; repeat for "
                                                        "several. Replaces each plan's own list."),
    oxygen: bool = typer.Option(False, "--oxygen", help="Add each plan's oxygen review (oxygen needed)."),
    decompression: bool = typer.Option(False, "--decompression", help="Add each flight's decompression "
                                                                      "review."),
    batch: int = typer.Option(256, "--batch", help="Plans evaluated together (memory grows with the "
                                                    "batch, not the fleet)."),
    engine: str = typer.Option("local", "--engine", help="local (this process) or dask (partitions of "
                                                         "plans on a Dask cluster)."),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", help="With --engine dask: address of a "
                                                                      "running Dask scheduler; default a "
                                                                      "local cluster."),
    workers: int = typer.Option(0, "--workers", help="With --engine dask and no --scheduler: local "
                                                     "worker processes (0: one per core)."),
    force: bool = typer.Option(False, "--force", help="Replace an existing --output or --summary-json file."),
):
    """Review many plans: one result line per plan, then a summary across the fleet."""
    def check():
        from altox.errors import AltoxError
        from altox.present.outfiles import check_output

        if fmt not in _FORMATS:
            raise AltoxError(f"--format: {fmt!r} is not a format; expected jsonl or csv.", field="--format")
        if engine not in _ENGINES:
            raise AltoxError(f"--engine: {engine!r} is not an engine; expected local or dask.", field="--engine")
        if not 1 <= batch <= 100_000:
            raise AltoxError(f"--batch: {batch} is outside the accepted range; expected 1 to 100,000.",
                             field="--batch")
        if not 0 <= workers <= 1024:
            raise AltoxError(f"--workers: {workers} is outside the accepted range; expected 0 to 1,024.",
                             field="--workers")
        if (scheduler or workers) and engine != "dask":
            raise AltoxError("--scheduler and --workers need --engine dask.", field="--engine")
        files = [i for i in inputs if i != "-"]
        if output:
            import os

            here = os.path.realpath(output)
            for i in files:
                if os.path.isdir(i) and here.startswith(os.path.realpath(i) + os.sep):
                    raise AltoxError(f"--output: {output!r} is inside the input folder {i!r}, where it would be "
                                     "read back as plans; write it elsewhere.", field="--output")
        for opt, path, suffixes in (("--output", output, (".jsonl", ".csv", ".ndjson", ".txt")),
                                    ("--summary-json", summary_json, (".json",))):
            if path:
                check_output(path, option=opt, force=force, inputs=files, suffixes=suffixes)
    run_guarded(check)

    def body():
        from altox.evaluation import fleet

        summary = fleet.FleetSummary()
        advance, close = _progress()
        out = open(output, "w", encoding="utf-8", newline="") if output else sys.stdout
        try:
            writer = fleet.CsvWriter(out) if fmt == "csv" else None
            if engine == "dask":
                from altox.evaluation.fleet_dask import review_on_dask

                lines = review_on_dask(inputs, rules=tuple(rules), oxygen=oxygen, decompression=decompression,
                                       batch=batch, scheduler=scheduler, workers=workers or None,
                                       stdin=sys.stdin)
            else:
                lines = fleet.review_plans(inputs, rules=tuple(rules), oxygen=oxygen,
                                           decompression=decompression, batch=batch, stdin=sys.stdin)
            for line in lines:
                if writer is not None:
                    writer.write(line)
                else:
                    out.write(fleet.to_json_line(line) + "\n")
                summary.add(line)
                advance()
        finally:
            close()
            if output:
                out.close()
            else:
                out.flush()
        typer.echo(summary.text(), err=not output, nl=False)
        if summary_json:
            import json

            with open(summary_json, "w", encoding="utf-8") as handle:
                json.dump(summary.as_dict(), handle, indent=2)
                handle.write("\n")
        return summary

    try:
        summary = run_guarded(body)
    except BrokenPipeError:   # the reader stopped early (e.g. | head): stop quietly, as other tools do
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        raise typer.Exit(1) from None
    if summary.errors:
        raise typer.Exit(2)
