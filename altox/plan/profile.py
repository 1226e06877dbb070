"""The altox plan format: an expedition itinerary or a flight profile, read from YAML.

A plan file is a YAML mapping whose ``kind`` is ``expedition`` or ``flight``.  Quantities are
written with their units (``"3,850 m"``, ``"12,500 ft"``, ``"FL250"``, ``"45 min"``,
``"7.8 psi"``, ``"14.2 g/dL"``, ``"93 %"``) and are held inside in altox's units: metres,
hours, mmHg, g/dL, fractions.  The format is described in ``docs/profiles.md``; its JSON
Schema is :func:`plan_json_schema`.

Public entry points
-------------------
:func:`load_plan`
    Read a plan file (safely: see :mod:`altox.yamlload`) and validate it.
:func:`load_plan_text`
    The same for YAML text.
:func:`plan_from_data`
    Validate already-parsed data (a dict).
:func:`plan_json_schema`
    JSON Schema of the format.

Every problem is raised as one :class:`~altox.errors.ProfileError` whose message is a single
paragraph ``file:line:column: field.path: what is wrong, the value, what is expected``.

Notes on altitudes
------------------
Expedition altitudes are geometric (map) altitudes in metres.  Flight altitudes (``altitude``,
``cabin``, elevations, ``max_cabin_altitude``) are *pressure* altitudes, held as feet x 0.3048
in attributes named ``*_pressure_altitude_m`` / ``*_elevation_m``; the timeline turns them into
pressures and geometric ISA altitudes.

Why this module is long: it still holds the plan format's models, their quantity validators, the JSON Schema and the translation of validation errors into located messages; splitting these into plan/quantities, plan/models and plan/messages is open work.
"""

from __future__ import annotations

import difflib
import math
import re
import types
from pathlib import Path
from typing import Annotated, Any, Literal, Optional, Union, get_args, get_origin

from pydantic import (BaseModel, BeforeValidator, ConfigDict, Field, PrivateAttr, StrictBool,
                      StrictInt, StrictStr, TypeAdapter, ValidationError, WithJsonSchema,
                      model_validator)

from altox.errors import ProfileError, UnitError
from altox.units import M_PER_FT, PA_PER_MMHG, PA_PER_PSI, parse_fraction, parse_quantity
from altox.yamlload import PositionMap, format_path, parse_yaml, plan_dir, read_plan_data

__all__ = [
    "ExpeditionPlan", "FlightPlan", "Plan", "Member", "Day", "Observation", "LakeLouise", "DayOxygen", "Aircraft", "Occupant",
    "Leg", "load_plan", "load_plan_text", "plan_from_data", "plan_json_schema",
    "parse_hemoglobin", "parse_flow", "parse_vertical_speed", "flight_leg_altitudes",
    "EXPEDITION_MIN_M", "EXPEDITION_MAX_M", "FLIGHT_MIN_FT", "FLIGHT_MAX_FT",
]

# -- limits ------------------------------------------------------------------------------
EXPEDITION_MIN_M = -500.0          # the mountain model's range (altox.physiology.atmosphere)
EXPEDITION_MAX_M = 9000.0
FLIGHT_MIN_FT = -2000.0            # pressure altitude; the lowest fields are about -1,300 ft
FLIGHT_MAX_FT = 60000.0
MAX_HOURS_HIGH_H = 16.0            # the waking day, 06:00-22:00
MAX_LEG_DURATION_H = 48.0
MAX_SAMPLE_EVERY_H = 24.0
MAX_SAMPLES = 500_000
MAX_DIFFERENTIAL_PSI = 12.0        # above any pressurized aircraft's
MAX_DAYS = 1000
MAX_LEGS = 10000
#: people in a plan's party or aboard (each is evaluated along the whole timeline)
MAX_PEOPLE = 100
#: people (with the reference adult) x timeline samples evaluated for one plan: about 1.3 GB and
#: 20 s at the limit on a 2-core machine (docs/profiles.md, "Limits")
MAX_PERSON_SAMPLES = 5_000_000
PRESSURE_MIN_MMHG = 200.0          # measured site pressures: below the highest summit's ~250
PRESSURE_MAX_MMHG = 820.0
PRESSURE_MISMATCH_M = 1500.0       # measured pressure vs. sleeping altitude, mountain model


# -- problems raised inside validation, carrying a path relative to the model -----------------
class _Problem(ValueError):
    """A validation problem; ``loc`` is appended to pydantic's location of the failing item."""

    _UNSET = object()

    def __init__(self, message: str, *, expected: str | None = None, loc: tuple = (),
                 value=_UNSET):
        super().__init__(message)
        self.message = message
        self.expected = expected
        self.loc = tuple(loc)
        self.value = value


_F = "\x00field"  # placeholder field name passed to the unit parsers, stripped from messages


def _unit_problem(exc: UnitError) -> _Problem:
    msg = exc.message
    if msg.startswith(_F + ": "):
        msg = msg[len(_F) + 2:]
    return _Problem(msg.replace(_F, "value"), expected=exc.expected)


_NUM = r"[-+]?(?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d*)?(?:[eE][-+]?\d+)?|[-+]?\.\d+(?:[eE][-+]?\d+)?"
_NUM_UNIT_RE = re.compile(rf"^\s*(?P<num>{_NUM})\s*(?P<unit>[^\d\s].*?)?\s*$")


def _split(value) -> tuple[float, str] | None:
    if not isinstance(value, str):
        return None
    m = _NUM_UNIT_RE.match(value)
    if not m:
        return None
    return float(m.group("num").replace(",", "")), (m.group("unit") or "")


def _fmt(x: float, digits: int = 0) -> str:
    return f"{x:,.{digits}f}"


def _fmt_h(hours: float) -> str:
    if hours >= 1.0:
        return f"{hours:g} h"
    if hours * 60.0 >= 1.0:
        return f"{hours * 60.0:g} min"
    return f"{hours * 3600.0:g} s"


# -- altitudes -------------------------------------------------------------------------------
def _altitude(value, lo_m: float, hi_m: float, lo_text: str, hi_text: str, what: str) -> float:
    try:
        alt_m = parse_quantity(value, "length", field=_F)
    except UnitError as exc:
        raise _unit_problem(exc) from None
    if lo_m <= alt_m <= hi_m:
        return alt_m
    expected = f"{what} from {lo_text} to {hi_text}"
    split = _split(value)
    if alt_m > hi_m and split and split[1].lower() in ("m", "metre", "metres", "meter", "meters"):
        as_ft_m = split[0] * M_PER_FT
        if lo_m <= as_ft_m <= hi_m:
            raise _Problem(f"{value!r} is above {hi_text}, higher than {what} can be; did you mean "
                           f"'{_fmt(split[0])} ft' ({_fmt(as_ft_m)} m)? Expected {expected}.",
                           expected=expected)
    side = "above" if alt_m > hi_m else "below"
    raise _Problem(f"{value!r} ({_fmt(alt_m)} m) is {side} the range altox models; expected "
                   f"{expected}.", expected=expected)


def _expedition_altitude(value) -> float:
    return _altitude(value, EXPEDITION_MIN_M, EXPEDITION_MAX_M, "-500 m", "9,000 m",
                     "an expedition altitude")


def _flight_altitude(value) -> float:
    return _altitude(value, FLIGHT_MIN_FT * M_PER_FT, FLIGHT_MAX_FT * M_PER_FT, "-2,000 ft",
                     "60,000 ft (FL600)", "a pressure altitude")


def _opt(fn):
    def wrapped(value):
        return None if value is None else fn(value)
    wrapped.__name__ = fn.__name__
    return wrapped


# -- durations -------------------------------------------------------------------------------
_DURATION_PART_RE = re.compile(r"\s*(\d+(?:\.\d*)?)\s*([A-Za-z]+)")


def _parse_duration_h(value) -> float:
    """parse_quantity for durations, plus compound forms such as '1 h 35 min' or '2 d 6 h'."""
    if isinstance(value, str):
        parts = _DURATION_PART_RE.findall(value)
        if len(parts) > 1 and _DURATION_PART_RE.sub("", value).strip() == "":
            return sum(parse_quantity(f"{num} {unit}", "duration", field=_F) for num, unit in parts)
    return parse_quantity(value, "duration", field=_F)


def _duration(value, max_h: float, max_text: str) -> float:
    try:
        hours = _parse_duration_h(value)
    except UnitError as exc:
        raise _unit_problem(exc) from None
    expected = f"a duration above zero and at most {max_text}, e.g. '45 min' or '2 h'"
    if hours <= 0.0:
        raise _Problem(f"{value!r} is {'zero' if hours == 0 else 'negative'}; expected {expected}.",
                       expected=expected)
    if hours > max_h:
        raise _Problem(f"{value!r} is longer than {max_text}; expected {expected}.", expected=expected)
    return hours


def _leg_duration(value) -> float:
    return _duration(value, MAX_LEG_DURATION_H, "48 h")


def _hours_high(value) -> float:
    return _duration(value, MAX_HOURS_HIGH_H, "16 h (the waking day, 06:00-22:00)")


def _sample_every(value) -> float:
    return _duration(value, MAX_SAMPLE_EVERY_H, "24 h")


# -- pressures -------------------------------------------------------------------------------
def _pressure(value, lo: float, hi: float, expected: str) -> float:
    try:
        p = parse_quantity(value, "pressure", field=_F)
    except UnitError as exc:
        raise _unit_problem(exc) from None
    if not lo <= p <= hi:
        raise _Problem(f"{value!r} ({p:.1f} mmHg) is implausible; expected {expected}.",
                       expected=expected)
    return p


def _site_pressure(value) -> float:
    return _pressure(value, PRESSURE_MIN_MMHG, PRESSURE_MAX_MMHG,
                     "a barometric pressure from 200 to 820 mmHg, e.g. '455 mmHg' or '60.7 kPa'")


def _differential(value) -> float:
    try:
        p = parse_quantity(value, "pressure", field=_F)
    except UnitError as exc:
        raise _unit_problem(exc) from None
    psi = p * PA_PER_MMHG / PA_PER_PSI
    expected = "a cabin differential above 0 and at most 12 psi, e.g. '8.6 psi' or '59 kPa'"
    if not 0.0 < psi <= MAX_DIFFERENTIAL_PSI:
        raise _Problem(f"{value!r} ({psi:.2f} psi) is not a plausible maximum cabin differential; "
                       f"expected {expected}.", expected=expected)
    return p


def _pao2(value) -> float:
    return _pressure(value, 20.0, 700.0, "an arterial PO2 from 20 to 700 mmHg, e.g. '62 mmHg' or "
                     "'8.3 kPa'")


# -- other quantities -------------------------------------------------------------------------
_HB_UNITS = {"g/dl": 1.0, "g/l": 0.1}
_HB_EXPECTED = "a hemoglobin concentration in g/dL or g/L, e.g. '14.2 g/dL' or '142 g/L'"


def parse_hemoglobin(value, *, field: str = "hemoglobin") -> float:
    """Parse a hemoglobin concentration written with its unit.

    Parameters
    ----------
    value : str
        ``"14.2 g/dL"`` or ``"142 g/L"`` (case-insensitive unit).  A bare number is rejected:
        g/dL and g/L differ tenfold.
    field : str
        Name used in error messages.

    Returns
    -------
    hemoglobin_g_dl : float
        Concentration, 5 to 25 g/dL. [g/dL]

    Raises
    ------
    UnitError
        Missing or unknown unit, not a number, or outside 5-25 g/dL.
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        raise UnitError(f"{field}: the bare number {value} has no unit, which is ambiguous (g/dL and "
                        f"g/L differ tenfold); expected {_HB_EXPECTED}.", field=field, value=value,
                        expected=_HB_EXPECTED)
    split = _split(value)
    if split is None:
        raise UnitError(f"{field}: {value!r} is not a hemoglobin concentration; expected "
                        f"{_HB_EXPECTED}.", field=field, value=value, expected=_HB_EXPECTED)
    number, unit = split
    factor = _HB_UNITS.get(unit.replace(" ", "").lower())
    if factor is None:
        raise UnitError(f"{field}: {value!r} has {'no' if not unit else 'an unknown'} unit; expected "
                        f"{_HB_EXPECTED}.", field=field, value=value, expected=_HB_EXPECTED)
    g_dl = number * factor
    if not (math.isfinite(g_dl) and 5.0 <= g_dl <= 25.0):
        raise UnitError(f"{field}: {value!r} ({g_dl:.1f} g/dL) is outside 5-25 g/dL; expected "
                        f"{_HB_EXPECTED}.", field=field, value=value, expected=_HB_EXPECTED)
    return g_dl


_FLOW_UNITS = {"l/min": 1.0, "lpm": 1.0, "ml/min": 1e-3}
_FLOW_EXPECTED = "an oxygen flow above 0 and at most 25 L/min, e.g. '2 L/min' or '500 mL/min'"


def parse_flow(value, *, field: str = "flow") -> float:
    """Parse an oxygen flow (``"2 L/min"``, ``"2 lpm"``, ``"500 mL/min"``) into L/min.

    Raises
    ------
    UnitError
        Missing or unknown unit, not a number, or outside (0, 25] L/min.
    """
    split = None if isinstance(value, bool) else _split(value)
    if split is None or not split[1]:
        raise UnitError(f"{field}: {value!r} is not an oxygen flow with its unit; expected "
                        f"{_FLOW_EXPECTED}.", field=field, value=value, expected=_FLOW_EXPECTED)
    factor = _FLOW_UNITS.get(split[1].replace(" ", "").lower())
    if factor is None:
        raise UnitError(f"{field}: unknown flow unit {split[1]!r} in {value!r}; expected "
                        f"{_FLOW_EXPECTED}.", field=field, value=value, expected=_FLOW_EXPECTED)
    flow = split[0] * factor
    if not (math.isfinite(flow) and 0.0 < flow <= 25.0):
        raise UnitError(f"{field}: {value!r} is outside (0, 25] L/min; expected {_FLOW_EXPECTED}.",
                        field=field, value=value, expected=_FLOW_EXPECTED)
    return flow


_VS_UNITS = {"ft/min": 1.0, "fpm": 1.0, "m/min": 1.0 / M_PER_FT, "m/s": 60.0 / M_PER_FT}
_VS_EXPECTED = "a vertical speed above 0 and at most 20,000 ft/min, e.g. '4,000 ft/min' or '20 m/s'"


def parse_vertical_speed(value, *, field: str = "emergency_descent_rate") -> float:
    """Parse a vertical speed (``"4,000 ft/min"``, ``"4000 fpm"``, ``"20 m/s"``) into ft/min.

    Raises
    ------
    UnitError
        Missing or unknown unit, not a number, or outside (0, 20,000] ft/min.
    """
    split = None if isinstance(value, bool) else _split(value)
    if split is None or not split[1]:
        raise UnitError(f"{field}: {value!r} is not a vertical speed with its unit; expected "
                        f"{_VS_EXPECTED}.", field=field, value=value, expected=_VS_EXPECTED)
    factor = _VS_UNITS.get(split[1].replace(" ", "").lower())
    if factor is None:
        raise UnitError(f"{field}: unknown unit {split[1]!r} in {value!r}; expected {_VS_EXPECTED}.",
                        field=field, value=value, expected=_VS_EXPECTED)
    rate = split[0] * factor
    if not (math.isfinite(rate) and 0.0 < rate <= 20000.0):
        raise UnitError(f"{field}: {value!r} is outside (0, 20,000] ft/min; expected {_VS_EXPECTED}.",
                        field=field, value=value, expected=_VS_EXPECTED)
    return rate


def _wrap_unit(parser):
    def wrapped(value):
        try:
            return parser(value, field=_F)
        except UnitError as exc:
            raise _unit_problem(exc) from None
    wrapped.__name__ = parser.__name__
    return wrapped


def _fraction(value) -> float:
    try:
        return parse_fraction(value, field=_F)
    except UnitError as exc:
        raise _unit_problem(exc) from None


def _spo2(value) -> float:
    frac = _fraction(value)
    if frac < 0.5:
        raise _Problem(f"{value!r} is below 50 %, not a plausible resting SpO2; expected a "
                       "saturation such as '93 %' or 0.93.", expected="an SpO2 from 50 % to 100 %")
    return frac


def _fev1(value) -> float:
    """FEV1 as a fraction of predicted; '110 %' (above predicted) is allowed up to 150 %."""
    expected = "a fraction of predicted, e.g. 0.45 or '45 %' (up to 150 %)"
    if isinstance(value, str) and value.strip().endswith("%"):
        try:
            pct = float(value.strip().rstrip("%").strip())
        except ValueError:
            raise _Problem(f"{value!r} is not a number; expected {expected}.", expected=expected) from None
        if math.isfinite(pct) and 0.0 < pct <= 150.0:
            return pct / 100.0
        raise _Problem(f"{value!r} is outside (0, 150 %]; expected {expected}.", expected=expected)
    return _fraction(value)


def _age(value) -> float:
    expected = "an age in years as a plain number from 0 to 110, e.g. 45"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _Problem(f"{value!r} is not an age; expected {expected}.", expected=expected)
    if not (math.isfinite(value) and 0.0 <= value <= 110.0):
        raise _Problem(f"{value!r} is outside 0-110 years; expected {expected}.", expected=expected)
    return float(value)


def _dose_floor(value) -> float:
    return _altitude(value, 0.0, EXPEDITION_MAX_M, "0 m", "9,000 m", "a dose floor")


_RULE_ID_RE = re.compile(r"^[a-z0-9][a-z0-9._-]{0,63}$")


def _rule_id(value) -> str:
    expected = "a rule-set id in lower case, e.g. 'wms-2024' or 'us-14cfr-91'"
    if not isinstance(value, str) or not _RULE_ID_RE.match(value):
        fixed = re.sub(r"[\s_]+", "-", value.strip().lower()) if isinstance(value, str) else ""
        hint = f" Did you mean {fixed!r}?" if _RULE_ID_RE.match(fixed) else ""
        raise _Problem(f"{value!r} is not a rule-set id.{hint} Expected {expected}.",
                       expected=expected)
    return value


def _nonblank(value):
    if isinstance(value, str) and not value.strip():
        raise _Problem("the text is blank; expected a name.", expected="non-empty text")
    if isinstance(value, str) and ("\n" in value or "\t" in value):
        raise _Problem(f"the name {value!r} spans lines or holds a tab; expected a name on one line.",
                       expected="a name on one line")
    return value


# -- JSON-schema fragments for user-written quantities -----------------------------------------
_QTY_PATTERN = r"^\s*([-+]?[0-9][0-9,]*(\.[0-9]*)?([eE][-+]?[0-9]+)?|[-+]?\.[0-9]+)\s*[^0-9\s].*$"


def _qschema(description: str, examples: list, *, pattern: str = _QTY_PATTERN, nullable=False):
    s: dict[str, Any] = {"type": "string", "pattern": pattern, "description": description,
                         "examples": examples}
    if nullable:
        return {"anyOf": [s, {"type": "null"}], "description": description, "examples": examples}
    return s


_ALT_PATTERN = r"^\s*(([Ff][Ll])\s*[0-9]{1,3}|([-+]?[0-9][0-9,]*(\.[0-9]*)?|[-+]?\.[0-9]+)\s*[A-Za-z'].*)\s*$"


def _Q(fn, description, examples, *, nullable=False, pattern=_QTY_PATTERN):
    inner = Optional[float] if nullable else float
    validator = _opt(fn) if nullable else fn
    return Annotated[inner, BeforeValidator(validator),
                     WithJsonSchema(_qschema(description, examples, nullable=nullable, pattern=pattern))]


ExpAltitude = _Q(_expedition_altitude, "Altitude with its unit (m, km, ft), -500 m to 9,000 m.",
                 ["3,850 m", "12,600 ft", "4.2 km"], pattern=_ALT_PATTERN)
OptExpAltitude = _Q(_expedition_altitude, "Altitude with its unit (m, km, ft), -500 m to 9,000 m.",
                    ["5,180 m"], nullable=True, pattern=_ALT_PATTERN)
FlightAltitude = _Q(_flight_altitude, "Pressure altitude with its unit (ft, m, or FLnnn), "
                    "-2,000 to 60,000 ft.", ["FL410", "12,500 ft", "3,800 m"], pattern=_ALT_PATTERN)
OptFlightAltitude = _Q(_flight_altitude, "Pressure altitude with its unit (ft, m, or FLnnn), "
                       "-2,000 to 60,000 ft.", ["FL350", "8,000 ft"], nullable=True,
                       pattern=_ALT_PATTERN)
Fraction = Annotated[float, BeforeValidator(_fraction),
                     WithJsonSchema({"anyOf": [{"type": "number", "exclusiveMinimum": 0, "maximum": 1},
                                               {"type": "string", "pattern": r"^\s*[0-9.]+\s*%\s*$"}],
                                     "description": "A fraction in (0, 1] or a percentage with its "
                                     "sign.", "examples": ["90 %", 0.9]})]
OptFraction = Annotated[Optional[float], BeforeValidator(_opt(_fraction)),
                        WithJsonSchema({"anyOf": [{"type": "number", "exclusiveMinimum": 0,
                                                   "maximum": 1},
                                                  {"type": "string",
                                                   "pattern": r"^\s*[0-9.]+\s*%\s*$"},
                                                  {"type": "null"}],
                                        "description": "A fraction in (0, 1] or a percentage with "
                                        "its sign.", "examples": ["100 %", 0.5]})]
Hemoglobin = _Q(_wrap_unit(parse_hemoglobin), "Hemoglobin in g/dL or g/L.", ["14.2 g/dL", "152 g/L"],
                nullable=True)
Age = Annotated[Optional[float], BeforeValidator(_opt(_age)),
                WithJsonSchema({"anyOf": [{"type": "number", "exclusiveMinimum": 0, "maximum": 110},
                                          {"type": "null"}],
                                "description": "Age in years, a plain number.", "examples": [45]})]
Name = Annotated[StrictStr, BeforeValidator(_nonblank), Field(min_length=1, max_length=200)]
RuleId = Annotated[str, BeforeValidator(_rule_id),
                   WithJsonSchema({"type": "string", "pattern": _RULE_ID_RE.pattern,
                                   "examples": ["wms-2024", "us-14cfr-91"]})]


# -- models ----------------------------------------------------------------------------------
class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Member(_Model):
    """A member of an expedition party."""

    name: Name = Field(description="Name or nickname (unique in the party).", examples=["Ilse"])
    age_y: Annotated[float, BeforeValidator(_age),
                     WithJsonSchema({"type": "number", "exclusiveMinimum": 0, "maximum": 110,
                                     "description": "Age in years, a plain number.",
                                     "examples": [45]})] = Field(
        alias="age", description="Age in years, a plain number.")
    sex: Optional[Literal["female", "male"]] = Field(None, description="Sex, if known.")
    hemoglobin_g_dl: Hemoglobin = Field(None, alias="hemoglobin",
                                        description="Hemoglobin concentration at home. [g/dL]")
    home_altitude_m: OptExpAltitude = Field(None, alias="home_altitude",
                                            description="Altitude where the member lives. [m]")
    history: list[Literal["ams", "hape", "hace"]] = Field(
        default_factory=list, description="Earlier altitude illness: ams, hape, hace.")
    acetazolamide: StrictBool = Field(False, description="Takes acetazolamide for prevention.")
    role: Optional[StrictStr] = Field(None, description="Free text: leader, guide, cook, ...",
                                      examples=["leader"])
    hvr: Optional[Literal["low", "normal", "high"]] = Field(
        None, description="Hypoxic ventilatory response, if measured: low, normal or high (the "
        "population's lower, middle or upper third).")
    home_spo2: Annotated[Optional[float], BeforeValidator(_opt(_spo2)),
                         WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"},
                                                   {"type": "null"}],
                                         "examples": ["96 %"]})] = Field(
        None, description="Resting SpO2 at home altitude, breathing air. [fraction]")
    fev1_fraction: Annotated[Optional[float], BeforeValidator(_opt(_fev1)),
                             WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"},
                                                       {"type": "null"}],
                                             "examples": [0.8, "80 %"]})] = Field(
        None, alias="fev1", description="FEV1 as a fraction of predicted. [fraction]")
    lung_disease: Optional[StrictStr] = Field(None, description="Free text.", examples=["asthma"])


# -- readings (observations) on an expedition -------------------------------------------------
_HR_RE = re.compile(r"^\s*(\d+(?:\.\d*)?)\s*(/\s*min|bpm|beats\s*/\s*min|per\s+min(?:ute)?)\s*$", re.I)
_HR_EXPECTED = "a resting heart rate from 20 to 250 per minute, e.g. '96 /min' or '96 bpm'"
_TIME_RE = re.compile(r"^\s*([01]?\d|2[0-3]):([0-5]\d)\s*$")


def _heart_rate(value) -> float:
    m = _HR_RE.match(value) if isinstance(value, str) else None
    if m is None:
        hint = " (write it with its unit)" if isinstance(value, (int, float)) and not isinstance(value, bool) else ""
        raise _Problem(f"{value!r} is not a heart rate{hint}; expected {_HR_EXPECTED}.", expected=_HR_EXPECTED)
    rate = float(m.group(1))
    if not 20.0 <= rate <= 250.0:
        raise _Problem(f"{value!r} is outside 20-250 /min; expected {_HR_EXPECTED}.", expected=_HR_EXPECTED)
    return rate


def _clock_h(value) -> float:
    expected = "a clock time HH:MM from 00:00 to 23:59, quoted, e.g. '07:30'"
    m = _TIME_RE.match(value) if isinstance(value, str) else None
    if m is None:
        hint = (" (YAML reads an unquoted 07:30 as a number; quote it)"
                if isinstance(value, int) and not isinstance(value, bool) else "")
        raise _Problem(f"{value!r} is not a clock time{hint}; expected {expected}.", expected=expected)
    return int(m.group(1)) + int(m.group(2)) / 60.0


_LLS_ITEM = Annotated[StrictInt, Field(ge=0, le=3)]


class LakeLouise(_Model):
    """The four self-reported items of the 2018 Lake Louise AMS score (Roach et al. 2018), each 0-3."""

    headache: _LLS_ITEM = Field(description="0 none, 1 mild, 2 moderate, 3 severe (incapacitating).")
    gi: _LLS_ITEM = Field(description="Gastrointestinal: 0 good appetite, 1 poor appetite or nausea, "
                          "2 moderate nausea or vomiting, 3 severe (incapacitating).")
    fatigue: _LLS_ITEM = Field(description="Fatigue and/or weakness, 0-3.")
    dizziness: _LLS_ITEM = Field(description="Dizziness or light-headedness, 0-3.")


HapeSymptom = Literal["dyspnoea_at_rest", "cough", "weakness", "chest_tightness"]
HapeSign = Literal["crackles", "central_cyanosis", "tachypnoea", "tachycardia"]
FlightRiskFactor = Literal["hypercapnia", "fev1_below_50", "lung_cancer", "restrictive", "ventilator",
                           "cerebrovascular_or_cardiac", "recent_exacerbation"]
_WORD_ALIASES = {"dyspnea_at_rest": "dyspnoea_at_rest", "tachypnea": "tachypnoea",
                 "decreased_exercise_performance": "weakness", "chest_congestion": "chest_tightness",
                 "wheezing": "crackles", "cyanosis": "central_cyanosis"}


def _words(value):
    """Symptom and sign words: case, spaces and hyphens do not matter; US spellings accepted."""
    if not isinstance(value, list):
        return value
    out = []
    for v in value:
        if isinstance(v, str):
            k = re.sub(r"[\s\-]+", "_", v.strip().lower())
            v = _WORD_ALIASES.get(k, k)
        out.append(v)
    return out


class Observation(_Model):
    """A reading taken on the expedition: SpO2, heart rate and/or a Lake Louise score."""

    day: StrictInt = Field(description="The plan day the reading was taken on.")
    member: Name = Field(description="The party member's name, as in 'party'.")
    time_h: Annotated[Optional[float], BeforeValidator(_opt(_clock_h)),
                      WithJsonSchema({"anyOf": [{"type": "string", "pattern": _TIME_RE.pattern},
                                                {"type": "null"}], "examples": ["07:30"]})] = Field(
        None, alias="time", description="Clock time (quoted 'HH:MM'); default 18:00, in camp. [h]")
    spo2: Annotated[Optional[float], BeforeValidator(_opt(_spo2)),
                    WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"}, {"type": "null"}],
                                    "examples": ["84 %"]})] = Field(
        None, description="Resting pulse-oximetry SpO2. [fraction]")
    heart_rate_per_min: Annotated[Optional[float], BeforeValidator(_opt(_heart_rate)),
                                  WithJsonSchema({"anyOf": [{"type": "string"}, {"type": "null"}],
                                                  "examples": ["96 /min"]})] = Field(
        None, alias="heart_rate", description="Resting heart rate. [/min]")
    lake_louise: Optional[Union[LakeLouise, Annotated[StrictInt, Field(ge=0, le=12)]]] = Field(
        None, description="2018 Lake Louise AMS score: the four items, or the total (0-12) alone.")
    symptoms: Annotated[list[HapeSymptom], BeforeValidator(_words)] = Field(
        default_factory=list, description="Symptoms of the consensus definition of high-altitude "
        "pulmonary oedema present at the reading: dyspnoea_at_rest, cough, weakness (or decreased "
        "exercise performance), chest_tightness (or congestion).")
    signs: Annotated[list[HapeSign], BeforeValidator(_words)] = Field(
        default_factory=list, description="Signs of that definition found on examination: crackles "
        "(or wheezing, in at least one lung field), central_cyanosis, tachypnoea, tachycardia "
        "(also taken from a heart rate above 100 /min).")
    note: Optional[StrictStr] = Field(None, description="Free text.")

    @model_validator(mode="after")
    def _something(self):
        if (self.spo2 is None and self.heart_rate_per_min is None and self.lake_louise is None
                and not self.symptoms and not self.signs):
            raise _Problem("a reading needs at least one of 'spo2', 'heart_rate', 'lake_louise', "
                           "'symptoms' or 'signs'.",
                           expected="spo2, heart_rate, lake_louise, symptoms or signs", value=None)
        return self


class DayOxygen(_Model):
    """Supplemental oxygen on an expedition day (parsed and kept; applies to the whole party)."""

    flow_l_min: Annotated[Optional[float], BeforeValidator(_opt(_wrap_unit(parse_flow))),
                          WithJsonSchema(_qschema("Oxygen flow in L/min or mL/min.", ["2 L/min"],
                                                  nullable=True))] = Field(
        None, alias="flow", description="Flow rate. [L/min]")
    fio2: OptFraction = Field(None, description="Inspired O2 fraction delivered, if known "
                              "(e.g. an oxygen-enriched room).")
    when: Literal["sleep", "climb", "all"] = Field(
        "all", description="sleep: the nights; climb: the hours at the high point; all: all day.")

    @model_validator(mode="after")
    def _something(self):
        if self.flow_l_min is None and self.fio2 is None:
            raise _Problem("oxygen needs a 'flow' (e.g. '2 L/min') or an 'fio2' (e.g. '28 %').",
                           expected="flow or fio2", value=None)
        return self


class Day(_Model):
    """One day of an expedition (24 h, midnight to midnight, ending with the night at ``sleep``)."""

    day: StrictInt = Field(description="Day number: 1, 2, 3, ... in order, without gaps.")
    sleep_m: ExpAltitude = Field(alias="sleep", description="Sleeping altitude that night. [m]")
    high_m: OptExpAltitude = Field(None, alias="high",
                                   description="Highest altitude reached that day, if above or "
                                   "apart from the route between camps. [m]")
    hours_high_h: Annotated[Optional[float], BeforeValidator(_opt(_hours_high)),
                            WithJsonSchema(_qschema("Duration at the high point.", ["1 h", "90 min"],
                                                    nullable=True))] = Field(
        None, alias="hours_high", description="Time spent at the high point; default 1 h. [h]")
    activity: Literal["trek", "climb", "rest", "fly-in", "drive", "descent"] = Field(
        "trek", description="What the day is.")
    atmosphere: Optional[Literal["mountain", "isa"]] = Field(
        None, description="Atmosphere model for this day (default: the plan's).")
    pressure_mmhg: Annotated[Optional[float], BeforeValidator(_opt(_site_pressure)),
                             WithJsonSchema(_qschema("Measured barometric pressure at the sleeping "
                                                     "site.", ["455 mmHg", "60.7 kPa"],
                                                     nullable=True))] = Field(
        None, alias="pressure", description="Measured pressure at the sleeping site. [mmHg]")
    note: Optional[StrictStr] = Field(None, description="Free text.")
    oxygen: Optional[DayOxygen] = Field(None, description="Supplemental oxygen that day.")
    fixed: StrictBool = Field(False, description="The day cannot move or change (a flight out, a "
                              "permit date): 'altox fix' keeps its number and its content.")

    @model_validator(mode="after")
    def _check(self):
        if self.hours_high_h is not None and self.high_m is None:
            raise _Problem("'hours_high' is given without 'high'; expected a 'high' altitude for "
                           "the hours to apply to.", loc=("hours_high",),
                           expected="'high' alongside 'hours_high'", value=_Problem._UNSET)
        if self.high_m is not None and self.hours_high_h is None:
            object.__setattr__(self, "hours_high_h", 1.0)
        if self.oxygen is not None and self.oxygen.when == "climb" and self.high_m is None:
            raise _Problem("oxygen 'when: climb' covers the hours at the day's high point, but the day has no "
                           "'high'; expected a 'high' altitude, or 'when: sleep' or 'all'.",
                           loc=("oxygen", "when"), expected="'high' alongside when: climb")
        if self.pressure_mmhg is not None:
            from altox.physiology.atmosphere import altitude_for_pressure
            try:
                implied_m = float(altitude_for_pressure(self.pressure_mmhg, "mountain"))
            except ValueError:
                implied_m = math.nan
            if not abs(implied_m - self.sleep_m) <= PRESSURE_MISMATCH_M:
                where = ("outside the mountain model's range" if math.isnan(implied_m)
                         else f"that of about {_fmt(implied_m)} m")
                raise _Problem(f"a measured pressure of {self.pressure_mmhg:.0f} mmHg is {where}, "
                               f"not of the sleeping altitude {_fmt(self.sleep_m)} m; check the "
                               "unit (mmHg, hPa, kPa) or the altitude.", loc=("pressure",),
                               expected="a pressure within about 1,500 m of the sleeping altitude")
        return self


class _PlanBase(_Model):
    name: Name = Field(description="Name of the plan.")
    description: Optional[StrictStr] = Field(None, description="Free text.")
    rules: list[RuleId] = Field(default_factory=list,
                                description="Rule-set ids to check the plan against.",
                                examples=[["wms-2024"]])
    rule_file: Optional[StrictStr] = Field(None, description="A rule file of your own, relative to "
                                           "the plan file.", examples=["my-rules.yaml"])
    dose_floor_m: Annotated[float, BeforeValidator(_dose_floor),
                            WithJsonSchema(_qschema("Altitude below which no hypoxic dose counts.",
                                                    ["1,500 m", "5,000 ft"]))] = Field(
        "1,500 m", alias="dose_floor", validate_default=True,
        description="Hypoxic-dose floor; default 1,500 m. [m]")
    saturation_levels: list[Fraction] = Field(
        ["90 %", "80 %"], validate_default=True,
        description="SpO2 levels to report time below; default 90 % and 80 %. [fraction]")

    _source_path: Optional[str] = PrivateAttr(default=None)
    _positions: Any = PrivateAttr(default=None)   # where each value was written (PositionMap)

    def position_of(self, *loc) -> tuple[Optional[int], Optional[int]]:
        """(line, column) where a field was written, e.g. ``position_of("rules", 1)``; None unknown."""
        if self._positions is None:
            return None, None
        try:
            return self._positions.locate(tuple(loc))
        except (KeyError, IndexError, TypeError, AttributeError):
            return None, None

    @property
    def source_path(self) -> Optional[str]:
        """The file the plan was read from (None for text or data)."""
        return self._source_path

    @property
    def rule_file_path(self) -> Optional[Path]:
        """``rule_file`` resolved against the plan file's directory (the working directory for
        plans not read from a file)."""
        if self.rule_file is None:
            return None
        base = plan_dir(self._source_path) if self._source_path else Path.cwd()
        return (base / self.rule_file).resolve()

    def _check_samples(self):
        n = self.total_duration_h / self.sample_every_h
        if n > MAX_SAMPLES:
            raise _Problem(f"sampling a {self.total_duration_h:g} h plan every "
                           f"{_fmt_h(self.sample_every_h)} gives {n:,.0f} samples, over the "
                           f"limit of {MAX_SAMPLES:,}; expected a coarser 'sample_every'.",
                           loc=("sample_every",), expected="a coarser sample_every")
        people = self.party if self.kind == "expedition" else self.aboard
        key = "party" if self.kind == "expedition" else "aboard"
        # samples are also cut at every change of state: a few per day or leg beyond the grid
        stages = len(self.days) if self.kind == "expedition" else len(self.legs)
        total = (1 + len(people)) * (math.ceil(n) + 6 * stages)
        if total > MAX_PERSON_SAMPLES:
            loc = ("sample_every",) if "sample_every_h" in self.model_fields_set else (key,)
            raise _Problem(f"{1 + len(people)} people (with the reference adult) over about "
                           f"{math.ceil(n) + 6 * stages:,} samples make {total:,} person-samples, over the limit "
                           f"of {MAX_PERSON_SAMPLES:,}; expected a coarser 'sample_every', fewer people or a "
                           "shorter plan.", loc=loc, value=None, expected=f"at most {MAX_PERSON_SAMPLES:,} person-samples")


#: Cyrillic and Greek letters drawn like Latin ones (the common look-alikes; a name mixing them would
#: print exactly like another)
_LOOKALIKES = str.maketrans("АВЕКМНОРСТХаеорсухіјѕԁԛԝΑΒΕΖΗΙΚΜΝΟΡΤΥΧον",
                            "ABEKMHOPCTXaeopcyxijsdqwABEZHIKMNOPTYXov")


def _shown_as(name: str) -> str:
    """What a name looks like on a page: compatibility forms folded (NFKC), look-alike letters mapped to
    Latin, runs of spaces and spaces at the ends ignored."""
    import unicodedata

    folded = unicodedata.normalize("NFKC", name).translate(_LOOKALIKES)
    return " ".join(folded.split())


def _unique_names(people, key: str):
    seen: dict[str, int] = {}
    for i, person in enumerate(people):
        shown = _shown_as(person.name)
        if shown in seen:
            j = seen[shown]
            other = people[j].name
            same = "is used twice" if other == person.name else f"reads the same as {other!r}"
            raise _Problem(f"the name {person.name!r} {same} (also {key}[{j}]); expected names that can be "
                           "told apart on paper.", loc=(key, i, "name"), expected="unique names")
        seen[shown] = i


class ExpeditionPlan(_PlanBase):
    """A mountain itinerary, day by day."""

    kind: Literal["expedition"] = Field(description="The plan's kind.")
    sample_every_h: Annotated[float, BeforeValidator(_sample_every),
                              WithJsonSchema(_qschema("Timeline resolution.", ["1 h", "30 min"]))] = Field(
        "1 h", alias="sample_every", validate_default=True,
        description="Timeline resolution; default 1 h. [h]")
    atmosphere: Literal["mountain", "isa"] = Field(
        "mountain", description="Atmosphere model: mountain (West 1996) or isa.")
    start_altitude_m: ExpAltitude = Field(
        alias="start_altitude", description="Where the party slept the night before day 1. [m]")
    party: list[Member] = Field(default_factory=list, max_length=MAX_PEOPLE, description="The people.")
    days: list[Day] = Field(min_length=1, max_length=MAX_DAYS, description="The days, in order.")
    observations: list[Observation] = Field(
        default_factory=list, description="Readings taken on the way: SpO2, heart rate, Lake Louise score.")
    max_days: Optional[Annotated[StrictInt, Field(ge=1, le=MAX_DAYS)]] = Field(
        None, description="Longest the itinerary may become when 'altox fix' adds days.")

    @model_validator(mode="after")
    def _check(self):
        for i, day in enumerate(self.days):
            if day.day != i + 1:
                prev = f"day {self.days[i - 1].day}" if i else "the start"
                what = ("repeats" if i and day.day == self.days[i - 1].day else
                        "is out of order after" if i else "does not start at 1:")
                raise _Problem(f"day {day.day} {what} {prev}; expected day {i + 1} (days are "
                               "numbered 1, 2, 3, ... in order, without gaps or repeats).",
                               loc=("days", i, "day"), value=day.day, expected=f"day: {i + 1}")
        _unique_names(self.party, "party")
        names = [m.name for m in self.party]
        for i, obs in enumerate(self.observations):
            if obs.member not in names:
                who = ", ".join(names) if names else "none: the plan has no 'party'"
                raise _Problem(f"{obs.member!r} is not in the party.{_suggest(obs.member, names)} "
                               f"Expected one of: {who}.", loc=("observations", i, "member"),
                               expected="a name from 'party'")
            if not 1 <= obs.day <= len(self.days):
                raise _Problem(f"day {obs.day} is not in the plan; expected a day from 1 to "
                               f"{len(self.days)}.", loc=("observations", i, "day"),
                               expected=f"a day from 1 to {len(self.days)}")
        self._check_samples()
        return self

    @property
    def total_duration_h(self) -> float:
        """Length of the plan: 24 h per day. [h]"""
        return 24.0 * len(self.days)


class Aircraft(_Model):
    """The aircraft and its pressurization."""

    type: StrictStr = Field(description="Free text: the aircraft type.", examples=["Strelvane 7"])
    pressurized: StrictBool = Field(description="Whether the cabin is pressurized.")
    max_differential_mmhg: Annotated[Optional[float], BeforeValidator(_opt(_differential)),
                                     WithJsonSchema(_qschema("Maximum cabin differential.",
                                                             ["8.6 psi", "59 kPa"],
                                                             nullable=True))] = Field(
        None, alias="max_differential",
        description="Maximum cabin-to-outside pressure difference (pressurized only). [mmHg]")
    max_cabin_pressure_altitude_m: FlightAltitude = Field(
        "8,000 ft", alias="max_cabin_altitude", validate_default=True,
        description="Highest cabin (pressure) altitude the system holds; default 8,000 ft. "
        "[m of pressure altitude]")

    @model_validator(mode="after")
    def _no_pressurization_fields_unpressurized(self):
        if not self.pressurized:
            for key, attr in (("max_differential", "max_differential_mmhg"),
                              ("max_cabin_altitude", "max_cabin_pressure_altitude_m")):
                if attr in self.model_fields_set:
                    raise _Problem(f"'{key}' has no effect on an unpressurized aircraft (its cabin is at the "
                                   f"aircraft's altitude); expected no '{key}', or pressurized: true.", loc=(key,),
                                   expected=f"no {key} when pressurized is false")
        return self

    @property
    def max_differential_psi(self) -> Optional[float]:
        """``max_differential`` in psi."""
        if self.max_differential_mmhg is None:
            return None
        return self.max_differential_mmhg * PA_PER_MMHG / PA_PER_PSI

    @property
    def max_cabin_altitude_ft(self) -> float:
        """``max_cabin_altitude`` in feet of pressure altitude."""
        return self.max_cabin_pressure_altitude_m / M_PER_FT


class Occupant(_Model):
    """A person aboard."""

    name: Name = Field(description="Name or label (unique aboard).")
    role: Literal["crew", "passenger", "patient"] = Field(description="crew, passenger or patient.")
    age_y: Age = Field(None, alias="age", description="Age in years.")
    hemoglobin_g_dl: Hemoglobin = Field(None, alias="hemoglobin", description="[g/dL]")
    ground_spo2: Annotated[Optional[float], BeforeValidator(_opt(_spo2)),
                           WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"},
                                                     {"type": "null"}],
                                           "examples": ["91 %"]})] = Field(
        None, description="SpO2 at the departure field, breathing air. [fraction]")
    ground_pao2_mmhg: Annotated[Optional[float], BeforeValidator(_opt(_pao2)),
                                WithJsonSchema(_qschema("Arterial PO2 on the ground.", ["62 mmHg"],
                                                        nullable=True))] = Field(
        None, alias="ground_pao2", description="Arterial PO2 on the ground, breathing air. [mmHg]")
    lung_disease: Optional[StrictStr] = Field(None, description="Free text.", examples=["COPD"])
    fev1_fraction: Annotated[Optional[float], BeforeValidator(_opt(_fev1)),
                             WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"},
                                                       {"type": "null"}],
                                             "examples": [0.45, "45 %"]})] = Field(
        None, alias="fev1", description="FEV1 as a fraction of predicted. [fraction]")
    risk_factors: Annotated[Optional[list[FlightRiskFactor]], BeforeValidator(_words)] = Field(
        None, description="Additional risk factors of the air-travel screening present: hypercapnia, "
        "fev1_below_50, lung_cancer, restrictive, ventilator, cerebrovascular_or_cardiac, "
        "recent_exacerbation; [] when all were checked and none is present; left out, they count "
        "as unknown.")


class Leg(_Model):
    """One leg of a flight."""

    phase: Literal["ground", "climb", "cruise", "hold", "descent"] = Field(description="Phase.")
    duration_h: Annotated[float, BeforeValidator(_leg_duration),
                          WithJsonSchema(_qschema("Duration of the leg.", ["45 min", "2 h"]))] = Field(
        alias="duration", description="Duration. [h]")
    pressure_altitude_m: OptFlightAltitude = Field(
        None, alias="altitude", description="Pressure altitude at the END of the leg; required for "
        "climb and descent, optional (and then equal to the current one) otherwise. "
        "[m of pressure altitude]")
    cabin_pressure_altitude_m: OptFlightAltitude = Field(
        None, alias="cabin", description="Stated cabin altitude for this leg (pressurized aircraft "
        "only); overrides the cabin schedule. [m of pressure altitude]")
    oxygen: Literal["none", "crew", "patient", "all"] = Field(
        "none", description="Who breathes supplemental oxygen during the leg: none, crew, "
        "patient (the patients aboard) or all.")
    fio2: OptFraction = Field(None, description="Inspired O2 fraction for those on oxygen, if known.")
    note: Optional[StrictStr] = Field(None, description="Free text.")


def flight_leg_altitudes(legs, departure_elevation_m: float) -> list[tuple[float, float]]:
    """Start and end pressure altitude of every leg.

    Parameters
    ----------
    legs : list of Leg
    departure_elevation_m : float
        Departure field elevation (as pressure altitude). [m]

    Returns
    -------
    list of (start_m, end_m)
        Pressure altitudes, feet x 0.3048. [m]

    Raises
    ------
    ValueError
        (a private subclass carrying the leg's location) for an inconsistent leg sequence.
    """
    out = []
    current = departure_elevation_m
    on_ground = True
    tol_m = 1.0
    for i, leg in enumerate(legs):
        end = leg.pressure_altitude_m
        ft = (lambda m: f"{_fmt(m / M_PER_FT)} ft")
        if leg.phase in ("climb", "descent"):
            if end is None:
                raise _Problem(f"a {leg.phase} leg needs 'altitude', the pressure altitude at its "
                               "end; expected e.g. 'FL350' or '9,500 ft'.", loc=(i, "altitude"),
                               expected="an altitude at the end of the leg", value=None)
            if leg.phase == "climb" and not end > current + tol_m:
                raise _Problem(f"this climb ends at {ft(end)}, not above its start at {ft(current)}; "
                               "expected a higher altitude, or phase: descent/cruise.",
                               loc=(i, "altitude"), expected=f"above {ft(current)}")
            if leg.phase == "descent" and not end < current - tol_m:
                raise _Problem(f"this descent ends at {ft(end)}, not below its start at "
                               f"{ft(current)}; expected a lower altitude, or phase: climb/cruise.",
                               loc=(i, "altitude"), expected=f"below {ft(current)}")
            on_ground = False if leg.phase == "climb" else on_ground
        else:
            if leg.phase == "ground" and not on_ground and legs[i - 1].phase not in ("descent", "ground"):
                raise _Problem(f"a ground leg follows a {legs[i - 1].phase} leg ending at "
                               f"{ft(current)}; expected a descent leg before it.", loc=(i, "phase"),
                               expected="a descent before a ground leg")
            if end is not None and abs(end - current) > tol_m:
                raise _Problem(f"this {leg.phase} leg is at {ft(end)} but the aircraft is at "
                               f"{ft(current)} when it starts; expected {ft(current)} or no "
                               "'altitude' (add a climb or descent leg to change altitude).",
                               loc=(i, "altitude"), expected=ft(current))
            end = current
            if leg.phase != "ground":
                on_ground = False
        out.append((current, end))
        current = end
    return out


class FlightPlan(_PlanBase):
    """A flight profile, leg by leg."""

    kind: Literal["flight"] = Field(description="The plan's kind.")
    sample_every_h: Annotated[float, BeforeValidator(_sample_every),
                              WithJsonSchema(_qschema("Timeline resolution.", ["10 min", "1 min"]))] = Field(
        "10 min", alias="sample_every", validate_default=True,
        description="Timeline resolution; default 10 min. [h]")
    aircraft: Aircraft = Field(description="The aircraft.")
    departure_elevation_m: FlightAltitude = Field(
        alias="departure_elevation", description="Departure field elevation. [m]")
    arrival_elevation_m: OptFlightAltitude = Field(
        None, alias="arrival_elevation", description="Arrival field elevation. [m]")
    aboard: list[Occupant] = Field(default_factory=list, max_length=MAX_PEOPLE,
                                   description="The people aboard.")
    emergency_descent_rate_ft_min: Annotated[
        Optional[float], BeforeValidator(_opt(_wrap_unit(parse_vertical_speed))),
        WithJsonSchema(_qschema("Emergency descent rate.", ["4,000 ft/min"], nullable=True))] = Field(
        None, alias="emergency_descent_rate", description="Emergency descent rate. [ft/min]")
    pilots_at_controls: Annotated[StrictInt, Field(ge=1, le=4)] = Field(
        1, description="Pilots at the controls throughout the flight; default 1 (the two-pilot "
        "exceptions of the mask rules then do not apply).")
    quick_donning_masks: StrictBool = Field(
        False, description="Whether each pilot has a quick-donning oxygen mask (one hand, within "
        "5 seconds); default false.")
    oxygen_carried_h: Annotated[Optional[float], BeforeValidator(_opt(_leg_duration)),
                                WithJsonSchema(_qschema("Oxygen carried for each occupant, as time of use.",
                                                        ["10 min", "30 min"], nullable=True))] = Field(
        None, alias="oxygen_carried", description="Supplemental oxygen available to each occupant for a "
        "descent after a pressurization failure, as time of use; default: not stated (supply rules are "
        "then reported as not met). [h]")
    legs: list[Leg] = Field(min_length=1, max_length=MAX_LEGS, description="The legs, in order.")

    @model_validator(mode="after")
    def _check(self):
        _unique_names(self.aboard, "aboard")
        try:
            altitudes = flight_leg_altitudes(self.legs, self.departure_elevation_m)
        except _Problem as exc:
            exc.loc = ("legs",) + exc.loc
            raise
        ac = self.aircraft
        patients = [o.name for o in self.aboard if o.role == "patient"]
        for i, leg in enumerate(self.legs):
            if leg.fio2 is not None and leg.oxygen == "none":
                raise _Problem(f"'fio2' is given but nobody is on oxygen on this leg (oxygen: none), so it would "
                               "have no effect; expected 'oxygen: crew', 'patient' or 'all' with it, or no "
                               "'fio2'.", loc=("legs", i, "fio2"), expected="oxygen alongside fio2")
            if leg.oxygen == "patient" and not patients:
                raise _Problem("'oxygen: patient' but no one aboard has 'role: patient'; expected a patient in "
                               "'aboard', or oxygen for 'crew' or 'all'.", loc=("legs", i, "oxygen"),
                               expected="a patient aboard")
            if leg.cabin_pressure_altitude_m is not None and not ac.pressurized:
                raise _Problem("'cabin' is stated on a leg of an unpressurized aircraft, whose cabin "
                               "is at the aircraft's altitude; expected no 'cabin' (or "
                               "aircraft.pressurized: true).", loc=("legs", i, "cabin"),
                               expected="no cabin for an unpressurized aircraft")
        if ac.pressurized and ac.max_differential_mmhg is None:
            for i, leg in enumerate(self.legs):
                if leg.phase != "ground" and leg.cabin_pressure_altitude_m is None:
                    raise _Problem(f"a pressurized aircraft needs 'max_differential' (e.g. '8.6 psi') "
                                   f"unless every airborne leg states its 'cabin', and legs[{i}] "
                                   "does not.", loc=("aircraft", "max_differential"), value=None,
                                   expected="max_differential, e.g. '8.6 psi'")
        if ac.pressurized and ac.max_differential_mmhg is not None:
            from altox.physiology.atmosphere import pressure_altitude_ft_to_mmhg
            for i, (leg, (a0, a1)) in enumerate(zip(self.legs, altitudes)):
                if leg.cabin_pressure_altitude_m is None:
                    continue
                top_ft = max(a0, a1) / M_PER_FT
                cab_ft = leg.cabin_pressure_altitude_m / M_PER_FT
                if cab_ft > top_ft + 1.0:
                    raise _Problem(f"a cabin at {_fmt(cab_ft)} ft is above the aircraft's highest point on this "
                                   f"leg; a cabin is never above the aircraft. Expected at most {_fmt(top_ft)} ft.",
                                   loc=("legs", i, "cabin"),
                                   expected=f"at most {_fmt(top_ft)} ft")
                if cab_ft >= top_ft:
                    continue
                dp = float(pressure_altitude_ft_to_mmhg(cab_ft) - pressure_altitude_ft_to_mmhg(top_ft))
                if dp > ac.max_differential_mmhg * 1.001:
                    to_psi = PA_PER_MMHG / PA_PER_PSI
                    raise _Problem(f"a cabin at {_fmt(cab_ft)} ft with the aircraft at "
                                   f"{_fmt(top_ft)} ft needs a differential of {dp * to_psi:.2f} psi, "
                                   f"more than aircraft.max_differential "
                                   f"({ac.max_differential_mmhg * to_psi:.2f} psi); expected a higher "
                                   "cabin altitude.", loc=("legs", i, "cabin"),
                                   expected="a cabin within the aircraft's differential")
        if self.arrival_elevation_m is not None and self.legs[-1].phase in ("descent", "ground"):
            end = altitudes[-1][1]
            if abs(end - self.arrival_elevation_m) > 30.0 * M_PER_FT:
                i = len(self.legs) - 1
                while i > 0 and self.legs[i].phase == "ground":
                    i -= 1
                raise _Problem(f"the flight ends at {_fmt(end / M_PER_FT)} ft but arrival_elevation "
                               f"is {_fmt(self.arrival_elevation_m / M_PER_FT)} ft; expected the "
                               "last descent to end at the arrival field.", loc=("legs", i, "altitude"),
                               expected=f"{_fmt(self.arrival_elevation_m / M_PER_FT)} ft")
        self._check_samples()
        return self

    @property
    def total_duration_h(self) -> float:
        """Sum of the legs' durations. [h]"""
        return float(sum(leg.duration_h for leg in self.legs))

    def leg_altitudes_m(self) -> list[tuple[float, float]]:
        """(start, end) pressure altitude of each leg, feet x 0.3048. [m]"""
        return flight_leg_altitudes(self.legs, self.departure_elevation_m)


Plan = Annotated[Union[ExpeditionPlan, FlightPlan], Field(discriminator="kind")]
_KINDS = {"expedition": ExpeditionPlan, "flight": FlightPlan}


# -- JSON Schema -------------------------------------------------------------------------------
def _strip_inside_units(node):
    """Drop the ``[unit]`` suffixes (altox's inside units) from schema descriptions."""
    if isinstance(node, dict):
        out = {}
        for key, value in node.items():
            if key == "description" and isinstance(value, str):
                value = re.sub(r"\s*\[[^\]]*\]\s*$", "", value)
            out[key] = _strip_inside_units(value)
        return out
    if isinstance(node, list):
        return [_strip_inside_units(v) for v in node]
    return node


def plan_json_schema() -> dict:
    """JSON Schema (draft 2020-12) of the plan format, as written by users (quantities as text).

    Returns
    -------
    dict
        The schema: a ``oneOf`` of the expedition and flight forms, discriminated by ``kind``.
    """
    schema = _strip_inside_units(TypeAdapter(Plan).json_schema(by_alias=True, mode="validation"))
    schema = {"$schema": "https://json-schema.org/draft/2020-12/schema",
              "title": "altox plan",
              "description": "An altox plan: a mountain itinerary (kind: expedition) or a flight "
              "profile (kind: flight). Quantities are strings with units.", **schema}
    return schema


# -- error reporting ---------------------------------------------------------------------------
def _unwrap(tp):
    while True:
        origin = get_origin(tp)
        if origin is Annotated:
            tp = get_args(tp)[0]
        elif origin is Union or origin is types.UnionType:
            args = [a for a in get_args(tp) if a is not type(None)]
            tp = args[0] if len(args) == 1 else tp
            if len(args) != 1:
                return tp
        else:
            return tp


def _field_at(model, loc):
    """(model class owning the last str part, FieldInfo) for a loc, or (model, None)."""
    tp = model
    owner, info = model, None
    for part in loc:
        tp = _unwrap(tp)
        if isinstance(part, int):
            if get_origin(tp) is list:
                tp = get_args(tp)[0]
                continue
            return owner, None
        if isinstance(tp, type) and issubclass(tp, BaseModel):
            owner = tp
            info = None
            for fname, finfo in tp.model_fields.items():
                if (finfo.alias or fname) == part:
                    info = finfo
                    tp = finfo.annotation
                    break
            if info is None:
                return owner, None
        else:
            return owner, None
    return owner, info


def _example_for(info) -> str | None:
    """An example value for a field, from its JSON-schema fragment, as YAML text."""
    if info is None:
        return None
    examples = info.examples or []
    for meta in info.metadata:
        if isinstance(meta, WithJsonSchema) and isinstance(meta.json_schema, dict):
            examples = examples or meta.json_schema.get("examples", [])
    if not examples:
        return None
    ex = examples[0]
    return ex if isinstance(ex, str) else str(ex).lower() if isinstance(ex, bool) else str(ex)


def _keys_of(model) -> list[str]:
    return [f.alias or n for n, f in model.model_fields.items()]


def _suggest(word, options) -> str:
    if not isinstance(word, str):
        return ""
    lowered = {o.lower(): o for o in options}
    hits = difflib.get_close_matches(word.lower(), list(lowered), n=1, cutoff=0.6)
    return f" Did you mean {lowered[hits[0]]!r}?" if hits else ""


def _show(value) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


_TYPE_WORDS = {
    "string_type": "text", "bool_type": "true or false", "int_type": "a whole number",
    "list_type": "a list", "model_type": "a mapping of fields", "dict_type": "a mapping of fields",
    "model_attributes_type": "a mapping of fields", "float_type": "a number",
    "int_from_float": "a whole number",
}


def _message_for(err, model) -> tuple[str, tuple, bool, Any, str | None]:
    """(problem text, loc, point at key?, value, expected) for one pydantic error."""
    loc = tuple(err["loc"])
    etype = err["type"]
    value = err.get("input")
    ctx = err.get("ctx") or {}
    exc = ctx.get("error")
    if isinstance(exc, _Problem):
        if exc.value is not _Problem._UNSET:
            value = exc.value
        else:
            for part in exc.loc:
                try:
                    value = value[part]
                except (KeyError, IndexError, TypeError):
                    value = None
                    break
        loc = loc + exc.loc
        message = exc.message
        if value is not None and _show(value) not in message:
            message = f"{message.rstrip('.')} (got {_show(value)})."
        return message, loc, False, value, exc.expected
    parent, info = _field_at(model, loc)
    key = loc[-1] if loc else None
    if etype == "extra_forbidden":
        owner, _ = _field_at(model, loc[:-1] + ("\x00",))
        allowed = _keys_of(owner)
        hint = _suggest(key, allowed)
        return (f"unknown key {key!r} (value {_show(value)}).{hint} Expected one of: "
                f"{', '.join(allowed)}.", loc, True, value, "one of " + ", ".join(allowed))
    if etype == "missing":
        desc = re.sub(r"\s*\[[^\]]*\]\s*$", "", (info.description or "") if info is not None else "")
        desc = desc.rstrip(".")
        example = _example_for(info)
        where = format_path(loc[:-1])
        about = f" ({desc[:1].lower() + desc[1:]})" if desc else ""
        shown = f"{key}: {example}" if example else f"a value for {key!r}"
        return (f"the required key {key!r}{about} is missing from {where}; expected e.g. "
                f"'{shown}'.", loc, False, None, desc or None)
    if etype in ("literal_error", "enum"):
        options = re.findall(r"'([^']*)'", str(ctx.get("expected", "")))
        hint = _suggest(value, options)
        return (f"{_show(value)} is not one of {', '.join(options)}.{hint}", loc, False, value,
                "one of " + ", ".join(options))
    if etype == "union_tag_invalid" or etype == "union_tag_not_found":
        return (f"{_show(value)} is not a plan kind; expected kind: expedition or kind: flight.",
                loc, False, value, "expedition or flight")
    if etype == "too_short":
        n = ctx.get("min_length", 1)
        return (f"the list is {'empty' if not value else 'too short'}; expected at least {n} "
                f"entr{'y' if n == 1 else 'ies'}.", loc, False, value, f"at least {n} entries")
    if etype == "too_long":
        n = ctx.get("max_length")
        return (f"the list has {len(value) if hasattr(value, '__len__') else 'too many'} entries; "
                f"expected at most {n}.", loc, False, None, f"at most {n} entries")
    if etype in ("string_too_short", "string_too_long"):
        return (f"{_show(value)}: {err['msg'].lower()}.", loc, False, value, err["msg"])
    if etype in _TYPE_WORDS:
        words = _TYPE_WORDS[etype]
        hint = ""
        if etype == "string_type" and isinstance(value, (int, float, bool)):
            hint = " (quote it to make it text)"
        return (f"{_show(value)} is not {words}; expected {words}{hint}.", loc, False, value, words)
    return (f"{_show(value)}: {err['msg']}.", loc, False, value, err["msg"])


def _raise_validation(exc: ValidationError, model, path: str, positions: PositionMap | None):
    errors = exc.errors(include_url=False)
    items = [_message_for(err, model) for err in errors]

    def where(item):
        if positions is None:
            return (None, None)
        return positions.locate(item[1], prefer_key=item[2])

    # a missing key is often the echo of a misspelt one: report the misspelling first
    kinds = [err["type"] == "missing" for err in errors]
    order = sorted(range(len(items)), key=lambda i: (kinds[i], where(items[i])[0] or 10**9,
                                                      where(items[i])[1] or 0))
    items = [items[i] for i in order]
    text, loc, _, value, expected = items[0]
    line, col = where(items[0])
    more = len(items) - 1
    tail = f" ({more} more problem{'s' if more > 1 else ''} in this plan.)" if more else ""
    prefix = path + (f":{line}:{col}" if line is not None else "")
    field = format_path(loc)
    raise ProfileError(f"{prefix}: {field}: {text}{tail}", path=path, line=line, column=col,
                       field=field, value=value, expected=expected) from None


def plan_from_data(data, path: str = "<data>", positions: PositionMap | None = None):
    """Validate parsed plan data into an :class:`ExpeditionPlan` or :class:`FlightPlan`.

    Parameters
    ----------
    data : dict
        Plan data as parsed from YAML (quantities as strings with units).
    path : str
        Name used in error messages.
    positions : PositionMap, optional
        Where each value was written, for ``line:column`` in messages.

    Returns
    -------
    ExpeditionPlan or FlightPlan

    Raises
    ------
    ProfileError
        The first problem, by position in the file.
    """
    def fail(msg, loc=(), value=None, expected=None, key=False):
        line, col = positions.locate(loc, prefer_key=key) if positions else (None, None)
        prefix = path + (f":{line}:{col}" if line is not None else "")
        raise ProfileError(f"{prefix}: {msg}", path=path, line=line, column=col,
                           field=format_path(loc) if loc else None, value=value, expected=expected)

    if not isinstance(data, dict):
        fail(f"the plan is {'a list' if isinstance(data, list) else _show(data)}, not a mapping; "
             "expected a mapping of fields starting with 'kind: expedition' or 'kind: flight'.",
             value=data, expected="a YAML mapping")
    if "kind" not in data:
        hint = _suggest(next((k for k in data if _suggest(k, ["kind"])), None), ["kind"])
        fail(f"kind: the required key 'kind' is missing.{hint} Expected 'kind: expedition' or "
             "'kind: flight' at the top of the plan.", loc=("kind",),
             expected="kind: expedition or kind: flight")
    kind = data["kind"]
    if not isinstance(kind, str) or kind not in _KINDS:
        fail(f"kind: {_show(kind)} is not a plan kind.{_suggest(kind, list(_KINDS))} Expected "
             "'expedition' or 'flight'.", loc=("kind",), value=kind, expected="expedition or flight")
    model = _KINDS[kind]
    try:
        plan = model.model_validate(data)
    except ValidationError as exc:
        _raise_validation(exc, model, path, positions)
    return plan


def load_plan_text(text: str, path: str = "<string>"):
    """Parse and validate a plan from YAML text.

    Parameters
    ----------
    text : str
        The YAML.
    path : str
        Name used in error messages (and to resolve ``rule_file`` if it is a real path).

    Returns
    -------
    ExpeditionPlan or FlightPlan

    Raises
    ------
    ProfileError
        Any YAML or plan problem, located by line and column.
    """
    data, positions = parse_yaml(text, path)
    plan = plan_from_data(data, path, positions)
    plan._positions = positions
    if path and not path.startswith("<"):
        plan._source_path = path
    return plan


def load_plan(path):
    """Read, parse and validate a plan file.

    The file is only read (never written).  Files over 1 MiB, directories, binary and
    non-UTF-8 files, YAML tags other than the standard ones, anchors and aliases are refused
    (see :mod:`altox.yamlload`).

    Parameters
    ----------
    path : str or os.PathLike
        The plan file.

    Returns
    -------
    ExpeditionPlan or FlightPlan
        With ``source_path`` set; ``rule_file``, if given, must exist relative to the plan.

    Raises
    ------
    ProfileError
        Any problem, as one paragraph naming ``file:line:column``, the field, the value and what
        is expected.
    """
    data, positions, _text = read_plan_data(path)
    name = str(path)
    plan = plan_from_data(data, name, positions)
    plan._source_path = name
    plan._positions = positions
    if plan.rule_file is not None:
        target = plan.rule_file_path
        if not target.is_file():
            line, col = positions.locate(("rule_file",))
            raise ProfileError(f"{name}:{line}:{col}: rule_file: {plan.rule_file!r} "
                               f"({'a directory' if target.is_dir() else 'no such file'} at "
                               f"{target}); expected a rule file, relative to the plan's folder.",
                               path=name, line=line, column=col, field="rule_file",
                               value=plan.rule_file, expected="an existing rule file")
    return plan
