"""Rendering of results for people (rich tables) and for other tools (JSON, CSV); no physics here.

Why this module is long: the terminal, CSV and JSON renderings of a plan result are declared side by side so that the three back ends stay in step; a declared table model shared by all back ends is open work.
"""

from __future__ import annotations

import csv
import io
import json
import math
from altox.guidance.cautions import CAUTION  # noqa: E402,F401  (re-exported)
from altox.present.terminal import caution_panel  # noqa: E402,F401  (re-exported)


# rows of the point table: key, label, unit, digits; pressures get a kPa column
_POINT_ROWS = (
    ("altitude_m", "Altitude", "m", 0),
    ("barometric_mmhg", "Barometric pressure (PB)", "mmHg", 1),
    ("fio2", "Inspired O2 fraction (FiO2)", "", 4),
    ("inspired_po2_mmhg", "Inspired PO2 (PIO2)", "mmHg", 1),
    ("alveolar_pco2_mmhg", "Alveolar PCO2 (PACO2)", "mmHg", 1),
    ("alveolar_po2_mmhg", "Alveolar PO2 (PAO2)", "mmHg", 1),
    ("arterial_po2_mmhg", "Arterial PO2 (PaO2)", "mmHg", 1),
    ("alveolar_arterial_mmhg", "Alveolar-arterial difference", "mmHg", 1),
    ("arterial_ph", "Arterial pH", "", 3),
    ("bicarbonate_mmol_l", "Bicarbonate (HCO3)", "mmol/L", 1),
    ("sao2_pct", "Expected saturation (SaO2)", "%", 1),
    ("hemoglobin_g_dl", "Hemoglobin", "g/dL", 1),
    ("o2_content_ml_dl", "O2 content (CaO2)", "mL/dL", 1),
    ("ventilation_ratio", "Alveolar ventilation vs sea level", "x", 2),
    ("equivalent_altitude_m", "Equivalent altitude (same PIO2, air)", "m", 0),
)
KPA_PER_MMHG = 0.133322387415


def _clean(value):
    """JSON-safe scalar: floats rounded sensibly, NaN as None, numpy types unwrapped."""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float):
        if math.isnan(value) or math.isinf(value):
            return None
        return round(value, 6)
    return value


def to_json(obj, indent: int | None = 2) -> str:
    """JSON text of a mapping or list of mappings of scalars (numpy types allowed); ``indent=None``
    gives one line (JSON Lines)."""
    def walk(o):
        if isinstance(o, dict):
            return {k: walk(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [walk(v) for v in o]
        if hasattr(o, "tolist") and getattr(o, "ndim", 0) > 0:
            return [walk(v) for v in o.tolist()]
        return _clean(o)
    return json.dumps(walk(obj), indent=indent, ensure_ascii=False)


#: keys of altox's data that are notes for maintainers (how a figure was checked), never user output
MAINTAINER_KEYS = frozenset({"basis", "where", "checked", "patient_flow_basis", "rapid_decompression_basis"})


def public(obj):
    """``obj`` without maintainers' notes: every mapping loses the keys in :data:`MAINTAINER_KEYS`."""
    if isinstance(obj, dict):
        return {k: public(v) for k, v in obj.items() if k not in MAINTAINER_KEYS}
    if isinstance(obj, (list, tuple)):
        return [public(v) for v in obj]
    return obj


def to_csv(rows: list[dict]) -> str:
    """CSV text of a list of flat mappings; the header is the union of keys in first-seen order."""
    keys: list[str] = []
    for row in rows:
        for k in row:
            if k not in keys:
                keys.append(k)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=keys, lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: _csv_cell(_clean(row.get(k))) for k in keys})
    return buf.getvalue()


#: the one-line caution that opens every plan's output (the full caution closes it)
SHORT_CAUTION = "Guidance only: model estimates, not a clearance; the full caution is at the end."


#: first characters that make a spreadsheet read a cell as a formula (OWASP, "CSV injection")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "|", "%")


def _csv_cell(value):
    """A text cell a spreadsheet would run as a formula gets a leading apostrophe; numbers stay numbers."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        try:
            float(value)
            return value
        except ValueError:
            return "'" + value
    return value




# point rows that exist only at a resting steady state (not shown where there is none)
_STEADY_STATE_KEYS = ("alveolar_pco2_mmhg", "alveolar_po2_mmhg", "arterial_po2_mmhg", "alveolar_arterial_mmhg",
                      "arterial_ph", "bicarbonate_mmol_l", "sao2_pct", "o2_content_ml_dl", "ventilation_ratio")
VALIDITY_LABELS = {"validated": "within the validated range", "extrapolated": "EXTRAPOLATED",
                   "no_steady_state": "NO STEADY STATE"}


def saturation_text(sao2_pct, time_limited=None, digits: int = 0, unit: str = " %") -> str:
    """A saturation as shown to people, or the time-limited state where there is no steady state."""
    if time_limited:
        return time_limited
    if sao2_pct is None:
        return "-"
    return f"{sao2_pct:.{digits}f}{unit}"


def point_table(result: dict, assumptions: list[str], validity: dict | None = None):
    """A rich renderable: every quantity of one point with its unit, then assumptions and caution.

    ``validity`` (:func:`altox.physiology.validity.describe`) puts the status first and beside the
    saturation; where there is no steady state the steady-state rows show none.
    """
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    validity = validity or {}
    status = validity.get("validity_status", "validated")
    table = Table(title="altox point: resting physiology at one place", title_justify="left")
    table.add_column("Quantity")
    table.add_column("Value", justify="right")
    table.add_column("Unit")
    table.add_column("kPa", justify="right")
    for key, label, unit, digits in _POINT_ROWS:
        value = result[key]
        if status == "no_steady_state" and key in _STEADY_STATE_KEYS:
            table.add_row(label, "none" if key == "sao2_pct" else "-", "", "")
            continue
        text = f"{value:.{digits}f}"
        if key == "sao2_pct" and status != "validated":
            text += f" ({status})"
        kpa = f"{value * KPA_PER_MMHG:.2f}" if unit == "mmHg" else ""
        if key == "altitude_m":
            text += f"  ({value / 0.3048:,.0f} ft)"
        if key == "equivalent_altitude_m" and result.get("equivalent_altitude_clipped"):
            text += " (beyond model)"
        table.add_row(label, text, unit, kpa)
    notes = list(assumptions)
    if result.get("alveolar_po2_clamped"):
        notes.append("WARNING: the alveolar gas equation fell below zero here; PAO2 was set to 0.")
    if not result.get("solver_converged", True):
        notes.append("WARNING: the ventilation model did not converge; values are unreliable.")
    body = Text("Assumptions:\n" + "\n".join(f"- {n}" for n in notes))
    if not validity:
        return Group(table, body, caution_panel())
    first = validity.get("time_limited") or VALIDITY_LABELS[status]
    head = Text(("" if status == "validated" else first[0].upper() + first[1:] + "\n") + "\n".join(f"- {n}" for n in validity["validity_notes"]),
                style="bold" if status != "validated" else "")
    return Group(head, table, body, caution_panel())


# -- plans ------------------------------------------------------------------------------------
# flags are short words (defined in altox.present.legend), followed by the finding's number
FLAG_BROKEN = "breaks "   # the plan does not meet finding n
FLAG_MET = "met "         # finding n asks for oxygen here and the plan provides it
OUTSIDE_MODEL = "outside"  # the leg leaves the model's validity: no steady state (see the notes)
EXTRAPOLATED_MARK = "extrapolated"  # a steady state beyond the published data (see the notes)
FLAG_LEGEND = ("Flags: 'breaks n' = the plan does not meet finding n of the verdict; 'met n' = finding n "
               "asks for oxygen here and the plan provides it; 'outside' = outside the model, no steady "
               "state (no saturation shown); 'extrapolated' = beyond the published data (see the "
               "assumptions).")


def validity_mark(leg: dict) -> str:
    """The validity mark of a leg for the flags column: '?', '~' or ''."""
    if not leg.get("model_valid", True):
        return OUTSIDE_MODEL
    return EXTRAPOLATED_MARK if leg.get("validity_status") == "extrapolated" else ""


#: per-leg and per-sample values that exist only at a resting steady state
PLAN_STEADY_STATE_KEYS = ("alveolar_pco2_mmhg", "alveolar_po2_mmhg", "arterial_po2_mmhg", "arterial_ph", "sao2_pct",
                          "night_sao2_pct", "o2_content_ml_dl")


def shown_leg(leg: dict) -> dict:
    """A leg as shown to people: without a steady state its steady-state values are None (the
    ``time_limited`` text stands in their place); every back end reads legs through this."""
    if not leg.get("time_limited"):
        return leg
    return {**leg, **{k: None for k in PLAN_STEADY_STATE_KEYS if k in leg}}


def _timeline_rows(result) -> list[dict]:
    """Per-sample rows; where a sample has no steady state its steady-state values are None."""
    from altox.physiology.validity import NO_STEADY_STATE, STATUS_NAMES

    samples = result.samples
    rows = []
    for i in range(len(samples["time_h"])):
        row = {k: v[i] for k, v in samples.items()}
        if "validity_status" in row:
            code = int(row["validity_status"])
            row["validity_status"] = STATUS_NAMES[code]
            if code == NO_STEADY_STATE:
                row.update({k: None for k in PLAN_STEADY_STATE_KEYS if k in row})
        rows.append(row)
    return rows


def _num(value, fmt: str = "{:.0f}", none: str = "-") -> str:
    return none if value is None else fmt.format(value)


def _flag_text(result, leg, sep=", "):
    marks = []
    for k in leg["flags"]:
        f = result.findings[k]
        marks.append(f"{FLAG_MET if f.status == 'required-planned' else FLAG_BROKEN}{k + 1}")
    return sep.join(marks) or "-"


def _fmt_h(hours: float) -> str:
    if hours >= 48:
        return f"{hours / 24:.1f} d"
    if hours >= 1:
        return f"{hours:.1f} h"
    return f"{hours * 60:.0f} min"


def _fold(table):
    """Wrap long cells onto more lines; never cut a value or a name short with an ellipsis."""
    for column in table.columns:
        column.overflow = "fold"
    return table


def _compact_table(title=None, caption=None):
    """A rich table without side borders: one header rule, rows on single lines where they fit."""
    from rich import box
    from rich.table import Table

    return Table(title=title, title_justify="left", pad_edge=False, box=box.SIMPLE_HEAD, show_edge=False,
                 caption=caption, caption_justify="left")


def oxygen_sentence(ox: dict) -> str:
    """Oxygen on and off, in one sentence: what the planned oxygen achieves and what if it fails."""
    legs = ", ".join(map(str, ox["legs"]))
    text = f"Oxygen planned on leg{'s' if len(ox['legs']) > 1 else ''} {legs}: "
    w = ox["sao2_with_oxygen_pct"]
    if w:
        text += (f"with it, expected SaO2 {w[0]:.0f} %" if round(w[0]) == round(w[1])
                 else f"with it, expected SaO2 {w[0]:.0f}-{w[1]:.0f} %") + " (reference adult); "
    if ox["sao2_if_it_fails_pct"] is not None:
        text += (f"if it fails, on air, {ox['sao2_if_it_fails_pct']:.0f} % (the other figures of this output "
                 "are on air).")
    return text


def verdict_renderables(result, verdict: dict, feet: bool = False) -> list:
    """The verdict first: the worst moment, each person's worst moment, what breaks which rule and
    what to do (the findings, numbered as the flags in the tables)."""
    from rich.text import Text

    w = verdict["worst"]
    out = []
    state = "asleep" if w["asleep"] else "awake"
    from altox.units import label_in_unit

    label = label_in_unit(w["label"], feet)
    where = label if label.lower().startswith("leg") else f"{label} (leg {w['leg']})"
    who = w.get("subject", "reference adult")
    if w.get("time_limited"):   # no steady state: never a saturation
        out.append(Text(f"Verdict. Worst moment: {where}: {w['time_limited']}, {who} on air."))
    else:
        out.append(Text(f"Verdict. Worst moment: {where}: expected SaO2 {w['sao2_pct']:.0f} % "
                        f"{state}, {who} at rest on air."))
    people = verdict["people"]
    if len(people) > 1:
        expedition = result.kind == "expedition"
        table = _compact_table()
        table.add_column("Worst moment per person")
        table.add_column("Leg", justify="right")
        table.add_column("SaO2 %", justify="right")
        table.add_column("Range %", justify="right")
        table.add_column("State")
        table.add_column("Risk" if expedition else "Role")
        for p in people:
            rng = "-" if p["range_pct"] is None else f"{p['range_pct'][0]:.0f}-{p['range_pct'][1]:.0f}"
            state = "-" if p["asleep"] is None else ("asleep" if p["asleep"] else "awake")
            last = (p["risk_category"] or "-") if expedition else p["role"]
            table.add_row(p["name"], str(p["leg"]), saturation_text(p["sao2_pct"], p.get("time_limited") and "none",
                                                                     unit=""), rng, state, last)
        out.append(_fold(table))
        limited: dict[tuple, list[str]] = {}
        for p in people:
            if p.get("time_limited"):
                limited.setdefault((p["leg"], p["time_limited"]), []).append(p["name"])
        for (leg_no, text), names in limited.items():
            out.append(Text(f"SaO2 none for {', '.join(names)}: on leg {leg_no}, {text}."))
    ox = verdict.get("oxygen")
    if ox:
        out.append(Text(oxygen_sentence(ox)))
    for a in verdict.get("actions") or []:
        out.append(Text(f"ACTION (readings) day {a['day']}, {a['member']}: {a['what']}; see Readings.",
                        style="bold"))
    c = verdict["counts"]
    rules = ", ".join(c["rule_sets"]) or "none"
    if not verdict["findings"]:
        out.append(Text(f"Guidance ({rules}): the plan touches no rule altox checks; not a clearance."))
        return out
    out.append(Text(f"Findings ({rules}): {c['not_met']} not met, {c['met_with_oxygen']} met with the "
                    "planned oxygen.", style="bold"))
    for f in verdict["findings"]:
        out.append(Text(f"{f['number']}. {f['status'].capitalize()} ({f['section']}): {f['message']} "
                        f"To do: {f['what_to_do']}"))
    return out


def plan_renderables(result, *, feet: bool = False, rule_sets=None):
    """Rich renderables for one evaluated plan, in the order of a decision: a short caution, the
    verdict and findings, the people, the per-leg tables, oxygen and decompression, assumptions
    and sources, and the full caution at the end."""
    from rich.table import Table
    from rich.text import Text

    from altox.evaluation.verdict import plan_verdict

    if rule_sets is None:
        from altox.guidance.applied import applied_rule_sets

        rule_sets, _missing = applied_rule_sets(result)
    out = [Text(result.name, style="bold"), Text(f"{result.kind.capitalize()} plan: {result.source or 'given as data'}"),
           Text(SHORT_CAUTION)]
    out.extend(verdict_renderables(result, plan_verdict(result, rule_sets), feet=feet))
    if getattr(result, "guidance_notes", None):
        out.append(Text("Guidance not applied or not checked\n"
                        + "\n".join(f"(!) {n}" for n in result.guidance_notes)))

    # -- people and exposure --------------------------------------------------------------------
    s = result.summary
    lines = [f"Hypoxic dose: {s['hypoxic_dose_kmh']:.1f} km.h above {s['dose_floor_m']:,.0f} m over "
             f"{_fmt_h(s['total_hours'])}."]
    below = [f"{k.split('_')[2]} %: {_fmt_h(v)}" for k, v in s.items() if k.startswith("hours_below_")]
    subj = s.get("subject") or {"name": "reference adult", "role": "reference"}
    if below:
        lines.append(f"Time below SaO2 ({subj['name']}): " + "; ".join(below) + ".")
    if subj["role"] == "patient":
        lines.append(f"Subject: {subj['name']} (the patient), age {subj['age_y']:.0f}, Hb "
                     f"{subj['hemoglobin_g_dl']:.1f} g/dL: lowest SaO2 on air {s['worst_sao2_pct']:.0f} % "
                     f"(leg {s['worst_leg']}).")
        on = subj.get("worst_sao2_pct_planned_oxygen")
        unstated = subj.get("oxygen_fio2_unstated_legs") or []
        if on is not None:
            lines.append(f"With the planned oxygen: lowest SaO2 {on:.0f} %"
                         + (f" (oxygen planned without an FiO2 on leg(s) {', '.join(map(str, unstated))}: not "
                            "computed there)." if unstated else "."))
    cabin = [f"{int(k.split('_')[3]):,} ft: {_fmt_h(v)}" for k, v in s.items() if k.startswith("hours_cabin_above_")]
    if cabin:
        lines.append("Time with cabin above: " + "; ".join(cabin) + ".")
    out.append(Text("Exposure\n" + "\n".join(lines)))
    if result.members:
        people = Table(title="People", title_justify="left", pad_edge=False)
        for name in ("Name", "Role", "Age", "Hb g/dL", "Lowest SaO2 %", "Leg", "Risk (guidance)"):
            people.add_column(name, justify="left" if name in ("Name", "Role", "Risk (guidance)") else "right", overflow="fold")
        for m in result.members:
            dflt = set(m.get("defaults_used", ()))
            people.add_row(m["name"], m["role"], f"{m['age_y']:.0f}" + ("*" if "age" in dflt else ""),
                           f"{m['hemoglobin_g_dl']:.1f}" + ("*" if "hemoglobin" in dflt else ""),
                           saturation_text(m["min_sao2_pct"], m.get("time_limited") and "none", unit=""),
                           str(m["min_sao2_leg"]), m.get("risk_category") or "-")
        out.append(people)
        if any(m.get("defaults_used") for m in result.members):
            out.append(Text("* a default (the reference adult's age 40 or Hb 14.5 g/dL), not given in the plan: "
                            "not the person's own value."))
        texts: dict[str, list[str]] = {}
        for m in result.members:
            if m.get("prophylaxis"):
                texts.setdefault(m["prophylaxis"], []).append(m["name"])
        for text, names in texts.items():
            out.append(Text(f"Prevention (guidance) for {', '.join(names)}: {text}"))
    out.extend(people_extras_renderables(result, feet=feet))

    # -- per-leg tables -------------------------------------------------------------------------
    out.extend(leg_renderables(result, feet=feet))
    out.extend(oxygen_extras_renderables(result, feet=feet))
    from altox.present.legend import legend_lines

    out.append(Text("Terms\n" + "\n".join(f"- {line}" for line in legend_lines(result.kind))))
    out.append(Text("Assumptions\n" + "\n".join(f"- {n}" for n in result.notes)))
    out.append(Text("Sources\n" + "\n".join(f"- {line}" for line in sources_lines(result, rule_sets))))
    out.append(caution_panel())
    return out


def sources_lines(result, rule_sets) -> list[str]:
    """The primary source of every rule set applied and of every finding, once each."""
    lines = []
    for rs in rule_sets or ():
        line = f"{rs.id}: {rs.citation.rstrip('.')}." + (f" Official text: {rs.url}" if rs.url else "")
        if line not in lines:
            lines.append(line)
    for f in result.findings:
        if not any(f.citation.rstrip(".") in line for line in lines):
            lines.append(f"{f.rule_set_id}: {f.citation.rstrip('.')}.")
    return lines or ["No rule set applied."]


def leg_renderables(result, *, feet: bool = False) -> list:
    """The per-leg tables: where and when, then the expected physiology with the flags."""
    from rich.table import Table
    from rich.text import Text

    out = []
    alt_unit = "ft" if feet else "m"
    conv = (lambda m: m / 0.3048) if feet else (lambda m: m)
    where = Table(title="Where and when", title_justify="left", pad_edge=False,
                  caption="PB and PIO2 at the worst moment of the leg; dose cumulative to its end.",
                  caption_justify="left")
    where.add_column("Leg", justify="right")
    where.add_column("What")
    if result.kind == "expedition":
        where.add_column(f"Sleep {alt_unit}", justify="right")
        where.add_column(f"High {alt_unit}", justify="right")
    else:
        where.add_column("Aircraft FL/ft", justify="right")
        where.add_column("Cabin ft", justify="right")
    where.add_column("Time", justify="right")
    where.add_column("PB mmHg", justify="right")
    where.add_column("PIO2 mmHg", justify="right")
    where.add_column("Dose km.h", justify="right")
    for leg in result.legs:
        what = leg.get("activity") or leg.get("phase")
        if leg["oxygen_planned"]:
            what += " +O2"
        if result.kind == "expedition":
            a = f"{conv(leg['sleep_altitude_m']):,.0f}"
            b = f"{conv(leg['high_altitude_m']):,.0f}" if leg["high_altitude_m"] is not None else "-"
            when = f"day {leg['day']}"
        else:
            ac_ft = leg["aircraft_pressure_altitude_ft"]
            a = f"FL{ac_ft / 100:.0f}" if ac_ft >= 18000 else f"{ac_ft:,.0f}"
            b = f"{leg['max_cabin_pressure_altitude_ft']:,.0f}"
            when = _fmt_h(leg["duration_h"])
        where.add_row(str(leg["leg"]), what, a, b, when, f"{leg['barometric_mmhg']:.0f}",
                      f"{leg['inspired_po2_mmhg']:.0f}", f"{leg['hypoxic_dose_kmh']:.1f}")
    out.append(_fold(where))

    who = (result.summary.get("subject") or {}).get("name", "reference adult")
    phys = Table(title=f"Expected physiology at rest, on air ({who}, worst awake moment of each leg)",
                 title_justify="left", pad_edge=False)
    night = result.kind == "expedition"
    names = ["Leg", "PACO2 mmHg", "PAO2 mmHg", "PaO2 mmHg", "PaO2 kPa", "SaO2 %"]
    names += (["Night SaO2 %"] if night else []) + ["CaO2 mL/dL", "Flags"]
    for name in names:
        phys.add_column(name, justify="left" if name == "Flags" else "right", overflow="fold")
    for leg in map(shown_leg, result.legs):
        pao2 = leg["arterial_po2_mmhg"]
        row = [str(leg["leg"]), _num(leg["alveolar_pco2_mmhg"]), _num(leg["alveolar_po2_mmhg"]), _num(pao2),
               _num(None if pao2 is None else pao2 * KPA_PER_MMHG, "{:.1f}"), _num(leg["sao2_pct"], none="none")]
        if night:
            row.append(_num(leg["night_sao2_pct"]))
        flags = _flag_text(result, leg, sep="\n")   # one flag a line: a flag is never split
        if validity_mark(leg):
            flags = (validity_mark(leg) + "\n" + flags) if flags != "-" else validity_mark(leg)
        phys.add_row(*row, _num(leg["o2_content_ml_dl"], "{:.1f}"), flags)
    out.append(phys)
    limited = [f"Leg {leg['leg']}: {leg['time_limited']}." for leg in result.legs if leg.get("time_limited")]
    out.append(Text(FLAG_LEGEND + ("\n" + "\n".join(limited) if limited else "")))
    return out


def extras_renderables(result) -> list:
    """Expected ranges, readings, oxygen and decompression sections of a plan (no caution: the caller's)."""
    return people_extras_renderables(result) + oxygen_extras_renderables(result)


def people_extras_renderables(result, feet: bool = False) -> list:
    """Expected SaO2 ranges, fitness to fly and readings, where the plan has them."""
    from rich.table import Table
    from rich.text import Text

    out = []
    ranges = result.extras.get("ranges")
    if ranges and ranges.get("people"):
        lo_p, hi_p = ranges["percentiles"][0], ranges["percentiles"][-1]
        table = Table(title=f"Expected SaO2 by person: central and {lo_p:g}th-{hi_p:g}th percentile "
                            f"({ranges['n']} simulated people each)", title_justify="left", pad_edge=False)
        for name in ("Name", "Worst leg", "Central %", "Range %", "Asleep"):
            table.add_column(name, justify="left" if name == "Name" else "right", overflow="fold")
        for person in ranges["people"]:
            worst = min(person["legs"], key=lambda leg: (leg.get("model_valid", True), leg["central_sao2_pct"]))
            pct = worst["sao2_pct_percentiles"]
            if worst.get("model_valid", True):
                central, spread = f"{worst['central_sao2_pct']:.0f}", f"{pct[0]:.0f}-{pct[-1]:.0f}"
            else:   # no steady state: no saturation (the time-limited state is in the legs and notes)
                central, spread = "none", "-"
            table.add_row(person["name"], str(worst["leg"]), central, spread, "yes" if worst["sleeping"] else "no")
        out.append(table)
    if result.extras.get("fitness_to_fly"):
        from altox.present.render_people import fitness_lines

        out.append(Text("Fitness to fly (guidance; British Thoracic Society thresholds)\n"
                        + "\n".join(fitness_lines(result.extras["fitness_to_fly"]))))
    if result.extras.get("readings") is not None:
        from altox.present.render_people import readings_renderables

        out.extend(readings_renderables(result.name, result.extras["readings"], [], feet=feet))
    return out


def oxygen_extras_renderables(result, feet: bool = False) -> list:
    """The oxygen and decompression reviews of a plan, where it has them."""
    out = []
    ox, dec = result.extras.get("oxygen"), result.extras.get("decompression")
    if ox or dec:
        from altox.present.render_oxygen import decompression_review_renderables, oxygen_review_renderables

        if ox:
            out.extend(oxygen_review_renderables(ox, with_caution=False, feet=feet, legs=result.legs))
        if dec:
            out.extend(decompression_review_renderables(dec, with_caution=False))
    return out


def finding_dict(finding) -> dict:
    """A finding for users: its fields without the maintainers' basis, with ``figure_checked``."""
    from dataclasses import asdict

    from altox.guidance.checker import figure_checked

    data = {k: v for k, v in asdict(finding).items() if k != "basis"}
    data["figure_checked"] = figure_checked(finding.basis)
    return data


#: the sections of a plan's JSON, in the order of the terminal and the report
JSON_SECTIONS = ("plan", "kind", "source", "caution_short", "rule_sets", "verdict", "findings", "guidance_notes",
                 "summary",
                 "members", "ranges", "fitness_to_fly", "readings", "legs", "oxygen", "decompression", "notes",
                 "sources", "caution")


def range_without_unsteady(person: dict) -> dict:
    """One person's expected range with no saturation where there is no steady state."""
    import numpy as np

    out = {**person, "legs": [leg if leg.get("model_valid", True) else
                              {**leg, "central_sao2_pct": None, "sao2_pct_percentiles": None,
                               "lowest_sao2_pct_percentiles": None} for leg in person["legs"]]}
    if "central_sao2_pct" in person and "model_valid" in person:   # per sample (--timeline)
        valid = np.asarray(person["model_valid"], dtype=bool)
        out["central_sao2_pct"] = np.where(valid, person["central_sao2_pct"], np.nan)
        out["sao2_pct_percentiles"] = np.where(valid, person["sao2_pct_percentiles"], np.nan)
    return out


def plan_to_dict(result, *, timeline: bool = False, rule_sets=None) -> dict:
    """JSON-ready mapping of an evaluated plan (same numbers as the tables), its sections in the
    order of the terminal output (:data:`JSON_SECTIONS`; extras a plan lacks are left out)."""
    from altox.evaluation.verdict import plan_verdict

    if rule_sets is None:
        from altox.guidance.applied import applied_rule_sets

        rule_sets, _missing = applied_rule_sets(result)
    legs = []
    for leg in map(shown_leg, result.legs):
        row = {k: v for k, v in leg.items() if k != "flags"}
        row["flags"] = [_flag_text(result, {"flags": [k]}) for k in leg["flags"]]
        legs.append(row)
    parts = {
        "plan": result.name, "kind": result.kind, "source": result.source, "caution_short": SHORT_CAUTION,
        "rule_sets": result.rule_sets, "verdict": plan_verdict(result, rule_sets),
        "findings": [finding_dict(f) for f in result.findings],
        "guidance_notes": list(getattr(result, "guidance_notes", [])), "summary": result.summary,
        "members": result.members, "legs": legs, "notes": result.notes,
        "sources": sources_lines(result, rule_sets), "caution": CAUTION,
    }
    for key, value in result.extras.items():
        if key == "ranges" and not timeline:   # per-sample percentiles only with --timeline
            value = {k: v for k, v in value.items() if k not in ("time_h", "duration_h", "leg", "altitude_m",
                                                                 "sleeping")}
            value["people"] = [{k: v for k, v in p.items() if k not in ("central_sao2_pct", "sao2_pct_percentiles", "model_valid")}
                               for p in value["people"]]
        if key == "ranges":   # no saturation where there is no steady state
            value = {**value, "people": [range_without_unsteady(p) for p in value["people"]]}
        parts[key] = value
    order = [k for k in JSON_SECTIONS if k in parts] + [k for k in parts if k not in JSON_SECTIONS]
    data = public({k: parts[k] for k in order})
    if timeline:
        data["timeline"] = _timeline_rows(result)
    return data


def plan_csv_rows(result, *, timeline: bool = False) -> list[dict]:
    """One flat row per leg (or per sample with ``timeline``), each with the plan's name."""
    if timeline:
        rows = [{"plan": result.name, **row} for row in _timeline_rows(result)]
    else:
        rows = []
        for leg in map(shown_leg, result.legs):
            row = {"plan": result.name, **{k: v for k, v in leg.items() if k != "flags"}}
            row["validity_notes"] = " ".join(leg.get("validity_notes", []))
            row["flags"] = " ".join(_flag_text(result, {"flags": [k]}) for k in leg["flags"])
            rows.append(row)
    notes = " ".join(getattr(result, "guidance_notes", []))
    for row in rows:  # on every row, so no reader of the file misses it
        row["guidance_notes"] = notes
    return rows
