"""Every kind of bad plan through the real command: exit status 2, file:line in one paragraph, no traceback,
the file untouched, and quick."""

import os
import subprocess
import sys

import pytest
from clirun import run_cli

ENV = {**os.environ, "COLUMNS": "100", "NO_COLOR": "1"}

GOOD_HEAD = "kind: expedition\nname: bad plan\nstart_altitude: 1,200 m\n"
DAY = "days:\n  - {day: 1, sleep: 2,800 m}\n"

# name -> (bytes of the file, expected line number or None, a word the message must contain)
CASES = {
    "yaml-syntax": (GOOD_HEAD + "days:\n  - {day: 1, sleep: '2,800 m'\n", 6, "YAML"),  # found at end of file
    "unknown-key": (GOOD_HEAD + "days:\n  - {day: 1, slep: '2,800 m'}\n", 5, "sleep"),
    "bare-number": (GOOD_HEAD + "days:\n  - {day: 1, sleep: 2800}\n", 5, "unit"),
    "feet-as-metres": (GOOD_HEAD + "days:\n  - {day: 1, sleep: '14,000 m'}\n", 5, "ft"),
    "zero-duration": ("kind: flight\nname: f\naircraft: {type: x, pressurized: false}\n"
                      "departure_elevation: 1,000 ft\nlegs:\n  - {phase: ground, duration: 0 min}\n", 6, "duration"),
    "negative-duration": ("kind: flight\nname: f\naircraft: {type: x, pressurized: false}\n"
                          "departure_elevation: 1,000 ft\nlegs:\n  - {phase: ground, duration: -5 min}\n", 6,
                          "duration"),
    "days-out-of-order": (GOOD_HEAD + "days:\n  - {day: 1, sleep: '2,800 m'}\n  - {day: 3, sleep: '3,000 m'}\n",
                          6, "day"),
    "altitude-beyond-model": (GOOD_HEAD + "days:\n  - {day: 1, sleep: '9.6 km'}\n", 5, "9,000"),
    "fio2-outside": (GOOD_HEAD + "days:\n  - {day: 1, sleep: '2,800 m', oxygen: {flow: 2 L/min, when: sleep, "
                     "fio2: 1.5}}\n", 5, "fio2"),
    "empty": ("", None, "empty"),
    "binary": (b"\x00\x01\x02\x03kind", None, "binary"),
    "non-utf8": (GOOD_HEAD.encode() + b"description: caf\xe9\n" + DAY.encode(), None, "UTF-8"),
    "object-tag": (GOOD_HEAD + "description: !!python/object/apply:os.system ['true']\n" + DAY, 4, "tag"),
    "alias-bomb": (GOOD_HEAD + "a: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a]\n"
                   "c: [*b, *b, *b, *b, *b, *b, *b, *b]\n" + DAY, 4, "alias"),
    "too-large": (GOOD_HEAD + DAY + "# " + "x" * (3 * 1024 * 1024) + "\n", None, "large"),
}


def _run(*args):
    return run_cli(*args)


@pytest.mark.parametrize("case", sorted(CASES), ids=sorted(CASES))
@pytest.mark.parametrize("command", ["check", "plan"])
def test_bad_plan(tmp_path, case, command):
    content, line, word = CASES[case]
    path = tmp_path / f"{case}.yaml"
    path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    before = path.read_bytes()
    proc = _run(command, str(path))
    assert proc.returncode == 2, proc.stdout + proc.stderr
    assert "Traceback" not in proc.stderr + proc.stdout
    first = proc.stderr.strip().splitlines()[0]
    assert first.startswith("Error: ") and str(path) in first
    if line is not None:
        assert f"{path}:{line}" in first, first
    assert word.lower() in first.lower(), first
    assert path.read_bytes() == before


def test_directory_is_refused(tmp_path):
    proc = _run("check", str(tmp_path))
    assert proc.returncode == 2 and "Traceback" not in proc.stderr and "director" in proc.stderr.lower()
