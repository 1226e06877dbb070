"""Oxygen and decompression review of an evaluated plan, as plain dicts (JSON-ready, no printing).

* :func:`oxygen_review` ``(plan, result)``: the plan's oxygen days or legs (flow, FiO2 and
  equivalent altitude on the assumed device, litres per person), the cylinders per person and
  in total with the planning margin, a packing list, and for the legs above the review target
  what would hold it (``oxygen_devices.yaml``, ``review_targets``).
* :func:`decompression_review` ``(plan, result)``: for each airborne leg of a pressurized
  flight above 10,000 ft, the time of useful consciousness at the aircraft's altitude, the
  time to descend to 14,000 and 10,000 ft at the plan's emergency descent rate, and the oxygen
  each occupant uses on the way down (:mod:`altox.evaluation.decompression`).

``plan`` is a loaded plan (:func:`altox.plan.profile.load_plan`), ``result`` its
:class:`altox.evaluation.evaluate.PlanResult`.  Assumptions (devices, activities) come from the data
files and are listed in each review's ``assumptions``.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from altox.evaluation import oxygen as ox
from altox.guidance.cautions import CAUTION

__all__ = ["oxygen_review", "decompression_review"]


def _f(x):
    """Python float (or None for NaN/inf) of a numpy scalar."""
    v = float(np.asarray(x))
    return v if math.isfinite(v) else None


def _length_m(text, field):
    from altox.units import parse_quantity

    return parse_quantity(text, "length", field=field)


def _cylinder_block(kind: str, litres_by_person: dict, margin=None) -> dict:
    planning = ox.load_data("cylinders")["planning"]
    m = float(planning["safety_margin_fraction"]) if margin is None else float(margin)
    cyl = ox.get_cylinder(planning["default_cylinder"][kind])
    usable = float(ox.usable_gas_l(cyl["water_l"], cyl["fill_bar"], cyl["residual_bar"]))
    people = []
    for name, litres in litres_by_person.items():
        n = int(ox.cylinders_needed(litres, usable, m))
        people.append({"name": name, "litres": litres, "cylinders": n})
    return {
        "cylinder": cyl["id"], "label": cyl["label"], "water_l": cyl["water_l"],
        "fill_bar": cyl["fill_bar"], "residual_bar": cyl["residual_bar"],
        "gas_l": float(ox.gas_volume_l(cyl["water_l"], cyl["fill_bar"])), "usable_l": usable,
        "mass_full_kg": cyl.get("mass_full_kg"), "source": cyl["source"], "basis": cyl["basis"],
        "safety_margin_fraction": m, "margin_source": planning["source"],
        "per_person": people,
        "litres_total": float(sum(p["litres"] for p in people)),
        "cylinders_total": int(sum(p["cylinders"] for p in people)),
    }


def _device_for_cabin(cabin_ft: float, start: str | None = None) -> str:
    order = ox.load_data("oxygen_devices")["plan_defaults"]["flight"]["by_cabin_altitude"]
    if start is not None and start in order:
        order = order[order.index(start):]
    for dev_id in order:
        ceiling = ox.get_device(dev_id).get("ceiling_ft")
        if ceiling is None or cabin_ft <= float(ceiling):
            return dev_id
    return order[-1]


def _review_target_m(kind: str) -> tuple[float, dict]:
    t = ox.load_data("oxygen_devices")["review_targets"][kind]
    m = _length_m(t["equivalent_altitude"], f"review_targets.{kind}.equivalent_altitude")
    if kind == "flight":  # a pressure altitude: the equivalent altitude is geometric ISA
        from altox.evaluation.decompression import _geometric_of_pressure_altitude_m

        m = _geometric_of_pressure_altitude_m(m)
    return m, t


def _at_once(rows) -> int:
    """Most people on oxygen at the same time: the groups of one day or leg add up (crew and
    passengers both on oxygen on a leg count together), the largest day or leg counts."""
    per_leg: dict = {}
    for row in rows:
        per_leg[row["leg"]] = per_leg.get(row["leg"], 0) + int(row["people"])
    return max(per_leg.values(), default=0)


# -- oxygen review ----------------------------------------------------------------------------
def oxygen_review(plan, result) -> dict:
    """Oxygen review of an evaluated plan.

    Parameters
    ----------
    plan : ExpeditionPlan or FlightPlan
        The loaded plan.
    result : PlanResult
        Its evaluation (:func:`altox.evaluation.evaluate.evaluate_plan`).

    Returns
    -------
    dict
        ``kind``, ``planned`` (one row per oxygen day or leg), ``cylinders`` (type, usable gas,
        per person and total counts with the margin; ``None`` when nothing is planned),
        ``packing_list`` (list of ``{'item', 'quantity', 'note'}``), ``target`` and
        ``would_need`` (legs above the review target: FiO2 and flow that would hold it, or the
        ceiling of 100 % oxygen), ``assumptions``, ``notes`` and ``caution``.
    """
    if plan.kind == "expedition":
        planned, litres, assumptions = _expedition_planned(plan)
    else:
        planned, litres, assumptions = _flight_planned(plan, result)
    target_m, target = _review_target_m(plan.kind)
    would = _would_need(plan, result, target_m)
    cyl = _cylinder_block(plan.kind, litres) if planned else None
    packing = []
    notes = []
    if cyl is not None:
        packing.append({"item": cyl["label"], "quantity": cyl["cylinders_total"],
                        "note": f"{cyl['usable_l']:,.0f} L usable each; includes a "
                                f"{cyl['safety_margin_fraction']:.0%} margin"})
        devs = sorted({row["device"] for row in planned})
        for dev_id in devs:
            packing.append({"item": ox.get_device(dev_id)["label"],
                            "quantity": _at_once(row for row in planned if row["device"] == dev_id),
                            "note": "one per person using it; carry spares"})
        packing.append({"item": "regulator / flowmeter for the cylinder type", "quantity": _at_once(planned),
                        "note": "one per person on oxygen at the same time"})
        packing.append({"item": "pulse oximeter", "quantity": 1, "note": "titrate flow to SpO2, not to this plan"})
    else:
        notes.append("The plan asks for no supplemental oxygen.")
    if any(not row["device_ok"] for row in planned):
        notes.append("On some oxygen days or legs the assumed device cannot give the planned oxygen; see the rows marked.")
    return {
        "plan": plan.name, "kind": plan.kind, "planned": planned, "cylinders": cyl,
        "packing_list": packing,
        "target": {"equivalent_altitude_m": target_m, "source": target["source"], "basis": target["basis"]},
        "would_need": would, "assumptions": assumptions, "notes": notes, "caution": CAUTION,
    }


def _expedition_planned(plan):
    from altox.physiology.atmosphere import barometric_pressure
    from altox.plan.timeline import NIGHT_END_H, NIGHT_START_H

    defaults = ox.load_data("oxygen_devices")["plan_defaults"]["expedition"]
    acts = ox.load_data("activity_ventilation")["plan_defaults"]
    names = [m.name for m in plan.party] or ["reference adult"]
    rows, litres = [], {n: 0.0 for n in names}
    night_h = (24.0 - NIGHT_START_H) + NIGHT_END_H
    for i, day in enumerate(plan.days):
        o = day.oxygen
        if o is None:
            continue
        atm = day.atmosphere or plan.atmosphere
        if o.when == "sleep":
            alt, hours = day.sleep_m, night_h
        elif o.when == "climb":
            alt, hours = (day.high_m if day.high_m is not None else day.sleep_m), (day.hours_high_h or 0.0)
        else:
            alt, hours = max(day.sleep_m, day.high_m or day.sleep_m), 24.0
        pb = (day.pressure_mmhg if (day.pressure_mmhg is not None and o.when == "sleep")
              else float(barometric_pressure(alt, atm)))
        rows.append(_planned_row(
            leg=i + 1, label=f"day {day.day}", where_m=alt, where_ft=None, pb=pb, hours=hours,
            people=len(names), device=defaults[o.when], activity=acts[o.when], flow=o.flow_l_min,
            fio2=o.fio2, days=float(i), atmosphere=atm, when=o.when))
        for n in names:
            litres[n] += rows[-1]["litres_per_person"]
    assumptions = [
        f"Devices assumed: {', '.join(f'{k}: {v}' for k, v in defaults.items())}.",
        f"Activities assumed: {', '.join(f'{k}: {acts[k]}' for k in ('sleep', 'climb', 'all'))}.",
        f"Oxygen 'sleep' is the night, {night_h:g} h; 'climb' the hours at the high point; 'all' 24 h.",
        "Everyone in the party breathes the day's oxygen (the plan format gives it to the whole party).",
        "Acclimatization for ventilation: the days since the start of the plan (an upper bound).",
    ]
    return rows, litres, assumptions


def _planned_row(*, leg, label, where_m, where_ft, pb, hours, people, device, activity, flow, fio2, days,
                 atmosphere, when):
    dev = ox.get_device(device)
    notes = []
    if dev["kind"] != "continuous":
        # a demand regulator: the flow is the mean consumption for the FiO2 asked (or 100 %)
        f_use = fio2 if fio2 is not None else 1.0
        n = float(ox.inspired_gas_l_min(activity, pb, f_use, days=days))
        q = n * (f_use - ox.AIR_FIO2) / (1.0 - ox.AIR_FIO2)
        achieved, ok = f_use, True
        if flow is not None:
            notes.append("a demand regulator: the planned flow is ignored, consumption follows breathing")
    elif flow is not None:
        q = float(flow)
        got = ox.device_fio2(device, q, pb, activity, days=days, atmosphere=atmosphere)
        achieved = float(got["fio2"])
        ok = not bool(got["flow_outside_device_range"])
        if not ok:
            notes.append(f"{q:g} L/min is outside the {dev['label']}'s range "
                         f"({dev.get('min_flow_l_min', 0):g}-{dev.get('max_flow_l_min', 0):g} L/min)")
    else:
        max_fio2 = float(dev["max_fio2"])
        f_use = min(float(fio2), max_fio2)
        n = float(ox.inspired_gas_l_min(activity, pb, f_use, days=days))
        q = float(ox.flow_for_fio2(f_use, n, float(dev["delivery_fraction"])))
        ok = float(fio2) <= max_fio2 + 1e-12 and q <= float(dev.get("max_flow_l_min", np.inf)) + 1e-9
        achieved = f_use
        if not ok:
            notes.append(f"the {dev['label']} cannot give FiO2 {float(fio2):.2f} here")
    r = ox._assess(pb, achieved, days=days, atmosphere=atmosphere)
    ceiling = dev.get("ceiling_ft")
    if where_ft is not None and ceiling is not None and where_ft > float(ceiling):
        notes.append(f"cabin above the {dev['label']}'s usual ceiling of {float(ceiling):,.0f} ft")
        ok = False
    return {
        "leg": leg, "label": label, "when": when, "altitude_m": _f(where_m) if where_m is not None else None,
        "cabin_ft": where_ft, "pb_mmhg": _f(pb), "hours": float(hours), "people": int(people),
        "device": device, "activity": activity, "flow_l_min": _f(q), "fio2_planned": fio2,
        "fio2_achieved": _f(achieved), "equivalent_altitude_m": _f(r["equivalent_altitude_m"]),
        "sao2_pct": _f(r["sao2_pct"]), "litres_per_person": float(q) * float(hours) * 60.0,
        "device_ok": bool(ok), "notes": notes,
    }


def _flight_planned(plan, result):
    from altox.physiology.atmosphere import pressure_altitude_ft_to_mmhg

    d = ox.load_data("oxygen_devices")["plan_defaults"]["flight"]
    acts = ox.load_data("activity_ventilation")["plan_defaults"]
    target_m, _ = _review_target_m("flight")
    groups = {
        "crew": [o.name for o in plan.aboard if o.role == "crew"] or ["crew"],
        "patient": [o.name for o in plan.aboard if o.role == "patient"] or ["patient"],
        "all": [o.name for o in plan.aboard] or ["reference adult"],
    }
    role_of = {o.name: o.role for o in plan.aboard}
    litres: dict[str, float] = {}
    rows = []
    for leg_res, leg in zip(result.legs, plan.legs):
        if leg.oxygen == "none":
            continue
        cabin_ft = float(leg_res["max_cabin_pressure_altitude_ft"])
        pb = float(pressure_altitude_ft_to_mmhg(cabin_ft))
        who = groups[leg.oxygen]
        for role_set, names in _split_by_role(who, role_of, leg.oxygen).items():
            if role_set == "patient":
                device, activity = d["patient"], acts["flight_patient"]
            else:
                device = _device_for_cabin(cabin_ft)
                activity = acts["flight_crew"] if role_set == "crew" else acts["flight_passenger"]
            flow, fio2 = None, leg.fio2
            if fio2 is None:
                if role_set == "patient":
                    from altox.plan.profile import parse_flow

                    flow = parse_flow(d["patient_flow"], field="plan_defaults.flight.patient_flow")
                else:
                    t = ox.oxygen_for_target(pb, device, activity, equivalent_altitude_m=target_m)
                    fio2 = max(float(t["fio2_needed"]), ox.AIR_FIO2)
                    if not t["oxygen_needed"]:
                        dev = ox.get_device(device)
                        flow = float(dev.get("min_flow_l_min", 0.0)) if dev["kind"] == "continuous" else None
                        fio2 = None if flow is not None else fio2
            row = _planned_row(leg=leg_res["leg"], label=leg_res["label"], where_m=None, where_ft=cabin_ft,
                               pb=pb, hours=leg.duration_h, people=len(names), device=device,
                               activity=activity, flow=flow, fio2=fio2, days=0.0, atmosphere="isa",
                               when=leg.oxygen if role_set == leg.oxygen else f"{leg.oxygen} ({role_set})")
            row["who"] = names
            rows.append(row)
            for n in names:
                litres[n] = litres.get(n, 0.0) + row["litres_per_person"]
    assumptions = [
        "Devices: patients on a " + ox.get_device(d["patient"])["label"] + "; crew and passengers on the "
        "first of " + ", ".join(d["by_cabin_altitude"]) + " rated for the cabin altitude.",
        "Where a leg gives no FiO2, crew and passengers get what holds the review target; patients "
        f"get {d['patient_flow']} ({d['patient_flow_basis']}).",
        f"Activities: crew {acts['flight_crew']}, passengers and patients {acts['flight_passenger']}.",
    ]
    return rows, litres, assumptions


def _split_by_role(names, role_of, oxygen):
    if oxygen != "all":
        return {oxygen: names}
    out: dict[str, list] = {}
    for n in names:
        role = role_of.get(n, "passenger")
        out.setdefault("patient" if role == "patient" else "crew" if role == "crew" else "passenger", []).append(n)
    return out


def _would_need(plan, result, target_m):
    """Legs above the review target: FiO2, flow on the default device, or the 100 % ceiling."""
    if plan.kind == "expedition":
        defaults = ox.load_data("oxygen_devices")["plan_defaults"]["expedition"]
        acts = ox.load_data("activity_ventilation")["plan_defaults"]
        atm = plan.atmosphere
        pick = lambda leg: ((defaults["climb"], acts["climb"]) if leg.get("activity") == "climb"  # noqa: E731
                            else (defaults["sleep"], acts["sleep"]))
    else:
        acts = ox.load_data("activity_ventilation")["plan_defaults"]
        atm = "isa"
        pick = lambda leg: (_device_for_cabin(leg["max_cabin_pressure_altitude_ft"]), acts["flight_crew"])  # noqa: E731
    groups: dict[tuple, list] = {}
    for i, leg in enumerate(result.legs):
        groups.setdefault(pick(leg), []).append(i)
    rows: list = [None] * len(result.legs)
    for (device, activity), idx in groups.items():
        pb = np.array([result.legs[i]["barometric_mmhg"] for i in idx])
        days = np.array([float(i) if plan.kind == "expedition" else 0.0 for i in idx])
        r = ox.oxygen_for_target(pb, device, activity, atmosphere=atm, days=days, equivalent_altitude_m=target_m)
        arr = {k: np.atleast_1d(v) for k, v in r.items() if not isinstance(v, str)}
        for j, i in enumerate(idx):
            if not bool(arr["oxygen_needed"][j]):
                continue
            leg = result.legs[i]
            rows[i] = {
                "leg": leg["leg"], "label": leg["label"], "pb_mmhg": _f(pb[j]),
                "device": device, "activity": activity,
                "fio2_needed": _f(arr["fio2_needed"][j]), "reachable": bool(arr["reachable"][j]),
                "flow_l_min": _f(arr["flow_l_min"][j]), "device_reaches_target": bool(arr["device_reaches_target"][j]),
                "pressure_breathing": bool(arr["pressure_breathing"][j]),
                "ceiling_altitude_m": _f(arr["ceiling_altitude_m"][j]),
                "ceiling_pressure_altitude_ft": _f(arr["ceiling_pressure_altitude_ft"][j]),
            }
    return [r for r in rows if r is not None]


# -- decompression review ---------------------------------------------------------------------
@lru_cache(maxsize=256)
def _descent(from_ft, to_ft, rate, device, activity):
    from altox.evaluation.decompression import descent_oxygen_l

    return descent_oxygen_l(from_ft, to_ft, rate, device=device, activity=activity)


def decompression_review(plan, result) -> dict:
    """Decompression review of an evaluated flight plan.

    Returns
    -------
    dict
        ``applicable`` (False for expeditions and unpressurized aircraft, with ``reason``),
        ``descent_rate_ft_min`` (the plan's; None when it gives none: times and oxygen are then
        not computed), ``oxygen_free_ft`` (per group, with the rule it comes from), ``legs``
        (per airborne leg above the lower checkpoint: ``aircraft_ft``, ``tuc_min_s``,
        ``tuc_max_s``, ``tuc_rapid_min_s``, ``tuc_position``, ``minutes_to`` per checkpoint,
        ``crew`` and ``passengers`` descent oxygen per occupant, ``oxygen_total_l``),
        ``worst_leg``, ``convention``, ``tuc_caution``, ``notes``, ``caution``.
    """
    from altox.evaluation.decompression import (certification_descent_oxygen_l, certification_flow, descent_convention,
                                                descent_time_min, oxygen_free_altitudes_ft, tuc_range_s, tuc_table)

    base = {"plan": plan.name, "kind": plan.kind, "caution": CAUTION}
    if plan.kind != "flight":
        return {**base, "applicable": False, "reason": "not a flight", "legs": []}
    if not plan.aircraft.pressurized:
        return {**base, "applicable": False, "legs": [],
                "reason": "unpressurized aircraft: the cabin is always at the aircraft's altitude"}
    conv = descent_convention()
    checkpoints = [float(c) for c in conv["checkpoints_ft"]]
    rate = plan.emergency_descent_rate_ft_min
    rule_sets = _rule_sets(plan, result)
    free = oxygen_free_altitudes_ft(rule_sets)
    crew_n = sum(1 for o in plan.aboard if o.role == "crew")
    pax_n = sum(1 for o in plan.aboard if o.role != "crew")
    notes = []
    if rate is None:
        notes.append("The plan gives no emergency_descent_rate: descent times and descent oxygen are not computed.")
    if not plan.aboard:
        notes.append("The plan lists nobody aboard: oxygen is given per occupant only.")
    legs = []
    tuc_rows = [(leg_res, float(leg_res["aircraft_pressure_altitude_ft"])) for leg_res, leg in
                zip(result.legs, plan.legs) if leg.phase != "ground"
                and float(leg_res["aircraft_pressure_altitude_ft"]) > min(checkpoints)]
    if tuc_rows:
        tuc = tuc_range_s(np.array([a for _, a in tuc_rows]))
        tuc = {k: np.atleast_1d(v) for k, v in tuc.items()}
    for j, (leg_res, alt_ft) in enumerate(tuc_rows):
        row = {"leg": leg_res["leg"], "label": leg_res["label"], "aircraft_ft": alt_ft,
               "tuc_min_s": _f(tuc["min_s"][j]), "tuc_max_s": _f(tuc["max_s"][j]),
               "tuc_rapid_min_s": _f(tuc["rapid_min_s"][j]), "tuc_position": int(tuc["position"][j]),
               "minutes_to": {}, "crew": None, "passengers": None, "oxygen_total_l": None}
        if rate is not None:
            for c in checkpoints:
                row["minutes_to"][f"{c:.0f}"] = float(descent_time_min(alt_ft, c, rate))
            crew_dev = _device_for_cabin(alt_ft, conv["crew_device"])
            acts = ox.load_data("activity_ventilation")["plan_defaults"]
            row["crew"] = dict(_descent(round(alt_ft), free["crew"], float(rate), crew_dev, acts["flight_crew"]))
            row["passengers"] = dict(_descent(round(alt_ft), free["passengers"], float(rate),
                                              conv["passenger_device"], acts["flight_passenger"]))
            # the litres shown: the certification standard's minimum flow for each group
            row["crew_cert"] = certification_descent_oxygen_l(round(alt_ft), free["crew"], float(rate), "crew")
            row["passengers_cert"] = certification_descent_oxygen_l(round(alt_ft), free["passengers"],
                                                                    float(rate), "passengers")
            row["oxygen_total_l"] = (row["crew_cert"]["oxygen_l"] * max(crew_n, 0)
                                     + row["passengers_cert"]["oxygen_l"] * max(pax_n, 0))
        legs.append(row)
    worst = max(legs, key=lambda r: r["aircraft_ft"]) if legs else None
    cert = certification_flow()
    if any(r.get("crew_cert") and (r["crew_cert"]["beyond_standard"] or r["passengers_cert"]["beyond_standard"])
           for r in legs):
        notes.append(f"(!) Above {cert['top_ft']:,.0f} ft, the top of {cert['standard']}, or where 100 % oxygen "
                     "cannot reach its figure, the litres count 100 % oxygen: pressure breathing or a faster "
                     "descent is needed there.")
    carriage = _carriage_notes(plan, rule_sets, worst)
    notes += carriage
    t = tuc_table()
    return {**base, "applicable": True, "descent_rate_ft_min": rate, "oxygen_free_ft": free,
            "rule_sets": [rs.id for rs in rule_sets], "crew_count": crew_n, "passenger_count": pax_n,
            "checkpoints_ft": checkpoints, "legs": legs, "worst_leg": worst["leg"] if worst else None,
            "convention": {"rule": conv["rule"], "basis": conv["basis"], "crew_device": conv["crew_device"],
                           "passenger_device": conv["passenger_device"], "reaction_min": conv["reaction_min"]},
            "certification_basis": {"standard": cert["standard"], "crew": cert["crew_demand"]["text"],
                                    "crew_section": cert["crew_demand"]["section"],
                                    "passengers": cert["passengers"]["text"],
                                    "passengers_section": cert["passengers"]["section"], "model": cert["model"]},
            "tuc_interpolation": t["interpolation"], "tuc_caution": t["caution"],
            "tuc_rapid_source": t["rapid_decompression_source"], "notes": notes}


def _carriage_notes(plan, rule_sets, worst) -> list[str]:
    """The operating rules' carriage (supply rules) beside the worst leg's descent oxygen."""
    if worst is None or not worst.get("crew_cert"):
        return []
    out = []
    for rs in rule_sets:
        for th in rs.thresholds:
            if th.check != "supply" or worst["aircraft_ft"] <= th.lower_ft:
                continue
            stated = ("the plan states " + f"{plan.oxygen_carried_h * 60:.0f} min" if plan.oxygen_carried_h is not None
                      else "the plan does not state the oxygen carried")
            out.append(f"Carriage: {rs.label} {th.section} asks for at least {th.supply} of oxygen for "
                       f"{th.applies_to} above {th.value}; the descent from leg {worst['leg']} needs oxygen for "
                       f"{worst['crew_cert']['minutes']:.1f} min (crew) and "
                       f"{worst['passengers_cert']['minutes']:.1f} min (passengers) at the standard's flow; "
                       f"{stated} for each occupant.")
    return out


def _rule_sets(plan, result):
    from altox.guidance import load_rule_set

    out = []
    for rid in result.rule_sets:
        try:
            out.append(load_rule_set(rid))
        except Exception:  # a rule file given by path under its id: load it from the plan
            if plan.rule_file_path is not None:
                out.append(load_rule_set(plan.rule_file_path))
    return out
