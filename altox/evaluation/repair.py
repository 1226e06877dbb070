"""Repair a plan: the smallest change that makes it meet its guidance (and an optional goal).

:func:`repair_plan` searches over plans derived from the one given and returns the least
departure that the rule checker (:mod:`altox.guidance.checker`) finds with nothing "not met";
the physiology of a candidate is always that of the core (:func:`altox.evaluation.evaluate.evaluate_plan`,
:func:`altox.evaluation.population.expected_range`), never a second model.  The method, what it
guarantees and its cost are in docs/methods.md ("Repairing a plan").

Expeditions (:func:`_search_itinerary`)
    A best-first search over itineraries built night by night from the plan's days.  Where
    the next day of the plan would be flagged by the checker, the search may insert a rest
    day at the last sleeping altitude, insert an intermediate camp (the gain split evenly
    into steps within the per-day limit), or sleep lower on that day (the planned camp becomes
    the day's high point).  Days marked ``fixed`` keep their number and content; with a day
    limit or fixed days, days that do not gain altitude may be dropped to make room.  Cost:
    added days, then changes.  A ``goal`` on the expected SaO2 range is then met with planned
    oxygen on the nights (or days) that miss it, at the lowest flow of a ladder that meets it.

Flights (:mod:`altox.evaluation.repair_flight`).

Output is a :class:`Repair`; :func:`write_repaired_yaml` writes the repaired plan with the
original file's comments (a round-trip YAML library, ``ruamel.yaml``).

Why this module is long: the itinerary search, the goal, and writing the repaired itinerary back into the user's own YAML (comments kept) are one algorithm over one state; the flight search and the shared types live in repair_flight and repair_common.
"""

from __future__ import annotations

import heapq
import math
from dataclasses import dataclass, replace

import numpy as np

from altox.errors import AltoxError
from altox.evaluation.repair_common import (BROKEN, GOAL_EXAMPLE, Goal, Night, Repair, _dump, _put_after, _q,  # noqa: F401
                                            _round_trip, parse_goal)

#: default bound on the states the itinerary search may expand
MAX_STATES = 200_000
#: oxygen flows tried, lowest first, for a goal [L/min]
FLOW_LADDER_L_MIN = (0.5, 1.0, 1.5, 2.0, 3.0, 4.0)
KEEP_CHOICES = ("all", "highest", "none")
#: camp altitudes are rounded to this [m]
CAMP_ROUND_M = 10.0

# -- the checker, as the search uses it ----------------------------------------------------------
def _expedition_rule_sets(plan):
    from altox.evaluation.evaluate import _rule_sets

    return [rs for rs in _rule_sets(plan) if rs.kind == "expedition"]


def _broken_findings(sleeps, start_m, rule_sets):
    from altox.guidance.checker import check_itinerary

    days = np.arange(1, len(sleeps) + 1)
    arr = np.asarray(sleeps, dtype=float)
    out = []
    for rs in rule_sets:
        out += [f for f in check_itinerary(days, arr, arr, start_m, rs) if f.status in BROKEN]
    return out


def _last_flagged(sleeps, start_m, rule_sets) -> bool:
    n = len(sleeps)
    return any(n in f.legs for f in _broken_findings(sleeps, start_m, rule_sets))


def _gain_limit_m(rule_sets) -> float | None:
    limits = [th.value_inside for rs in rule_sets for th in rs.thresholds_by_check("sleep_gain")]
    return min(limits) if limits else None


def _camp_m(prev_m: float, target_m: float, limit_m: float | None) -> float:
    """The next intermediate camp from ``prev_m`` towards ``target_m``: the gain in equal steps within the limit."""
    gain = target_m - prev_m
    if limit_m is None or limit_m <= 0:
        steps = 2
    else:
        steps = max(2, math.ceil(gain / limit_m - 1e-9))
    camp = round((prev_m + gain / steps) / CAMP_ROUND_M) * CAMP_ROUND_M
    if limit_m is not None:
        camp = min(camp, math.floor(prev_m + limit_m))
    return float(camp)


# -- expedition search ---------------------------------------------------------------------------
def _high_points(plan):
    """Index of each day with a high point, and the plan's highest point [m]."""
    highs = {i: d.high_m for i, d in enumerate(plan.days) if d.high_m is not None}
    top = max([d.sleep_m for d in plan.days] + list(highs.values()))
    return highs, top


def _may_drop_high(plan, i, keep: str) -> bool:
    d = plan.days[i]
    if d.high_m is None:
        return True
    if keep == "none":
        return True
    if keep == "highest":
        _, top = _high_points(plan)
        return d.high_m < top
    return False


@dataclass
class _Search:
    nights: tuple | None
    states: int
    complete: bool
    reason: str | None = None


def _search_itinerary(plan, rule_sets, *, max_days: int | None, keep: str, use_fixed: bool = True,
                      max_states: int = MAX_STATES, progress=None) -> _Search:
    """Best-first search for the itinerary with the fewest added days (then changes).

    A state is the nights built so far and the index of the next day of the plan.  The next
    day is taken as planned when the checker does not flag it; otherwise the search branches:
    an added rest day, an added intermediate camp, or (not on a fly-in or fixed day) that day
    slept lower.  Days that do not gain altitude and hold no reading (and no high point that
    must be kept) may be dropped while days are owed to a fixed day or the day limit.
    Priority: (added days minus the days that could still be dropped, changes), a lower bound
    of the final cost, so the first complete itinerary taken off the queue is the cheapest.
    """
    days = plan.days
    n = len(days)
    start = float(plan.start_altitude_m)
    limit = _gain_limit_m(rule_sets)
    max_climb = _largest_day_climb_m(plan)
    fixed_at = {i: d.day for i, d in enumerate(days) if d.fixed} if use_fixed else {}
    observed = {o.day - 1 for o in plan.observations}
    squeeze = bool(fixed_at) or max_days is not None

    def droppable(i, prev_m):
        # a descent (or rest) day followed by another: the next day goes down the rest of the way
        d = days[i]
        return (squeeze and i + 1 < n and i not in fixed_at and i not in observed
                and d.sleep_m <= prev_m + 1e-6 and days[i + 1].sleep_m <= d.sleep_m + 1e-6
                and _may_drop_high(plan, i, keep))

    # an upper bound of the days still droppable from day i on (sleep never above the one before)
    can_drop = [0] * (n + 1)
    for i in range(n - 1, -1, -1):
        prev = days[i - 1].sleep_m if i else start
        can_drop[i] = can_drop[i + 1] + (1 if droppable(i, prev) else 0)
    last_fixed = max(fixed_at) if fixed_at else -1

    counter = 0
    heap = [((0, 0, 0), counter, 0, ())]
    seen = set()
    states = 0
    while heap:
        (_, changes, _), _, i, nights = heapq.heappop(heap)
        key = (i, tuple(round(x.sleep_m, 3) for x in nights), tuple(x.kind for x in nights))
        if key in seen:
            continue
        seen.add(key)
        states += 1
        if progress is not None and states % 200 == 0:
            progress(states, max_states)
        if states > max_states:
            return _Search(None, states, False, f"the search stopped after {max_states:,} states")
        if i == n:
            return _Search(nights, states, True)
        prev = nights[-1].sleep_m if nights else start
        sleeps = [x.sleep_m for x in nights]
        d = days[i]

        def push(new_nights, next_i, extra_changes):
            nonlocal counter
            added = len(new_nights) - next_i
            if max_days is not None and len(new_nights) + (n - next_i) - can_drop[next_i] > max_days:
                return
            # a fixed day still ahead cannot be reached if more days are owed than can be dropped before it
            if fixed_at and next_i <= last_fixed:
                owed = len(new_nights) - next_i
                drops_before = can_drop[next_i] - can_drop[last_fixed]
                if owed > drops_before:
                    return
            bound = added - (can_drop[next_i] if squeeze else 0)
            counter += 1
            heapq.heappush(heap, ((bound, changes + extra_changes, -next_i), counter, next_i, new_nights))

        here = len(nights) + 1   # the day number the next night gets
        if i in fixed_at and here != fixed_at[i]:
            continue             # a fixed day must keep its number
        take = Night(d.sleep_m, i, "keep")
        carried = d.activity in ("fly-in", "drive")
        take_ok = ((carried or max(d.sleep_m, d.high_m or d.sleep_m) - prev <= max_climb + 1e-6)
                   and not _last_flagged(sleeps + [d.sleep_m], start, rule_sets))
        if take_ok:
            push(nights + (take,), i + 1, 0)
        fixed_ahead = any(j >= i for j in fixed_at)
        too_long = max_days is not None and len(nights) + (n - i) > max_days
        if droppable(i, prev) and ((fixed_ahead and len(nights) > i) or too_long):
            push(nights, i + 1, 1)
        if take_ok or i in fixed_at:
            continue
        push(nights + (Night(prev, None, "rest"),), i, 1)
        if d.sleep_m > prev + 1e-6:
            camp = _camp_m(prev, d.sleep_m, limit)
            if prev + 1e-6 < camp < d.sleep_m - 1e-6 and not _last_flagged(sleeps + [camp], start, rule_sets):
                push(nights + (Night(camp, None, "camp"),), i, 1)
                high = max(d.sleep_m, d.high_m or d.sleep_m)
                if d.activity != "fly-in" and high - prev <= max_climb + 1e-6:
                    push(nights + (Night(camp, i, "lower", high_m=high),), i + 1, 1)
    if fixed_at:
        return _Search(None, states, True, "fixed")
    return _Search(None, states, True, "limit")


def _largest_day_climb_m(plan) -> float:
    """The plan's largest climb on foot in one day (to the day's high point or camp from the last camp). [m]"""
    prev, out = float(plan.start_altitude_m), 0.0
    for d in plan.days:
        if d.activity not in ("fly-in", "drive"):   # carried, not climbed
            out = max(out, max(d.sleep_m, d.high_m or d.sleep_m) - prev)
        prev = d.sleep_m
    return out


# -- building the repaired plan --------------------------------------------------------------------
def _fmt_m(x: float) -> str:
    return f"{x:,.0f} m"


def _fmt_flow(q: float) -> str:
    return f"{q:g} L/min"


def _load_text(path) -> str:
    from altox.yamlload import read_plan_text

    return read_plan_text(path)


def _expedition_text(original_text: str, plan, nights) -> tuple[str, dict]:
    """The repaired plan's YAML from the original text (comments kept) and the day map old -> new."""
    from ruamel.yaml.comments import CommentedMap, CommentedSeq

    y = _round_trip()
    doc = y.load(original_text)
    old_days = doc["days"]
    flow = bool(len(old_days) and getattr(old_days[0], "fa", None) is not None and old_days[0].fa.flow_style())
    new_days = CommentedSeq()
    day_map = {}
    comments = {}
    for k, night in enumerate(nights, start=1):
        if night.source is not None:
            item = old_days[night.source]
            day_map[night.source + 1] = k
            if night.source in old_days.ca.items:
                comments[k - 1] = old_days.ca.items[night.source]
            item["day"] = k
            if night.kind == "lower":
                item["sleep"] = _q(_fmt_m(night.sleep_m), flow)
                if "pressure" in item:       # measured at the planned camp, not at the lower one
                    del item["pressure"]
                if night.high_m is not None and (plan.days[night.source].high_m is None
                                                 or night.high_m > plan.days[night.source].high_m):
                    _put_after(item, "high", _q(_fmt_m(night.high_m), flow), "sleep")
                    if "hours_high" not in item:
                        _put_after(item, "hours_high", "1 h", "high")
            if night.drop_high and "high" in item:
                del item["high"]
                if "hours_high" in item:
                    del item["hours_high"]
        else:
            item = CommentedMap()
            item["day"] = k
            if night.kind == "rest":
                item["activity"] = "rest"
            item["sleep"] = _q(_fmt_m(night.sleep_m), flow)
            item["note"] = ("added: rest day for acclimatization" if night.kind == "rest"
                            else "added: intermediate camp")
            if flow:
                item.fa.set_flow_style()
        if night.oxygen_flow_l_min is not None:
            ox = CommentedMap()
            ox["flow"] = _fmt_flow(night.oxygen_flow_l_min)
            ox["when"] = night.oxygen_when
            ox.fa.set_flow_style()
            if "oxygen" in item:
                item["oxygen"] = ox
            else:
                item["oxygen"] = ox
        new_days.append(item)
    for k, c in comments.items():
        new_days.ca.items[k] = c
    doc["days"] = new_days
    if "observations" in doc:
        for obs in doc["observations"]:
            obs["day"] = day_map[int(obs["day"])]
    return _dump(y, doc), day_map


def _sentences(plan, nights, day_map) -> list[str]:
    """The changes as plain sentences, one per changed day, by the repaired plan's day numbers."""
    out = []
    kept = {x.source for x in nights if x.source is not None}
    for k, x in enumerate(nights, start=1):
        parts = []
        if x.kind == "rest":
            parts.append(f"stay at {_fmt_m(x.sleep_m)} (added rest day for acclimatization)")
        elif x.kind == "camp":
            nxt = next((y for y in nights[k:] if y.source is not None), None)
            towards = f" on the way to {_fmt_m(plan.days[nxt.source].sleep_m)}" if nxt else ""
            parts.append(f"sleep at {_fmt_m(x.sleep_m)} (added intermediate camp{towards})")
        elif x.kind == "lower":
            parts.append(f"sleep at {_fmt_m(x.sleep_m)} instead of {_fmt_m(plan.days[x.source].sleep_m)}, "
                         f"going up to {_fmt_m(x.high_m)} for the day")
        if x.drop_high:
            parts.append(f"no longer goes up to {_fmt_m(plan.days[x.source].high_m)}")
        if x.oxygen_flow_l_min is not None:
            what = {"sleep": "sleep" if parts else f"sleep at {_fmt_m(x.sleep_m)}",
                    "all": "spend the day and the night", "climb": "climb"}[x.oxygen_when]
            was = ""
            if x.source is not None and plan.days[x.source].oxygen is not None:
                o = plan.days[x.source].oxygen
                was = (f" (planned: {_fmt_flow(o.flow_l_min)} when {o.when})" if o.flow_l_min is not None
                       else f" (planned: FiO2 {o.fio2:.0%} when {o.when})")
            parts.append(f"{what} on {_fmt_flow(x.oxygen_flow_l_min)} oxygen{was}")
        if parts:
            was = f" (was day {x.source + 1})" if x.source is not None and k != x.source + 1 else ""
            out.append(f"day {k}{was}: " + "; ".join(parts) + ".")
    for i in range(len(plan.days)):
        if i not in kept:
            out.append(f"day {i + 1} of the plan (to {_fmt_m(plan.days[i].sleep_m)}) dropped: the day after it "
                       "goes on down (keeps the fixed days and the day limit).")
    return out


# -- meeting a goal ------------------------------------------------------------------------------
def _goal_values(plan, goal: Goal, members: int, seed: int, progress=None):
    """Each person's SaO2 at the goal's percentile per sample, with planned oxygen applied.

    Returns (people, values, selected, sleeping, day_of, at_high): the members (the reference
    adult when the plan names none), an array (people, samples), the samples the goal looks at,
    and per sample whether asleep, the plan day whose oxygen covers it and whether it is at the
    day's high point.
    """
    from altox.evaluation.population import expected_range
    from altox.plan.timeline import expand

    rng = expected_range(plan, None, n=members, seed=seed, percentiles=(goal.percentile,),
                         fio2=_planned_fio2(plan), progress=progress)
    tl = expand(plan)
    sleeping = np.asarray(rng["sleeping"], dtype=bool)
    selected = {"night": sleeping, "awake": ~sleeping, "any": np.ones_like(sleeping)}[goal.when]
    day_of = _day_of_oxygen(plan, tl)
    alt = np.asarray(tl.altitude_m, dtype=float)
    high = np.array([plan.days[k].high_m if plan.days[k].high_m is not None else np.nan for k in day_of])
    people = rng["people"][1:] if len(rng["people"]) > 1 else rng["people"][:1]
    values = np.array([np.asarray(p["sao2_pct_percentiles"])[0] for p in people])
    return ([p["name"] for p in people], values, selected, sleeping, day_of,
            ~sleeping & np.isclose(alt, high))


def _goal_misses(plan, goal: Goal, members: int, seed: int, progress=None) -> dict:
    """Where the goal is missed: {(day index, oxygen 'when' that would cover it): (value, member)}.

    A sample asleep before 06:00 belongs to the night of the day before (as planned oxygen does);
    an awake miss at the day's high point asks for 'climb' oxygen, any other awake miss for 'all'.
    """
    names, values, selected, sleeping, day_of, at_high = _goal_values(plan, goal, members, seed, progress)
    misses: dict = {}
    for name, s in zip(names, values):
        for k in np.flatnonzero(selected & (s < goal.sao2_pct - 1e-9)):
            when = "sleep" if sleeping[k] else ("climb" if at_high[k] else "all")
            key = (int(day_of[k]), when)
            if key not in misses or s[k] < misses[key][0]:
                misses[key] = (float(s[k]), name)
    return misses


def goal_worst(plan, goal: Goal, members: int | None = None, seed: int | None = None) -> list[dict]:
    """Per person, the lowest SaO2 at the goal's percentile over the moments the goal looks at, and its day."""
    from altox.evaluation.population import DEFAULT_MEMBERS, DEFAULT_SEED

    names, values, selected, _sleeping, day_of, _ = _goal_values(
        plan, goal, DEFAULT_MEMBERS if members is None else members, DEFAULT_SEED if seed is None else seed)
    out = []
    for name, s in zip(names, values):
        k = int(np.argmin(np.where(selected, s, np.inf)))
        out.append({"name": name, "sao2_pct": float(s[k]), "day": int(day_of[k]) + 1})
    return out


def _planned_fio2(plan):
    """Per-sample FiO2 of the plan's planned oxygen (None when the plan has none), from the device model."""
    from altox.evaluation import oxygen as ox
    from altox.plan.timeline import expand

    if not any(d.oxygen is not None for d in plan.days):
        return None
    tl = expand(plan)
    defaults = ox.load_data("oxygen_devices")["plan_defaults"]["expedition"]
    acts = ox.load_data("activity_ventilation")["plan_defaults"]
    fio2 = np.full(len(tl), ox.AIR_FIO2)
    on = np.asarray(tl.oxygen) > 0
    day_of = _day_of_oxygen(plan, tl)
    for k in np.flatnonzero(on):
        d = plan.days[day_of[k]]
        o = d.oxygen
        if o is None:
            continue
        if o.fio2 is not None:
            fio2[k] = o.fio2
            continue
        device = defaults[o.when]
        dev = ox.get_device(device)
        if dev["kind"] != "continuous":
            fio2[k] = 1.0
            continue
        n_l = ox.inspired_gas_l_min(acts[o.when], float(tl.pb_mmhg[k]), ox.AIR_FIO2)
        fio2[k] = float(ox.fio2_from_flow(o.flow_l_min, n_l, float(dev["delivery_fraction"]),
                                          float(dev["max_fio2"])))
    return fio2


def _day_of_oxygen(plan, tl):
    """Index of the plan day whose oxygen applies to each sample (the night after 00:00 is the day before)."""
    from altox.plan.timeline import NIGHT_END_H

    t = np.asarray(tl.time_h, dtype=float)
    day = np.floor(t / 24.0 + 1e-9).astype(int)
    clock = t - 24.0 * day
    day = np.where(clock < NIGHT_END_H - 1e-9, day - 1, day)
    return np.clip(day, 0, len(plan.days) - 1)


# -- entry point ----------------------------------------------------------------------------------
def repair_plan(path, *, goal: str | Goal | None = None, keep: str = "all", max_days: int | None = None,
                allow_oxygen: bool = True, members: int | None = None, seed: int | None = None,
                max_states: int = MAX_STATES, progress=None) -> Repair:
    """The smallest repair of a plan file: fewest added days (then least oxygen) for an itinerary.

    Parameters
    ----------
    path : str or os.PathLike
        The plan file (only read).
    goal : str or Goal, optional
        An expected-SaO2 goal (:func:`parse_goal`), met with planned oxygen.
    keep : {"all", "highest", "none"}
        High points that must stay: every day's ``high`` (default), only the plan's highest
        point, or none.
    max_days : int, optional
        Longest the itinerary may become (default: the plan's ``max_days``, else no limit).
    allow_oxygen : bool
        Whether planned oxygen may be added to meet the goal.
    members, seed
        Simulated people per person for the goal's expected range, and its seed (default:
        those of ``altox plan``, so the goal is judged on the range it shows).
    max_states : int
        Bound on the states the search expands.
    progress : callable, optional
        ``progress(done, total)`` while searching.

    Returns
    -------
    Repair

    Raises
    ------
    AltoxError, ProfileError
        Bad input (the plan, the goal, ``keep``).
    """
    from altox.plan.profile import load_plan

    plan = load_plan(path)
    if keep not in KEEP_CHOICES:
        raise AltoxError(f"--keep: {keep!r} is not a choice; expected one of {', '.join(KEEP_CHOICES)}.",
                         field="--keep", value=keep, expected=", ".join(KEEP_CHOICES))
    goal = parse_goal(goal) if not isinstance(goal, Goal) else goal
    if plan.kind == "flight":
        from altox.evaluation.repair_flight import repair_flight

        return repair_flight(plan, _load_text(path), goal=goal, progress=progress)
    return _repair_expedition(plan, _load_text(path), goal=goal, keep=keep,
                              max_days=max_days if max_days is not None else plan.max_days,
                              allow_oxygen=allow_oxygen, members=members, seed=seed,
                              max_states=max_states, progress=progress)


def _repair_expedition(plan, text, *, goal, keep, max_days, allow_oxygen, members, seed, max_states, progress):
    from altox.evaluation.population import DEFAULT_MEMBERS, DEFAULT_SEED
    from altox.plan.profile import load_plan_text

    seed = DEFAULT_SEED if seed is None else seed
    members = DEFAULT_MEMBERS if members is None else members
    rule_sets = _expedition_rule_sets(plan)
    reasons = []
    search = _search_itinerary(plan, rule_sets, max_days=max_days, keep=keep, max_states=max_states,
                               progress=progress)
    found = search.nights is not None
    nights = search.nights
    notes = []
    if not found:
        relaxed = _search_itinerary(plan, rule_sets, max_days=None, keep=keep, use_fixed=False,
                                    max_states=max_states, progress=progress)
        nights = relaxed.nights
        if nights is not None and max_days is not None and not any(d.fixed for d in plan.days):
            for longer in range(max_days + 1, len(nights)):   # the shortest the limits allow
                closer = _search_itinerary(plan, rule_sets, max_days=longer, keep=keep,
                                           max_states=max_states, progress=progress)
                if closer.nights is not None:
                    nights = closer.nights
                    break
        names = ", ".join(rs.label for rs in rule_sets)
        if nights is None:
            nights = tuple(Night(d.sleep_m, i, "keep") for i, d in enumerate(plan.days))
            reasons.append(search.reason or f"no itinerary meeting {names} was found")
        else:
            need = len(nights)
            if search.reason == "fixed" or (search.reason == "limit" and any(d.fixed for d in plan.days)):
                moved = [f"day {d.day}" for d in plan.days if d.fixed]
                reasons.append(f"the fixed day(s) {', '.join(moved)} cannot keep their number: meeting "
                               f"{names} needs {need - len(plan.days)} more day(s) before them than "
                               "can be made up by dropping days without gain.")
            if max_days is not None and need > max_days:
                reasons.append(f"the day limit of {max_days} days: meeting {names} needs {need} days.")
            if not reasons:
                reasons.append(search.reason or "no repair within the limits")
            notes.append("The closest plan shown meets the rules but not the limits above.")
    plan_text, day_map = _expedition_text(text, plan, nights)
    repaired = load_plan_text(plan_text, "<repaired>")
    misses_text = []
    if goal is not None:
        nights, misses_text, ok = _meet_goal(plan, text, nights, goal, allow_oxygen, members, seed, progress)
        plan_text, day_map = _expedition_text(text, plan, nights)
        repaired = load_plan_text(plan_text, "<repaired>")
        if not ok:
            found = False
            reasons += misses_text
    return Repair("expedition", found, repaired, plan_text, _sentences(plan, nights, day_map),
                  added_days=len(nights) - len(plan.days), reasons=reasons, goal=goal,
                  goal_misses=misses_text, states=search.states, complete=search.complete, notes=notes)


def _combine_when(a: str | None, b: str) -> str:
    return b if a is None or a == b else "all"


def _oxygen_of(plan, night: Night) -> tuple[float, str | None]:
    """(flow, when) of a night's oxygen: the repair's, else the plan's (flow 0 when none or FiO2 only)."""
    if night.oxygen_flow_l_min is not None:
        return night.oxygen_flow_l_min, night.oxygen_when
    if night.source is not None and plan.days[night.source].oxygen is not None:
        o = plan.days[night.source].oxygen
        return (o.flow_l_min or 0.0), o.when
    return 0.0, None


def _meet_goal(plan, text, nights, goal, allow_oxygen, members, seed, progress=None):
    """Raise planned oxygen on every day that misses the goal by one step of the flow ladder, then evaluate again.

    Flows only rise, so this ends within the ladder's length of rounds.  Returns (nights, reasons, met).
    """
    from altox.plan.profile import load_plan_text

    nights = list(nights)
    for _ in range(len(FLOW_LADDER_L_MIN) + 2):
        plan_text, _ = _expedition_text(text, plan, tuple(nights))
        misses = _goal_misses(load_plan_text(plan_text, "<repaired>"), goal, members, seed, progress)
        if not misses:
            return tuple(nights), [], True
        stuck = []
        for (day_i, need), (value, name) in sorted(misses.items()):
            x = nights[day_i]
            if x.source is not None and plan.days[x.source].fixed:
                stuck.append(f"the goal ({goal.describe()}) is missed by {name} on day {day_i + 1}, "
                             f"{value:.0f} % at the {goal.percentile:g}th percentile, and that day is fixed.")
                continue
            flow, when = _oxygen_of(plan, x)
            covered = when == need or when == "all"
            higher = [q for q in FLOW_LADDER_L_MIN if q > flow + 1e-9 or (not covered and q >= flow - 1e-9)]
            if not allow_oxygen or not higher:
                why = ("adding oxygen is not allowed (--no-oxygen)" if not allow_oxygen else
                       f"even {_fmt_flow(FLOW_LADDER_L_MIN[-1])} of oxygen does not reach it")
                moment = {"sleep": "asleep", "climb": "at the high point", "all": "awake"}[need]
                stuck.append(f"the goal ({goal.describe()}) is missed by {name} on day {day_i + 1} ({moment}): "
                             f"{value:.0f} % at the {goal.percentile:g}th percentile, and {why}.")
                continue
            nights[day_i] = replace(x, oxygen_flow_l_min=higher[0], oxygen_when=_combine_when(when, need))
        if stuck:
            return tuple(nights), stuck, False
    return tuple(nights), ["the goal was still missed after raising the oxygen through every step"], False


# -- before and after ------------------------------------------------------------------------------
def _side(plan) -> dict:
    """What the summary shows of one plan: its length, worst moment per person, findings, oxygen."""
    from altox.evaluation.evaluate import evaluate_plan
    from altox.evaluation.oxygen_plan import oxygen_review

    result = evaluate_plan(plan)
    broken = [f for f in result.findings if f.status in BROKEN]
    cyl = oxygen_review(plan, result)["cylinders"]
    worst = []
    for m in result.members:
        leg = result.legs[m["min_sao2_leg"] - 1]
        worst.append({"name": m["name"], "sao2_pct": m["min_sao2_pct"], "leg": m["min_sao2_leg"],
                      "where": leg["label"], "time_limited": m.get("time_limited")})
    if plan.kind == "expedition":
        length = {"days": len(plan.days)}
    else:
        length = {"legs": len(plan.legs), "hours": float(plan.total_duration_h)}
    return {**length, "worst": worst,
            "not_met": [{"rule_set": f.rule_set_id, "section": f.section, "message": f.message} for f in broken],
            "met_or_planned": sum(1 for f in result.findings if f.status not in BROKEN),
            "oxygen_litres": float(cyl["litres_total"]) if cyl else 0.0}


def not_checked(plan) -> list[dict]:
    """Provisions of the applied rule sets that altox does not check (listed, never counted as met)."""
    from altox.evaluation.evaluate import _rule_sets

    return [{"rule_set": rs.id, "section": ne.section, "reason": ne.reason}
            for rs in _rule_sets(plan) for ne in rs.not_encoded]


def compare(original, repaired, goal: Goal | None = None, *, members: int | None = None,
            seed: int | None = None) -> dict:
    """Side-by-side summary of two plans (``before`` and ``after``) and the provisions not checked.

    With a ``goal``, each side also has ``goal_worst`` (:func:`goal_worst`, planned oxygen applied).
    """
    out = {"before": _side(original), "after": _side(repaired), "not_checked": not_checked(repaired)}
    if goal is not None and original.kind == "expedition":
        out["before"]["goal_worst"] = goal_worst(original, goal, members, seed)
        out["after"]["goal_worst"] = goal_worst(repaired, goal, members, seed)
    return out


def repair_to_dict(original, repair: Repair, summary: dict) -> dict:
    """JSON-ready mapping of a repair."""
    out = {"plan": original.name, "kind": repair.kind, "source": original.source_path,
           "found": repair.found, "changes": repair.changes, "reasons": repair.reasons}
    if repair.kind == "expedition":
        out["added_days"] = repair.added_days
    else:
        out["changed_legs"] = repair.changed_legs
        out["altitude_change_ft"] = repair.altitude_change_ft
    if repair.goal is not None:
        out["goal"] = repair.goal.describe()
    out.update({"summary": summary, "search": {"states": repair.states, "complete": repair.complete},
                "notes": repair.notes, "plan_yaml": repair.text})
    return out
