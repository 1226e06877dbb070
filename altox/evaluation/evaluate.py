"""Evaluate a plan: expand it to a timeline, run the physiology chain once over people x samples, check the guidance.

No printing here; :mod:`altox.present.render` and :mod:`altox.cli.main` present the result.

Why this module is long: it is the one place the physiology runs along a plan (people x samples in one call) and the per-leg and per-person summaries are built from that single evaluation.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from altox.evaluation.sampling import assess_along
from altox.physiology.gas_exchange import inspired_po2
from altox.physiology.atmosphere import barometric_pressure
from altox.units import M_PER_FT
from altox.physiology.validity import NO_STEADY_STATE, describe_samples

#: rule sets applied when a plan names none (documented in docs/profiles.md)
DEFAULT_RULES = {"expedition": ("wms-2024",), "flight": ("us-14cfr-91", "eu-nco")}
REFERENCE_PERSON = {"name": "reference adult", "age_y": 40.0, "hemoglobin_g_dl": 14.5}

#: per-sample and per-leg result keys taken from assess
PHYSIOLOGY_KEYS = ("barometric_mmhg", "inspired_po2_mmhg", "alveolar_pco2_mmhg", "alveolar_po2_mmhg",
                   "arterial_po2_mmhg", "arterial_ph", "sao2_pct", "o2_content_ml_dl")


@dataclass
class Person:
    name: str
    role: str
    age_y: float
    hemoglobin_g_dl: float
    home_altitude_m: float = 0.0
    history: tuple = ()
    acetazolamide: bool = False
    defaults: tuple = ()          # factors not given in the plan, taken from the reference adult


@dataclass
class PlanResult:
    """Everything computed for one plan."""

    name: str
    kind: str
    source: str | None
    people: list[Person]
    rule_sets: list[str]
    legs: list[dict]
    samples: dict                 # per-sample arrays of the reference person (plus timeline fields)
    member_samples: dict          # name -> {'sao2_pct': array, ...}
    members: list[dict]           # per-person summary
    findings: list                # rules.checker.Finding
    summary: dict
    notes: list[str] = field(default_factory=list)
    guidance_notes: list[str] = field(default_factory=list)  # rule sets not applied; what was not checked
    extras: dict = field(default_factory=dict)   # expected ranges, readings, oxygen and decompression reviews
    rule_file: object = None      # the plan's own rule file (a Path), if it names one


def _people(plan) -> list[Person]:
    default_hb = REFERENCE_PERSON["hemoglobin_g_dl"]
    default_age = REFERENCE_PERSON["age_y"]
    out = []
    source = plan.party if plan.kind == "expedition" else plan.aboard
    for m in source:
        defaults = tuple(k for k, v in (("age", m.age_y), ("hemoglobin", m.hemoglobin_g_dl)) if v is None)
        age = m.age_y if m.age_y is not None else default_age
        hb = m.hemoglobin_g_dl or default_hb
        if plan.kind == "expedition":
            out.append(Person(m.name, m.role or "member", age, hb, m.home_altitude_m or 0.0,
                              tuple(m.history), bool(m.acetazolamide), defaults))
        else:
            out.append(Person(m.name, m.role, age, hb, defaults=defaults))
    return out


#: the kind of rule set that fits each kind of plan
RULE_KIND_FOR_PLAN = {"flight": "aviation", "expedition": "expedition"}
_KIND_WORDS = {"aviation": "aviation oxygen rules", "expedition": "expedition guidance"}


def select_rule_sets(plan):
    """Load the rule sets a plan names (or the defaults for its kind) and keep those that fit it.

    Parameters
    ----------
    plan : ExpeditionPlan or FlightPlan

    Returns
    -------
    (applied, notes)
        ``applied``: the rule sets of the kind that fits the plan (aviation rules for a flight,
        expedition guidance for an itinerary), in the plan's order; ``notes``: one sentence for
        each rule set that does not fit and was therefore not applied.

    Raises
    ------
    ProfileError
        An unknown rule-set id or a faulty rule file (located in the plan where it can be), or
        no rule set that fits the plan's kind (naming the ones given), rather than a silent
        "0 not met".
    """
    from altox.errors import AltoxError, ProfileError
    from altox.guidance import load_rule_set

    path = plan.source_path or "<plan>"
    ids = list(plan.rules) or list(DEFAULT_RULES[plan.kind])
    sets = []
    for i, rid in enumerate(ids):
        try:
            sets.append(load_rule_set(rid))
        except ProfileError:
            raise
        except AltoxError as exc:
            line, col = plan.position_of("rules", i) if plan.rules else (None, None)
            where = ":".join(str(x) for x in (path, line, col) if x is not None)
            raise ProfileError(f"{where}: rules[{i}]: {exc.message}", path=path, line=line, column=col,
                               field=f"rules[{i}]", value=rid, expected=exc.expected) from None
    if plan.rule_file_path is not None:
        sets.append(load_rule_set(plan.rule_file_path))
    want = RULE_KIND_FOR_PLAN[plan.kind]
    applied = [rs for rs in sets if rs.kind == want]
    wrong = [rs for rs in sets if rs.kind != want]
    if not applied:
        named = "; ".join(f"{rs.id} ({_KIND_WORDS[rs.kind]})" for rs in wrong)
        defaults = ", ".join(DEFAULT_RULES[plan.kind])
        line, col = plan.position_of("rules") if plan.rules else (None, None)
        where = ":".join(str(x) for x in (path, line, col) if x is not None)
        raise ProfileError(f"{where}: rules: none of the rule sets applied fits a {plan.kind} plan: {named}. "
                           f"Checking it against them would say nothing; expected {_KIND_WORDS[want]}, "
                           f"e.g. {defaults} (the defaults for a {plan.kind}).", path=path, line=line,
                           column=col, field="rules", value=[rs.id for rs in wrong],
                           expected=f"{want} rule sets")
    notes = [f"Not applied: {rs.id} ({rs.label}) is {_KIND_WORDS[rs.kind]} and does not fit a "
             f"{plan.kind} plan; the plan was checked against "
             f"{', '.join(r.id for r in applied)} only." for rs in wrong]
    for rs in applied:
        for ne in rs.not_encoded:
            notes.append(f"Not checked: {rs.label} {ne.section}: {ne.reason}.".replace("..", "."))
    return applied, notes


def _rule_sets(plan):
    return select_rule_sets(plan)[0]


#: cabin altitudes [ft] whose time above is summed for a flight's summary
SUMMARY_CABIN_FT = (10000.0, 12500.0, 14000.0, 15000.0)


def guidance_findings(plan, rule_sets=None):
    """Findings of a plan against its rule sets, and (flights) the exact time above each cabin figure.

    Flights are checked on :func:`altox.plan.timeline.cabin_crossings`: the profile cut at the exact
    times the cabin crosses every threshold of the rule sets, so each verdict and each minute
    count is independent of ``sample_every``.  Expeditions are checked night by night.

    Returns
    -------
    (findings, cabin_hours)
        ``cabin_hours`` maps each of :data:`SUMMARY_CABIN_FT` to the hours with the cabin
        strictly above it (empty for an expedition).
    """
    from altox.guidance.checker import check_flight, check_flight_levels, check_itinerary, hours_above
    from altox.guidance.loader import FLIGHT_LEVEL_CHECKS
    from altox.plan.timeline import OXYGEN_NAMES, cabin_crossings

    rule_sets = _rule_sets(plan) if rule_sets is None else rule_sets
    findings, cabin_hours = [], {}
    if plan.kind == "flight":
        figures, levels = list(SUMMARY_CABIN_FT), []
        for rs in rule_sets:
            if rs.kind == "aviation":
                for th in rs.thresholds:
                    edges = [th.lower_ft] + ([th.top_ft] if th.top_ft is not None else [])
                    if th.check in FLIGHT_LEVEL_CHECKS:
                        levels += edges + ([th.unless.up_to_ft] if th.unless and th.unless.up_to_ft else [])
                    else:
                        figures += edges
        pieces = cabin_crossings(plan, figures, levels)
        use = np.array([{"patient": "none"}.get(OXYGEN_NAMES[int(c)], OXYGEN_NAMES[int(c)]) for c in pieces.oxygen])
        for rs in rule_sets:
            if rs.kind == "aviation":
                findings += check_flight(pieces.time_h, pieces.duration_h, pieces.cabin_pressure_altitude_ft,
                                         pieces.leg + 1, use, rs)
                findings += check_flight_levels(
                    pieces.duration_h, pieces.aircraft_pressure_altitude_ft, pieces.leg + 1, use, rs,
                    pressurized=plan.aircraft.pressurized, pilots_at_controls=plan.pilots_at_controls,
                    quick_donning=plan.quick_donning_masks, oxygen_carried_h=plan.oxygen_carried_h)
        cabin_hours = {x: hours_above(pieces.duration_h, pieces.cabin_pressure_altitude_ft, x)
                       for x in SUMMARY_CABIN_FT}
    else:
        day = np.array([d.day for d in plan.days])
        sleep = np.array([d.sleep_m for d in plan.days])
        high = np.array([d.high_m if d.high_m is not None else d.sleep_m for d in plan.days])
        for rs in rule_sets:
            if rs.kind == "expedition":
                findings += check_itinerary(day, sleep, high, plan.start_altitude_m, rs)
    return findings, cabin_hours


def evaluate_plan(plan, *, people_override=None) -> PlanResult:
    """Evaluate a loaded plan (:func:`altox.plan.profile.load_plan`).

    The reference person and every member are evaluated together: one call of
    :func:`altox.assess` over an array shaped (people, samples).  Expeditions carry
    acclimatization along the timeline (:func:`altox.physiology.acclimatization.acclimatization_history`),
    starting from each person's home altitude; a flight is acute exposure.

    Values are on air: planned supplemental oxygen is shown as a flag, and the physiology is
    what a person would have without it (the case that matters when the oxygen fails).
    """
    from altox.plan.timeline import expand
    from altox.physiology.acclimatization import acclimatization_history

    tl = expand(plan)
    people = people_override if people_override is not None else _people(plan)
    everyone = [Person(REFERENCE_PERSON["name"], "reference", REFERENCE_PERSON["age_y"],
                       REFERENCE_PERSON["hemoglobin_g_dl"])] + list(people)
    n = len(tl)
    pb = np.broadcast_to(np.asarray(tl.pb_mmhg, dtype=float), (len(everyone), n))
    if plan.kind == "expedition":
        home_m = np.clip([p.home_altitude_m for p in everyone], -500.0, 9000.0)
        home_pb = np.asarray(barometric_pressure(home_m, "mountain"))
        pio2 = np.asarray(inspired_po2(pb))
        f_v, f_r = acclimatization_history(pio2, tl.duration_h, np.asarray(inspired_po2(home_pb)))
    else:
        f_v = f_r = np.zeros((len(everyone), n))
    factors = _factor_keywords(plan, everyone, people_override is None, tl)
    res = assess_along(tl.time_h, altitude_m=np.broadcast_to(tl.altitude_m, (len(everyone), n)), pb_mmhg=pb,
                 atmosphere="isa" if plan.kind == "flight" else "mountain",
                 f_ventilatory=f_v, f_renal=f_r, **factors)

    dt = np.asarray(tl.duration_h, dtype=float)
    floor = plan.dose_floor_m
    # whether each value is a prediction (altox.physiology.validity): a value without a resting steady state
    # is never shown as a saturation
    status = np.asarray(res["validity_status"])
    reasons = np.asarray(res["validity_reasons"])
    pio2_all = np.asarray(res["inspired_po2_mmhg"])
    valid = status < NO_STEADY_STATE
    dose_kmh = np.cumsum(np.maximum(tl.altitude_m - floor, 0.0) / 1000.0 * dt)
    levels = sorted(plan.saturation_levels, reverse=True)
    # the subject of the tables, summary and chart: the first patient aboard, else the reference adult
    subject_k = next((j for j, p in enumerate(everyone) if j > 0 and p.role == "patient"), 0)
    ref = {k: res[k][subject_k] for k in PHYSIOLOGY_KEYS}
    on_oxygen = _subject_on_planned_oxygen(plan, tl, everyone[subject_k], res, subject_k, f_v, f_r, factors)
    below = {lvl: np.cumsum(dt * (ref["sao2_pct"] < 100 * lvl)) for lvl in levels}
    rule_sets, guidance_notes = select_rule_sets(plan)
    findings, cabin_hours = guidance_findings(plan, rule_sets)

    legs = []
    if plan.kind == "flight":
        from altox.plan.profile import flight_leg_altitudes

        leg_altitudes = flight_leg_altitudes(plan.legs, plan.departure_elevation_m)
    for i, label in enumerate(tl.leg_labels):
        mask = tl.leg == i
        if not mask.any():
            continue
        idx = np.flatnonzero(mask)
        awake = idx[~tl.sleeping[idx]]
        asleep = idx[tl.sleeping[idx]]
        worst = (awake if awake.size else idx)[np.argmin(ref["sao2_pct"][awake if awake.size else idx])]
        leg = {
            "leg": i + 1,
            "label": label,
            "start_h": float(tl.time_h[idx[0]]),
            "duration_h": float(dt[idx].sum()),
            "max_altitude_m": float(tl.altitude_m[idx].max()),
            "max_aircraft_altitude_m": float(tl.aircraft_altitude_m[idx].max()),
            "max_cabin_pressure_altitude_ft": float(tl.cabin_pressure_altitude_ft[idx].max()),
            "oxygen_planned": bool(np.any(tl.oxygen[idx] > 0)),
        }
        for k in PHYSIOLOGY_KEYS:
            leg[k] = float(ref[k][worst])
        leg["night_sao2_pct"] = float(ref["sao2_pct"][asleep].min()) if asleep.size else None
        if on_oxygen is not None:
            ox = on_oxygen[idx]
            leg["sao2_pct_planned_oxygen"] = None if np.all(np.isnan(ox)) else float(np.nanmin(ox))
        leg["model_valid"] = bool(np.all(valid[:, idx]))
        leg.update(describe_samples(status[subject_k, idx], reasons[subject_k, idx], pio2_all[subject_k, idx],
                                    age_y=everyone[subject_k].age_y))
        leg["hypoxic_dose_kmh"] = float(dose_kmh[idx[-1]])
        for lvl in levels:
            leg[f"hours_below_{round(100 * lvl)}_pct"] = float(below[lvl][idx[-1]])
        if plan.kind == "expedition":
            d = plan.days[i]
            leg["day"] = d.day
            leg["sleep_altitude_m"] = float(d.sleep_m)
            leg["high_altitude_m"] = float(d.high_m) if d.high_m is not None else None
            leg["activity"] = d.activity
        else:
            start_m, end_m = leg_altitudes[i]
            leg["phase"] = plan.legs[i].phase
            leg["aircraft_pressure_altitude_ft"] = max(start_m, end_m) / M_PER_FT
        leg["flags"] = []
        legs.append(leg)

    # attach findings to legs (expedition findings carry day numbers, flight findings 1-based leg numbers)
    for k, f in enumerate(findings):
        for ref_leg in f.legs:
            for leg in legs:
                hit = (leg.get("day") == ref_leg) if plan.kind == "expedition" else (leg["leg"] == ref_leg)
                if hit:
                    leg["flags"].append(k)

    members = []
    member_samples = {}
    for j, p in enumerate(everyone[1:], start=1):
        s = res["sao2_pct"][j]
        state = describe_samples(status[j], reasons[j], pio2_all[j], age_y=p.age_y)
        without = status[j] == NO_STEADY_STATE
        lowest = int(np.flatnonzero(without)[np.argmin(pio2_all[j][without])]) if without.any() else int(np.argmin(s))
        entry = {"name": p.name, "role": p.role, "age_y": p.age_y, "hemoglobin_g_dl": p.hemoglobin_g_dl,
                 "defaults_used": list(p.defaults),
                 # no saturation where there is no steady state: the time-limited state instead
                 "min_sao2_pct": None if without.any() else float(s.min()),
                 "min_sao2_leg": int(tl.leg[lowest]) + 1,
                 "min_o2_content_ml_dl": None if without.any() else float(res["o2_content_ml_dl"][j].min()),
                 **state,
                 "legs_without_steady_state": sorted({int(v) + 1 for v in tl.leg[without]})}
        for lvl in levels:
            entry[f"hours_below_{round(100 * lvl)}_pct"] = float(np.sum(dt * (s < 100 * lvl)))
        if plan.kind == "expedition":
            entry["history"] = list(p.history)
            entry["acetazolamide"] = p.acetazolamide
            entry.update(_risk(plan, p, rule_sets))
        members.append(entry)
        member_samples[p.name] = {k: res[k][j] for k in ("sao2_pct", "arterial_po2_mmhg", "o2_content_ml_dl",
                                                         "validity_status")}

    # the worst leg: one without a steady state first (the lowest PIO2), else the lowest saturation
    def severity(leg):
        if leg["time_limited"]:
            return (0, leg["inspired_po2_mmhg"])
        return (1, leg["sao2_pct"] if leg["night_sao2_pct"] is None else min(leg["sao2_pct"], leg["night_sao2_pct"]))

    worst_leg = min(legs, key=severity)
    no_steady = [leg["leg"] for leg in legs if leg["time_limited"]]
    broken = [f for f in findings if f.status in ("required-not-planned", "limit-exceeded")]
    summary = {
        "worst_leg": worst_leg["leg"], "worst_leg_label": worst_leg["label"],
        "worst_sao2_pct": None if worst_leg["time_limited"] else severity(worst_leg)[1],
        "worst_time_limited": worst_leg["time_limited"],
        "no_steady_state_legs": no_steady,
        "extrapolated_legs": [leg["leg"] for leg in legs if leg["validity_status"] == "extrapolated"],
        "outside_validated_range": bool(np.any(status[subject_k] > 0)),
        "total_hours": float(dt.sum()),
        "hypoxic_dose_kmh": float(dose_kmh[-1]), "dose_floor_m": float(floor),
        "rules_broken": len(broken), "rules_touched": len(findings),
    }
    for lvl in levels:
        summary[f"hours_below_{round(100 * lvl)}_pct"] = float(below[lvl][-1])
    subj = everyone[subject_k]
    summary["subject"] = {"name": subj.name, "role": subj.role, "age_y": subj.age_y,
                          "hemoglobin_g_dl": subj.hemoglobin_g_dl,
                          "defaults_used": list(subj.defaults) if subject_k else [],
                          "worst_sao2_pct_planned_oxygen": (
                              None if on_oxygen is None or np.all(np.isnan(on_oxygen)) else float(np.nanmin(on_oxygen))),
                          "oxygen_fio2_unstated_legs": (
                              [] if on_oxygen is None else sorted({int(tl.leg[i]) + 1 for i in np.flatnonzero(
                                  _oxygen_for(plan, tl, subj) & np.isnan(on_oxygen))}))}
    if plan.kind == "flight":
        for threshold_ft, hours in cabin_hours.items():
            summary[f"hours_cabin_above_{int(threshold_ft)}_ft"] = hours
    samples = {"time_h": tl.time_h, "duration_h": dt, "leg": tl.leg + 1, "altitude_m": tl.altitude_m,
               "aircraft_altitude_m": tl.aircraft_altitude_m, "sleeping": tl.sleeping,
               "oxygen_code": tl.oxygen, "cabin_pressure_altitude_ft": tl.cabin_pressure_altitude_ft,
               **ref, "validity_status": status[subject_k], "hypoxic_dose_kmh": dose_kmh}
    subject_note = ("Physiology on air for a resting reference adult (age 40, Hb 14.5 g/dL) unless a member is "
                    "named; planned supplemental oxygen is flagged, not applied.") if not subject_k else (
        f"The tables, summary and chart describe {subj.name} (the patient), at rest, on air; the same person with "
        "the planned oxygen is shown beside it where the plan states its FiO2.")
    notes = [subject_note,
             "Per-leg values are those of the worst awake sample (lowest SaO2) in the leg; 'night' is the "
             "lowest while asleep, with the lower chemoreflex drive of sleep (docs/individual.md).",
             "Members' values include their age, hemoglobin, ventilatory response category, acetazolamide, "
             "and a venous admixture fitted to a stated home or ground SpO2/PaO2 where given."]
    notes.extend(_validity_notes(legs, members))
    if plan.kind == "expedition":
        notes.append("Acclimatization carries across days from each person's home altitude; "
                     "mountain model atmosphere unless a day says otherwise.")
    else:
        notes.append("A flight is acute exposure; cabin altitudes are pressure altitudes (ISA).")
        from altox.yamlload import load_data_file

        notes += [" ".join(c["text"].split()) for c in load_data_file("cautions")["flight"]]
    return PlanResult(plan.name, plan.kind, plan.source_path, people, [rs.id for rs in rule_sets], legs,
                      samples, member_samples, members, findings, summary, notes, guidance_notes=guidance_notes,
                      rule_file=plan.rule_file_path)


def _validity_notes(legs, members) -> list[str]:
    """Plan notes: the legs without a steady state, extrapolated legs, and people outside the data."""
    out = []
    invalid_legs = [leg for leg in legs if not leg["model_valid"]]
    if invalid_legs:
        worst = min(invalid_legs, key=lambda leg: leg["inspired_po2_mmhg"])
        out.append("OUTSIDE THE MODEL on leg(s) " + ", ".join(str(leg["leg"]) for leg in invalid_legs) + ": "
                   + " ".join(worst["validity_notes"]) + " No saturation is shown there.")
    extrapolated = [leg for leg in legs if leg["validity_status"] == "extrapolated"]
    if extrapolated:
        out.append("Extrapolated on leg(s) " + ", ".join(str(leg["leg"]) for leg in extrapolated) + ": "
                   + " ".join(extrapolated[0]["validity_notes"]))
    optimistic = [leg for leg in legs if any(n.startswith("Known optimistic") for n in leg.get("validity_notes", []))]
    if optimistic:
        note = next(n for n in optimistic[0]["validity_notes"] if n.startswith("Known optimistic"))
        out.append("On leg(s) " + ", ".join(str(leg["leg"]) for leg in optimistic) + ": " + note)
    for m in members:
        age_notes = [n for n in m["validity_notes"] if n.startswith("Extrapolated: age")]
        if age_notes:
            out.append(f"{m['name']}: {age_notes[0]}")
    return out


def plan_extras(plan, result, *, members: int | None = None, seed: int | None = None, progress=None) -> dict:
    """The reviews that sit beside the per-leg tables: expected ranges (people), readings, oxygen, decompression.

    Each is a plain mapping (arrays as numpy); :mod:`altox.present.render` presents them. ``members``
    simulated people per person for the expected range (default
    :data:`altox.evaluation.defaults.ENSEMBLE_MEMBERS`, the same as ``altox range`` and ``altox readings``;
    0 skips only the simulation: readings are still reviewed, against each member's central value,
    the party and published levels, and a note in ``result.notes`` says so).
    """
    from altox.evaluation.oxygen_plan import decompression_review, oxygen_review
    from altox.evaluation.population import DEFAULT_MEMBERS, DEFAULT_SEED, expected_range
    from altox.evaluation.readings import central_ranges, review

    members = DEFAULT_MEMBERS if members is None else members

    extras = {"oxygen": oxygen_review(plan, result), "decompression": decompression_review(plan, result)}
    people = plan.party if plan.kind == "expedition" else plan.aboard
    if plan.kind == "flight":
        from altox.evaluation.individual import occupant_fitness_to_fly

        with_ground = [o for o in plan.aboard if o.ground_pao2_mmhg is not None or o.ground_spo2 is not None]
        if with_ground:
            cabin_ft = float(np.max(result.samples["cabin_pressure_altitude_ft"]))
            ground_ft = float(plan.departure_elevation_m) / M_PER_FT
            extras["fitness_to_fly"] = [occupant_fitness_to_fly(o, cabin_ft, ground_ft) for o in with_ground]
    observed = plan.kind == "expedition" and bool(getattr(plan, "observations", None))
    if members and people:
        extras["ranges"] = expected_range(plan, result, n=members, seed=DEFAULT_SEED if seed is None else seed,
                                          progress=progress)
        if observed:
            extras["readings"] = review(plan, result, extras["ranges"])
    elif people:
        result.notes.append("No simulated people (members 0): the expected range is not computed"
                            + ("; readings are reviewed against each member's own central value, the party's "
                               "readings and published levels, without the range check." if observed else "."))
        if observed:
            extras["readings"] = review(plan, result, central_ranges(result))
    return extras


def _oxygen_for(plan, tl, person) -> np.ndarray:
    """Samples where the plan gives ``person`` supplemental oxygen (flights: by role)."""
    from altox.plan.timeline import OXYGEN_CODES

    if plan.kind != "flight":
        return np.zeros(len(tl), dtype=bool)
    codes = {"patient": ("patient", "all"), "crew": ("crew", "all")}.get(person.role, ("all",))
    return np.isin(tl.oxygen, [OXYGEN_CODES[c] for c in codes])


def _subject_on_planned_oxygen(plan, tl, person, res, k, f_v, f_r, factors):
    """The subject's SaO2 with the planned oxygen (NaN where it is planned without an FiO2); None without a patient."""
    if person.role != "patient":
        return None
    on = _oxygen_for(plan, tl, person)
    if not on.any():
        return None
    fio2 = np.full(len(tl), np.nan)
    for i, leg in enumerate(plan.legs):
        if leg.fio2 is not None:
            fio2[tl.leg == i] = leg.fio2
    out = np.asarray(res["sao2_pct"][k], dtype=float).copy()
    known = on & ~np.isnan(fio2)
    out[on & np.isnan(fio2)] = np.nan
    if known.any():
        from altox.physiology.chain import assess

        row = {key: (np.asarray(v)[k] if np.ndim(v) >= 2 and np.shape(v)[0] > k else v) for key, v in factors.items()}
        row = {key: (np.broadcast_to(v, (len(tl),))[known] if np.ndim(v) else v) for key, v in row.items()}
        r = assess(altitude_m=np.asarray(tl.altitude_m)[known], pb_mmhg=np.asarray(tl.pb_mmhg, dtype=float)[known],
                   atmosphere="isa", fio2=fio2[known], f_ventilatory=np.asarray(f_v)[k][known],
                   f_renal=np.asarray(f_r)[k][known], **row)
        out[known] = np.asarray(r["sao2_pct"], dtype=float)
    return out


def _factor_keywords(plan, everyone, from_plan: bool, tl) -> dict:
    """assess keywords for the reference adult and each person, shaped (people, 1) or (people, samples)."""
    from altox.evaluation.individual import people_kwargs

    sources = [{"age_y": REFERENCE_PERSON["age_y"], "hemoglobin_g_dl": REFERENCE_PERSON["hemoglobin_g_dl"]}]
    if from_plan and plan.kind == "expedition":
        sources += list(plan.party)
    elif from_plan:
        ground_m = float(plan.departure_elevation_m)
        for o in plan.aboard:
            entry = {"age_y": o.age_y, "hemoglobin_g_dl": o.hemoglobin_g_dl}
            if o.ground_spo2 is not None:
                entry.update(home_spo2=o.ground_spo2, home_altitude_m=ground_m)
            sources.append(entry)
    else:
        sources += [{"age_y": p.age_y, "hemoglobin_g_dl": p.hemoglobin_g_dl,
                     "acetazolamide": p.acetazolamide, "home_altitude_m": p.home_altitude_m} for p in everyone[1:]]
    sources = [{k: v for k, v in src.items() if v is not None} if isinstance(src, dict) else src for src in sources]
    kw = people_kwargs(sources, sleeping=tl.sleeping if plan.kind == "expedition" else None)
    return {"age_y": kw["age_y"], "hb_g_dl": kw["hb_g_dl"], "hypoxic_gain_scale": kw["hypoxic_gain_scale"],
            "drive_scale": kw["drive_scale"], "hco3_offset_mmol_l": kw["hco3_offset_mmol_l"],
            "shunt_fraction": kw["shunt_fraction"]}


def _risk(plan, person, rule_sets):
    from altox.guidance.checker import risk_category

    for rs in rule_sets:
        if rs.kind == "expedition" and rs.risk_table is not None:
            day = np.array([d.day for d in plan.days])
            sleep = np.array([d.sleep_m for d in plan.days])
            start = max(plan.start_altitude_m, person.home_altitude_m) if person.home_altitude_m else plan.start_altitude_m
            high = np.array([d.high_m if d.high_m is not None else d.sleep_m for d in plan.days])
            category, reasons, prophylaxis = risk_category(set(person.history), day, sleep, start, rs,
                                                           high_altitude_m=high)
            return {"risk_category": category, "risk_reasons": reasons, "prophylaxis": prophylaxis,
                    "risk_rule_set": rs.id}
    return {}
