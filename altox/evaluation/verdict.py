"""The verdict of an evaluated plan: the worst moment per person, what breaks which rule, what to do.

Presentation data only (no physics): it reads :class:`altox.evaluation.evaluate.PlanResult` and the rule
sets applied, and returns plain mappings that the terminal (:mod:`altox.present.render`), the JSON and
the HTML report (:mod:`altox.present.report`) all show first, in the same order.
"""

from __future__ import annotations

from altox.guidance.applied import threshold_of

#: what each finding status means for the plan, in words
STATUS_WORDS = {
    "required-not-planned": "not met",
    "limit-exceeded": "not met",
    "required-planned": "met with the planned oxygen",
}
BROKEN = ("required-not-planned", "limit-exceeded")


def what_to_do(finding, threshold, kind: str) -> str:
    """One sentence: what would change the plan so that it meets the rule (guidance only)."""
    from altox.guidance.checker import _fmt_list as _list, figure_checked

    where = ("day " if kind == "expedition" else "leg ") if len(finding.legs) == 1 else \
        ("days " if kind == "expedition" else "legs ")
    where += _list(finding.legs)
    if threshold is None or not figure_checked(threshold.basis):
        return f"Read {finding.section} of the source and check {where} against it."
    if finding.status == "required-planned":
        return f"Carry the planned oxygen and use it on {where}, as the rule asks."
    check = threshold.check
    if check == "sleep_gain":
        return (f"Spread the ascent so that no night above {threshold.above} sleeps more than "
                f"{threshold.value} higher than the night before ({where}).")
    if check == "rest_interval":
        return f"Add a rest day (no gain in sleeping altitude) before {where}."
    if check == "rest_per_gain":
        return f"Add an extra day for acclimatization before {where}."
    if check == "limit":
        return f"Keep the cabin at or below {threshold.value} on {where}, or accept it with the operator."
    who = {"crew": "the crew", "flight crew": "the flight crew", "passengers": "the passengers",
           "all occupants": "everyone aboard", "party": "the party"}.get(threshold.applies_to, "them")
    return f"Plan oxygen for {who} on {where}, or fly with the cabin lower there."


def plan_verdict(result, rule_sets=None) -> dict:
    """The verdict of a plan, as data.

    Returns
    -------
    dict
        ``worst`` (the subject's worst moment: leg, label, SaO2, awake or asleep, ``subject``: the
        patient aboard, else the reference adult),
        ``people`` (each person's worst moment, with the expected range where computed, and
        the guideline risk category on an expedition), ``findings`` (each finding numbered
        as in the tables, with its status in words and what to do) and ``counts``.
    """
    s = result.summary
    leg = next((lg for lg in result.legs if lg["leg"] == s["worst_leg"]), None)
    asleep = bool(leg is not None and leg.get("night_sao2_pct") is not None
                  and leg["night_sao2_pct"] < leg["sao2_pct"])
    # without a steady state there is no saturation: ``time_limited`` says what there is instead
    worst = {"leg": s["worst_leg"], "label": s["worst_leg_label"], "sao2_pct": s["worst_sao2_pct"],
             "asleep": asleep, "time_limited": s.get("worst_time_limited")}
    ranges = {p["name"]: p for p in (result.extras.get("ranges") or {}).get("people", [])}
    people = []

    def entry(name, role, sao2, leg_no, risk=None, time_limited=None):
        label = next((lg["label"] for lg in result.legs if lg["leg"] == leg_no), "")
        row = {"name": name, "role": role, "leg": leg_no, "label": label, "sao2_pct": sao2,
               "range_pct": None, "asleep": None, "risk_category": risk, "time_limited": time_limited}
        r = ranges.get(name)
        if r:
            at = next((lg for lg in r["legs"] if lg["leg"] == leg_no), None)
            if at is not None and at.get("model_valid", True):
                pct = at["sao2_pct_percentiles"]
                row["range_pct"] = [pct[0], pct[-1]]
                row["asleep"] = bool(at["sleeping"])
        return row

    subject = (s.get("subject") or {}).get("name", "reference adult")
    members = sorted(result.members, key=lambda m: m["name"] != subject)   # the patient first
    if subject == "reference adult":
        people.append(entry("reference adult", "model", s["worst_sao2_pct"], s["worst_leg"],
                            time_limited=s.get("worst_time_limited")))
        if people[0]["asleep"] is None:
            people[0]["asleep"] = asleep
    worst["subject"] = subject
    for m in members:
        people.append(entry(m["name"], m["role"], m["min_sao2_pct"], m["min_sao2_leg"], m.get("risk_category"),
                            m.get("time_limited")))
    findings = []
    for k, f in enumerate(result.findings):
        th = threshold_of(rule_sets, f)
        findings.append({"number": k + 1, "rule_set_id": f.rule_set_id, "section": f.section,
                         "status": STATUS_WORDS.get(f.status, f.status), "legs": list(f.legs),
                         "message": f.message, "what_to_do": what_to_do(f, th, result.kind),
                         "citation": f.citation})
    oxygen = None
    planned = (result.extras.get("oxygen") or {}).get("planned") or []
    with_o2 = [r["sao2_pct"] for r in planned if r.get("sao2_pct") is not None]
    if planned:
        legs = sorted({r["leg"] for r in planned})
        on_air = [lg for lg in result.legs if lg["leg"] in legs]
        air = [min(v for v in (lg.get("sao2_pct"), lg.get("night_sao2_pct")) if v is not None)
               for lg in on_air if lg.get("sao2_pct") is not None]
        oxygen = {"legs": legs, "sao2_with_oxygen_pct": [min(with_o2), max(with_o2)] if with_o2 else None,
                  "sao2_if_it_fails_pct": min(air) if air else None}
    # readings that call for action (e.g. suspected pulmonary oedema) belong in the verdict
    actions = [{"day": r["day"], "member": r["member"], "what": a["action"].split(":")[0].strip(),
                "action": a["action"], "source": a["source"]}
               for r in (result.extras.get("readings") or []) for a in r.get("actions", [])]
    broken = sum(f.status in BROKEN for f in result.findings)
    counts = {"not_met": broken, "met_with_oxygen": len(result.findings) - broken,
              "rule_sets": list(result.rule_sets)}
    return {"worst": worst, "people": people, "oxygen": oxygen, "actions": actions, "findings": findings,
            "counts": counts}
