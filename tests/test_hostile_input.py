"""Hostile values at every reader: plans, rule files, options and output files.

The contract: bad input ends in exit status 2 and one located message (file:line:column and the field,
or the option), never "Internal error", a traceback or exit 1; valid input is never refused.  Each case
here was found by trying hostile values (see tests/test_fuzz_contract.py for the random search).
"""

import errno
import os
import re

import pytest
from typer.testing import CliRunner

from altox.cli.main import app
from test_rules import _GOOD_USER_FILE

RUN = CliRunner()
HUGE = "9" * 400  # an integer no float can hold

EXPEDITION = """kind: expedition
name: probe
start_altitude: 650 m
party:
  - {name: Pia, age: 31}
days:
  - {day: 1, sleep: "2,400 m"}
  - {day: 2, sleep: 2900 m, high: 3100 m}
"""
FLIGHT = """kind: flight
name: probe
aircraft: {type: invented trainer, pressurized: false}
departure_elevation: 410 ft
aboard:
  - {name: Ann, role: crew}
legs:
  - {phase: ground, duration: 8 min}
  - {phase: climb, duration: 12 min, altitude: "9,500 ft"}
  - {phase: descent, duration: 15 min, altitude: 410 ft}
"""


def _write(tmp_path, text, name="plan.yaml"):
    path = tmp_path / name
    path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
    return str(path)


def assert_refused(result, *, where=None, words=()):
    """Exit 2, one message starting 'Error:' (naming ``where``), nothing internal."""
    out = result.output
    assert result.exit_code == 2, out
    assert "Internal error" not in out and "Traceback" not in out, out
    first = next(line for line in out.splitlines() if line.startswith("Error:"))
    if where:
        assert re.search(where, first), first
    for w in words:
        assert w in first, first
    assert max(len(line) for line in out.splitlines()) <= 400, "one readable paragraph"
    return first


# -- plan values the loader must refuse with a location ----------------------------------------------
PLAN_CASES = {
    "huge-int-age": (EXPEDITION.replace("age: 31", f"age: {HUGE}"), "party[0].age", "too large"),
    "huge-int-fio2": (FLIGHT.replace("duration: 8 min}", f"duration: 8 min, oxygen: crew, fio2: {HUGE}}}"),
                      "legs[0].fio2", "too large"),
    "huge-sexagesimal": (EXPEDITION.replace("age: 31", "age: " + ":".join(["59"] * 300)), "party[0].age",
                         "too large"),
    "int-tag-empty": (EXPEDITION.replace("age: 31", "age: !!int ''"), "party[0].age", "!!int"),
    "float-tag-empty": (EXPEDITION.replace("age: 31", "age: !!float ''"), "party[0].age", "!!float"),
    "bool-tag-odd": (EXPEDITION.replace("age: 31", "age: !!bool maybe"), "party[0].age", "!!bool"),
    "null-tag-odd": (EXPEDITION.replace("age: 31", "age: !!null x"), "party[0].age", "!!null"),
    "kind-list": (EXPEDITION.replace("kind: expedition", "kind: [expedition]"), "kind", "not a plan kind"),
    "kind-mapping": (EXPEDITION.replace("kind: expedition", "kind: {a: 1}"), "kind", "not a plan kind"),
    "escape-in-name": (EXPEDITION.replace("name: probe", 'name: "a\\e[31mred"'), "name", "U+001B"),
    "bidi-override-in-note": (EXPEDITION.replace("high: 3100 m}", 'high: 3100 m, note: "x\\u202ey"}'),
                              "days[1].note", "U+202E"),
    "zero-width-in-key": (EXPEDITION.replace("name: probe", '"na\\u200bme": probe'), "", "U+200B"),
    "newline-in-member-name": (EXPEDITION.replace("name: Pia", 'name: "Pi\\na"'), "party[0].name", "one line"),
    "lookalike-names": (EXPEDITION.replace("  - {name: Pia, age: 31}",
                                           "  - {name: Pia, age: 31}\n  - {name: \"Р\u0456a\", age: 30}"),
                        "party[1].name", "reads the same"),
    "fullwidth-name-twin": (FLIGHT.replace("  - {name: Ann, role: crew}",
                                           "  - {name: Ann, role: crew}\n  - {name: \"Ａnn\", role: passenger}"),
                            "aboard[1].name", "reads the same"),
    "trailing-space-twin": (FLIGHT.replace("  - {name: Ann, role: crew}",
                                           "  - {name: Ann, role: crew}\n  - {name: \"Ann \", role: passenger}"),
                            "aboard[1].name", "reads the same"),
    # silent acceptance found by the review: fields with no effect, values that contradict each other
    "fio2-without-oxygen": (FLIGHT.replace("duration: 8 min}", "duration: 8 min, fio2: 30 %}"), "legs[0].fio2",
                            "nobody is on oxygen"),
    "oxygen-for-absent-patient": (FLIGHT.replace("duration: 8 min}", "duration: 8 min, oxygen: patient}"),
                                  "legs[0].oxygen", "role: patient"),
    "cabin-above-aircraft": (FLIGHT.replace("pressurized: false", "pressurized: true, max_differential: 8 psi")
                             .replace('altitude: "9,500 ft"}', 'altitude: "9,500 ft", cabin: "12,000 ft"}'),
                             "legs[1].cabin", "above the aircraft"),
    "differential-unpressurized": (FLIGHT.replace("pressurized: false", "pressurized: false, max_differential: 8 psi"),
                                   "aircraft.max_differential", "unpressurized"),
    "climb-oxygen-without-high": (EXPEDITION.replace('{day: 1, sleep: "2,400 m"}',
                                                     '{day: 1, sleep: "2,400 m", oxygen: {flow: 2 L/min, when: climb}}'),
                                  "days[0].oxygen.when", "no 'high'"),
    "real-comma-split": (EXPEDITION.replace("sleep: 2900 m,", "sleep: 2,900 m,"), "days[1].sleep", "split"),
}


@pytest.mark.parametrize("case", list(PLAN_CASES))
def test_bad_plan_values_are_located(tmp_path, case):
    text, field, word = PLAN_CASES[case]
    path = _write(tmp_path, text)
    for command in (["check", path], ["plan", path, "--members", "0"]):
        first = assert_refused(RUN.invoke(app, command), where=re.escape(path) + r":\d+:\d+: " + re.escape(field),
                               words=(word,))
        assert len(first) - len(path) <= 220, "a message of a couple of lines"


@pytest.mark.parametrize("text", [
    # a number before a key in a flow mapping is not a split value (found: '1,400 m' reported for day 1)
    EXPEDITION.replace('{day: 1, sleep: "2,400 m"}', "{day: 1, sleep: 400 m}"),
    EXPEDITION.replace('{day: 1, sleep: "2,400 m"}', "{day: 1, sleep: 900 m, high: 950 m}"),
    FLIGHT.replace("{phase: ground, duration: 8 min}", "{phase: ground, duration: 100 min}"),
], ids=["day-then-400m", "day-then-900m", "flow-three-digit-duration"])
def test_flow_mapping_numbers_are_not_split_values(tmp_path, text):
    res = RUN.invoke(app, ["check", _write(tmp_path, text)])
    assert res.exit_code == 0, res.output


def test_markup_and_formula_names_print_as_written(tmp_path):
    """Names are text, not console markup (found: '[/red]Pia' crashed readings) nor spreadsheet formulas."""
    text = EXPEDITION.replace("name: probe", 'name: "=HYPERLINK(\\"http://x\\") [link=http://x]go[/link]"')
    text = text.replace("name: Pia", 'name: "[/red]Pia :smile:"') + (
        "observations:\n  - {day: 1, member: \"[/red]Pia :smile:\", spo2: 90 %, note: \"[/]\"}\n")
    path = _write(tmp_path, text)
    for command in (["plan", path, "--members", "10"], ["readings", path, "--members", "10"],
                    ["range", path, "--members", "10"]):
        res = RUN.invoke(app, command)
        assert res.exit_code == 0, res.output
        assert "[/red]Pia :smile:" in res.output
    csv_out = RUN.invoke(app, ["plan", path, "--members", "0", "--csv"]).stdout
    rows = [line for line in csv_out.splitlines()[1:] if line]
    assert rows and all(row.startswith("'=HYPERLINK") or row.startswith("\"'=HYPERLINK") for row in rows)


# -- rule files --------------------------------------------------------------------------------------
RULES = _GOOD_USER_FILE  # a valid rule file of a user's own
RULE_CASES = {
    "negative-duration": (RULES.replace("    requirement", '    duration: "more than -30 min"\n    requirement'),
                          "thresholds[0].duration", "above zero"),
    "duplicate-key": (RULES.replace("    basis: read\n", "    basis: read\n    basis: from memory\n"),
                      "thresholds[0].basis", "second time"),
    "legacy-encoding": (RULES.replace("Flying club", "Fl\xfcgclub").encode("latin-1"), "", "UTF-8"),
    "huge-int": (RULES.replace('edition: "2025"', f"edition: {HUGE}"), "edition", "too large"),
    "int-tag-empty": (RULES.replace('edition: "2025"', "edition: !!int ''"), "edition", "!!int"),
    "set-tag": (RULES.replace('edition: "2025"', "edition: !!set {a: null}"), "edition", "!!set"),
    "alias": (RULES.replace('edition: "2025"', "edition: &a x"), "edition", "anchor"),
    "kind-list": (RULES.replace("kind: aviation", "kind: [aviation]"), "kind", "expected"),
    "check-mapping": (RULES.replace("check: oxygen", "check: {a: b}"), "thresholds[0].check", "expected"),
    "misspelt-key": (RULES.replace("    basis: read\n", "    basys: read\n"), "thresholds[0].basys",
                     "did you mean 'basis'"),
    # found: one message of over a thousand characters listing every problem
    "many-problems": (RULES.replace("thresholds:", "thresholds:" + "\n  - {id: x, value: y}" * 60), "",
                      "more problems"),
}


@pytest.mark.parametrize("case", list(RULE_CASES))
def test_bad_rule_files_are_located(tmp_path, case):
    text, field, word = RULE_CASES[case]
    rules = _write(tmp_path, text, "mine.yaml")
    plan = _write(tmp_path, FLIGHT)
    first = assert_refused(RUN.invoke(app, ["plan", plan, "--rules", rules, "--members", "0"]),
                           where=re.escape(rules) + r"(:\d+:\d+)?: " + re.escape(field), words=(word,))
    assert len(first) - len(rules) <= 220, "a message of a couple of lines"


def test_good_rule_file_still_loads(tmp_path):
    rules = _write(tmp_path, RULES, "mine.yaml")
    res = RUN.invoke(app, ["plan", _write(tmp_path, FLIGHT), "--rules", rules, "--members", "0"])
    assert res.exit_code == 0, res.output


@pytest.mark.parametrize("make", ["directory", "fifo", "huge"])
def test_rule_file_must_be_a_small_regular_file(tmp_path, make):
    target = tmp_path / "rules.yaml"
    if make == "directory":
        target.mkdir()
    elif make == "fifo":
        os.mkfifo(target)  # reading it would wait forever
    else:
        target.write_text(RULES + "# " + "x" * (300 * 1024) + "\n")
    res = RUN.invoke(app, ["plan", _write(tmp_path, FLIGHT), "--rules", str(target), "--members", "0"])
    assert_refused(res, where=re.escape(str(target)))


# -- options -----------------------------------------------------------------------------------------
@pytest.mark.parametrize("command", ["plan", "range"])
@pytest.mark.parametrize("seed", ["-1", str(2**32), "-" + "9" * 25])
def test_seed_outside_range_is_refused(tmp_path, command, seed):
    path = _write(tmp_path, FLIGHT)
    res = RUN.invoke(app, [command, path, f"--seed={seed}", "--members", "10"])
    assert_refused(res, where="--seed")


@pytest.mark.parametrize("option,suffix,err", [("--report", ".html", errno.ENOSPC), ("--chart", ".svg", errno.EACCES)],
                         ids=["report-disk-full", "chart-read-only"])
def test_output_write_failure_names_option_and_os_error(tmp_path, monkeypatch, option, suffix, err):
    import altox.present.outfiles

    def refuse(*args, **kwargs):
        raise OSError(err, os.strerror(err))

    monkeypatch.setattr(altox.present.outfiles.tempfile, "mkstemp", refuse)
    out = tmp_path / f"out{suffix}"
    res = RUN.invoke(app, ["plan", _write(tmp_path, FLIGHT), option, str(out), "--members", "0"])
    first = assert_refused(res, where=option, words=(os.strerror(err),))
    assert str(out) in first
    assert not out.exists()


def test_people_must_be_whole():
    """Found: --people 2.9 was truncated to 2 in the cylinder count."""
    args = ["cylinders", "--water", "10 L", "--fill", "200 bar", "--flow", "2 L/min", "--hours", "8 h"]
    assert_refused(RUN.invoke(app, args + ["--people", "2.9"]), where="--people", words=("whole number",))
    assert RUN.invoke(app, args + ["--people", "3"]).exit_code == 0


def test_age_zero_is_accepted_as_documented(tmp_path):
    """Found by the random-plan search: the docs say ages 0 to 110, the reader refused 0."""
    res = RUN.invoke(app, ["check", _write(tmp_path, EXPEDITION.replace("age: 31", "age: 0"))])
    assert res.exit_code == 0, res.output


def test_readings_of_a_flight_refused_up_front_with_the_file(tmp_path):
    """Found: 'readings are reviewed for expedition plans only' came after the ensemble, without the file."""
    path = _write(tmp_path, FLIGHT)
    assert_refused(RUN.invoke(app, ["readings", path, "--members", "10"]), where=re.escape(path) + ": kind:")
