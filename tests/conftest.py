"""Shared fixtures: every demo plan evaluated once and rendered to each user format."""

from __future__ import annotations

import io
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))


def render_demo(path: Path) -> dict:
    """A demo as ``altox plan`` sees it (members 20, fixed seed): result and every user format."""
    from rich.console import Console

    from altox.present import render
    from altox.cli.main import _load_and_evaluate
    from altox.present.report import build_report

    plan, result = _load_and_evaluate(str(path), [], members=20, seed=1)
    console = Console(width=80, file=io.StringIO(), record=True, color_system=None)
    for part in render.plan_renderables(result):
        console.print(part)
    return {
        "plan": plan, "result": result,
        "terminal": console.export_text(),
        "json": render.to_json(render.plan_to_dict(result)),
        "csv": render.to_csv(render.plan_csv_rows(result)),
        "html": build_report(result, plan=plan),
    }


@pytest.fixture(scope="session")
def demo_outputs():
    """{demo stem: render_demo(...)} for every demo in profiles/ (built once per test run)."""
    return {p.stem: render_demo(p) for p in DEMOS}
