"""Readings as an expedition medic reviews them: 2018 Lake Louise scoring, SpO2 against the expected SpO2 range, pulmonary oedema.

A plan may carry observations (``observations:`` in an expedition plan, see
``docs/profiles.md``): resting SpO2, heart rate, the 2018 Lake Louise AMS score and the symptoms
and signs of the consensus definition of high-altitude pulmonary oedema, per member and day.
:func:`review` places each at its time in the plan and flags, as guidance for the medic:

* an SpO2 below the member's expected SpO2 range: the expected SaO2 range
  (:func:`altox.evaluation.population.expected_range`) widened by the published pulse-oximeter error
  (:func:`oximeter_error`, ``altox/data/oximetry.yaml``);
* an SpO2 well below the expected central value or below the party's other readings that day,
  and one below the level where oximeter accuracy declines [LuksSwenson2011]_;
* acute mountain sickness by the 2018 definition [Roach2018]_, and suspected pulmonary oedema
  by the Lake Louise consensus criteria [HackettRoach2001]_, met or partly met with a low
  SpO2 and a history of pulmonary oedema;

and gives the actions of the Wilderness Medical Society guidelines [Luks2019]_, each with its
source.  None of this is a diagnosis; licensed expedition medicine decides.

References
----------
.. [Roach2018] Roach RC, Hackett PH, Oelz O, et al. The 2018 Lake Louise Acute Mountain Sickness
   Score. High Alt Med Biol 2018;19:4-6.
.. [HackettRoach2001] Hackett PH, Roach RC. High-altitude illness. N Engl J Med 2001;345:107-114.
.. [LuksSwenson2011] Luks AM, Swenson ER. Pulse oximetry at high altitude. High Alt Med Biol
   2011;12:109-119.
.. [Luks2019] Luks AM, Auerbach PS, Freer L, et al. Wilderness Medical Society Clinical Practice
   Guidelines for the Prevention and Treatment of Acute Altitude Illness: 2019 Update.
   Wilderness Environ Med 2019;30(4S):S3-S18.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.evaluation.individual import coefficients

__all__ = ["lake_louise", "review", "central_ranges", "oximeter_error", "expected_spo2_range", "hape_criteria",
           "oximetry_caveats", "CAUTION", "FLAG_CODES"]

CAUTION = ("Guidance for the expedition medic, not a diagnosis: readings are compared with a "
           "model's population range and published criteria. Symptoms, examination and licensed "
           "expedition medicine decide.")
FLAG_CODES = ("spo2-below-range", "spo2-well-below-expected", "spo2-below-party", "spo2-low-accuracy",
              "ams", "ams-low-spo2-ascent", "hape-suspected", "hape-partial")
#: short words for each flag, for tables (the flag's message says the rest)
FLAG_WORDS = {"spo2-below-range": "below range", "spo2-well-below-expected": "well below expected",
              "spo2-below-party": "below party", "spo2-low-accuracy": "below 80 %",
              "ams": "AMS", "ams-low-spo2-ascent": "going up",
              "hape-suspected": "HAPE suspected", "hape-partial": "some HAPE signs"}


def _lls():
    return coefficients()["readings"]["lake_louise_2018"]


def lake_louise(headache=None, gi=None, fatigue=None, dizziness=None, *, total=None) -> dict:
    """Score the 2018 Lake Louise AMS questionnaire (Roach et al. 2018).

    Four self-reported items, each 0-3: headache, gastrointestinal symptoms, fatigue and/or
    weakness, dizziness/light-headedness.  Acute mountain sickness: after a recent gain in
    altitude, a headache score of at least 1 and a total of at least 3; mild 3-5, moderate 6-9,
    severe 10-12 [Roach2018]_.

    Parameters
    ----------
    headache, gi, fatigue, dizziness : int or array of int, optional
        Item scores 0-3 (arrays broadcast).
    total : int or array of int, optional
        The total alone (0-12), when the items were not recorded; then the headache criterion
        is unknown.

    Returns
    -------
    dict
        ``total``, ``meets_definition`` (bool; ``None`` when only a total >= 3 is known, since the
        headache criterion cannot be checked), ``severity`` ('none', 'mild', 'moderate',
        'severe'; by total, meaningful only with the definition met), ``headache_known``.

    Raises
    ------
    OutOfRangeError
        An item outside 0-3, a total outside 0-12, or neither given.

    Examples
    --------
    >>> lake_louise(headache=1, gi=1, fatigue=1, dizziness=0)["meets_definition"]
    True
    >>> lake_louise(headache=0, gi=2, fatigue=2, dizziness=1)["meets_definition"]
    False
    """
    c = _lls()
    items = {"headache": headache, "gi": gi, "fatigue": fatigue, "dizziness": dizziness}
    if all(v is None for v in items.values()):
        if total is None:
            raise OutOfRangeError("a Lake Louise score needs the four items or a total.",
                                  field="lake_louise", expected="headache, gi, fatigue, dizziness (0-3 each)")
        t = np.asarray(total)
        if np.any((t < 0) | (t > 4 * c["item_max"]) | (t != np.round(t))):
            raise OutOfRangeError(f"Lake Louise total {total!r} is outside 0-12.", field="lake_louise",
                                  value=total, expected="a whole number from 0 to 12")
        meets = np.where(t >= c["total_threshold"], None, False)
        return {"total": _plain(t), "meets_definition": _plain(meets), "severity": _severity(t),
                "headache_known": False}
    arrs = {}
    for k, v in items.items():
        if v is None:
            raise OutOfRangeError(f"Lake Louise item {k!r} is missing; give all four items or a total.",
                                  field=f"lake_louise.{k}", expected="a whole number 0-3")
        a = np.asarray(v)
        if np.any((a < 0) | (a > c["item_max"]) | (a != np.round(a))):
            raise OutOfRangeError(f"Lake Louise item {k} = {v!r} is outside 0-3.", field=f"lake_louise.{k}",
                                  value=v, expected="a whole number 0-3")
        arrs[k] = a.astype(int)
    t = arrs["headache"] + arrs["gi"] + arrs["fatigue"] + arrs["dizziness"]
    meets = (arrs["headache"] >= c["headache_threshold"]) & (t >= c["total_threshold"])
    return {"total": _plain(t), "meets_definition": _plain(meets), "severity": _severity(t),
            "headache_known": True}


def _plain(a):
    a = np.asarray(a)
    return a.item() if a.ndim == 0 else a


def _severity(total):
    bands = _lls()["bands"]
    t = np.asarray(total)
    out = np.full(t.shape, "none", dtype=object)
    for name, (lo, hi) in bands.items():
        out[(t >= lo) & (t <= hi)] = name
    return out.item() if out.ndim == 0 else out


def _oximetry():
    from altox.yamlload import load_data_file

    return load_data_file("oximetry")


def oximeter_error(sao2_pct):
    """Published pulse-oximeter bias and precision at an arterial saturation.

    Parameters
    ----------
    sao2_pct : numeric
        Arterial saturation. [%]

    Returns
    -------
    (bias, precision) : (ndarray or float, ndarray or float)
        Mean (SpO2 - SaO2) and the SD of the differences, in percentage points, interpolated
        linearly between the knots of ``altox/data/oximetry.yaml`` (Hannhart et al., Eur Respir
        J 1991;4:115-119: bias and precision below 3 % above an SaO2 of 83 %, up to 8 % and 5 %
        in deeper hypoxia down to 55 %).

    Examples
    --------
    >>> oximeter_error(90.0)
    (0.0, 2.0)
    >>> round(float(oximeter_error(69.0)[1]), 2)
    3.5
    """
    s = np.asarray(sao2_pct, dtype=float)
    knots = sorted(_oximetry()["accuracy_knots"], key=lambda k: k["sao2_pct"])
    x = [k["sao2_pct"] for k in knots]
    bias = np.interp(s, x, [k["bias_pct_points"] for k in knots])
    prec = np.interp(s, x, [k["precision_pct_points"] for k in knots])
    return (_plain(bias), _plain(prec))


def expected_spo2_range(central_pct, low_pct, high_pct, percentiles=(5.0, 95.0)):
    """Expected SpO2 range from the expected SaO2 range and the oximeter's published error.

    The SaO2 percentiles describe people; a reading adds the instrument's error, independent of
    the person.  Each side of the range is combined with the instrument's precision at that
    saturation as independent spreads (normal approximation), then shifted by its bias:
    ``low = central + bias - sqrt((central - low_SaO2)**2 + (z sd)**2)`` with ``z`` the normal
    quantile of the lower percentile; the same above.

    Parameters
    ----------
    central_pct, low_pct, high_pct : numeric
        Central value and lower and upper percentile of SaO2. [%]
    percentiles : (float, float)
        The percentiles ``low_pct`` and ``high_pct`` stand for.

    Returns
    -------
    dict
        ``central``, ``low``, ``high`` (SpO2, %, capped at 100) and ``bias``, ``precision`` at
        the low end.

    Examples
    --------
    >>> r = expected_spo2_range(88.0, 83.0, 92.0)
    >>> round(r["low"], 1), round(r["high"], 1)
    (82.0, 93.2)
    """
    from statistics import NormalDist

    z_lo = -NormalDist().inv_cdf(float(percentiles[0]) / 100.0)
    z_hi = NormalDist().inv_cdf(float(percentiles[-1]) / 100.0)
    c = float(central_pct)
    b_lo, sd_lo = oximeter_error(float(low_pct))
    b_c, _ = oximeter_error(c)
    b_hi, sd_hi = oximeter_error(float(high_pct))
    low = c + b_lo - float(np.hypot(c - float(low_pct), z_lo * sd_lo))
    high = c + b_hi + float(np.hypot(float(high_pct) - c, z_hi * sd_hi))
    return {"central": min(c + b_c, 100.0), "low": min(low, 100.0), "high": min(high, 100.0),
            "bias": float(b_lo), "precision": float(sd_lo)}


def oximetry_caveats() -> dict:
    """The caveats of field pulse oximetry (text and source), stated once per output."""
    c = _oximetry()["caveats"]
    return {"text": " ".join(c["text"].split()), "source": " ".join(c["source"].split())}


def hape_criteria(symptoms=(), signs=(), heart_rate_per_min=None) -> dict:
    """Count the consensus criteria of high-altitude pulmonary oedema met by a reading.

    The Lake Louise consensus definition (Hackett & Roach, N Engl J Med 2001;345:107-114): after
    a recent gain in altitude, at least two symptoms (dyspnoea at rest, cough, weakness or
    decreased exercise performance, chest tightness or congestion) and at least two signs
    (crackles or wheezing in at least one lung field, central cyanosis, tachypnoea,
    tachycardia).  A resting heart rate above 100 /min counts as tachycardia (common practice).

    Returns
    -------
    dict
        ``symptoms``, ``signs`` (lists, tachycardia added from the heart rate), ``met`` (both
        counts reached), ``partly_met`` (at least two items in all, not ``met``).

    Examples
    --------
    >>> hape_criteria(["cough", "dyspnoea_at_rest"], [], 118)["partly_met"]
    True
    >>> hape_criteria(["cough", "weakness"], ["crackles"], 118)["met"]
    True
    """
    c = coefficients()["readings"]
    cfg = c["hape_consensus"]
    sy = [s for s in cfg["symptoms"] if s in set(symptoms)]
    sg = [s for s in cfg["signs"] if s in set(signs)]
    if (heart_rate_per_min is not None and heart_rate_per_min > c["tachycardia_per_min"]["value"]
            and "tachycardia" not in sg):
        sg.append("tachycardia")
    met = len(sy) >= cfg["symptoms_needed"] and len(sg) >= cfg["signs_needed"]
    return {"symptoms": sy, "signs": sg, "met": met, "partly_met": (not met) and len(sy) + len(sg) >= 2}


_WORDS = {"dyspnoea_at_rest": "dyspnoea at rest", "cough": "cough",
          "weakness": "weakness or decreased exercise performance",
          "chest_tightness": "chest tightness or congestion", "crackles": "crackles or wheezing",
          "central_cyanosis": "central cyanosis", "tachypnoea": "tachypnoea", "tachycardia": "tachycardia"}


def _sample_at(ranges, t_h):
    """Index of the sample that contains time ``t_h`` (clipped to the plan)."""
    start = np.asarray(ranges["time_h"])
    return int(np.clip(np.searchsorted(start, t_h, side="right") - 1, 0, len(start) - 1))


def central_ranges(result) -> dict:
    """A stand-in for the expected range with each member's central value only (no simulated people).

    Built from an evaluated plan (:func:`altox.evaluation.evaluate.evaluate_plan`): the members' own SaO2 at
    every sample, on the same timeline.  :func:`review` then skips the range check and keeps the
    rest (central value, party, published levels, symptoms and signs).
    """
    s = result.samples
    return {"n": 0, "seed": None, "percentiles": [], "time_h": np.asarray(s["time_h"]),
            "altitude_m": np.asarray(s["altitude_m"]), "sleeping": np.asarray(s["sleeping"]),
            "people": [{"name": name, "central_sao2_pct": np.asarray(m["sao2_pct"])}
                       for name, m in result.member_samples.items()], "notes": []}


def review(plan, result=None, ranges=None) -> list[dict]:
    """Review every observation of a plan as an expedition medic would; flag and advise as guidance.

    Each SpO2 reading is compared with the member's expected SpO2 range at that time (the
    expected SaO2 range of :func:`altox.evaluation.population.expected_range` widened by the published
    pulse-oximeter error, :func:`expected_spo2_range`), with the expected central value and with
    the party's other readings that day; symptoms, signs, the Lake Louise score and the member's
    history are combined into the actions of the Wilderness Medical Society guidelines.

    Parameters
    ----------
    plan : ExpeditionPlan
        With ``observations`` (an empty list gives an empty review).
    result : PlanResult, optional
        Unused except to build ``ranges`` when they are not given.
    ranges : dict, optional
        :func:`altox.evaluation.population.expected_range` for this plan (computed with its defaults if
        not given). The lower and upper bounds used are its first and last percentiles.

    Returns
    -------
    list of dict
        One per observation, in plan order: ``day``, ``member``, ``time_h``, ``sleeping``,
        ``altitude_m``, ``spo2_pct``, ``heart_rate_per_min``, ``lake_louise`` (the scoring),
        ``expected_sao2_pct`` and ``expected_spo2_pct`` (``central``, ``low``, ``high``; the
        bounds None when ``ranges`` come from :func:`central_ranges`),
        ``party_median_spo2_pct`` (the other members' readings that day, or None), ``hape``
        (:func:`hape_criteria` plus ``suspected`` and ``history``), ``ascent_continues``,
        ``recent_gain_m``, ``flags`` (each ``code``, ``message``, ``source``), ``actions``
        (each ``action``, ``source``), ``note``.

    Raises
    ------
    OutOfRangeError
        A flight plan (observations are for expeditions), or ranges of another plan.
    """
    if plan.kind != "expedition":
        raise OutOfRangeError("readings are reviewed for expedition plans only.", field="kind",
                              value=plan.kind, expected="kind: expedition")
    if not plan.observations:
        return []
    if ranges is None:
        from altox.evaluation.population import expected_range

        ranges = expected_range(plan, result)
    people = {p["name"]: p for p in ranges["people"]}
    history = {m.name: set(m.history) for m in plan.party}
    from altox.physiology.validity import limits

    lim = limits()
    outside_age = {m.name: m.age_y for m in plan.party if m.age_y is not None
                   and not lim["adult_min_age_y"] <= m.age_y <= lim["adult_max_age_y"]}
    cfg = coefficients()["readings"]
    lls_cfg = cfg["lake_louise_2018"]
    rec = cfg["recommendation"]
    hape_cfg = cfg["hape_actions"]
    src = lambda text: " ".join(text.split())  # noqa: E731
    lls_source, rec_source = src(lls_cfg["citation"]), src(rec["source"])
    hape_source = src(cfg["hape_consensus"]["citation"])
    well_below = float(cfg["well_below_points"]["value"])
    well_below_source = src(cfg["well_below_points"]["source"]).split(": ", 1)[-1].split(", citing")[0]
    ox = _oximetry()
    low_acc = float(ox["accuracy_declines_below_pct"]["value"])
    default_t = cfg["default_time_h"]["value"]
    sleeps = [plan.start_altitude_m] + [d.sleep_m for d in plan.days]
    pcts = [float(p) for p in ranges["percentiles"]]
    by_day: dict = {}
    for obs in plan.observations:
        if obs.spo2 is not None:
            by_day.setdefault(obs.day, []).append((obs.member, 100.0 * obs.spo2))
    out = []
    for obs in plan.observations:
        if obs.member not in people:
            raise OutOfRangeError(f"the expected ranges have no member {obs.member!r}; compute them for "
                                  "this plan.", field="ranges", value=obs.member)
        person = people[obs.member]
        clock = default_t if obs.time_h is None else obs.time_h
        t_h = 24.0 * (obs.day - 1) + clock
        i = _sample_at(ranges, t_h)
        central = float(person["central_sao2_pct"][i])
        if "sao2_pct_percentiles" in person:
            pct = person["sao2_pct_percentiles"][:, i]
            low, high = float(pct[0]), float(pct[-1])
            spo2_range = expected_spo2_range(central, low, high, (pcts[0], pcts[-1]))
        else:   # no simulated people: the central value only
            low = high = None
            spo2_range = {"central": central + float(oximeter_error(central)[0]), "low": None, "high": None,
                          "bias": None, "precision": None}
        day = plan.days[obs.day - 1]
        nxt = plan.days[obs.day] if obs.day < len(plan.days) else None
        today_top = max(day.sleep_m, day.high_m or day.sleep_m)
        ascent = bool(nxt is not None and max(nxt.sleep_m, nxt.high_m or nxt.sleep_m) > day.sleep_m + 1.0)
        k = obs.day  # sleeps[k] is this day's sleeping altitude
        back = max(0, k - int(lls_cfg["recent_gain_days"]))
        gain = float(max(sleeps[back + 1:k + 1] + [today_top]) - min(sleeps[back:k]))
        ll = None
        if obs.lake_louise is not None:
            if isinstance(obs.lake_louise, int):
                ll = lake_louise(total=obs.lake_louise)
            else:
                v = obs.lake_louise
                ll = lake_louise(v.headache, v.gi, v.fatigue, v.dizziness)
                ll["items"] = {"headache": v.headache, "gi": v.gi, "fatigue": v.fatigue, "dizziness": v.dizziness}
        others = [v for m, v in by_day.get(obs.day, []) if m != obs.member]
        party = float(np.median(others)) if others else None
        spo2 = None if obs.spo2 is None else 100.0 * obs.spo2
        hape = hape_criteria(obs.symptoms, obs.signs, obs.heart_rate_per_min)
        hape["history"] = "hape" in history.get(obs.member, set())
        rec_out = {
            "day": obs.day, "member": obs.member, "time_h": clock, "sleeping": bool(ranges["sleeping"][i]),
            "altitude_m": float(ranges["altitude_m"][i]), "spo2_pct": spo2,
            "heart_rate_per_min": obs.heart_rate_per_min, "lake_louise": ll,
            "expected_sao2_pct": {"central": central, "low": low, "high": high, "percentiles": pcts,
                                  "model_valid": bool(person["model_valid"][i]) if "model_valid" in person else True},
            "expected_spo2_pct": spo2_range, "party_median_spo2_pct": party, "hape": hape,
            "ascent_continues": ascent, "recent_gain_m": max(gain, 0.0), "flags": [], "actions": [],
            "note": obs.note,
        }
        if obs.member in outside_age:
            rec_out["extrapolated"] = (f"age {outside_age[obs.member]:g} years is outside the adults "
                                       f"({lim['adult_min_age_y']:g} to {lim['adult_max_age_y']:g} years) the "
                                       "model is checked against: the expected range is extrapolated")
        flags, actions = rec_out["flags"], rec_out["actions"]
        state = "asleep" if rec_out["sleeping"] else "awake"
        below_range = spo2 is not None and low is not None and spo2 < spo2_range["low"]
        well_below_expected = spo2 is not None and central - spo2 >= well_below
        below_party = spo2 is not None and party is not None and party - spo2 >= well_below
        if below_range:
            flags.append({"code": "spo2-below-range",
                          "message": (f"SpO2 {spo2:.0f} % is below the expected SpO2 range "
                                      f"({spo2_range['low']:.0f}-{spo2_range['high']:.0f} %, {state}) for "
                                      f"{obs.member} here: the {pcts[0]:g}th-{pcts[-1]:g}th percentile of "
                                      "people like them, widened by the oximeter's published error."),
                          "source": ("altox population model; oximeter error: "
                                     + src(ox["accuracy_knots"][0]["source"]))})
        if well_below_expected:
            flags.append({"code": "spo2-well-below-expected",
                          "message": (f"SpO2 {spo2:.0f} % is {central - spo2:.0f} points below the expected "
                                      f"central value ({central:.0f} %); in pulmonary oedema the saturation "
                                      f"is typically {well_below:.0f}-20 points below others at the same "
                                      "altitude."),
                          "source": well_below_source})
        if below_party:
            flags.append({"code": "spo2-below-party",
                          "message": (f"SpO2 {spo2:.0f} % is {party - spo2:.0f} points below the median of the "
                                      f"party's other readings that day ({party:.0f} %, {len(others)} "
                                      f"reading{'s' if len(others) > 1 else ''})."),
                          "source": well_below_source})
        if spo2 is not None and spo2 < low_acc:
            flags.append({"code": "spo2-low-accuracy",
                          "message": (f"SpO2 {spo2:.0f} % is below {low_acc:.0f} %, where oximeter accuracy "
                                      "declines; repeat with a warm hand, at rest, and treat the true value "
                                      "as possibly lower."),
                          "source": src(ox["accuracy_declines_below_pct"]["source"])})
        ams = bool(ll is not None and ll["meets_definition"])
        if ams:
            qual = "" if gain > 0 else " (no gain in altitude in the last days: the definition assumes one)"
            flags.append({"code": "ams",
                          "message": (f"Lake Louise score {ll['total']} with headache meets the 2018 definition "
                                      f"of acute mountain sickness ({ll['severity']}){qual}."),
                          "source": lls_source})
        elif ll is not None and ll["meets_definition"] is None:
            flags.append({"code": "ams",
                          "message": (f"Lake Louise total {ll['total']} is at or above 3, but the headache item "
                                      "was not recorded, so the 2018 definition cannot be checked; record the "
                                      "items."),
                          "source": lls_source})
        low_spo2 = below_range or well_below_expected or below_party
        if ams and low_spo2 and ascent:
            flags.append({"code": "ams-low-spo2-ascent",
                          "message": (f"{obs.member}: symptoms of acute mountain sickness and a low SpO2, "
                                      f"with the plan going higher on day {obs.day + 1}."),
                          "recommendation": rec["text"], "source": rec_source})
        items = ", ".join(_WORDS[w] for w in hape["symptoms"] + hape["signs"])
        suspected = hape["met"] or (hape["partly_met"] and (well_below_expected or below_party)
                                    and hape["history"])
        hape["suspected"] = bool(suspected)
        if suspected:
            why = ("the consensus criteria are met" if hape["met"] else
                   "the consensus criteria are partly met, the SpO2 is well below expectation and there is "
                   "a history of pulmonary oedema")
            flags.append({"code": "hape-suspected",
                          "message": (f"Suspected high-altitude pulmonary oedema: {why} ({items}"
                                      + (f", {gain:,.0f} m gained in the last days" if gain > 0 else "")
                                      + ")."),
                          "source": hape_source})
            actions.append({"action": src(hape_cfg["text"]), "source": src(hape_cfg["source"])})
        elif hape["partly_met"]:
            flags.append({"code": "hape-partial",
                          "message": (f"Some criteria of high-altitude pulmonary oedema are present ({items}); "
                                      "examine the chest (crackles, cyanosis, breathing rate) and recheck."),
                          "source": hape_source})
        if ams and not suspected:
            actions.append({"action": rec["text"], "source": rec_source})
        elif low_spo2 and not suspected:
            actions.append({"action": ("Recheck the reading at rest with a warm hand and ask about symptoms "
                                       "(headache, breathlessness at rest, cough, weakness)"
                                       + (f" before the planned ascent on day {obs.day + 1}; " + rec["text"].lower()
                                          if ascent else ".")),
                            "source": rec_source if ascent else src(ox["caveats"]["source"]).split("; ")[0]})
        out.append(rec_out)
    return out
