"""Read the transcribed reference tables in tests/reference_data (comment lines start with '#')."""

from __future__ import annotations

import csv
from pathlib import Path

REFERENCE_DIR = Path(__file__).parent / "reference_data"


def rows(name: str) -> list[dict]:
    """Rows of a reference CSV as dicts; empty cells become None, numbers stay strings."""
    with open(REFERENCE_DIR / name, encoding="utf-8") as fh:
        lines = [line for line in fh if not line.startswith("#")]
    return [{k: (v if v != "" else None) for k, v in row.items()} for row in csv.DictReader(lines)]


def number(row: dict, key: str) -> float | None:
    value = row.get(key)
    return None if value in (None, "") else float(value)
