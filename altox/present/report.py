"""A self-contained HTML report of an evaluated plan, and safe writing of output files.

The report is one HTML file: inline CSS, the chart as inline SVG (:mod:`altox.present.charts`), no
scripts, no fonts, images or style sheets fetched from anywhere, and a Content-Security-Policy
that tells the browser to fetch nothing even if something slipped in.  It opens with the
guidance caution, before any number, and ends with it.  Layout is one column that fits the
printable width of A4 and US Letter; ``@page`` and print rules keep tables and the chart
whole where they can.

No physics here: numbers come from :class:`altox.evaluation.evaluate.PlanResult`; guidance texts and
sources from the rule sets (:mod:`altox.guidance`).

Why this module is long: the HTML report is one self-contained document; its sections follow the terminal's order and share escaping helpers that must not leak to other back ends.
"""

from __future__ import annotations

import html
import re
from pathlib import Path

from altox.errors import AltoxError
from altox.guidance.applied import threshold_of
from altox.present.render import CAUTION, FLAG_BROKEN, FLAG_LEGEND, FLAG_MET, KPA_PER_MMHG, _fmt_h, saturation_text, shown_leg, validity_mark
from altox.present.outfiles import check_output, write_atomic  # noqa: E402,F401  (re-exported)

REPORT_SUFFIXES = (".html", ".htm")
#: the Content-Security-Policy of every report: inline styles only, nothing fetched, no scripts
CSP = "default-src 'none'; style-src 'unsafe-inline'; img-src 'none'; base-uri 'none'; form-action 'none'"
_FT_PER_M = 1.0 / 0.3048

_CSS = """
:root { --ink: #1b2430; --muted: #55606d; --line: #c8ced6; --zebra: #f4f6f8;
        --caution-bg: #fff6e5; --caution-edge: #7a4a00; --broken: #9c2f2f; }
* { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; }
body { margin: 0 auto; max-width: 58rem; padding: 1.2rem 1rem 2rem; color: var(--ink); background: #fff;
       font: 15px/1.45 system-ui, "Segoe UI", "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
h1 { font-size: 1.45rem; margin: 0 0 .2rem; line-height: 1.25; overflow-wrap: anywhere; }
h2 { font-size: 1.12rem; margin: 1.6rem 0 .5rem; padding-bottom: .15rem; border-bottom: 2px solid var(--ink); }
h3 { font-size: 1rem; margin: 1rem 0 .3rem; }
p, li, dd { overflow-wrap: anywhere; }
.meta { color: var(--muted); margin: 0 0 .8rem; font-size: .9rem; }
.caution { border: 2px solid var(--caution-edge); border-left-width: 10px; background: var(--caution-bg);
           padding: .6rem .9rem; margin: .6rem 0 1rem; }
.caution h2 { border: 0; margin: 0 0 .25rem; padding: 0; font-size: 1.05rem; letter-spacing: .02em; }
.caution p { margin: 0; font-size: .95rem; }
dl.summary { display: grid; grid-template-columns: max-content 1fr; gap: .2rem 1rem; margin: 0; }
dl.summary dt { font-weight: 600; }
dl.summary dd { margin: 0; }
figure { margin: .6rem 0 0; }
figure svg { display: block; width: 100%; height: auto; }
figcaption { font-size: .85rem; color: var(--muted); margin-top: .3rem; }
table { border-collapse: collapse; width: 100%; font-size: .82rem; margin: .3rem 0 .4rem;
        font-variant-numeric: tabular-nums; }
caption { text-align: left; font-weight: 600; padding: .2rem 0; caption-side: top; }
th, td { border-bottom: 1px solid var(--line); padding: .22rem .35rem; vertical-align: top; overflow-wrap: break-word; }
th { text-align: left; background: #e9edf1; font-weight: 600; }
td.n, th.n { text-align: right; }
td.n { white-space: nowrap; }
tbody tr:nth-child(even) td { background: var(--zebra); }
tbody tr.broken td, tbody tr.broken:nth-child(even) td { background: repeating-linear-gradient(135deg, #fff 0 6px, #f3dede 6px 9px); }
tbody tr.broken td:first-child { box-shadow: inset 4px 0 0 var(--broken); }
.flag { font-weight: 700; white-space: nowrap; }
.flag.x { color: var(--broken); }
.small { font-size: .85rem; color: var(--muted); }
ol.findings { list-style: none; padding-left: 0; }
ol.findings li, ul.plain li { margin-bottom: .35rem; }
.source { font-size: .85rem; color: var(--muted); }
code { font-size: .85em; overflow-wrap: anywhere; }
.note { font-size: .88rem; }
footer { margin-top: 1.6rem; }
@page { margin: 14mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  figure, .caution, tr, dl.summary { break-inside: avoid; page-break-inside: avoid; }
  thead { display: table-header-group; }
  table { font-size: 8.5pt; }
  .caution, tr.broken td, th { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""








# -- the report -----------------------------------------------------------------------------------
def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _s(text) -> str:
    """Escaped text without its closing full stop (the report adds its own punctuation)."""
    return _e(str(text).rstrip().rstrip("."))


def _rows(cells_list, numeric) -> str:
    out = []
    for cells, cls in cells_list:
        tds = "".join(f'<td class="n">{c}</td>' if num else f"<td>{c}</td>" for c, num in zip(cells, numeric))
        out.append(f'<tr{f" class={chr(34)}{cls}{chr(34)}" if cls else ""}>{tds}</tr>')
    return "\n".join(out)


def _table(caption: str, headers, numeric, rows) -> str:
    ths = "".join(f'<th scope="col" class="n">{_e(h)}</th>' if num else f'<th scope="col">{_e(h)}</th>'
                  for h, num in zip(headers, numeric))
    return (f"<table>\n<caption>{_e(caption)}</caption>\n<thead><tr>{ths}</tr></thead>\n<tbody>\n"
            f"{_rows(rows, numeric)}\n</tbody>\n</table>")


def _flags_html(result, leg) -> str:
    marks = []
    for k in leg["flags"]:
        f = result.findings[k]
        met = f.status == "required-planned"
        marks.append(f'<span class="flag {"m" if met else "x"}">{FLAG_MET if met else FLAG_BROKEN}{k + 1}</span>')
    if validity_mark(leg):
        marks.insert(0, f'<span class="flag v">{_e(validity_mark(leg))}</span>')
    return " ".join(marks) or "&ndash;"


def _levels(result) -> list[int]:
    from altox.present.charts import saturation_levels_pct

    return [int(v) for v in saturation_levels_pct(result)]


def _caution_block(where: str) -> str:
    return (f'<aside class="caution" id="caution-{where}" role="note" aria-label="Caution">\n'
            f"<h2>Guidance only &mdash; not a clearance</h2>\n<p>{_e(CAUTION)}</p>\n</aside>")


def _summary(result, feet: bool, rule_sets=None) -> str:
    """The verdict first, as in the terminal: worst moment, each person's worst moment, the
    findings with what to do, then the exposure figures."""
    from altox.present.render import FLAG_BROKEN as XB
    from altox.units import label_in_unit
    from altox.evaluation.verdict import plan_verdict

    v = plan_verdict(result, rule_sets)
    s = result.summary
    w = v["worst"]
    length = (f"{len(result.legs)} days" if result.kind == "expedition"
              else f"{len(result.legs)} legs, {_fmt_h(s['total_hours'])}")
    if w.get("time_limited"):   # no steady state: never a saturation
        worst = f"<strong>{_e(w['time_limited'])}</strong>, {_e(w.get('subject', 'reference adult'))} on air."
    else:
        worst = (f"expected SaO2 <strong>{w['sao2_pct']:.0f} %</strong> {'asleep' if w['asleep'] else 'awake'}, "
                 f"{_e(w.get('subject', 'reference adult'))} at rest on air.")
    parts = ['<section id="summary">', "<h2>Verdict</h2>",
             f"<p><strong>Worst moment:</strong> {_e(label_in_unit(w['label'], feet))} (leg {w['leg']}): {worst}</p>"]
    for a in v.get("actions") or []:
        parts.append(f"<p><strong>ACTION (readings) day {a['day']}, {_e(a['member'])}:</strong> {_e(a['action'])} "
                     f'<span class="source">{_s(a["source"])}.</span></p>')
    if v.get("oxygen"):
        from altox.present.render import oxygen_sentence

        parts.append(f"<p><strong>{_e(oxygen_sentence(v['oxygen']))}</strong></p>")
    if len(v["people"]) > 1:
        expedition = result.kind == "expedition"
        rows = []
        for p in v["people"]:
            rng = "&ndash;" if p["range_pct"] is None else f"{p['range_pct'][0]:.0f}-{p['range_pct'][1]:.0f}"
            state = "&ndash;" if p["asleep"] is None else ("asleep" if p["asleep"] else "awake")
            last = _e(p["risk_category"] or "-") if expedition else _e(p["role"])
            rows.append(([_e(p["name"]), str(p["leg"]), _e(label_in_unit(p["label"], feet)),
                          _e(saturation_text(p["sao2_pct"], p.get("time_limited"), unit="")), rng, state, last], ""))
        parts.append(_table("Worst moment per person (expected SaO2; range: 5th to 95th percentile of simulated "
                            "people like them)", ["Person", "Leg", "When", "SaO2 %", "Range %", "State",
                                                  "Risk" if expedition else "Role"],
                            [False, True, False, True, True, False, False], rows))
    c = v["counts"]
    rules = ", ".join(c["rule_sets"]) or "none"
    if v["findings"]:
        parts.append(f"<h3>Findings ({_e(rules)}): {c['not_met']} not met, {c['met_with_oxygen']} met with the "
                     "planned oxygen</h3>")
        items = []
        for f in v["findings"]:
            broken = f["status"] == "not met"
            mark = XB if broken else FLAG_MET
            items.append(f'<li><span class="flag {"x" if broken else "m"}">{mark}{f["number"]}</span> '
                         f"<strong>{_e(f['status'].capitalize())}</strong> ({_e(f['section'])}): {_e(f['message'])} "
                         f"<strong>To do:</strong> {_e(f['what_to_do'])} "
                         f'<span class="source">Source: {_s(f["citation"])}.</span></li>')
        parts.append('<ol class="findings">' + "".join(items) + "</ol>")
    else:
        parts.append(f"<p>Guidance ({_e(rules)}): the plan touches no rule altox checks. That is a statement "
                     "about altox's reading of the guidance, not a clearance.</p>")
    items = [("Plan", f"{_e(result.kind)}: {_e(length)}"),
             ("Hypoxic dose", f"{s['hypoxic_dose_kmh']:.1f} km&middot;h above {s['dose_floor_m']:,.0f} m")]
    below = [f"{lvl} %: {_e(_fmt_h(s[f'hours_below_{lvl}_pct']))}" for lvl in _levels(result)]
    if below:
        subj = s.get("subject") or {"name": "reference adult", "role": "reference"}
        items.append((f"Time below SaO2 ({_e(subj['name'])})", "; ".join(below)))
        if subj["role"] == "patient" and subj.get("worst_sao2_pct_planned_oxygen") is not None:
            unstated = subj.get("oxygen_fio2_unstated_legs") or []
            items.append(("With the planned oxygen", f"lowest SaO2 {subj['worst_sao2_pct_planned_oxygen']:.0f} %"
                          + (f" (FiO2 not stated on leg(s) {', '.join(map(str, unstated))}: not computed there)"
                             if unstated else "")))
    cabin = [(int(k.split("_")[3]), v_) for k, v_ in s.items() if k.startswith("hours_cabin_above_")]
    if cabin:
        items.append(("Time with the cabin above", "; ".join(f"{ft:,} ft: {_e(_fmt_h(h))}" for ft, h in cabin)))
    body = "\n".join(f"<dt>{k}</dt><dd>{val}</dd>" for k, val in items)
    parts.append(f'<h3>Exposure</h3>\n<dl class="summary">\n{body}\n</dl>\n</section>')
    return "\n".join(parts)


def _chart(result, feet: bool, rule_sets) -> str:
    from altox.present.charts import chart_svg_inline

    svg = chart_svg_inline(result, feet=feet, rule_sets=rule_sets)
    svg = svg.replace("<svg ", f'<svg role="img" aria-label="{_e("Chart of " + result.name)}" ', 1)
    if result.kind == "flight":
        what = ("Top: aircraft pressure altitude (thin line) and cabin pressure altitude (thick dashes), "
                "with the cabin-altitude thresholds of the rule sets applied.")
    else:
        what = ("Top: altitude through each day (thin line), nights at the sleeping altitude (thick line), "
                "the day's high points (triangles), and the sleeping altitude above which the ascent-rate "
                "guidance applies.")
    subj = (result.summary.get("subject") or {}).get("name", "reference adult")
    who = "the reference adult" if subj == "reference adult" else f"{subj} (the patient)"
    cap = (f"{what} Bottom: expected SaO2 at rest on air for {who} (thick line), each person "
           "(thin lines) and the range between them, with the plan's saturation levels (dots). Hatched: legs "
           "where the plan does not meet a guidance rule (flags as in the tables); grey: rest days; "
           "cross-hatched strip: supplemental oxygen planned. Model estimates, not measurements.")
    return f'<section id="chart">\n<h2>Profile</h2>\n<figure>\n{svg}\n<figcaption>{_e(cap)}</figcaption>\n</figure>\n</section>'


def _people(result) -> str:
    levels = _levels(result)
    parts = ['<section id="people">', "<h2>People: per-person risk (guidance) and expected saturation</h2>"]
    if not result.members:
        parts.append("<p>The plan lists no people; every value is for the reference adult.</p></section>")
        return "\n".join(parts)
    expedition = result.kind == "expedition"
    headers = ["Name", "Role", "Age", "Hb g/dL", "Lowest SaO2 %", "Leg"] + [f"h below {lvl} %" for lvl in levels]
    numeric = [False, False, True, True, True, True] + [True] * len(levels)
    if expedition:
        headers.append("Risk (guidance)")
        numeric.append(False)
    rows = []
    for m in result.members:
        cells = [_e(m["name"]), _e(m["role"]), f"{m['age_y']:.0f}", f"{m['hemoglobin_g_dl']:.1f}",
                 _e(saturation_text(m["min_sao2_pct"], m.get("time_limited"), unit="")), str(m["min_sao2_leg"])]
        cells += [_e(_fmt_h(m.get(f"hours_below_{lvl}_pct", 0.0))) for lvl in levels]
        if expedition:
            cells.append(_e(m.get("risk_category") or "-"))
        rows.append((cells, ""))
    parts.append(_table("Expected values per person (model estimates, at rest, on air)", headers, numeric, rows))
    if expedition:
        reasons = [m for m in result.members if m.get("risk_reasons")]
        if reasons:
            parts.append(f"<h3>Why (risk table of {_e(reasons[0].get('risk_rule_set', 'the guideline'))})</h3>")
            parts.append('<ul class="plain">' + "".join(
                f"<li><strong>{_e(m['name'])}</strong> ({_e(m.get('risk_category'))}): "
                f"{_e('; '.join(m['risk_reasons']))}</li>" for m in reasons) + "</ul>")
        texts: dict[str, list[str]] = {}
        for m in result.members:
            if m.get("prophylaxis"):
                texts.setdefault(m["prophylaxis"], []).append(m["name"])
        for text, names in texts.items():
            parts.append(f'<p class="note"><strong>Prevention (guidance) for {_e(", ".join(names))}:</strong> '
                         f"{_e(text)}</p>")
    parts.extend(_people_extras(result))
    parts.append('<p class="note">Per-person values come from the model with the person\'s age, hemoglobin, '
                 "ventilatory response category and acetazolamide, and a venous admixture fitted to a stated "
                 "home or ground SpO2/PaO2; history of altitude illness enters the risk category, not the "
                 "saturation figures. People vary widely: check people, not numbers.</p>")
    parts.append("</section>")
    return "\n".join(parts)


def _people_extras(result) -> list[str]:
    """Expected ranges, readings and fitness to fly, where the plan has them."""
    parts = []
    ranges = result.extras.get("ranges")
    if ranges and ranges.get("people"):
        lo_p, hi_p = ranges["percentiles"][0], ranges["percentiles"][-1]
        rows = []
        for person in ranges["people"]:
            worst = min(person["legs"], key=lambda leg: (leg.get("model_valid", True), leg["central_sao2_pct"]))
            pct = worst["sao2_pct_percentiles"]
            if worst.get("model_valid", True):
                central, spread = f"{worst['central_sao2_pct']:.0f}", f"{pct[0]:.0f}-{pct[-1]:.0f}"
            else:   # no steady state: no saturation
                central, spread = "none (no steady state)", "-"
            rows.append(([_e(person["name"]), str(worst["leg"]), central, spread,
                          "yes" if worst["sleeping"] else "no"], ""))
        parts.append(_table(f"Expected SaO2 at each person's worst leg: central and {lo_p:g}th to {hi_p:g}th "
                            f"percentile of {ranges['n']} simulated people",
                            ["Name", "Leg", "Central %", "Range %", "Asleep"], [False, True, True, True, False],
                            rows))
    readings = result.extras.get("readings")
    if readings:
        flagged = [(r, f) for r in readings for f in r["flags"]]
        parts.append(f"<h3>Readings against the expected range ({len(readings)} readings, "
                     f"{len(flagged)} flags)</h3>")
        if flagged:
            parts.append('<ul class="plain">' + "".join(
                f"<li><strong>Day {r['day']} {_e(r['member'])}:</strong> {_e(f['message'])}"
                + (f" <em>{_e(f['recommendation'])}</em>" if "recommendation" in f else "")
                + f" <span class=\"note\">[{_e(f['source'])}]</span></li>" for r, f in flagged) + "</ul>")
        acts = [(r, a) for r in readings for a in r.get("actions", [])]
        if acts:
            parts.append('<ul class="plain">' + "".join(
                f"<li><strong>Action, day {r['day']} {_e(r['member'])}:</strong> {_e(a['action'])}"
                f" <span class=\"note\">[{_e(a['source'])}]</span></li>" for r, a in acts) + "</ul>")
        if any(r["spo2_pct"] is not None for r in readings):
            from altox.evaluation.readings import oximetry_caveats

            cav = oximetry_caveats()
            parts.append(f'<p class="note">{_e(cav["text"])} [{_e(cav["source"])}]</p>')
    fit = result.extras.get("fitness_to_fly")
    if fit:
        from altox.present.render_people import fitness_lines

        parts.append("<h3>Fitness to fly (guidance; British Thoracic Society thresholds)</h3>")
        parts.append('<ul class="plain">' + "".join(f"<li>{_e(line.strip())}</li>" for line in fitness_lines(fit))
                     + "</ul>")
    return parts


def _place_cells(leg, expedition: bool, conv) -> list[str]:
    """Where and when a leg is, as the terminal's table shows it: two altitudes and a time."""
    if not expedition:
        ac_ft = leg["aircraft_pressure_altitude_ft"]
        aircraft = f"FL{ac_ft / 100:.0f}" if ac_ft >= 18000 else f"{ac_ft:,.0f}"   # flight levels from 18,000 ft
        return [aircraft, f"{leg['max_cabin_pressure_altitude_ft']:,.0f}", _e(_fmt_h(leg["duration_h"]))]
    high = leg["high_altitude_m"]
    return [f"{conv(leg['sleep_altitude_m']):,.0f}", "&ndash;" if high is None else f"{conv(high):,.0f}",
            f"day {leg['day']}"]


def _legs(result, feet: bool) -> str:
    from altox.present.charts import BROKEN_STATUSES

    conv = (lambda m: m * _FT_PER_M) if feet else (lambda m: m)
    unit = "ft" if feet else "m"
    expedition = result.kind == "expedition"
    headers = ["Leg", "What"] + ([f"Sleep {unit}", f"High {unit}"] if expedition else ["Aircraft FL/ft", "Cabin ft"])
    headers += ["Time", "PB mmHg", "PIO2 mmHg", "Dose km·h"]
    numeric = [True, False, True, True, True, True, True, True]
    where, phys = [], []
    for leg in map(shown_leg, result.legs):
        cls = "broken" if any(result.findings[k].status in BROKEN_STATUSES for k in leg["flags"]) else ""
        label = _e(leg["label"]) + (" <strong>+O2</strong>" if leg["oxygen_planned"] else "")
        where.append(([str(leg["leg"]), label, *_place_cells(leg, expedition, conv), f"{leg['barometric_mmhg']:.0f}",
                       f"{leg['inspired_po2_mmhg']:.0f}", f"{leg['hypoxic_dose_kmh']:.1f}"], cls))
        if leg.get("time_limited"):   # no steady state: the time-limited state, no saturation
            phys.append(([str(leg["leg"]), "-", "-", "-", "-", _e(leg["time_limited"]), "-",
                          _flags_html(result, leg)], cls))
            continue
        phys.append(([str(leg["leg"]), f"{leg['alveolar_pco2_mmhg']:.0f}", f"{leg['alveolar_po2_mmhg']:.0f}",
                      f"{leg['arterial_po2_mmhg']:.0f}", f"{leg['arterial_po2_mmhg'] * KPA_PER_MMHG:.1f}",
                      f"{leg['sao2_pct']:.0f}", f"{leg['o2_content_ml_dl']:.1f}", _flags_html(result, leg)], cls))
    t1 = _table("Where and when (PB and PIO2 at the worst moment of the leg; dose cumulative to its end)",
                headers, numeric, where)
    t2 = _table(f"Expected physiology at rest, on air ({_e((result.summary.get('subject') or {}).get('name', 'reference adult'))}, worst moment of each leg)",
                ["Leg", "PACO2 mmHg", "PAO2 mmHg", "PaO2 mmHg", "PaO2 kPa", "SaO2 %", "CaO2 mL/dL", "Flags"],
                [True] * 7 + [False], phys)
    return (f'<section id="legs">\n<h2>{"Day by day" if expedition else "Leg by leg"}</h2>\n{t1}\n{t2}\n'
            f'<p class="small">{_e(FLAG_LEGEND)} Hatched rows: guidance not met.</p>\n</section>')


def _num(v, fmt="{:,.0f}") -> str:
    return "&ndash;" if v is None else _e(fmt.format(v))


def _dur_s(seconds) -> str:
    if seconds is None:
        return "&ndash;"
    return f"{seconds / 60:.1f} min" if seconds >= 120 else f"{seconds:.0f} s"


def _oxygen(result, rule_sets, review, feet: bool = False) -> str:
    """Oxygen planned (legs, guidance asking for it) and the oxygen review of the plan, where present."""
    from altox.plan.timeline import OXYGEN_NAMES
    from altox.units import altitude_unit, shown_altitude, shown_equivalent_altitude

    import numpy as np

    legs = [leg for leg in result.legs if leg["oxygen_planned"]]
    found = [(k, f) for k, f in enumerate(result.findings)
             if (th := threshold_of(rule_sets, f)) is not None and th.check == "oxygen"]
    planned = (review or {}).get("planned") or []
    would = (review or {}).get("would_need") or []
    if not legs and not found and not planned and not would:
        return ""
    flight = result.kind == "flight"
    parts = ['<section id="oxygen">', "<h2>Supplemental oxygen</h2>",
             "<p>The physiology in the tables above is on air: planned oxygen is shown, not applied, so those "
             "figures are what a person would have if the oxygen failed.</p>"]
    if legs and not planned:
        codes = np.asarray(result.samples["oxygen_code"])
        leg_of = np.asarray(result.samples["leg"])
        items = []
        for leg in legs:
            who = sorted({OXYGEN_NAMES.get(int(c), str(c)) for c in codes[leg_of == leg["leg"]] if int(c) > 0})
            items.append(f"<li>{_e(leg['label'])}: oxygen planned for {_e(', '.join(who) or 'the party')}</li>")
        parts.append('<ul class="plain">' + "".join(items) + "</ul>")
    if found:
        parts.append('<ul class="plain">' + "".join(
            f'<li><span class="flag {"m" if f.status == "required-planned" else "x"}">'
            f'{FLAG_MET if f.status == "required-planned" else FLAG_BROKEN}{k + 1}</span> {_e(f.message)}</li>'
            for k, f in found) + "</ul>")
    if planned:
        rows = []
        for r in planned:
            where = _num(r["cabin_ft"]) if flight else shown_altitude(r["altitude_m"], feet)
            device = _e(r["device"]) + ("" if r["device_ok"] else " <strong>(!)</strong>")
            rows.append(([str(r["leg"]), _e(r["when"]) + (f" ({_e(', '.join(r['who']))})" if r.get("who") else ""),
                          where, device, _num(r["flow_l_min"], "{:.1f}"), _num(r["fio2_achieved"], "{:.2f}"),
                          shown_equivalent_altitude(r["equivalent_altitude_m"], feet or flight),
                          _num(r["sao2_pct"], "{:.0f}"), _num(r["litres_per_person"])], ""))
        unit = altitude_unit(feet or flight)
        parts.append(_table("Oxygen planned: flow and FiO2 on the assumed device (L/min at 1 atm, 15 degC; "
                            f"Eq. {unit} = equivalent altitude; hyperoxic: below sea level, more oxygen than "
                            "sea-level air)",
                            ["Leg", "Who", "Cabin ft" if flight else f"At {unit}", "Device", "L/min", "FiO2", f"Eq. {unit}",
                             "SaO2 %", "L each"], [True, False, True, False, True, True, True, True, True], rows))
        notes = [f"<li><strong>(!)</strong> leg {r['leg']}: {_e(n)}</li>" for r in planned for n in r["notes"]]
        if notes:
            parts.append('<ul class="plain">' + "".join(notes) + "</ul>")
    c = (review or {}).get("cylinders")
    if c is not None:
        rows = [([_e(p["name"]), _num(p["litres"]), str(p["cylinders"])], "") for p in c["per_person"]]
        rows.append((["<strong>Total</strong>", _num(c["litres_total"]), str(c["cylinders_total"])], ""))
        parts.append(_table(f"Cylinders: {c['label']}, {c['usable_l']:,.0f} L usable of {c['gas_l']:,.0f} L; "
                            f"margin {c['safety_margin_fraction']:.0%}",
                            ["Person", "Oxygen L", "Cylinders"], [False, True, True], rows))
        pack = [([_e(i["item"]), str(i["quantity"]), _e(i["note"])], "") for i in review["packing_list"]]
        parts.append(_table("Packing list", ["Item", "Qty", "Note"], [False, True, False], pack))
    if would:
        target_m = review["target"]["equivalent_altitude_m"]
        rows = []
        for r in would:
            note = ("pressure breathing" if r["pressure_breathing"] else "") if r["device_reaches_target"] \
                else "beyond this device"
            if not r["reachable"]:
                note = f"100 % O2 not enough; ceiling {_num(r['ceiling_pressure_altitude_ft'])} ft"
            rows.append(([str(r["leg"]), _num(r["pb_mmhg"]), _num(r["fio2_needed"], "{:.2f}"), _e(r["device"]),
                          _num(r["flow_l_min"], "{:.1f}"), note], ""))
        parts.append(_table(f"To hold an equivalent altitude of {target_m:,.0f} m ({target_m * _FT_PER_M:,.0f} ft): "
                            f"what the legs above it would need",
                            ["Leg", "PB mmHg", "FiO2", "Device", "L/min", "Note"],
                            [True, True, True, False, True, False], rows))
        parts.append(f'<p class="source">Review target: {_s(review["target"]["source"])}.</p>')
    if review:
        items = "".join(f"<li>{_e(a)}</li>" for a in list(review.get("assumptions", [])) + list(review.get("notes", [])))
        if items:
            parts.append(f'<h3>Oxygen assumptions</h3>\n<ul class="plain">{items}</ul>')
    parts.append("</section>")
    return "\n".join(parts)


def _decompression(result, rule_sets, review) -> str:
    """The decompression review of a pressurized flight and the failure limits of the rule sets."""
    if result.kind != "flight":
        return ""
    limits = []
    for rs in rule_sets:
        if rs.kind != "aviation":
            continue
        for th in rs.thresholds:
            if th.condition and re.search(r"failure|decompression", th.condition, re.I):
                dur = f", {th.duration}" if th.duration else ""
                from altox.guidance.checker import figure_checked

                if not figure_checked(th.basis):
                    limits.append(f"<li>{_e(th.condition)}: figure not shown, as altox has not checked it "
                                  f"against the published text; read the section itself. <span class=\"source\">"
                                  f"{_e(rs.label)} {_e(th.section)}.</span></li>")
                    continue
                limits.append(f"<li><strong>{_e(th.value)}{_e(dur)}</strong> &ndash; {_s(th.requirement)} "
                              f"({_e(th.condition)}). <span class=\"source\">{_e(rs.label)} {_e(th.section)}."
                              "</span></li>")
    applicable = bool(review and review.get("applicable"))
    if not limits and not applicable:
        return ""
    parts = ['<section id="decompression">', "<h2>Pressurization failure and decompression</h2>"]
    if applicable:
        cps = [float(c) for c in review["checkpoints_ft"]]
        rate = review["descent_rate_ft_min"]
        rows = []
        for r in review["legs"]:
            tuc = (f"&gt; {_dur_s(r['tuc_max_s'])}" if r["tuc_min_s"] is None
                   else f"&lt; {_dur_s(r['tuc_max_s'])} (!)" if r.get("tuc_position") == 1
                   else f"{_dur_s(r['tuc_min_s'])} to {_dur_s(r['tuc_max_s'])}")
            times = [_num(r["minutes_to"].get(f"{c:.0f}"), "{:.1f} min") for c in cps]
            crew = r["crew_cert"]["oxygen_l"] if r.get("crew_cert") else None
            pax = r["passengers_cert"]["oxygen_l"] if r.get("passengers_cert") else None
            rows.append(([str(r["leg"]), _num(r["aircraft_ft"]), tuc, *times, _num(crew, "{:.1f}"),
                          _num(pax, "{:.1f}"), _num(r["oxygen_total_l"], "{:.0f}")], ""))
        cap = ("After a rapid decompression: time of useful consciousness (TUC) at rest on air, "
               + (f"emergency descent at {rate:,.0f} ft/min, " if rate else "")
               + "oxygen per occupant on the way down (L)"
               + (f", at the minimum flow of {review['certification_basis']['standard']}"
                  if review.get("certification_basis") else ""))
        parts.append(_table(cap, ["Leg", "Aircraft ft", "TUC"] + [f"To {c:,.0f} ft" for c in cps]
                            + ["Crew L each", "Others L each", "Total L"],
                            [True, True, True] + [True] * len(cps) + [True, True, True], rows))
        free = review["oxygen_free_ft"]
        notes = [f"Oxygen until the cabin is below {free['crew']:,.0f} ft for crew ({free['crew_from']}) and "
                 f"{free['passengers']:,.0f} ft for passengers ({free['passengers_from']}); "
                 f"{review['crew_count']} crew, {review['passenger_count']} others aboard.",
                 (f"Litres on the basis of the certification standard {review['certification_basis']['standard']}, "
                  f"a design standard: crew, {review['certification_basis']['crew']}; "
                  f"{review['certification_basis']['passengers']}. {review['certification_basis']['model']}"
                  if review.get("certification_basis") else f"altox's convention: {review['convention']['rule']}"),
                 f"TUC: {review['tuc_interpolation']}. {review['tuc_caution']} A rapid decompression may shorten "
                 "it by up to half.",
                 "Litres are per occupant at reference conditions, before any planning margin; certified "
                 "aircraft systems are sized by their own rules."] + list(review.get("notes", []))
        if any(r.get("tuc_position") == 1 for r in review["legs"]):
            notes.append("(!) TUC marked < is above the table's highest altitude: shorter than its last row, "
                         "by an amount the table does not give (not held flat, not extrapolated).")
        if not review.get("certification_basis") and any(
                r[g] is not None and not r[g]["target_held"] for r in review["legs"] for g in ("crew", "passengers")):
            notes.append("(!) On some legs the assumed device cannot hold the target at the top of the descent "
                         "(pressure breathing or a faster descent is needed).")
        parts.append('<ul class="plain">' + "".join(f"<li>{_e(n)}</li>" for n in notes) + "</ul>")
    if limits:
        parts.append("<h3>Failure limits in the rule sets applied</h3>\n<p>These cabin-altitude limits concern a "
                     "failure of the pressurization system; the planned profile above is not a failure. The "
                     "aircraft's approved data and the operator's procedures decide.</p>\n"
                     f'<ul class="plain">{"".join(limits)}</ul>')
    parts.append("</section>")
    return "\n".join(parts)


def _guidance(result, rule_sets, missing) -> str:
    parts = ['<section id="guidance">', "<h2>Guidance applied and its sources</h2>",
             "<p>The findings are in the verdict at the top; here are the rule sets altox read the plan "
             "against, with their sources.</p>"]
    if getattr(result, "guidance_notes", None):
        parts.append("<h3>Not applied or not checked</h3>")
        parts.append('<ul class="plain">' + "".join(f"<li><strong>(!)</strong> {_e(n)}</li>"
                                                   for n in result.guidance_notes) + "</ul>")
    for rs in rule_sets:
        ths = "".join(_threshold_item(th) for th in rs.thresholds)
        url = f" Official text: <code>{_e(rs.url)}</code>." if rs.url else ""
        parts.append(f'<h3 id="rules-{_e(rs.id)}">{_e(rs.title)} <span class="small">({_e(rs.id)})</span></h3>\n'
                     f'<p class="source">{_s(rs.jurisdiction)}. Citation: {_s(rs.citation)}.{url}</p>\n'
                     f'<p class="note">{_e(rs.caution)}</p>\n<ul class="plain">{ths}</ul>')
    for rid in missing:
        parts.append(f"<p>Rule set {_e(rid)}: its file was not at hand when the report was written; see the "
                     "findings above for what it says about the plan.</p>")
    parts.append("</section>")
    return "\n".join(parts)


def _threshold_item(th) -> str:
    """One threshold of a rule set; its figure only when checked against the published text."""
    from altox.guidance.checker import figure_checked

    if figure_checked(th.basis):
        head = (_e(th.value) + (f" to {_e(th.band_top)}" if th.band_top else "")
                + (f" above {_e(th.above)}" if th.above else "") + (f", {_e(th.duration)}" if th.duration else "")
                + f" ({_e(th.applies_to)}): {_s(th.requirement)}. ")
    else:
        head = (f"({_e(th.applies_to)}) figure not shown: altox has not checked it against the published "
                "text; read the section itself. ")
    return f'<li>{head}<span class="source">{_e(th.section)}.</span></li>'


def _terms(result) -> str:
    """The legend of terms, the same as the terminal's and docs/glossary.md (altox.present.legend)."""
    from altox.present.legend import terms_for

    body = "\n".join(f"<dt>{_e(t)}</dt><dd>{_e(d)}</dd>" for t, d in terms_for(result.kind))
    return f'<section id="terms">\n<h2>Terms</h2>\n<dl class="summary">\n{body}\n</dl>\n</section>'


def _assumptions(result, with_reviews: bool = True) -> str:
    extra = [] if with_reviews else ["The oxygen and decompression reviews need the plan itself, which was not "
                                     "given with this result; they are not in this report."]
    notes = "".join(f"<li>{_e(n)}</li>" for n in list(result.notes) + extra)
    return ('<section id="assumptions">\n<h2>Model assumptions</h2>\n'
            f'<ul class="plain">{notes}</ul>\n'
            "<p>The models, their equations, validity ranges and references are described in "
            "<code>docs/methods.md</code> in altox's source; the guidance rule sets and how altox reads them "
            "in <code>docs/rules.md</code>.</p>\n</section>")


def build_report(result, *, plan=None, feet: bool = False, rule_sets=None, rule_files=()) -> str:
    """The HTML text of the report of an evaluated plan.

    Parameters
    ----------
    result : altox.evaluation.evaluate.PlanResult
    plan : ExpeditionPlan or FlightPlan, optional
        The plan as evaluated; with it the report has the oxygen and decompression reviews
        (:mod:`altox.evaluation.oxygen_plan`).  By default it is read again from ``result.source``; a plan
        given as data without it gets no reviews (the report says so).
    feet : bool
        Expedition altitudes in feet (flights are always in feet, as in the tables).
    rule_sets : list of RuleSet, optional
        The rule sets applied; found from ``result.rule_sets`` (and ``rule_files``) by default.
    rule_files : sequence of paths
        The user's own rule files, for rule sets that are not shipped with altox.
    """
    from altox import __version__
    from altox.guidance.applied import applied_rule_sets

    missing: list[str] = []
    if rule_sets is None:
        rule_sets, missing = applied_rule_sets(result, rule_files)
    if plan is None and result.source:
        from altox.plan.profile import load_plan

        plan = load_plan(result.source)
    ox_review, dec_review = result.extras.get("oxygen"), result.extras.get("decompression")
    if plan is not None and (ox_review is None or dec_review is None):
        from altox.evaluation.oxygen_plan import decompression_review, oxygen_review

        ox_review, dec_review = oxygen_review(plan, result), decompression_review(plan, result)
    source = Path(result.source).name if result.source else "plan given as data"
    kind = "expedition itinerary" if result.kind == "expedition" else "flight profile"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{CSP}">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f'<meta name="generator" content="altox {_e(__version__)}">',
        f"<title>{_e(result.name)} &ndash; altox report</title>",
        f"<style>{_CSS}</style>",
        "</head>",
        "<body>",
        "<header>",
        f"<h1>{_e(result.name)}</h1>",
        f'<p class="meta">altox {_e(__version__)} report of the {kind} in {_e(source)}</p>',
        "</header>",
        _caution_block("top"),
        "<main>",
        _summary(result, feet, rule_sets),
        _chart(result, feet, rule_sets),
        _people(result),
        _legs(result, feet),
        _oxygen(result, rule_sets, ox_review, feet),
        _decompression(result, rule_sets, dec_review),
        _guidance(result, rule_sets, missing),
        _terms(result),
        _assumptions(result, plan is not None),
        "</main>",
        "<footer>",
        _caution_block("end"),
        "</footer>",
        "</body>",
        "</html>",
        "",
    ]
    return "\n".join(p for p in parts if p)


def write_report(result, path, *, plan=None, feet: bool = False, rule_sets=None, rule_files=()) -> Path:
    """Write the report to ``path`` through a temporary file (see :func:`write_atomic`).

    The caller decides whether an existing file may be replaced (:func:`check_output`).
    """
    text = build_report(result, plan=plan, feet=feet, rule_sets=rule_sets, rule_files=rule_files)
    return write_atomic(path, text.encode("utf-8"))
