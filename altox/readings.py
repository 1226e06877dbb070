"""Readings against expectation: 2018 Lake Louise scoring, and each observation against the member's expected range.

A plan may carry observations (``observations:`` in an expedition plan, see
``docs/profiles.md``): resting SpO2, heart rate and the 2018 Lake Louise AMS score per member
and day.  :func:`review` places each at its time in the plan and compares it with that member's
expected range (:func:`altox.population.expected_range`), and flags, as guidance for the medic:

* ``spo2-below-range``: an SpO2 below the lower percentile of the member's range at that time;
* ``ams``: a Lake Louise score meeting the 2018 definition of acute mountain sickness
  (headache >= 1 and total >= 3, after a recent gain in altitude) [Roach2018]_;
* ``ams-low-spo2-ascent``: both, while the plan continues upward the next day; it quotes the
  recommendation it follows (do not ascend further with symptoms; descend if they worsen)
  [Luks2019]_.

Heart rate is recorded and shown, not flagged: altox has no model of it.  None of this is a
diagnosis; licensed expedition medicine decides.

References
----------
.. [Roach2018] Roach RC, Hackett PH, Oelz O, et al. The 2018 Lake Louise Acute Mountain Sickness
   Score. High Alt Med Biol 2018;19:4-6.
.. [Luks2019] Luks AM, Auerbach PS, Freer L, et al. Wilderness Medical Society Clinical Practice
   Guidelines for the Prevention and Treatment of Acute Altitude Illness: 2019 Update.
   Wilderness Environ Med 2019;30(4S):S3-S18.
"""

from __future__ import annotations

import numpy as np

from .errors import OutOfRangeError
from .individual import coefficients

__all__ = ["lake_louise", "review", "CAUTION", "FLAG_CODES"]

CAUTION = ("Guidance for the expedition medic, not a diagnosis: readings are compared with a "
           "model's population range. Symptoms, examination and licensed expedition medicine decide.")
FLAG_CODES = ("spo2-below-range", "ams", "ams-low-spo2-ascent")


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


def _sample_at(ranges, t_h):
    """Index of the sample that contains time ``t_h`` (clipped to the plan)."""
    start = np.asarray(ranges["time_h"])
    return int(np.clip(np.searchsorted(start, t_h, side="right") - 1, 0, len(start) - 1))


def review(plan, result=None, ranges=None) -> list[dict]:
    """Compare every observation of a plan with the member's expected range; flag as guidance.

    Parameters
    ----------
    plan : ExpeditionPlan
        With ``observations`` (an empty list gives an empty review).
    result : PlanResult, optional
        Unused except to build ``ranges`` when they are not given.
    ranges : dict, optional
        :func:`altox.population.expected_range` for this plan (computed with defaults if not
        given). The lower and upper bounds used are its first and last percentiles.

    Returns
    -------
    list of dict
        One per observation, in plan order: ``day``, ``member``, ``time_h``, ``sleeping``,
        ``altitude_m``, ``spo2_pct``, ``heart_rate_per_min``, ``lake_louise`` (the scoring),
        ``expected_sao2_pct`` (``central``, ``low``, ``high``, ``percentiles``),
        ``ascent_continues`` (the next day's sleeping or high altitude above this day's),
        ``recent_gain_m`` (sleeping-altitude gain over the last days), ``flags`` (each with
        ``code``, ``message``, ``source``; the combined flag also ``recommendation``),
        ``note``.

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
        from .population import expected_range

        ranges = expected_range(plan, result)
    people = {p["name"]: p for p in ranges["people"]}
    cfg = coefficients()["readings"]
    lls_cfg = cfg["lake_louise_2018"]
    rec = cfg["recommendation"]
    lls_source = " ".join(lls_cfg["citation"].split())
    rec_source = " ".join(rec["source"].split())
    default_t = cfg["default_time_h"]["value"]
    sleeps = [plan.start_altitude_m] + [d.sleep_m for d in plan.days]
    out = []
    for obs in plan.observations:
        if obs.member not in people:
            raise OutOfRangeError(f"the expected ranges have no member {obs.member!r}; compute them for "
                                  "this plan.", field="ranges", value=obs.member)
        person = people[obs.member]
        clock = default_t if obs.time_h is None else obs.time_h
        t_h = 24.0 * (obs.day - 1) + clock
        i = _sample_at(ranges, t_h)
        pct = person["sao2_pct_percentiles"][:, i]
        low, high = float(pct[0]), float(pct[-1])
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
        rec_out = {
            "day": obs.day, "member": obs.member, "time_h": clock, "sleeping": bool(ranges["sleeping"][i]),
            "altitude_m": float(ranges["altitude_m"][i]),
            "spo2_pct": None if obs.spo2 is None else 100.0 * obs.spo2,
            "heart_rate_per_min": obs.heart_rate_per_min, "lake_louise": ll,
            "expected_sao2_pct": {"central": float(person["central_sao2_pct"][i]), "low": low, "high": high,
                                  "percentiles": [float(p) for p in ranges["percentiles"]],
                                  "model_valid": bool(person["model_valid"][i]) if "model_valid" in person else True},
            "ascent_continues": ascent, "recent_gain_m": max(gain, 0.0), "flags": [], "note": obs.note,
        }
        low_spo2 = obs.spo2 is not None and 100.0 * obs.spo2 < low
        if low_spo2:
            rec_out["flags"].append({
                "code": "spo2-below-range",
                "message": (f"SpO2 {100 * obs.spo2:.0f} % is below the expected range "
                            f"({low:.0f}-{high:.0f} %, {ranges['percentiles'][0]:g}th-"
                            f"{ranges['percentiles'][-1]:g}th percentile) for {obs.member} here."),
                "source": "altox expected range (docs/individual.md)"})
        ams = bool(ll is not None and ll["meets_definition"])
        if ams:
            qual = "" if gain > 0 else " (no gain in altitude in the last days: the definition assumes one)"
            rec_out["flags"].append({
                "code": "ams",
                "message": (f"Lake Louise score {ll['total']} with headache meets the 2018 definition of "
                            f"acute mountain sickness ({ll['severity']}){qual}."),
                "source": lls_source})
        elif ll is not None and ll["meets_definition"] is None:
            rec_out["flags"].append({
                "code": "ams",
                "message": (f"Lake Louise total {ll['total']} is at or above 3, but the headache item was "
                            "not recorded, so the 2018 definition cannot be checked; record the items."),
                "source": lls_source})
        if ams and low_spo2 and ascent:
            rec_out["flags"].append({
                "code": "ams-low-spo2-ascent",
                "message": (f"{obs.member}: symptoms of acute mountain sickness and an SpO2 below the expected "
                            f"range, with the plan going higher on day {obs.day + 1}."),
                "recommendation": rec["text"], "source": rec_source})
        out.append(rec_out)
    return out
