"""The command-line application object and what every command shares: one message and exit
status 2 for a named error, a short note and exit 1 for a bug, and the option parsers.

Commands register themselves on :data:`app` from :mod:`altox.cli.main` and its sibling modules.
"""

from __future__ import annotations

import typer

from altox.errors import AltoxError, ProfileError

app = typer.Typer(
    add_completion=False,
    rich_markup_mode=None,       # plain help text: no rich import on the --help path, reads in any terminal
    no_args_is_help=True,
    help="Plan hypoxic exposure: per-leg physiology of ascent itineraries and flight profiles, "
         "checked against published guidance. Guidance only; never a clearance.",
)

_DEBUG = {"on": False}


def _fail(message: str, status: int = 2) -> None:
    typer.echo(f"Error: {message}", err=True)
    raise typer.Exit(status)


def run_guarded(func):
    """Call ``func``; named errors become one message and exit 2, bugs a short note and exit 1."""
    try:
        return func()
    except (typer.Exit, BrokenPipeError):
        raise
    except ProfileError as exc:
        where = exc.location()
        _fail(exc.message if exc.message.startswith(exc.path or "\0") else f"{where}: {exc.message}")
    except AltoxError as exc:
        _fail(exc.message)
    except Exception as exc:  # a bug, not bad input
        if _DEBUG["on"]:
            raise
        typer.echo(f"Internal error ({type(exc).__name__}: {exc}). This is a bug in altox, not in your "
                   "input; run again with --debug for the traceback.", err=True)
        raise typer.Exit(1)


@app.callback()
def _root(debug: bool = typer.Option(False, "--debug", help="Show tracebacks of internal errors.")):
    _DEBUG["on"] = debug


#: largest --seed accepted (numpy's generators take any non-negative integer; 2**32 - 1 keeps it typable)
MAX_SEED = 2**32 - 1


def check_seed(seed) -> None:
    """Refuse a --seed outside 0 to :data:`MAX_SEED` (numpy refuses negative seeds)."""
    from altox.errors import OutOfRangeError

    if seed is not None and not 0 <= seed <= MAX_SEED:
        raise OutOfRangeError(f"--seed: {seed} is outside the accepted range; expected a whole number "
                              f"from 0 to {MAX_SEED:,}.", field="--seed", value=seed,
                              expected=f"0 to {MAX_SEED:,}")


def _parse_number(text, option: str, lo: float, hi: float, unit: str = ""):
    from altox.errors import UnitError

    expected = f"a number from {lo:g} to {hi:g}{(' ' + unit) if unit else ''}"
    try:
        value = float(str(text).replace(",", ""))
    except ValueError:
        raise UnitError(f"{option}: {text!r} is not a number; expected {expected}.") from None
    if value != value or value in (float("inf"), float("-inf")) or not lo <= value <= hi:
        raise UnitError(f"{option}: {text!r} is outside the accepted range; expected {expected}.")
    return value
