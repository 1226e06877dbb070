"""Run the real `altox` app in-process, with the result shaped like ``subprocess.run``'s.

Starting a new interpreter per case cost most of the suite's time; typer's test runner calls the
same ``app`` that the console script calls, with the same option parsing, error handling and exit
status. Each entry point keeps one real subprocess smoke test (tests/test_cli.py).
"""

from __future__ import annotations

import os
import subprocess
from pathlib import Path

from typer.testing import CliRunner

ENV = {"COLUMNS": "100", "NO_COLOR": "1"}


def run_cli(*args, env: dict | None = None, cwd: str | os.PathLike | None = None,
            input: str | None = None) -> subprocess.CompletedProcess:
    """``altox ARGS...`` in this process; returns ``returncode``, ``stdout`` and ``stderr``."""
    from altox.cli.main import app

    old = Path.cwd()
    if cwd is not None:
        os.chdir(cwd)
    try:
        res = CliRunner().invoke(app, [str(a) for a in args], env={**ENV, **(env or {})}, input=input,
                                 prog_name="altox")
    finally:
        os.chdir(old)
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise res.exception  # a bug escaped run_guarded: show it, as --debug would
    return subprocess.CompletedProcess(list(args), res.exit_code, res.stdout, res.stderr)
