"""Unit constants and the parser that turns user-written quantities ("14,500 ft", "62 kPa") into altox's inside units.

Inside altox: altitude in metres, gas pressures in mmHg, durations in hours, fractions 0-1,
temperatures in degrees Celsius.  Conversions happen here and nowhere else.
"""

from __future__ import annotations

import math
import re

from altox.errors import UnitError

# -- exact or defined conversion constants ----------------------------------------------
M_PER_FT = 0.3048                    # international foot (1959), exact
PA_PER_MMHG = 133.322387415          # conventional millimetre of mercury
PA_PER_TORR = 101325.0 / 760.0       # torr, by definition 1/760 atm
PA_PER_KPA = 1000.0
PA_PER_HPA = 100.0
PA_PER_INHG = 3386.389               # conventional inch of mercury (0 degC)
PA_PER_PSI = 6894.757293168          # pound-force per square inch
PA_PER_BAR = 1.0e5
PA_PER_ATM = 101325.0
KPA_PER_MMHG = PA_PER_MMHG / PA_PER_KPA
MMHG_PER_KPA = PA_PER_KPA / PA_PER_MMHG
H_PER_MIN = 1.0 / 60.0
H_PER_DAY = 24.0
FT_PER_FL = 100.0                    # a flight level is hundreds of feet of pressure altitude


def m_to_ft(altitude_m):
    """Metres to feet."""
    return altitude_m / M_PER_FT


def ft_to_m(altitude_ft):
    """Feet to metres."""
    return altitude_ft * M_PER_FT


def mmhg_to_kpa(p_mmhg):
    """mmHg to kPa."""
    return p_mmhg * KPA_PER_MMHG


def kpa_to_mmhg(p_kpa):
    """kPa to mmHg."""
    return p_kpa * MMHG_PER_KPA


def pa_to_mmhg(p_pa):
    """Pa to mmHg."""
    return p_pa / PA_PER_MMHG


def mmhg_to_pa(p_mmhg):
    """mmHg to Pa."""
    return p_mmhg * PA_PER_MMHG


# -- the parser ---------------------------------------------------------------------------
_LENGTH_UNITS = {
    "m": 1.0, "metre": 1.0, "metres": 1.0, "meter": 1.0, "meters": 1.0,
    "km": 1000.0,
    "ft": M_PER_FT, "feet": M_PER_FT, "foot": M_PER_FT, "'": M_PER_FT,
}
_PRESSURE_UNITS_MMHG = {
    "mmhg": 1.0,
    "torr": PA_PER_TORR / PA_PER_MMHG,
    "kpa": PA_PER_KPA / PA_PER_MMHG,
    "hpa": PA_PER_HPA / PA_PER_MMHG,
    "mbar": PA_PER_HPA / PA_PER_MMHG,
    "pa": 1.0 / PA_PER_MMHG,
    "inhg": PA_PER_INHG / PA_PER_MMHG,
    "psi": PA_PER_PSI / PA_PER_MMHG,
    "bar": PA_PER_BAR / PA_PER_MMHG,
    "atm": PA_PER_ATM / PA_PER_MMHG,
}
_DURATION_UNITS_H = {
    "s": 1.0 / 3600.0, "sec": 1.0 / 3600.0, "second": 1.0 / 3600.0, "seconds": 1.0 / 3600.0,
    "min": H_PER_MIN, "mins": H_PER_MIN, "minute": H_PER_MIN, "minutes": H_PER_MIN,
    "h": 1.0, "hr": 1.0, "hrs": 1.0, "hour": 1.0, "hours": 1.0,
    "d": H_PER_DAY, "day": H_PER_DAY, "days": H_PER_DAY,
}
KINDS = {
    "length": (_LENGTH_UNITS, "m, km or ft (e.g. '4500 m', '14,800 ft', '4.5 km', 'FL250')"),
    "pressure": (_PRESSURE_UNITS_MMHG, "mmHg, Torr, kPa, hPa, mbar, Pa, inHg, psi, bar or atm "
                                       "(e.g. '470 mmHg', '62.5 kPa')"),
    "duration": (_DURATION_UNITS_H, "s, min, h or days (e.g. '45 min', '2 h', '3 days')"),
}

_NUMBER = r"[-+]?(?:\d{1,3}(?:,\d{3})+|\d+)(?:\.\d*)?(?:[eE][-+]?\d+)?|[-+]?\.\d+(?:[eE][-+]?\d+)?"
_QUANTITY_RE = re.compile(rf"^\s*(?P<num>{_NUMBER})\s*(?P<unit>[A-Za-z']*)\s*$")
_FL_RE = re.compile(r"^\s*FL\s*(?P<num>\d{1,3})\s*$", re.IGNORECASE)


def _describe(value) -> str:
    return repr(value) if isinstance(value, str) else str(value)


def is_flight_level(value) -> bool:
    """Whether ``value`` is written as a flight level (``"FL250"``): a pressure altitude."""
    return isinstance(value, str) and _FL_RE.match(value) is not None


def parse_quantity(value, kind: str, *, field: str = "value", default_unit: str | None = None) -> float:
    """Parse a quantity written with its unit and return it in altox's inside unit.

    Parameters
    ----------
    value : str or number
        What the user wrote: ``"14,500 ft"``, ``"4.2 km"``, ``"62 kPa"``, ``"45 min"``,
        ``"FL250"`` (length only, read as pressure altitude in feet x 100).
    kind : {'length', 'pressure', 'duration'}
        The kind of quantity. Inside units: metres, mmHg, hours.
    field : str
        Name used in error messages.
    default_unit : str, optional
        Unit assumed for a bare number. Without it a bare number is rejected, since
        the unit would be ambiguous.

    Returns
    -------
    float
        The value in metres, mmHg or hours.

    Raises
    ------
    UnitError
        Missing, unknown or mismatched unit, text that is not a number, NaN or infinity.
    """
    units, accepted = KINDS[kind]
    if isinstance(value, bool):
        raise UnitError(f"{field}: {_describe(value)} is not a {kind}; expected a number with a unit in "
                        f"{accepted}.", field=field, value=value, expected=accepted)
    if isinstance(value, (int, float)):
        if not math.isfinite(float(value)):
            raise UnitError(f"{field}: {value} is not a finite number; expected {accepted}.",
                            field=field, value=value, expected=accepted)
        if default_unit is None:
            raise UnitError(f"{field}: the bare number {value} has no unit, which is ambiguous; "
                            f"write it with a unit in {accepted}.",
                            field=field, value=value, expected=accepted)
        return float(value) * units[default_unit]
    if not isinstance(value, str):
        raise UnitError(f"{field}: {_describe(value)} is not a {kind}; expected {accepted}.",
                        field=field, value=value, expected=accepted)
    if kind == "length":
        fl = _FL_RE.match(value)
        if fl:
            return float(fl.group("num")) * FT_PER_FL * M_PER_FT
    match = _QUANTITY_RE.match(value)
    if not match:
        raise UnitError(f"{field}: {value!r} is not a {kind}; expected a number with a unit in {accepted}.",
                        field=field, value=value, expected=accepted)
    number = float(match.group("num").replace(",", ""))
    unit = match.group("unit")
    if not unit:
        if default_unit is None:
            raise UnitError(f"{field}: {value!r} has no unit, which is ambiguous; write it with a unit "
                            f"in {accepted}.", field=field, value=value, expected=accepted)
        unit = default_unit
    factor = units.get(unit) if unit in units else units.get(unit.lower())
    if factor is None:
        other = [k for k, (table, _) in KINDS.items() if k != kind and (unit in table or unit.lower() in table)]
        hint = f" ({unit!r} is a unit of {other[0]})" if other else ""
        raise UnitError(f"{field}: unknown unit {unit!r} in {value!r}{hint}; expected {accepted}.",
                        field=field, value=value, expected=accepted)
    return number * factor


def parse_fraction(value, *, field: str = "fio2") -> float:
    """Parse an oxygen fraction: ``0.21``, or ``"21 %"`` written with a percent sign.

    A bare number above 1 is rejected (it looks like a percentage written without ``%``).
    The result lies in (0, 1].
    """
    expected = "a fraction in (0, 1], e.g. 0.21, or a percentage with its sign, e.g. '21 %'"
    number: float
    if isinstance(value, bool):
        raise UnitError(f"{field}: {value!r} is not a fraction; expected {expected}.",
                        field=field, value=value, expected=expected)
    if isinstance(value, str):
        text = value.strip()
        pct = text.endswith("%")
        try:
            number = float(text.rstrip("%").strip())
        except ValueError:
            raise UnitError(f"{field}: {value!r} is not a number; expected {expected}.",
                            field=field, value=value, expected=expected) from None
        if pct:
            number /= 100.0
    elif isinstance(value, (int, float)):
        number = float(value)
    else:
        raise UnitError(f"{field}: {value!r} is not a fraction; expected {expected}.",
                        field=field, value=value, expected=expected)
    if not math.isfinite(number):
        raise UnitError(f"{field}: {value!r} is not finite; expected {expected}.",
                        field=field, value=value, expected=expected)
    if 2.0 < number <= 100.0 and not (isinstance(value, str) and value.strip().endswith("%")):
        raise UnitError(f"{field}: {value!r} looks like a percentage; write it as a fraction "
                        f"({number / 100:g}) or with a percent sign ('{number:g} %').",
                        field=field, value=value, expected=expected)
    if not 0.0 < number <= 1.0:
        raise UnitError(f"{field}: {value!r} is outside (0, 1]; expected {expected}.",
                        field=field, value=value, expected=expected)
    return number


def altitude_unit(feet: bool) -> str:
    """The unit altitudes are shown in: ``"ft"`` or ``"m"``."""
    return "ft" if feet else "m"


def shown_altitude(altitude_m, feet: bool, none: str = "-") -> str:
    """An altitude as a number in the unit shown (``feet``: ft, else m), without the unit."""
    if altitude_m is None:
        return none
    return f"{altitude_m / M_PER_FT if feet else altitude_m:,.0f}"


def shown_equivalent_altitude(altitude_m, feet: bool, none: str = "-") -> str:
    """An equivalent altitude as shown: below sea level it is 'hyperoxic' (more oxygen than
    sea-level air), never a negative altitude."""
    if altitude_m is None:
        return none
    if altitude_m < 0:
        return "hyperoxic"
    return shown_altitude(altitude_m, feet)


_LABEL_ALTITUDE = re.compile(r"(?<![\d,.])(\d{1,3}(?:,\d{3})*|\d+) m\b")


def label_in_unit(label: str, feet: bool) -> str:
    """A leg label with its altitudes ('to 5,720 m') in the unit shown."""
    if not feet:
        return label
    return _LABEL_ALTITUDE.sub(lambda m: f"{float(m.group(1).replace(',', '')) / M_PER_FT:,.0f} ft", label)
