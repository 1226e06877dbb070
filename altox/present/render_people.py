"""Terminal renderings of people: readings reviews and fitness-to-fly results (shared by altox plan, altox readings and altox fitness-to-fly)."""

from __future__ import annotations


def readings_renderables(plan_name: str, rows: list, notes: list, feet: bool = False) -> list:
    """Rich renderables of a readings review (table, flags, actions, oximetry caveats, notes).

    The caller adds the general caution.  SpO2 readings are shown against the expected SpO2
    range (the SaO2 range widened by the oximeter's published error).
    """
    from rich.table import Table
    from rich.text import Text

    from altox.evaluation.readings import FLAG_WORDS, oximetry_caveats
    from altox.units import altitude_unit, shown_altitude

    unit = altitude_unit(feet)
    table = Table(title=f"Readings: {plan_name}", title_justify="left", pad_edge=False)
    for col in ("Day", "Member", unit, "SpO2", "Expected SpO2", "HR", "LLS", "Flags"):
        table.add_column(col, overflow="fold")
    for r in rows:
        e = r["expected_spo2_pct"]
        ll = r["lake_louise"]
        lls = "-" if ll is None else f"{ll['total']}" + ("" if ll["headache_known"] else " (total)")
        when = f"{r['day']} {int(r['time_h']):02d}:{round(r['time_h'] % 1 * 60):02d}"
        table.add_row(when, r["member"], shown_altitude(r["altitude_m"], feet), _pct(r["spo2_pct"]),
                      ((f"{e['central']:.0f} ({e['low']:.0f}-{e['high']:.0f})" if e["low"] is not None
                        else f"{e['central']:.0f} (-)")
                       if r["expected_sao2_pct"].get("model_valid", True) else "none (outside)")   # no steady state
                      + (" (extrapolated)" if r.get("extrapolated") else ""),
                      "-" if r["heart_rate_per_min"] is None else f"{r['heart_rate_per_min']:.0f}",
                      lls, ", ".join(FLAG_WORDS.get(f["code"], f["code"]) for f in r["flags"]) or "-")
    out = [table if rows else Text("No observations in this plan.")]
    if rows:
        out.append(Text(f"Day and clock time; {unit}: altitude; SpO2 and expected SpO2 in %, central value and "
                        "range; HR: heart rate /min; LLS: 2018 Lake Louise score; AMS: acute mountain sickness; "
                        "HAPE: high-altitude pulmonary oedema.", style="dim"))
    seen = set()
    for r in rows:
        if r.get("extrapolated") and r["member"] not in seen:
            seen.add(r["member"])
            out.append(Text(f"{r['member']}: {r['extrapolated']}."))
    for r in rows:
        for a in r.get("actions", []):
            out.append(Text(f"ACTION day {r['day']} {r['member']}: {a['action']} [{a['source']}]", style="bold"))
    for r in rows:
        for f in r["flags"]:
            line = f"Day {r['day']} {r['member']}: {f['message']}"
            if "recommendation" in f:
                line += f" Recommendation: {f['recommendation']}"
            out.append(Text(f"- {line} [{f['source']}]"))
    if any(r["spo2_pct"] is not None for r in rows):
        c = oximetry_caveats()
        out.append(Text(f"{c['text']} [{c['source']}]", style="dim"))
    out += [Text(n, style="dim") for n in notes]
    return out


def fitness_lines(results: list) -> list:
    """Plain lines of fitness-to-fly results (shared by this command and `altox plan`): the verdict first."""
    lines = []
    for r in results:
        v = r["verdict"]
        head = r.get("name", "Passenger")
        lines.append(f"{head}: {v['text']} (guidance)")
        lines.append(f"  Path: {v['path']}")
        lines += [f"  Why: {reason}" for reason in v["reasons"]]
        lines += [f"  Source: {src}" for src in v["sources"]]
        if v["must_know"]:
            lines.append("  What must be known: " + "; ".join(v["must_know"]))
        reg = r.get("regression")
        cabin = f"{r['cabin_altitude_ft']:,.0f} ft"
        if reg:
            lines.append(f"  Cabin: the regression is for {reg['valid_at_ft']:,.0f} ft, where it was derived; "
                         f"this flight's cabin is {cabin} (ground values at {r['ground_elevation_ft']:,.0f} ft).")
        else:
            lines.append(f"  Cabin: {cabin} (ground values at {r['ground_elevation_ft']:,.0f} ft).")
        m = r.get("model")
        if m:
            lines.append(f"  Context only (the verdict does not rest on it): {m['method']} at {cabin}: PaO2 {m['pao2_mmhg']:.1f} mmHg "
                         f"({m['pao2_kpa']:.2f} kPa), SaO2 {m['sao2_pct']:.0f} %.")
        if r.get("defaults_used"):
            lines.append("  Defaults used: " + ", ".join(r["defaults_used"]))
        lines += [f"  Note: {n}" for n in r["notes"]]
        lines.append(f"  {r['caution']}")
    import textwrap

    return [w for line in lines for w in textwrap.wrap(line, 80, subsequent_indent="    ", break_on_hyphens=False)]


def _pct(x):
    return "-" if x is None else f"{x:.0f} %"
