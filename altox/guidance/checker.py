"""Pure checks of a flight profile or an expedition itinerary against a rule set.

No printing, no I/O beyond loading a rule set by id.  Every result is guidance only.

Aviation (:func:`check_flight`)
    Per time sample: cabin pressure altitude, the sample's length, its leg and the planned
    oxygen use (``'none'``, ``'crew'`` or ``'all'``).  For each threshold altox works out the
    samples in which the rule asks for oxygen, or in which a limit is passed:

    * a threshold is in force *above* its ``value`` (strictly) and, when it has a
      ``band_top``, *up to and including* it;
    * a ``duration`` of "more than T" is read as in 14 CFR 91.211(a)(1): oxygen is needed for
      "that part of the flight at those altitudes that is of more than 30 minutes duration",
      i.e. time in the band is **added up over the whole profile given** (not only continuous
      stretches), the first T of it needs no oxygen, and every sample whose end lies past T
      does.  Exactly T is not "more than T".  Pass one flight per call: the time is added up
      over every sample given, across legs.
    * ``'crew'`` covers thresholds for crew and flight crew; ``'all'`` covers every
      threshold, including those for passengers and all occupants (a supply rule for part of
      the passengers, e.g. 10 percent, is counted as covered only by ``'all'``).

Expedition (:func:`check_itinerary`, :func:`risk_category`)
    Per night: the day number and sleeping altitude (and the day's high point, which the
    shipped guidelines do not use: they turn on sleeping altitude).  Days missing from the
    list are read as rest days at the last sleeping altitude.  The first night's gain is
    counted from ``start_altitude_m``.  See docs/rules.md for the reading of each guideline.

Why this module is long: every rule kind (cabin-altitude bands, flight-level rules, ascent-rate and risk-table rules) is checked by one pure function family over the exact band times, so a verdict is produced in one place.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from altox.errors import AltoxError
from altox.guidance.loader import FLIGHT_LEVEL_CHECKS, RuleSet, Threshold, load_rule_set

OXYGEN_USE = ("none", "crew", "all")
#: oxygen_use values that meet a threshold for each kind of person
_COVERED_BY = {
    "crew": {"crew", "all"},
    "flight crew": {"crew", "all"},
    "passengers": {"all"},
    "all occupants": {"all"},
    "party": {"all"},
}
HISTORY_TAGS = ("ams", "hape", "hace")
_ORDER = {"low": 0, "moderate": 1, "high": 2}
_EPS_H = 1e-9     # hours
_EPS_M = 1e-6     # metres
_EPS_FT = 0.01    # feet: a cabin held at a limit (8,000.000000001 ft after unit round trips) is at it, not above


@dataclass(frozen=True)
class Finding:
    """One rule that the plan touches.

    status
        ``"required-planned"``: the rule asks for oxygen and the plan's oxygen_use covers it;
        ``"required-not-planned"``: the rule asks for oxygen (or, for an itinerary, a rest
        day) that the plan does not have; ``"limit-exceeded"``: the plan passes a limit.
    legs
        Aviation: the leg numbers concerned, as given to :func:`check_flight` (altox passes
        1-based leg numbers, as in every table); for ``required-not-planned``, the legs where
        the plan falls short.  Expedition: the day numbers concerned.
    """

    rule_set_id: str
    threshold_id: str
    section: str
    citation: str
    legs: list[int] = field(default_factory=list)
    applies_to: str = ""
    status: str = ""
    message: str = ""
    basis: str = ""
    band_hours: float | None = None   # aviation: hours with the cabin in the threshold's band


# -- helpers ------------------------------------------------------------------------------
def _rule_set(rule_set, kind: str) -> RuleSet:
    rs = load_rule_set(rule_set)
    if rs.kind != kind:
        raise AltoxError(f"rule set {rs.id!r} is a {rs.kind} rule set; this check needs a {kind} one",
                         field="rule_set", value=rs.id, expected=f"a {kind} rule set")
    return rs


def _float_array(values, name: str, n: int | None = None) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise AltoxError(f"{name}: expected numbers", field=name, value=values) from None
    if arr.ndim != 1:
        arr = np.atleast_1d(arr)
        if arr.ndim != 1:
            raise AltoxError(f"{name}: expected a one-dimensional array", field=name)
    if n is not None and arr.size != n:
        raise AltoxError(f"{name}: has {arr.size} values, expected {n} (one per sample)",
                         field=name, expected=f"{n} values")
    if not np.all(np.isfinite(arr)):
        raise AltoxError(f"{name}: every value must be a finite number", field=name)
    return arr


def _fmt_ft(x: float) -> str:
    return f"{x:,.0f} ft"


def _fmt_min(hours: float) -> str:
    minutes = hours * 60.0
    return f"{minutes:.0f} min" if abs(minutes - round(minutes)) < 0.05 else f"{minutes:.1f} min"


def _fmt_list(values) -> str:
    values = [str(v) for v in values]
    if len(values) <= 1:
        return "".join(values)
    return ", ".join(values[:-1]) + " and " + values[-1]


def _on_legs(legs) -> str:
    """'on leg 4', 'on legs 4 and 6', 'on legs 2 to 6' (runs of three or more joined)."""
    legs = sorted(int(x) for x in legs)
    parts, i = [], 0
    while i < len(legs):
        j = i
        while j + 1 < len(legs) and legs[j + 1] == legs[j] + 1:
            j += 1
        if j - i >= 2:
            parts.append(f"{legs[i]} to {legs[j]}")
            i = j + 1
        else:
            parts.append(str(legs[i]))
            i += 1
    return ("on leg " if len(legs) == 1 else "on legs ") + _fmt_list(parts)


def _band_words(th: Threshold) -> str:
    if th.quantity == "cabin_pressure":
        if th.band_top is None:
            return f"cabin pressure below {th.value} (about {_fmt_ft(th.lower_ft)} pressure altitude)"
        return (f"cabin pressure between {th.value} and {th.band_top} (about {_fmt_ft(th.lower_ft)} "
                f"to {_fmt_ft(th.top_ft)} pressure altitude)")
    if th.band_top is None:
        return f"cabin altitude above {th.value}"
    return f"cabin altitude above {th.value} up to {th.band_top}"


def _who(applies_to: str) -> str:
    return {"crew": "the crew", "flight crew": "the flight crew", "passengers": "passengers",
            "all occupants": "all occupants", "party": "the party"}[applies_to]


#: bases of a figure that count as checked against its source (``local``: the user's own file)
CHECKED_BASES = ("read", "local")


def figure_checked(basis: str) -> bool:
    """Whether a figure with this ``basis`` may be shown to users (checked against its source)."""
    return basis in CHECKED_BASES


def _finding(rs: RuleSet, th: Threshold, legs, status: str, message: str, band_hours=None) -> Finding:
    if not figure_checked(th.basis):
        # a figure not checked against the published text is not shown: point to the section
        what = "days" if rs.kind == "expedition" else "legs"
        message = (f"Guidance from {rs.label} {th.section} (for {_who(th.applies_to)}) may apply to this plan on "
                   f"{what} {_fmt_list(sorted({int(x) for x in legs}))}. Its figure is not shown because "
                   "altox has not checked it against the published text: read the section itself.")
    return Finding(rule_set_id=rs.id, threshold_id=th.id, section=th.section,
                   citation=th.citation or rs.citation, legs=sorted({int(x) for x in legs}),
                   applies_to=th.applies_to, status=status, message=message, basis=th.basis,
                   band_hours=band_hours)


def in_band(cabin_pressure_altitude_ft, lower_ft: float, top_ft: float | None = None) -> np.ndarray:
    """Samples strictly above ``lower_ft`` and, with a top, at or below ``top_ft`` [ft].

    A cabin held at a figure (8,000.000000001 ft after unit round trips) is at it, not above
    it: the comparison allows 0.01 ft.
    """
    alt = np.asarray(cabin_pressure_altitude_ft, dtype=float)
    mask = alt > lower_ft + _EPS_FT
    if top_ft is not None:
        mask &= alt <= top_ft + _EPS_FT
    return mask


def hours_above(duration_h, cabin_pressure_altitude_ft, threshold_ft: float) -> float:
    """Hours with the cabin strictly above ``threshold_ft`` [ft] (the sum over the samples)."""
    return float(np.sum(np.asarray(duration_h, dtype=float)
                        * in_band(cabin_pressure_altitude_ft, threshold_ft)))


def _past_duration(in_band: np.ndarray, duration_h: np.ndarray, limit_h: float | None) -> np.ndarray:
    """Samples in the band whose end lies past the first ``limit_h`` hours spent in it."""
    if limit_h is None:
        return in_band.copy()
    cum_end = np.cumsum(np.where(in_band, duration_h, 0.0))
    return in_band & (cum_end > limit_h + _EPS_H)


# -- aviation -------------------------------------------------------------------------------
def check_flight(time_h, duration_h, cabin_pressure_altitude_ft, leg, oxygen_use, rule_set) -> list[Finding]:
    """Check a cabin altitude profile against an aviation rule set.

    Parameters
    ----------
    time_h : array of float
        Start time of each sample [h], non-decreasing.
    duration_h : array of float
        Length of each sample [h], >= 0.
    cabin_pressure_altitude_ft : array of float
        Planned cabin pressure altitude of each sample [ft].
    leg : array of int
        Leg number of each sample, reported as given (altox passes 1-based numbers, the
        ones its tables show).
    oxygen_use : array of str
        Planned oxygen use in each sample: ``'none'``, ``'crew'`` or ``'all'``.
    rule_set : str, path or RuleSet
        An aviation rule set.

    Returns
    -------
    list of Finding
        One per threshold that the profile triggers, in the rule set's order.
    """
    rs = _rule_set(rule_set, "aviation")
    t = _float_array(time_h, "time_h")
    n = t.size
    dur = _float_array(duration_h, "duration_h", n)
    alt = _float_array(cabin_pressure_altitude_ft, "cabin_pressure_altitude_ft", n)
    legs = _float_array(leg, "leg", n)
    if np.any(legs != np.round(legs)):
        raise AltoxError("leg: leg numbers must be whole numbers", field="leg")
    legs = legs.astype(int)
    if np.any(dur < 0):
        raise AltoxError("duration_h: sample lengths must be >= 0", field="duration_h")
    if np.any(np.diff(t) < 0):
        raise AltoxError("time_h: sample times must be in order (non-decreasing)", field="time_h")
    use = np.asarray(oxygen_use, dtype=object)
    if use.ndim == 0:
        use = np.full(n, use.item(), dtype=object)
    if use.size != n:
        raise AltoxError(f"oxygen_use: has {use.size} values, expected {n} (one per sample)",
                         field="oxygen_use")
    bad = sorted({str(u) for u in use if u not in OXYGEN_USE})
    if bad:
        raise AltoxError(f"oxygen_use: unknown value(s) {', '.join(map(repr, bad))}; expected "
                         f"'none', 'crew' or 'all'", field="oxygen_use", value=bad,
                         expected="'none', 'crew' or 'all'")

    findings: list[Finding] = []
    for th in rs.thresholds:
        if th.check in FLIGHT_LEVEL_CHECKS:   # see check_flight_levels
            continue
        lower, top, limit_h = th.lower_ft, th.top_ft, th.duration_h
        band = in_band(alt, lower, top)
        if not band.any():
            continue
        hit = _past_duration(band, dur, limit_h)
        if not hit.any():
            continue
        band_h = float(dur[band].sum())
        cite = f"{rs.label} {th.section}"
        where_legs = sorted(set(legs[hit].tolist()))
        if th.check == "limit":
            cond = f" ({th.condition})" if th.condition else ""
            over = (f"for {_fmt_min(band_h)}, more than the {_fmt_min(limit_h)} allowed"
                    if limit_h is not None else f"for {_fmt_min(band_h)}")
            msg = (f"Guidance from {cite} ({th.requirement}): the planned cabin altitude is above "
                   f"{th.value}{cond} {over}, {_on_legs(where_legs)}.")
            findings.append(_finding(rs, th, where_legs, "limit-exceeded", msg, band_h))
            continue
        covered = np.isin(use, list(_COVERED_BY[th.applies_to]))
        short = hit & ~covered
        span = f"{_fmt_min(band_h)} with {_band_words(th)}"
        if limit_h is not None:
            span += f", {_fmt_min(band_h - limit_h)} of it beyond the first {_fmt_min(limit_h)}"
        if short.any():
            short_legs = sorted(set(legs[short].tolist()))
            msg = (f"Guidance from {cite} ({th.requirement}): the plan has {span}, and its oxygen use "
                   f"does not cover {_who(th.applies_to)} there, {_on_legs(short_legs)}.")
            findings.append(_finding(rs, th, short_legs, "required-not-planned", msg, band_h))
        else:
            msg = (f"Guidance from {cite} ({th.requirement}): the plan has {span}, and its oxygen use "
                   f"covers {_who(th.applies_to)} there, {_on_legs(where_legs)}.")
            findings.append(_finding(rs, th, where_legs, "required-planned", msg, band_h))
    return findings


def _fmt_fl(ft: float) -> str:
    return f"FL{ft / 100:03.0f}" if ft >= 17999.5 else _fmt_ft(ft)


def check_flight_levels(duration_h, aircraft_pressure_altitude_ft, leg, oxygen_use, rule_set, *,
                        pressurized: bool, pilots_at_controls: int = 1, quick_donning: bool = False,
                        oxygen_carried_h: float | None = None) -> list[Finding]:
    """Check the rules of a rule set that turn on the aircraft's flight altitude.

    ``mask`` rules (e.g. 14 CFR 91.211(b)(1)(ii)): while the aircraft is above ``value`` (and
    at or below ``band_top``), one pilot at the controls wears and uses an oxygen mask.  The
    plan meets it where its oxygen use covers the crew (``'crew'`` or ``'all'``: read as a pilot
    on a mask), or where the rule's ``unless`` holds: at least that many pilots at the controls,
    each with a quick-donning mask if asked, and the aircraft at or below ``unless.up_to``.
    ``supply`` rules (e.g. 91.211(b)(1)(i)): while the aircraft is above ``value``, a supply of
    ``supply`` for each occupant is available for a descent after a pressurization failure; met
    when the plan states at least that much oxygen carried per occupant.  Rules marked
    ``pressurized_only`` are skipped for an unpressurized aircraft (whose cabin rules apply).

    Parameters
    ----------
    duration_h, aircraft_pressure_altitude_ft, leg, oxygen_use : arrays, one entry per sample
        As for :func:`check_flight`, with the aircraft's pressure altitude [ft] in place of the
        cabin's.
    rule_set : str, path or RuleSet
    pressurized : bool
    pilots_at_controls : int
        Pilots at the controls (default 1: the exceptions for two pilots do not apply).
    quick_donning : bool
        Whether each pilot has a quick-donning mask (default False).
    oxygen_carried_h : float or None
        Supplemental oxygen carried for each occupant, as hours of use; None when not stated.

    Returns
    -------
    list of Finding
    """
    rs = _rule_set(rule_set, "aviation")
    dur = _float_array(duration_h, "duration_h")
    n = dur.size
    alt = _float_array(aircraft_pressure_altitude_ft, "aircraft_pressure_altitude_ft", n)
    legs = _float_array(leg, "leg", n).astype(int)
    use = np.asarray(oxygen_use, dtype=object)
    if use.ndim == 0:
        use = np.full(n, use.item(), dtype=object)
    findings: list[Finding] = []
    crew_on_oxygen = np.isin(use, list(_COVERED_BY["crew"]))
    crew = (f"{pilots_at_controls} pilot{'s' if pilots_at_controls != 1 else ''}, "
            f"{'quick-donning masks' if quick_donning else 'no quick-donning masks stated'}")
    for th in rs.thresholds:
        if th.check not in FLIGHT_LEVEL_CHECKS or (th.pressurized_only and not pressurized):
            continue
        band = in_band(alt, th.lower_ft, th.top_ft)
        if not band.any():
            continue
        band_h = float(dur[band].sum())
        where = f"{rs.label} {th.section}"
        top = f" up to {_fmt_fl(th.top_ft)}" if th.top_ft is not None else ""
        span = f"the aircraft is above {_fmt_fl(th.lower_ft)}{top} for {_fmt_min(band_h)}"
        band_legs = sorted(set(legs[band].tolist()))
        if th.check == "supply":
            need = th.supply_h
            if oxygen_carried_h is not None and oxygen_carried_h >= need - _EPS_H:
                msg = (f"Guidance from {where} ({th.requirement}): {span}; the plan carries "
                       f"{_fmt_min(oxygen_carried_h)} for each occupant, {_on_legs(band_legs)}.")
                findings.append(_finding(rs, th, band_legs, "required-planned", msg))
            else:
                carried = ("does not state the oxygen carried for each occupant"
                           if oxygen_carried_h is None else
                           f"states only {_fmt_min(oxygen_carried_h)} of oxygen for each occupant")
                msg = (f"Guidance from {where} ({th.requirement}): {span}, and the plan {carried}; "
                       f"{_fmt_min(need)} is asked for, {_on_legs(band_legs)}.")
                findings.append(_finding(rs, th, band_legs, "required-not-planned", msg))
            continue
        covered = crew_on_oxygen & band
        ex = th.unless
        excused = np.zeros(n, dtype=bool)
        if ex is not None and pilots_at_controls >= ex.pilots_at_controls and (quick_donning or not ex.quick_donning):
            excused = band & (alt <= ex.up_to_ft + _EPS_FT if ex.up_to_ft is not None else True)
        short = band & ~covered & ~excused
        if short.any():
            short_legs = sorted(set(legs[short].tolist()))
            why = ""
            if ex is not None:
                why = (f"; the exception needs {ex.pilots_at_controls} pilots at the controls"
                       + (" each with a quick-donning mask" if ex.quick_donning else "")
                       + (f" and holds only at or below {_fmt_fl(ex.up_to_ft)}" if ex.up_to_ft is not None else ""))
            msg = (f"Guidance from {where} ({th.requirement}): {span}, and the plan has no pilot on a "
                   f"mask there ({crew}{why}), {_on_legs(short_legs)}.")
            findings.append(_finding(rs, th, short_legs, "required-not-planned", msg))
        else:
            how = "the crew is on oxygen" if not excused.any() else (
                f"the exception applies ({crew})" if not covered.any() else
                f"the crew is on oxygen or the exception applies ({crew})")
            msg = f"Guidance from {where} ({th.requirement}): {span}; {how}, {_on_legs(band_legs)}."
            findings.append(_finding(rs, th, band_legs, "required-planned", msg))
    return findings


# -- expedition -----------------------------------------------------------------------------
@dataclass
class _Night:
    day: int
    sleep_m: float
    gain_m: float


def _nights(day, sleep_altitude_m, start_altitude_m, high_altitude_m=None) -> list[_Night]:
    days = _float_array(day, "day")
    if np.any(days != np.round(days)):
        raise AltoxError("day: day numbers must be whole numbers", field="day")
    sleep = _float_array(sleep_altitude_m, "sleep_altitude_m", days.size)
    if high_altitude_m is not None:
        _float_array(high_altitude_m, "high_altitude_m", days.size)
    try:
        start = float(start_altitude_m)
    except (TypeError, ValueError):
        raise AltoxError("start_altitude_m: expected one number [m]", field="start_altitude_m",
                         value=start_altitude_m) from None
    if not math.isfinite(start):
        raise AltoxError("start_altitude_m: must be finite", field="start_altitude_m")
    if days.size == 0:
        raise AltoxError("day: the itinerary has no days", field="day")
    if np.any(np.diff(days) <= 0):
        raise AltoxError("day: day numbers must increase from one night to the next", field="day")
    nights: list[_Night] = []
    prev = start
    for i, (d, s) in enumerate(zip(days.astype(int), sleep)):
        if i > 0:
            for gap_day in range(int(days[i - 1]) + 1, int(d)):  # unlisted days: rest in place
                nights.append(_Night(gap_day, prev, 0.0))
        nights.append(_Night(int(d), float(s), float(s) - prev))
        prev = float(s)
    return nights


def _fast_days(nights, limit_m: float, above_m: float) -> list[int]:
    return [n.day for n in nights if n.sleep_m > above_m + _EPS_M and n.gain_m > limit_m + _EPS_M]


def _rest_interval_days(nights, interval_days: float, above_m: float) -> list[int]:
    max_run = max(int(round(interval_days)) - 1, 0)
    run, flagged = 0, []
    for n in nights:
        if n.gain_m <= _EPS_M:
            run = 0
        elif n.sleep_m > above_m + _EPS_M:
            run += 1
            if run > max_run:
                flagged.append(n.day)
        else:
            run = 0
    return flagged


def _missing_extra_days(nights, per_m: float, above_m: float, start_m: float) -> list[int]:
    highest = start_m
    cum = 0.0
    owed = 0
    flagged = []
    for n in nights:
        if n.gain_m <= _EPS_M:
            owed = max(owed - 1, 0)
        else:
            if owed > 0:
                flagged.append(n.day)
            gain_above = max(0.0, n.sleep_m - max(highest, above_m))
            before = math.floor(cum / per_m + 1e-9)
            cum += gain_above
            owed += math.floor(cum / per_m + 1e-9) - before
        highest = max(highest, n.sleep_m)
    return flagged


def check_itinerary(day, sleep_altitude_m, high_altitude_m, start_altitude_m, rule_set) -> list[Finding]:
    """Check an ascent itinerary against an expedition rule set.

    Parameters
    ----------
    day : array of int
        Day number of each night, increasing (missing days are rest days in place).
    sleep_altitude_m : array of float
        Sleeping altitude of each night [m].
    high_altitude_m : array of float
        Highest point of each day [m]; validated, not used by the shipped guidelines.
    start_altitude_m : float
        Altitude the ascent starts from [m] (the night before the first day).
    rule_set : str, path or RuleSet
        An expedition rule set.

    Returns
    -------
    list of Finding
        ``limit-exceeded`` for nights whose sleeping-altitude gain passes the per-day limit;
        ``required-not-planned`` for days where a rest (acclimatization) day is due but the
        itinerary ascends.  ``legs`` holds the day numbers.
    """
    rs = _rule_set(rule_set, "expedition")
    nights = _nights(day, sleep_altitude_m, start_altitude_m, high_altitude_m)
    start = float(start_altitude_m)
    findings: list[Finding] = []
    for th in rs.thresholds:
        above = th.above_m
        if th.check == "sleep_gain":
            limit = th.value_inside
            days = _fast_days(nights, limit, above)
            if days:
                worst = max(n.gain_m for n in nights if n.day in days)
                msg = (f"Guidance from {rs.label} ({th.requirement}): the "
                       f"itinerary raises sleeping altitude by more than {th.value} on day(s) "
                       f"{_fmt_list(days)} (largest gain {worst:,.0f} m).")
                findings.append(_finding(rs, th, days, "limit-exceeded", msg))
        elif th.check == "rest_interval":
            days = _rest_interval_days(nights, th.value_days, above)
            if days:
                msg = (f"Guidance from {rs.label} ({th.requirement}): the "
                       f"itinerary ascends on day(s) {_fmt_list(days)} after "
                       f"{int(round(th.value_days)) - 1} ascent days in a row above {th.above} "
                       f"without a rest day.")
                findings.append(_finding(rs, th, days, "required-not-planned", msg))
        elif th.check == "rest_per_gain":
            days = _missing_extra_days(nights, th.value_inside, above, start)
            if days:
                msg = (f"Guidance from {rs.label} ({th.requirement}): the "
                       f"itinerary ascends on day(s) {_fmt_list(days)} while an extra day for "
                       f"acclimatization is still due.")
                findings.append(_finding(rs, th, days, "required-not-planned", msg))
    return findings


def risk_category(member_history, day, sleep_altitude_m, start_altitude_m, rule_set, high_altitude_m=None):
    """Risk category of one party member under a guideline's risk table.

    Parameters
    ----------
    member_history : set of str
        Prior altitude illness: any of ``'ams'``, ``'hape'``, ``'hace'`` (empty for none).
    day, sleep_altitude_m, start_altitude_m
        The itinerary, as for :func:`check_itinerary`.
    rule_set : str, path or RuleSet
        An expedition rule set with a ``risk_table``.
    high_altitude_m : array of float, optional
        Highest point of each day [m] (the very-rapid-ascent row reads the highest of it and
        the sleeping altitude); the sleeping altitude where not given.

    Returns
    -------
    (category, reasons, prophylaxis)
        ``category`` is ``'low'``, ``'moderate'`` or ``'high'``: the highest category of any
        table row that applies (low when none above low applies).  ``reasons`` lists the
        rows that apply, in the table's words, and notes on the table's assumptions.
        ``prophylaxis`` is the guideline's suggestion for that category with its source;
        guidance for discussion with a clinician, not a prescription.
    """
    rs = _rule_set(rule_set, "expedition")
    if rs.risk_table is None:
        raise AltoxError(f"rule set {rs.id!r} has no risk table", field="rule_set", value=rs.id)
    history = {str(h).strip().lower() for h in (member_history or ())}
    unknown = sorted(history - set(HISTORY_TAGS))
    if unknown:
        raise AltoxError(f"member_history: unknown tag(s) {', '.join(map(repr, unknown))}; expected "
                         f"any of 'ams', 'hape', 'hace'", field="member_history", value=unknown,
                         expected="'ams', 'hape', 'hace'")
    nights = _nights(day, sleep_altitude_m, start_altitude_m)
    start = float(start_altitude_m)
    day1 = nights[0].sleep_m
    days_arr = _float_array(day, "day")
    top_of_day = _float_array(sleep_altitude_m, "sleep_altitude_m", days_arr.size)
    if high_altitude_m is not None:
        top_of_day = np.maximum(top_of_day, _float_array(high_altitude_m, "high_altitude_m", days_arr.size))
    max_sleep = max(n.sleep_m for n in nights)

    gain_th = rs.thresholds_by_check("sleep_gain")
    extra_th = rs.thresholds_by_check("rest_per_gain")
    above = gain_th[0].above_m if gain_th else 3000.0
    extra_ok = True
    if extra_th:
        extra_ok = not _missing_extra_days(nights, extra_th[0].value_inside, extra_th[0].above_m, start)

    def applies(row) -> bool:
        v, c = row.value_m, row.criterion
        if c == "no_history_max_sleep_at_most":
            return not history and max_sleep <= v + _EPS_M
        if c == "gradual":
            return day1 < v - _EPS_M and not _fast_days(nights, 500.0 if not gain_th else
                                                        gain_th[0].value_inside, above) and extra_ok
        if c == "ams_day1_between":
            return "ams" in history and v - _EPS_M <= day1 <= row.top_m + _EPS_M
        if c == "no_ams_day1_above":
            return "ams" not in history and day1 > v + _EPS_M
        if c == "ams_day1_at_least":
            return "ams" in history and day1 >= v - _EPS_M
        if c == "hape_or_hace":
            return bool(history & {"hape", "hace"})
        if c == "history_ams":
            return "ams" in history
        if c == "day1_above":
            return day1 > v + _EPS_M
        if c == "day1_at_least":
            return day1 >= v - _EPS_M
        if c == "fast_gain_with_extra_days":
            return bool(_fast_days(nights, v, above)) and extra_ok
        if c == "fast_gain_without_extra_days":
            return bool(_fast_days(nights, v, above)) and not extra_ok
        if c == "very_rapid_ascent":   # reading of the table's example: see docs/rules.md
            return bool(np.any((days_arr < row.within_days) & (top_of_day >= v - _EPS_M)))
        raise AltoxError(f"risk table criterion {c!r} is not known to this checker", field="criterion")

    matched = [row for row in rs.risk_table.rows if applies(row)]
    category = "low"
    for row in matched:
        if _ORDER[row.category] > _ORDER[category]:
            category = row.category
    reasons = [f"{row.category}: {row.text}" for row in matched]
    if not any(_ORDER[row.category] > 0 for row in matched):
        reasons.append("low: no row of the table above low applies")
    if start >= 1200.0:
        reasons.append(f"note: the table assumes ascent starting below 1,200 m; this itinerary starts "
                       f"at {start:,.0f} m")
    if extra_th and not extra_ok:
        reasons.append("note: the itinerary lacks an extra day for acclimatization every "
                       f"{extra_th[0].value} above {extra_th[0].above}")

    proph = rs.prophylaxis
    chosen = getattr(proph, category)
    # users see the guideline's words and its citation; where a text was read stays in the data
    text = f"{chosen.text.rstrip('.')}."
    if chosen.dose is not None:
        # a dose is shown only when checked against the guideline itself; otherwise point to it
        text += (f" {chosen.dose.text.rstrip('.')}." if figure_checked(chosen.dose.basis)
                 else " For doses see the guideline's dosing table.")
    if "hape" in history and proph.hape is not None:
        text += f" {proph.hape.text.rstrip('.')}."
    text += f" Source: {rs.citation} Guidance only; discuss with a licensed clinician."
    return category, reasons, text
