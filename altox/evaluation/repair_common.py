"""What the two searches of a plan repair share: the goal, the result type and round-trip YAML.

:mod:`altox.evaluation.repair` (itineraries) and :mod:`altox.evaluation.repair_flight` (flights) both import from
here, so neither imports the other at module level.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from altox.errors import AltoxError

#: finding statuses that mean "not met"
BROKEN = ("required-not-planned", "limit-exceeded")

_GOAL_RE = re.compile(
    r"^\s*(?:(?P<when>night|awake|day|any)\s+)?sa?o2\s*(?P<op>>=|>|≥)\s*(?P<value>\d+(?:\.\d*)?)\s*%"
    r"(?:\s+for\s+(?:every|each|all)\s+(?:members?|people|persons?))?"
    r"(?:\s+at\s+the\s+(?P<pct>\d+(?:\.\d*)?)\s*(?:st|nd|rd|th)?\s+percentile)?\s*$",
    re.IGNORECASE)
GOAL_EXAMPLE = "night SaO2 >= 75 % for every member at the 5th percentile"


# -- goal ----------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Goal:
    """An expected-SaO2 goal: every member's ``percentile`` at least ``sao2_pct`` when ``when``."""

    when: str            # "night", "awake" or "any"
    sao2_pct: float
    percentile: float
    text: str

    def describe(self) -> str:
        when = {"night": "asleep", "awake": "awake", "any": "at every moment"}[self.when]
        return (f"expected SaO2 of at least {self.sao2_pct:g} % {when} for every member, "
                f"at the {self.percentile:g}th percentile of their expected range")


def parse_goal(text: str | None) -> Goal | None:
    """Parse a goal such as ``"night SaO2 >= 75 % for every member at the 5th percentile"``.

    ``night`` (asleep), ``awake`` or ``any`` (default) moment; the percentile defaults to 50.

    Raises
    ------
    AltoxError
        Text that does not read as a goal (the message gives an example).
    """
    if text is None:
        return None
    m = _GOAL_RE.match(str(text))
    if m is None:
        raise AltoxError(f"--goal: {text!r} is not a goal this version reads; expected e.g. "
                         f"{GOAL_EXAMPLE!r} (night, awake or any; SaO2 >= a percentage; an optional "
                         "percentile from 1 to 99).", field="--goal", value=text, expected=GOAL_EXAMPLE)
    value = float(m.group("value"))
    pct = float(m.group("pct")) if m.group("pct") else 50.0
    if not 50.0 <= value <= 100.0:
        raise AltoxError(f"--goal: SaO2 of {value:g} % is outside 50-100 %; expected e.g. {GOAL_EXAMPLE!r}.",
                         field="--goal", value=text)
    if not 1.0 <= pct <= 99.0:
        raise AltoxError(f"--goal: the {pct:g}th percentile is outside 1-99; expected e.g. {GOAL_EXAMPLE!r}.",
                         field="--goal", value=text)
    when = (m.group("when") or "any").lower()
    return Goal({"day": "awake"}.get(when, when), value, pct, str(text).strip())


# -- results -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Night:
    """One day (and its night) of a candidate itinerary."""

    sleep_m: float
    source: int | None          # index of the plan's day it comes from; None for an added day
    kind: str                   # "keep", "rest", "camp", "lower"
    high_m: float | None = None  # a lowered day's planned camp, now its high point
    drop_high: bool = False
    oxygen_flow_l_min: float | None = None
    oxygen_when: str | None = None


@dataclass
class Repair:
    """What :func:`repair_plan` found."""

    kind: str
    found: bool                       # a plan meeting every applied rule (and the goal)
    plan: object                      # the repaired plan (or the closest found)
    text: str                         # its YAML (comments of the original kept)
    changes: list[str]
    added_days: int = 0
    changed_legs: int = 0
    altitude_change_ft: float = 0.0
    reasons: list[str] = field(default_factory=list)    # why no repair, when found is False
    goal: Goal | None = None
    goal_misses: list[str] = field(default_factory=list)
    states: int = 0
    complete: bool = True             # the search finished within its bound
    notes: list[str] = field(default_factory=list)


def _round_trip():
    try:
        from ruamel.yaml import YAML
    except ImportError as exc:  # a declared dependency; reinstall altox
        raise AltoxError("writing a repaired plan needs the ruamel.yaml package (a dependency of altox); "
                         "reinstall altox with pip", field="ruamel.yaml") from exc
    y = YAML()
    y.preserve_quotes = True
    y.width = 4096             # no folding of long lines
    y.indent(mapping=2, sequence=4, offset=2)
    return y


def _dump(y, doc) -> str:
    import io

    buf = io.StringIO()
    y.dump(doc, buf)
    return buf.getvalue()


def _q(text: str, flow: bool):
    """A value with a thousands separator, double-quoted inside a flow mapping (as the demo plans write it)."""
    if flow and "," in text:
        from ruamel.yaml.scalarstring import DoubleQuotedScalarString

        return DoubleQuotedScalarString(text)
    return text


def _put_after(item, key, value, after):
    """Set ``key`` in a round-trip mapping, placed after ``after`` when new."""
    if key in item or after not in item:
        item[key] = value
        return
    item.insert(list(item.keys()).index(after) + 1, key, value)
