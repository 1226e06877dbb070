"""Load and validate guidance rule sets (YAML data files with their citations).

Each rule set is one YAML file.  The shipped ones live in ``altox/data/rules/`` and are
named by their ``id`` (``us-14cfr-91``, ``eu-nco``, ``wms-2024``, ...); a user may also
pass the path of a rule file of their own, written in the same format (see docs/rules.md).

Every threshold is written with its unit (``"12,500 ft"``, ``"700 hPa"``, ``"30 min"``,
``"500 m"``) and carries the section it comes from and its ``basis``: ``read`` (the
figure was read in a copy of the source, named in ``where``) or ``from memory``.

Errors
------
* an unknown id raises :class:`altox.errors.AltoxError` naming the valid ids, with a
  did-you-mean suggestion;
* a rule file that cannot be parsed or does not follow the format raises
  :class:`altox.errors.ProfileError` carrying the file, line and column of the fault.
"""

from __future__ import annotations

import difflib
import functools
import math
import re
from functools import cached_property
from importlib import resources
from pathlib import Path
from typing import Literal, Optional

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from altox.errors import AltoxError, ProfileError
from altox.units import H_PER_DAY, M_PER_FT, parse_quantity

Basis = Literal["read", "from memory", "common practice", "local"]  # the last two for users' own files
AppliesTo = Literal["crew", "flight crew", "passengers", "all occupants", "party"]
Quantity = Literal[
    "cabin_pressure_altitude",        # ft (pressure altitude of the cabin)
    "cabin_pressure",                 # hPa etc.; converted to ISA pressure altitude
    "sleeping_altitude_gain_per_day",  # m per day
    "rest_day_interval",              # days
    "sleeping_gain_per_extra_day",    # m of gain per extra acclimatization day
    "flight_altitude",                # ft (pressure altitude of the aircraft: flight levels)
]
Check = Literal["oxygen", "limit", "sleep_gain", "rest_interval", "rest_per_gain", "mask", "supply"]
Category = Literal["low", "moderate", "high"]
Criterion = Literal[
    "no_history_max_sleep_at_most", "gradual", "ams_day1_between", "no_ams_day1_above",
    "fast_gain_with_extra_days", "ams_day1_at_least", "hape_or_hace", "day1_above",
    "fast_gain_without_extra_days", "history_ams", "day1_at_least", "very_rapid_ascent",
]

#: unit kind (for :func:`altox.units.parse_quantity`) of each quantity
QUANTITY_KIND = {
    "cabin_pressure_altitude": "length",
    "cabin_pressure": "pressure",
    "sleeping_altitude_gain_per_day": "length",
    "rest_day_interval": "duration",
    "sleeping_gain_per_extra_day": "length",
    "flight_altitude": "length",
}
#: the checks each quantity may drive
QUANTITY_CHECKS = {
    "cabin_pressure_altitude": {"oxygen", "limit"},
    "cabin_pressure": {"oxygen", "limit"},
    "sleeping_altitude_gain_per_day": {"sleep_gain"},
    "rest_day_interval": {"rest_interval"},
    "sleeping_gain_per_extra_day": {"rest_per_gain"},
    "flight_altitude": {"mask", "supply"},
}
AVIATION_CHECKS = {"oxygen", "limit", "mask", "supply"}
#: aviation checks that turn on the aircraft's flight altitude, not on the cabin
FLIGHT_LEVEL_CHECKS = {"mask", "supply"}
EXPEDITION_CHECKS = {"sleep_gain", "rest_interval", "rest_per_gain"}
#: criteria of the risk table that need a ``value`` (and ``band_top``)
CRITERIA_WITH_VALUE = {
    "no_history_max_sleep_at_most", "gradual", "ams_day1_between", "no_ams_day1_above",
    "fast_gain_with_extra_days", "ams_day1_at_least", "day1_above",
    "fast_gain_without_extra_days", "day1_at_least", "very_rapid_ascent",
}
CRITERIA_WITH_BAND = {"ams_day1_between"}

_UNIT_RE = re.compile(r"[A-Za-z']+\s*$")
_DURATION_RE = re.compile(r"^\s*more than\s+(?P<q>.+)$", re.IGNORECASE)
_ID_RE = r"^[a-z0-9][a-z0-9.-]*$"
_FT_PER_M = 1.0 / M_PER_FT


def _altitude_ft(text: str, quantity: str, field: str) -> float:
    """Threshold altitude in feet: lengths directly; pressures as ISA pressure altitude."""
    kind = QUANTITY_KIND[quantity]
    inside = parse_quantity(text, kind, field=field)
    if kind == "length":
        return round(inside * _FT_PER_M, 6)  # '13,000 ft' must stay exactly 13,000 ft
    from altox.physiology.atmosphere import pressure_altitude_ft  # lazy: keeps ambiance off the import path
    return float(pressure_altitude_ft(inside))


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", str_strip_whitespace=True)


class Unless(_Strict):
    """The exception of a mask rule: when it is met, no pilot need wear the mask."""

    pilots_at_controls: int = Field(ge=1, le=4)
    quick_donning: bool
    up_to: str | None = None   # the exception holds at or below this flight altitude

    @field_validator("up_to")
    @classmethod
    def _length(cls, text):
        if text is not None:
            parse_quantity(text, "length", field="up_to")
        return text

    @cached_property   # parsed once per rule set (the checker reads it for every plan)
    def up_to_ft(self) -> float | None:
        return None if self.up_to is None else _altitude_ft(self.up_to, "flight_altitude", "up_to")


class Threshold(_Strict):
    """One figure of a rule set, with the words of the rule and where it was read."""

    id: str = Field(pattern=_ID_RE)
    applies_to: AppliesTo
    quantity: Quantity
    check: Check
    value: str
    band_top: str | None = None
    above: str | None = None
    duration: str | None = None
    condition: str | None = None
    supply: str | None = None          # 'supply' checks: the supply each occupant needs, e.g. '10 min'
    unless: Unless | None = None       # 'mask' checks: the exception
    pressurized_only: bool = False     # the rule is for aircraft with a pressurized cabin
    requirement: str = Field(min_length=1)
    section: str = Field(min_length=1)
    basis: Basis
    where: str = Field(min_length=1)
    note: str | None = None
    citation: str | None = None  # filled from the rule set when not given

    # -- derived (set by the validators) -----------------------------------------------
    @property
    def unit(self) -> str:
        """The unit as written in ``value`` (``"ft"``, ``"hPa"``, ``"m"``, ``"days"``)."""
        match = _UNIT_RE.search(self.value)
        return match.group(0).strip() if match else ""

    @field_validator("value", "band_top", "above")
    @classmethod
    def _parses(cls, text, info):
        if text is None:
            return text
        quantity = info.data.get("quantity")
        if quantity is None:  # quantity itself was invalid; reported separately
            return text
        kind = "length" if info.field_name == "above" else QUANTITY_KIND[quantity]
        if not isinstance(text, str):
            raise ValueError(f"write {info.field_name} with its unit, e.g. '12,500 ft' or '500 m'")
        number = parse_quantity(text, kind, field=info.field_name)
        if not math.isfinite(number) or number < 0:
            raise ValueError(f"{text!r} must be a finite, non-negative {kind}")
        return text

    @field_validator("duration")
    @classmethod
    def _duration(cls, text):
        if text is None:
            return text
        match = _DURATION_RE.match(text)
        if not match:
            raise ValueError(f"duration {text!r} must read 'more than <time>', e.g. 'more than 30 min'")
        hours = parse_quantity(match.group("q"), "duration", field="duration")
        if not math.isfinite(hours) or hours <= 0:
            raise ValueError(f"duration {text!r} must be a finite time above zero, e.g. 'more than 30 min'")
        return text

    @model_validator(mode="after")
    def _consistent(self):
        if self.check not in QUANTITY_CHECKS[self.quantity]:
            raise ValueError(f"check {self.check!r} does not fit quantity {self.quantity!r}; "
                             f"expected one of {sorted(QUANTITY_CHECKS[self.quantity])}")
        if self.band_top is not None:
            if self.check not in ("oxygen", "mask"):
                raise ValueError("band_top is only meaningful for an 'oxygen' or 'mask' check")
            if self.top_ft <= self.lower_ft:
                raise ValueError(f"band_top {self.band_top!r} must lie above value {self.value!r}")
        if self.check in EXPEDITION_CHECKS and self.above is None:
            raise ValueError("an expedition threshold needs 'above' (the altitude it applies above)")
        if self.check in AVIATION_CHECKS and self.above is not None:
            raise ValueError("'above' is for expedition thresholds; use 'value' for aviation")
        if (self.check == "supply") != (self.supply is not None):
            raise ValueError("a 'supply' check needs 'supply' (e.g. '10 min'), and only it takes one")
        if self.supply is not None:
            minutes = parse_quantity(self.supply, "duration", field="supply")
            if not math.isfinite(minutes) or minutes <= 0:
                raise ValueError(f"supply {self.supply!r} must be a positive duration")
        if self.unless is not None and self.check != "mask":
            raise ValueError("'unless' belongs to a 'mask' check")
        if self.check in FLIGHT_LEVEL_CHECKS and self.duration is not None:
            raise ValueError("a flight-level check takes no 'duration'")
        return self

    # -- values in the checker's units ---------------------------------------------------
    @cached_property   # parsed once per rule set (the checker reads it for every plan)
    def lower_ft(self) -> float:
        """Aviation: the cabin pressure altitude [ft] above which the threshold applies."""
        return _altitude_ft(self.value, self.quantity, "value")

    @cached_property   # parsed once per rule set (the checker reads it for every plan)
    def top_ft(self) -> float | None:
        """Aviation: the top of the band [ft], 'up to and including'; None for no top."""
        return None if self.band_top is None else _altitude_ft(self.band_top, self.quantity, "band_top")

    @cached_property   # parsed once per rule set (the checker reads it for every plan)
    def supply_h(self) -> float | None:
        """The supply each occupant needs [h] ('supply' checks), or None."""
        return None if self.supply is None else parse_quantity(self.supply, "duration")

    @cached_property   # parsed once per rule set (the checker reads it for every plan)
    def duration_h(self) -> float | None:
        """The 'more than' duration [h], or None."""
        if self.duration is None:
            return None
        return parse_quantity(_DURATION_RE.match(self.duration).group("q"), "duration")

    @property
    def value_inside(self) -> float:
        """``value`` in altox's inside unit: m for lengths, mmHg for pressures, h for durations."""
        return parse_quantity(self.value, QUANTITY_KIND[self.quantity])

    @property
    def value_days(self) -> float:
        """``value`` in days (for ``rest_day_interval``)."""
        return self.value_inside / H_PER_DAY

    @property
    def above_m(self) -> float | None:
        """Expedition: the sleeping altitude [m] above which the threshold applies."""
        return None if self.above is None else parse_quantity(self.above, "length")


class NotEncoded(_Strict):
    """A provision of the source that altox deliberately does not check, and why."""

    section: str
    reason: str
    basis: Basis
    where: str


class RiskRow(_Strict):
    """One row (or cell) of a risk-category table."""

    category: Category
    criterion: Criterion
    value: str | None = None
    band_top: str | None = None
    within_days: int | None = Field(None, ge=1, le=365)   # very_rapid_ascent: reached before this day
    text: str = Field(min_length=1)

    @field_validator("value", "band_top")
    @classmethod
    def _length(cls, text, info):
        if text is not None:
            parse_quantity(text, "length", field=info.field_name)
        return text

    @model_validator(mode="after")
    def _needs(self):
        if self.criterion in CRITERIA_WITH_VALUE and self.value is None:
            raise ValueError(f"criterion {self.criterion!r} needs a value, e.g. '2,800 m'")
        if self.criterion in CRITERIA_WITH_BAND and self.band_top is None:
            raise ValueError(f"criterion {self.criterion!r} needs band_top, e.g. '2,800 m'")
        if (self.criterion == "very_rapid_ascent") != (self.within_days is not None):
            raise ValueError("criterion 'very_rapid_ascent' needs within_days (e.g. 7), and only it takes one")
        return self

    @property
    def value_m(self) -> float | None:
        return None if self.value is None else parse_quantity(self.value, "length")

    @property
    def top_m(self) -> float | None:
        return None if self.band_top is None else parse_quantity(self.band_top, "length")


class RiskTable(_Strict):
    section: str
    basis: Basis
    where: str
    notes: list[str] = []
    rows: list[RiskRow] = Field(min_length=1)
    not_encoded: list[str] = []


class Dose(_Strict):
    text: str = Field(min_length=1)
    basis: Basis
    where: str


class ProphylaxisText(_Strict):
    text: str = Field(min_length=1)
    basis: Basis
    where: str
    dose: Dose | None = None


class Prophylaxis(_Strict):
    low: ProphylaxisText
    moderate: ProphylaxisText
    high: ProphylaxisText
    hape: ProphylaxisText | None = None


class RuleSet(_Strict):
    """A published rule or guideline, transcribed as data with its citation."""

    id: str = Field(pattern=_ID_RE)
    title: str = Field(min_length=1)
    label: str = Field(min_length=1)  # short name used in messages: "14 CFR", "WMS 2019"
    jurisdiction: str = Field(min_length=1)
    kind: Literal["aviation", "expedition"]
    edition: str = Field(min_length=1)
    effective: Optional[str] = Field(None, min_length=1)
    citation: str = Field(min_length=1)
    url: str | None = None
    caution: str = Field(min_length=1)
    thresholds: list[Threshold] = Field(min_length=1)
    not_encoded: list[NotEncoded] = []
    risk_table: RiskTable | None = None
    prophylaxis: Prophylaxis | None = None

    @model_validator(mode="after")
    def _consistent(self):
        seen = set()
        allowed = AVIATION_CHECKS if self.kind == "aviation" else EXPEDITION_CHECKS
        for i, th in enumerate(self.thresholds):
            if th.id in seen:
                raise ValueError(f"thresholds[{i}]: duplicate threshold id {th.id!r}")
            seen.add(th.id)
            if th.check not in allowed:
                raise ValueError(f"thresholds[{i}] ({th.id}): check {th.check!r} does not belong in a "
                                 f"{self.kind} rule set; expected one of {sorted(allowed)}")
            if th.citation is None:
                th.citation = self.citation
        if self.kind == "aviation" and (self.risk_table or self.prophylaxis):
            raise ValueError("risk_table and prophylaxis belong to expedition rule sets")
        if self.risk_table is not None and self.prophylaxis is None:
            raise ValueError("a rule set with a risk_table also needs prophylaxis texts "
                             "for low, moderate and high")
        return self

    def threshold(self, threshold_id: str) -> Threshold:
        """The threshold with this id (AltoxError listing the valid ones otherwise)."""
        for th in self.thresholds:
            if th.id == threshold_id:
                return th
        ids = [th.id for th in self.thresholds]
        raise AltoxError(f"rule set {self.id!r} has no threshold {threshold_id!r}; "
                         f"valid: {', '.join(ids)}", field="threshold", value=threshold_id,
                         expected=", ".join(ids))

    def thresholds_by_check(self, check: str) -> list[Threshold]:
        return [th for th in self.thresholds if th.check == check]


# -- files ----------------------------------------------------------------------------------
def _rules_dir():
    return resources.files("altox").joinpath("data", "rules")


def available_rule_sets() -> list[str]:
    """Ids of the rule sets shipped with altox, sorted."""
    return sorted(entry.name[:-5] for entry in _rules_dir().iterdir()
                  if entry.name.endswith(".yaml"))


#: Largest rule file accepted, in bytes (256 KiB); the shipped rule sets are 3-7 KB each.
MAX_RULE_BYTES = 256 * 1024
#: Longest message shown for one problem of a rule file, in characters (longer ones are cut).
_MAX_PROBLEM_CHARS = 160


def _field_name(loc) -> str:
    out = ""
    for key in loc:
        out += f"[{key}]" if isinstance(key, int) else (f".{key}" if out else str(key))
    return out


def _short(text: str, limit: int = _MAX_PROBLEM_CHARS) -> str:
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[:limit - 3] + "..."


def _parse(text: str, path: str) -> RuleSet:
    """Rule-file text -> RuleSet, through the plan reader's safe parser (no aliases, no duplicate keys,
    only plain tags, located errors); the first problem is reported with a count of the rest."""
    from altox.yamlload import parse_yaml

    data, positions = parse_yaml(text, path, noun="rule")
    if not isinstance(data, dict):
        raise ProfileError(f"{path}:1:1: a rule file must be a YAML mapping with id, title, kind, "
                           f"citation, caution and thresholds", path=path, line=1, column=1,
                           expected="a mapping")
    try:
        return RuleSet.model_validate(data)
    except ValidationError as exc:
        problems = []
        errors = exc.errors(include_url=False)
        missing = {}
        for err in errors:
            if err["type"] == "missing":
                loc = tuple(k for k in err["loc"] if not str(k).startswith("function-"))
                missing.setdefault(loc[:-1], []).append(str(loc[-1]))
        for err in errors:
            loc = tuple(k for k in err["loc"] if not str(k).startswith("function-"))
            line, col = positions.locate(loc, prefer_key=err["type"] == "extra_forbidden")
            msg = err["msg"].removeprefix("Value error, ")
            if err["type"] == "extra_forbidden":
                close = difflib.get_close_matches(str(loc[-1]), missing.get(loc[:-1], []), n=1, cutoff=0.6)
                msg = f"unknown key {loc[-1]!r}" + (f"; did you mean {close[0]!r}?" if close else "")
            elif err["type"] == "literal_error" and "expected" in err.get("ctx", {}):
                msg = f"{_short(repr(err.get('input')), 40)} is not accepted; expected {err['ctx']['expected']}"
            problems.append((err["type"] == "missing", line or 10**9, col or 0, _field_name(loc) or "(top level)",
                             _short(msg), err.get("input")))
        # a missing key is often the echo of a misspelt one: the misspelling first, then by position
        problems.sort(key=lambda p: p[:3])
        _, line, col, field, msg, value = problems[0]
        line, col = (None, None) if line == 10**9 else (line, col)
        more = len(problems) - 1
        tail = f" ({more} more problem{'s' if more > 1 else ''} in this rule file.)" if more else ""
        where = path + (f":{line}:{col}" if line is not None else "")
        raise ProfileError(f"{where}: {field}: {msg}{tail}", path=path, line=line, column=col, field=field,
                           value=value if isinstance(value, (str, int, float, bool, type(None))) else None) from None


@functools.lru_cache(maxsize=None)
def _load_builtin(rule_id: str) -> RuleSet:
    entry = _rules_dir().joinpath(f"{rule_id}.yaml")
    rs = _parse(entry.read_text(encoding="utf-8"), f"altox/data/rules/{rule_id}.yaml")
    if rs.id != rule_id:
        raise ProfileError(f"altox/data/rules/{rule_id}.yaml: id {rs.id!r} does not match the file name",
                           path=f"altox/data/rules/{rule_id}.yaml", field="id", value=rs.id)
    return rs


def load_rule_set(id_or_path) -> RuleSet:
    """Load a shipped rule set by id, or a user's rule file by path.

    Parameters
    ----------
    id_or_path : str or os.PathLike
        A shipped id (see :func:`available_rule_sets`) or the path of a ``.yaml`` file.

    Raises
    ------
    AltoxError
        Unknown id (the message lists the valid ids and the closest match).
    ProfileError
        A rule file that cannot be read, parsed or validated (with file:line).
    """
    if isinstance(id_or_path, RuleSet):
        return id_or_path
    text = str(id_or_path)
    looks_like_path = (isinstance(id_or_path, Path) or text.endswith((".yaml", ".yml"))
                       or "/" in text or "\\" in text)
    if not looks_like_path:
        valid = available_rule_sets()
        if text in valid:
            return _load_builtin(text)
        close = difflib.get_close_matches(text, valid, n=1, cutoff=0.5)
        hint = f" Did you mean {close[0]!r}?" if close else ""
        raise AltoxError(f"unknown rule set {text!r}.{hint} Valid rule sets: {', '.join(valid)}; "
                         f"or give the path of a .yaml rule file.",
                         field="rule_set", value=text, expected=", ".join(valid))
    from altox.yamlload import read_plan_text

    # a regular, small UTF-8 text file, or a located refusal (devices, pipes, huge files, legacy encodings)
    return _parse(read_plan_text(text, noun="rule", max_bytes=MAX_RULE_BYTES), text)
