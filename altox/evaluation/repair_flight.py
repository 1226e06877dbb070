"""Repair a flight profile: the least departure from the filed profile that meets every applied rule.

Search space, per leg that reaches above the lowest threshold of an applied rule set (legs
entirely below every threshold cannot change a verdict):

* oxygen: who breathes it, only ever more people (``none`` -> ``crew`` -> ``all``);
* unpressurized climb legs: end lower, at a threshold of the rule sets below the planned
  altitude (the cabin is then "not above" it), or stay at the altitude the climb starts from
  (the leg becomes a cruise);
* pressurized legs: a stated cabin altitude at a threshold below the cabin the aircraft would
  have, when the aircraft's maximum differential allows it (the plan's own validation decides).

Every combination of up to :data:`MAX_CHANGED` legs is tried (exhaustive within that bound)
and judged by the same checker as ``altox plan`` (:func:`altox.evaluation.evaluate.guidance_findings`).
Cost, in order: legs whose flight changes (a leg after a lowered climb counts, its altitude
changes too), total altitude change over those legs [ft], person-hours on oxygen.
"""

from __future__ import annotations

import copy
import itertools

from altox.errors import AltoxError, ProfileError
from altox.evaluation.repair_common import BROKEN, Repair, _dump, _put_after, _q, _round_trip
from altox.units import M_PER_FT

#: most legs a flight repair may change (the search is exhaustive up to this)
MAX_CHANGED = 3
_MORE_OXYGEN = {"none": ("crew", "all"), "patient": ("all",), "crew": ("all",), "all": ()}


def _ft(x_ft: float) -> str:
    return f"{x_ft:,.0f} ft"


def _thresholds_ft(rule_sets) -> list[float]:
    return sorted({th.lower_ft for rs in rule_sets for th in rs.thresholds}
                  | {th.top_ft for rs in rule_sets for th in rs.thresholds if th.top_ft is not None})


def _leg_options(plan, i, thresholds_ft, lowest_ft, cabin_ft_max):
    """Alternatives for leg ``i``: dicts of changed keys (``oxygen``, ``altitude_ft``, ``cruise``, ``cabin_ft``)."""
    leg = plan.legs[i]
    (start_m, end_m) = plan.leg_altitudes_m()[i]
    start_ft, end_ft = start_m / M_PER_FT, end_m / M_PER_FT
    if leg.phase == "ground" or max(start_ft, end_ft) <= lowest_ft + 0.01:   # the cabin is never above the aircraft
        return []
    shapes = [{}]
    if leg.phase == "climb":
        ends = set(thresholds_ft)
        if plan.aircraft.pressurized and plan.aircraft.max_differential_mmhg is not None:
            ends |= set(_aircraft_ft_for_cabins(plan, thresholds_ft))
        for t in sorted(ends):
            if start_ft + 1.0 < t < end_ft - 1.0:
                shapes.append({"altitude_ft": t})
        if i > 0 and plan.legs[i - 1].phase != "ground":
            shapes.append({"cruise": True})
    if plan.aircraft.pressurized:
        for t in thresholds_ft:
            if t < cabin_ft_max[i] - 1.0:
                shapes.append({"cabin_ft": t})
    out = []
    for shape in shapes:
        for ox in (None,) + _MORE_OXYGEN[leg.oxygen]:
            option = dict(shape)
            if ox is not None:
                option["oxygen"] = ox
            if option:
                out.append(option)
    return out


def _aircraft_ft_for_cabins(plan, cabins_ft):
    """Aircraft pressure altitudes [ft] at which the cabin, at the maximum differential, is at each of ``cabins_ft``.

    Rounded down to a whole 1,000 ft (a flight level or an altitude a pilot can fly).
    """
    from altox.physiology.atmosphere import pressure_altitude_ft, pressure_altitude_ft_to_mmhg

    out = []
    for c in cabins_ft:
        p_out = float(pressure_altitude_ft_to_mmhg(c)) - plan.aircraft.max_differential_mmhg
        if p_out > 50.0:
            out.append(1000.0 * (float(pressure_altitude_ft(p_out)) // 1000.0))
    return out


def _apply(legs, i, option, *, altitudes_ft=None):
    """Apply an option to leg ``i`` of a list of leg mappings (plain or round-trip); legs after a changed
    climb that state their altitude are given the new one."""
    leg = legs[i]
    new_end = None
    flow = getattr(leg, "fa", None) is not None and leg.fa.flow_style()

    def ft(x):      # as the demo plans write it: double-quoted inside {...}
        return _q(_ft(x), flow)

    if "oxygen" in option:
        if "oxygen" in leg or not hasattr(leg, "insert"):
            leg["oxygen"] = option["oxygen"]
        else:
            _put_after(leg, "oxygen", option["oxygen"], "altitude" if "altitude" in leg else "duration")
    if "altitude_ft" in option:
        leg["altitude"] = new_end = ft(option["altitude_ft"])
    if option.get("cruise"):
        leg["phase"] = "cruise"
        if "altitude" in leg:
            del leg["altitude"]
        new_end = ft(altitudes_ft[i][0]) if altitudes_ft is not None else None
    if "cabin_ft" in option:
        if "cabin" in leg or not hasattr(leg, "insert"):
            leg["cabin"] = ft(option["cabin_ft"])
        else:
            _put_after(leg, "cabin", ft(option["cabin_ft"]), "altitude" if "altitude" in leg else "duration")
    if new_end is not None:
        for later in legs[i + 1:]:
            if later.get("phase") in ("climb", "descent"):
                break
            if "altitude" in later:
                later["altitude"] = new_end


def _flown_ft(plan):
    """Per leg: (start, end) pressure altitude and the highest cabin altitude [ft]."""
    from altox.plan.timeline import expand

    import numpy as np

    tl = expand(plan)
    alts = [(a / M_PER_FT, b / M_PER_FT) for a, b in plan.leg_altitudes_m()]
    cabin = [float(np.max(tl.cabin_pressure_altitude_ft[tl.leg == i])) if np.any(tl.leg == i) else 0.0
             for i in range(len(plan.legs))]
    return alts, cabin


def _oxygen_person_hours(plan) -> float:
    crew = sum(1 for o in plan.aboard if o.role == "crew") or 1
    patients = sum(1 for o in plan.aboard if o.role == "patient") or 1
    everyone = len(plan.aboard) or 1
    per = {"none": 0, "crew": crew, "patient": patients, "all": everyone}
    return float(sum(leg.duration_h * per[leg.oxygen] for leg in plan.legs))


def _cost(original, alts0, cabin0, candidate):
    alts1, cabin1 = _flown_ft(candidate)
    changed, total = 0, 0.0
    for i, (a, b) in enumerate(zip(original.legs, candidate.legs)):
        d_alt = max(abs(alts1[i][0] - alts0[i][0]), abs(alts1[i][1] - alts0[i][1]),
                    abs(cabin1[i] - cabin0[i]))
        if d_alt > 1.0 or a.oxygen != b.oxygen or a.phase != b.phase or \
                a.cabin_pressure_altitude_m != b.cabin_pressure_altitude_m:
            changed += 1
            total += d_alt if d_alt > 1.0 else 0.0
    return changed, round(total, 1), round(_oxygen_person_hours(candidate), 6)


def repair_flight(plan, text, *, goal=None, progress=None) -> Repair:
    """The least departure from a flight profile that meets every applied aviation rule.

    Parameters
    ----------
    plan : FlightPlan
        The loaded plan.
    text : str
        Its YAML text (the repaired plan keeps its comments).
    goal : Goal, optional
        Not available for flights (an error).
    progress : callable, optional
        ``progress(done, total)`` over the candidates.

    Returns
    -------
    Repair
    """
    from altox.evaluation.evaluate import _rule_sets, guidance_findings
    from altox.plan.profile import plan_from_data
    from altox.yamlload import parse_yaml

    if goal is not None:
        raise AltoxError("--goal: a goal is for expedition plans in this version; a flight is repaired "
                         "against its rule sets only.", field="--goal")
    rule_sets = [rs for rs in _rule_sets(plan) if rs.kind == "aviation"]
    data, _ = parse_yaml(text, "<plan>")
    thresholds = _thresholds_ft(rule_sets)
    lowest = min(thresholds) if thresholds else float("inf")
    alts0, cabin0 = _flown_ft(plan)
    options = {i: _leg_options(plan, i, thresholds, lowest, cabin0) for i in range(len(plan.legs))}
    options = {i: o for i, o in options.items() if o}

    def judge(choice):
        legs_data = copy.deepcopy(data["legs"])
        for i, option in choice:
            _apply(legs_data, i, option, altitudes_ft=alts0)
        cand_data = dict(data)
        cand_data["legs"] = legs_data
        try:
            cand = plan_from_data(cand_data, "<candidate>")
        except ProfileError:
            return None
        cand._source_path = plan.source_path      # a rule_file resolves as for the plan
        findings, _ = guidance_findings(cand, rule_sets)
        return cand, [f for f in findings if f.status in BROKEN]

    base = judge(())
    if base is not None and not base[1]:
        return Repair("flight", True, plan, text, [], states=1)
    # by the number of legs decided on; each decision changes its own leg, so once the best found
    # changes no more legs than that number, no larger combination can beat it
    levels = [[c for legs in itertools.combinations(sorted(options), k)
               for c in itertools.product(*[[(i, o) for o in options[i]] for i in legs])]
              for k in range(1, MAX_CHANGED + 1)]
    total = sum(len(level) for level in levels)
    best, best_cost, closest, states = None, None, None, 0
    for k, choice in ((k, c) for k, level in enumerate(levels, start=1) for c in level):
        if best_cost is not None and best_cost[0] < k:
            break
        if progress is not None and states % 20 == 0:
            progress(states, total)
        got = judge(choice)
        states += 1
        if got is None:
            continue
        cand, broken = got
        if closest is None or len(broken) < closest[2]:
            closest = (choice, cand, len(broken))
        if broken:
            continue
        cost = _cost(plan, alts0, cabin0, cand)
        if best_cost is None or cost < best_cost:
            best, best_cost = (choice, cand), cost
    if best is None:
        choice, cand, _n = closest if closest is not None else ((), plan, 0)
        found = False
        why = [f"no change of up to {MAX_CHANGED} legs (oxygen for more people, a lower climb, a lower "
               "cabin) meets every applied rule; still not met: " + "; ".join(
                   f"{f.rule_set_id} {f.section}" for f in (judge(choice) or (None, []))[1])]
    else:
        (choice, cand), found, why = best, True, []
    changed, total_ft, _ = _cost(plan, alts0, cabin0, cand)
    return Repair("flight", found, cand, _flight_text(text, choice, alts0), _flight_sentences(plan, choice),
                  changed_legs=changed, altitude_change_ft=total_ft, reasons=why, states=states,
                  notes=["altox does not know terrain, minimum altitudes, airspace or weather: a lower "
                         "climb or cruise must be checked against them before it is flown."]
                  if any(set(o) - {"oxygen"} for _, o in choice) else [])


def _flight_text(text, choice, altitudes_ft) -> str:
    y = _round_trip()
    doc = y.load(text)
    for i, option in choice:
        _apply(doc["legs"], i, option, altitudes_ft=altitudes_ft)
    return _dump(y, doc)


def _flight_sentences(plan, choice) -> list[str]:
    alts = plan.leg_altitudes_m()
    who = {"crew": "the crew", "all": "everyone aboard", "patient": "the patients"}
    out = []
    for i, option in choice:
        leg = plan.legs[i]
        start_ft, end_ft = alts[i][0] / M_PER_FT, alts[i][1] / M_PER_FT
        what = f"leg {i + 1} ({leg.phase})"
        if "altitude_ft" in option:
            out.append(f"{what}: climb to {_ft(option['altitude_ft'])} instead of {_ft(end_ft)}; the legs "
                       "after it keep that altitude until the next climb or descent.")
        if option.get("cruise"):
            out.append(f"{what}: stay at {_ft(start_ft)} instead of climbing to {_ft(end_ft)}.")
        if "cabin_ft" in option:
            out.append(f"{what}: hold the cabin at {_ft(option['cabin_ft'])}.")
        if "oxygen" in option:
            out.append(f"{what}: {who[option['oxygen']]} on supplemental oxygen (planned: {leg.oxygen}).")
    return out
