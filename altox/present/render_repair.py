"""Rendering of a repair (:mod:`altox.evaluation.repair`): changes, the side-by-side summary; no physics here."""

from __future__ import annotations


def _worst_text(entry) -> str:
    from altox.present.render import saturation_text

    return f"{saturation_text(entry['sao2_pct'], entry.get('time_limited'))} ({entry['where']})"


def repair_renderables(original, repair, summary, *, written: str | None = None) -> list:
    """Rich renderables of a repair: the answer first, then the changes, the summary and the caution."""
    from rich.table import Table
    from rich.text import Text

    from altox.present.terminal import caution_panel

    out = []
    before, after = summary["before"], summary["after"]
    if repair.found:
        if repair.kind == "expedition":
            cost = (f"{repair.added_days} added day(s)" if repair.added_days > 0 else
                    "no added days" if repair.added_days == 0 else f"{-repair.added_days} fewer day(s)")
        else:
            cost = (f"{repair.changed_legs} changed leg(s), {repair.altitude_change_ft:,.0f} ft of altitude "
                    "change in all")
        head = (f"Repair found for {original.name}: {cost}; oxygen {before['oxygen_litres']:,.0f} L -> "
                f"{after['oxygen_litres']:,.0f} L. The repaired plan meets every applied rule that altox checks"
                + (" and the goal." if repair.goal is not None else "."))
        if not repair.changes:
            head = f"{original.name} already meets every applied rule that altox checks; nothing to change."
    else:
        head = f"No repair of {original.name} within the limits. Why:"
    out.append(Text(head, style="bold"))
    for r in repair.reasons:
        out.append(Text(f"  - {r}"))
    if not repair.found:
        out.append(Text("The closest plan found:"))
    if repair.changes:
        out.append(Text("Changes\n" + "\n".join(f"  {c}" for c in repair.changes)))
    table = Table(title="Before and after", title_justify="left", pad_edge=False)
    for name in ("", "Before", "After"):
        table.add_column(name, justify="left")
    if repair.kind == "expedition":
        table.add_row("Days", str(before["days"]), str(after["days"]))
    else:
        table.add_row("Legs", str(before["legs"]), str(after["legs"]))
    for b, a in zip(before["worst"], after["worst"]):
        table.add_row(f"Lowest SaO2, {b['name']}", _worst_text(b), _worst_text(a))
    if "goal_worst" in before:
        pct = f"{repair.goal.percentile:g}th pct"
        for b, a in zip(before["goal_worst"], after["goal_worst"]):
            table.add_row(f"Goal ({pct}), {b['name']}", f"{b['sao2_pct']:.0f} % (day {b['day']})",
                          f"{a['sao2_pct']:.0f} % (day {a['day']})")
    table.add_row("Guidance not met", str(len(before["not_met"])), str(len(after["not_met"])))
    table.add_row("Planned oxygen, L", f"{before['oxygen_litres']:,.0f}", f"{after['oxygen_litres']:,.0f}")
    out.append(table)
    out.append(Text("Lowest SaO2: expected value at rest on air (planned oxygen not applied), worst moment "
                    "of the plan per person."))
    if repair.goal is not None:
        out.append(Text(f"Goal: {repair.goal.describe()}. Goal rows: the lowest such value over the plan, "
                        "with the planned oxygen applied."))
    if before["not_met"]:
        out.append(Text("Not met before:\n" + "\n".join(f"  - {f['message']}" for f in before["not_met"])))
    if after["not_met"]:
        out.append(Text("Still not met:\n" + "\n".join(f"  - {f['message']}" for f in after["not_met"])))
    if summary["not_checked"]:
        out.append(Text("Not checked by altox (listed, not counted as met):\n" + "\n".join(
            f"  - {n['rule_set']} {n['section']}: {n['reason']}" for n in summary["not_checked"])))
    for note in repair.notes:
        out.append(Text(note))
    out.append(Text(f"Wrote the repaired plan to {written}; the original is unchanged." if written else
                    "Use --write NEW.yaml to save the repaired plan (the original is never changed)."))
    out.append(caution_panel())
    return out
