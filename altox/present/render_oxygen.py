"""Rich renderables for the oxygen and decompression dicts; no physics and no thresholds here.

Every list of renderables ends with the guidance caution (:func:`altox.present.render.caution_panel`).
Tables are sized for 80 columns.
"""

from __future__ import annotations

from altox.present.terminal import caution_panel

__all__ = ["oxygen_review_renderables", "decompression_review_renderables", "target_renderables",
           "flow_renderables", "cylinder_renderables", "room_renderables", "decompression_renderables",
           "plan_sections"]

_FT_PER_M = 1.0 / 0.3048


def _table(title, columns, caption=None):
    from rich import box
    from rich.table import Table

    # no side borders: the columns of 80 go to the values (a cell folds, never cut short)
    t = Table(title=title, title_justify="left", pad_edge=False, caption=caption, caption_justify="left",
              box=box.SIMPLE_HEAD, show_edge=False, collapse_padding=True)
    for name, right in columns:
        t.add_column(name, justify="right" if right else "left", overflow="fold")
    return t


def _num(v, fmt="{:,.0f}", none="-"):
    return none if v is None else fmt.format(v)


def _dur(seconds):
    if seconds is None:
        return "-"
    return f"{seconds / 60:.1f} min" if seconds >= 120 else f"{seconds:.0f} s"


def _on_air(leg, when) -> str:
    """Expected SaO2 on the leg without the oxygen (asleep for night oxygen), or '-'."""
    if not leg:
        return "-"
    value = leg.get("night_sao2_pct") if when == "sleep" and leg.get("night_sao2_pct") is not None \
        else leg.get("sao2_pct")
    return _num(value, "{:.0f}")


def _kv(title, rows):
    t = _table(title, [("Quantity", False), ("Value", True)])
    for k, v in rows:
        t.add_row(k, v)
    return t


def _text(lines):
    from rich.text import Text

    return Text("\n".join(lines))


# -- plan sections ------------------------------------------------------------------------------
def oxygen_review_renderables(review: dict, *, with_caution: bool = True, feet: bool = False,
                              legs=None) -> list:
    """Renderables of :func:`altox.evaluation.oxygen_plan.oxygen_review`; altitudes in feet with ``feet``
    and always for a flight."""
    from altox.units import altitude_unit, shown_altitude, shown_equivalent_altitude

    out = []
    flight = review["kind"] == "flight"
    unit = altitude_unit(feet or flight)
    if review["planned"]:
        t = _table("Oxygen planned", [("Leg", True), ("When", False), ("Cabin ft" if flight else f"At {unit}", True),
                                       ("Device", False), ("L/min", True), ("FiO2", True), (f"Eq. {unit}", True),
                                       ("O2 %", True), ("Air %", True), ("L each", True)],
                   caption=f"L/min at reference conditions (1 atm, 15 degC); Eq. {unit} = equivalent altitude "
                           "(hyperoxic: below sea level, more oxygen than sea-level air); O2 % = expected SaO2 "
                           "with this oxygen; Air % = if it fails (on air, as in the physiology table); "
                           "reference adult; (!) = see the note below the table.")
        by_leg = {lg["leg"]: lg for lg in (legs or [])}
        for r in review["planned"]:
            where = _num(r["cabin_ft"]) if flight else shown_altitude(r["altitude_m"], feet)
            t.add_row(str(r["leg"]), r["when"], where, r["device"] + ("" if r["device_ok"] else " (!)"),
                      _num(r["flow_l_min"], "{:.1f}"), _num(r["fio2_achieved"], "{:.2f}"),
                      shown_equivalent_altitude(r["equivalent_altitude_m"], feet or flight),
                      _num(r["sao2_pct"], "{:.0f}"), _on_air(by_leg.get(r["leg"]), r["when"]),
                      _num(r["litres_per_person"]))
        out.append(t)
        for r in review["planned"]:
            for n in r["notes"]:
                out.append(_text([f"(!) leg {r['leg']}: {n}"]))
    c = review["cylinders"]
    if c is not None:
        t = _table("Cylinders", [("Person", False), ("Oxygen L", True), ("Cylinders", True)],
                   caption=f"{c['label']}: {c['usable_l']:,.0f} L usable of {c['gas_l']:,.0f} L; margin "
                           f"{c['safety_margin_fraction']:.0%}.")
        for p in c["per_person"]:
            t.add_row(p["name"], _num(p["litres"]), str(p["cylinders"]))
        t.add_row("Total", _num(c["litres_total"]), str(c["cylinders_total"]))
        out.append(t)
        pack = _table("Packing list", [("Item", False), ("Qty", True), ("Note", False)])
        for item in review["packing_list"]:
            pack.add_row(item["item"], str(item["quantity"]), item["note"])
        out.append(pack)
    target_m = review["target"]["equivalent_altitude_m"]
    if review["would_need"]:
        t = _table(f"To hold an equivalent altitude of {target_m:,.0f} m ({target_m * _FT_PER_M:,.0f} ft)",
                   [("Leg", True), ("PB mmHg", True), ("FiO2", True), ("Device", False), ("L/min", True),
                    ("Note", False)],
                   caption=f"Target: {review['target']['source'].strip()} Ceiling = highest altitude where 100 % O2 "
                           "holds it.")
        for r in review["would_need"]:
            if not r["reachable"]:
                note = f"100 % O2 not enough; ceiling {_num(r['ceiling_pressure_altitude_ft'])} ft"
            elif not r["device_reaches_target"]:
                note = "beyond this device"
            else:
                note = "pressure breathing" if r["pressure_breathing"] else ""
            t.add_row(str(r["leg"]), _num(r["pb_mmhg"]), _num(r["fio2_needed"], "{:.2f}"), r["device"],
                      _num(r["flow_l_min"], "{:.1f}"), note)
        out.append(t)
    lines = ["Oxygen assumptions"] + [f"- {a}" for a in review["assumptions"]] + [f"- {n}" for n in review["notes"]]
    out.append(_text(lines))
    if with_caution:
        out.append(caution_panel())
    return out


def decompression_review_renderables(review: dict, *, with_caution: bool = True) -> list:
    """Renderables of :func:`altox.evaluation.oxygen_plan.decompression_review`."""
    out = []
    if not review["applicable"]:
        out.append(_text([f"Decompression review: not applicable ({review['reason']})."]))
    else:
        cps = [f"{float(c):,.0f}" for c in review["checkpoints_ft"]]
        cols = [("Leg", True), ("Aircraft ft", True), ("TUC", False)]
        cols += [(f"to {c} ft", True) for c in cps] + [("Crew L", True), ("Pax L", True), ("Total L", True)]
        rate = review["descent_rate_ft_min"]
        basis = review.get("certification_basis") or {}
        cap = (f"Emergency descent at {rate:,.0f} ft/min. " if rate else "") + \
              "TUC from the FAA table, interpolated; at rest, breathing air. " + \
              (f"Litres per occupant at the minimum flow of {basis['standard']} (crew "
               f"{basis['crew_section']}, passengers {basis['passengers_section']})." if basis else "")
        t = _table("After a rapid decompression", cols, caption=cap)
        for r in review["legs"]:
            tuc = (f"> {_dur(r['tuc_max_s'])}" if r["tuc_min_s"] is None
                   else f"< {_dur(r['tuc_max_s'])} (!)" if r.get("tuc_position") == 1
                   else f"{_dur(r['tuc_min_s'])}-{_dur(r['tuc_max_s'])}")
            times = [_num(r["minutes_to"].get(f"{float(c):.0f}"), "{:.1f} min") for c in review["checkpoints_ft"]]
            crew = r["crew_cert"]["oxygen_l"] if r.get("crew_cert") else None
            pax = r["passengers_cert"]["oxygen_l"] if r.get("passengers_cert") else None
            t.add_row(str(r["leg"]), _num(r["aircraft_ft"]), tuc, *times, _num(crew, "{:.1f}"),
                      _num(pax, "{:.1f}"), _num(r["oxygen_total_l"], "{:.0f}"))
        out.append(t)
        free = review["oxygen_free_ft"]
        lines = ["Decompression notes",
                 f"- Oxygen until the cabin is below {free['crew']:,.0f} ft for crew ({free['crew_from']}) "
                 f"and {free['passengers']:,.0f} ft for passengers ({free['passengers_from']}); "
                 f"{review['crew_count']} crew, {review['passenger_count']} others aboard.",
                 (f"- Litres on the basis of the certification standard {basis['standard']}, a design "
                  f"standard: crew, {basis['crew']}; {basis['passengers']}. {basis['model']}"
                  if basis else f"- altox's convention: {review['convention']['rule']}"),
                 f"- TUC: {review['tuc_interpolation']}. {review['tuc_caution']} A rapid decompression may "
                 "shorten it by up to half.",
                 "- Litres are per occupant at reference conditions, before any planning margin; "
                 "certified aircraft systems are sized by their own rules."]
        lines += [f"- {n}" for n in review["notes"]]
        held = [r for r in review["legs"] for g in ("crew", "passengers")
                if r[g] is not None and not r[g]["target_held"]]
        if any(r.get("tuc_position") == 1 for r in review["legs"]):
            lines.append("- (!) TUC marked < is above the table's highest altitude: shorter than its last "
                         "row, by an amount the table does not give (not held flat, not extrapolated).")
        if held and not basis:
            lines.append("- (!) On some legs the assumed device cannot hold the target at the top of the "
                         "descent (pressure breathing or a faster descent is needed).")
        out.append(_text(lines))
    if with_caution:
        out.append(caution_panel())
    return out


def plan_sections(oxygen_review: dict | None, decompression_review: dict | None) -> list:
    """Both plan sections, then one caution: what ``altox plan`` prints after its own tables."""
    out = []
    if oxygen_review is not None:
        out += oxygen_review_renderables(oxygen_review, with_caution=False)
    if decompression_review is not None and decompression_review.get("applicable"):
        out += decompression_review_renderables(decompression_review, with_caution=False)
    out.append(caution_panel())
    return out


# -- standalone commands ------------------------------------------------------------------------
def target_renderables(res: dict, assumptions: list[str]) -> list:
    """Table of an ``o2-target`` result (:func:`altox.evaluation.oxygen.oxygen_for_target` plus context)."""
    from altox.evaluation.oxygen import TARGET_KINDS

    what, unit = TARGET_KINDS[res["target_kind"]]
    rows = [("Pressure (PB)", f"{res['pb_mmhg']:.1f} mmHg"),
            ("Pressure altitude", f"{_num(res['pressure_altitude_ft'])} ft"),
            (f"Target: {what}", f"{res['target_value']:,.1f} {unit}"),
            ("FiO2 needed", f"{res['fio2_needed']:.3f}" + ("" if res["reachable"] else " (100 % is not enough)")),
            ("Device", res["device"] + (" (pressure breathing)" if res["pressure_breathing"] else "")),
            ("Gas inspired", f"{res['inspired_gas_l_min']:.1f} L/min (ref.)"),
            ("Flow" if res["device_kind"] == "continuous" else "Mean consumption",
             f"{res['flow_l_min']:.2f} L/min (ref.)"),
            ("FiO2 given at that flow", f"{res['fio2_achieved']:.3f}"),
            ("Device holds the target", "yes" if res["device_reaches_target"] else "no"),
            ("Ceiling of 100 % O2", f"{_num(res['ceiling_pressure_altitude_ft'])} ft pressure altitude")]
    if res["above_device_ceiling"]:
        rows.append(("Device ceiling", "above this device's usual ceiling"))
    return [_kv("Oxygen to hold a target", rows), _text(["Assumptions"] + [f"- {a}" for a in assumptions]),
            caution_panel()]


def flow_renderables(res: dict, assumptions: list[str]) -> list:
    """Table of an ``o2-flow`` result (:func:`altox.evaluation.oxygen.device_fio2`)."""
    rows = [("Device", res["device"]), ("Flow", f"{res['flow_l_min']:.2f} L/min (ref.)"),
            ("Activity", res["activity"]), ("Gas inspired", f"{res['inspired_gas_l_min']:.1f} L/min (ref.)"),
            ("FiO2", f"{res['fio2']:.3f}"), ("Inspired PO2", f"{res['inspired_po2_mmhg']:.1f} mmHg"),
            ("Equivalent altitude", f"{res['equivalent_altitude_m']:,.0f} m"),
            ("Expected SaO2", f"{res['sao2_pct']:.0f} %")]
    if res["flow_outside_device_range"]:
        rows.append(("Flow", "outside the device's usual range"))
    return [_kv("FiO2 from a device", rows), _text(["Assumptions"] + [f"- {a}" for a in assumptions]),
            caution_panel()]


def cylinder_renderables(res: dict) -> list:
    """Table of a ``cylinders`` result."""
    rows = [("Cylinder", res["label"]), ("Water volume", f"{res['water_l']:.2f} L"),
            ("Fill pressure", f"{res['fill_bar']:.1f} bar ({res['fill_psi']:,.0f} psi)"),
            ("Residual kept", f"{res['residual_bar']:.1f} bar"),
            ("Gas (ref. conditions)", f"{res['gas_l']:,.0f} L"), ("Usable gas", f"{res['usable_l']:,.0f} L")]
    if res.get("flow_l_min"):
        rows += [("Flow", f"{res['flow_l_min']:.2f} L/min"),
                 ("Duration of one cylinder", f"{res['duration_min']:,.0f} min ({res['duration_min'] / 60:.1f} h)")]
    if res.get("hours") is not None:
        rows += [("Oxygen needed per person", f"{res['litres_per_person']:,.0f} L"),
                 ("Safety margin", f"{res['margin_fraction']:.0%}"),
                 ("Cylinders per person", str(res["cylinders_per_person"])),
                 ("People", str(res["people"])), ("Cylinders in total", str(res["cylinders_total"]))]
    return [_kv("Cylinder arithmetic", rows),
            _text([f"Gas = water volume x gauge pressure / {res['reference_bar']:g} bar (ideal gas; real "
                   "oxygen holds a few per cent less at high fill pressures)."]), caution_panel()]


def room_renderables(res: dict) -> list:
    """Table of a ``room`` result (:mod:`altox.evaluation.rooms`)."""
    rows = [("Site pressure", f"{res['pb_mmhg']:.1f} mmHg"), ("Room O2", f"{100 * res['o2_fraction']:.2f} %"),
            ("Room kind", res["kind"]),
            ("Equivalent altitude", f"{_num(res['equivalent_altitude_m'])} m"),
            ("O2 partial pressure", f"{res['po2_mmhg']:.0f} mmHg ({res['po2_vs_sea_level']:.0%} of sea-level air)")]
    if res["enriched"]:
        rows.append(("Definition", f"oxygen-enriched (above {100 * res['enriched_above_fraction']:.1f} %)"))
    if res["deficient"]:
        rows.append(("Definition", f"oxygen-deficient (below {100 * res['deficient_below_fraction']:.1f} %)"))
    if not res.get("feasible", True):
        rows.append(("Feasible", "no: more than 100 % oxygen would be needed"))
    out = [_kv("Room atmosphere", rows)]
    for key in ("fire_caution", "hypoxic_caution"):
        if res.get(key):
            out.append(_text([res[key]]))
    out.append(caution_panel())
    return out


def decompression_renderables(res: dict) -> list:
    """Table of a ``decompress`` result."""
    tuc = (f"more than {_dur(res['tuc_max_s'])}" if res["tuc_min_s"] is None
           else f"shorter than {_dur(res['tuc_min_s'])} to {_dur(res['tuc_max_s'])} (!) (above the "
                "table's highest altitude; not extrapolated)" if res.get("tuc_position") == 1
           else f"{_dur(res['tuc_min_s'])} to {_dur(res['tuc_max_s'])}")
    rows = [("Cabin altitude after decompression", f"{res['altitude_ft']:,.0f} ft"),
            ("Time of useful consciousness", tuc)]
    if res["tuc_rapid_min_s"] is not None:
        rows.append(("After a rapid decompression", f"possibly as short as {_dur(res['tuc_rapid_min_s'])}"))
    for k, v in res["minutes_to"].items():
        rows.append((f"Descent to {float(k):,.0f} ft", f"{v:.1f} min"))
    for g in ("crew", "passengers"):
        d = res[g]
        rows.append((f"O2 per {g[:-1] if g.endswith('s') else g} member" if g == "crew" else "O2 per passenger",
                     f"{d['oxygen_l']:.1f} L to {d['to_ft']:,.0f} ft ({d['device']})"
                     + ("" if d["target_held"] else " (!)")))
    held = all(res[g]["target_held"] for g in ("crew", "passengers"))
    return [_kv("Decompression", rows),
            _text(["Notes", f"- TUC: {res['tuc_interpolation']}. {res['tuc_caution']}"]
                  + ([] if held else ["- (!) The assumed device cannot hold the target at the top of the "
                                      "descent: pressure breathing or a faster descent is needed."]) + [
                   f"- Oxygen-free altitudes: crew {res['oxygen_free_ft']['crew']:,.0f} ft "
                   f"({res['oxygen_free_ft']['crew_from']}), passengers "
                   f"{res['oxygen_free_ft']['passengers']:,.0f} ft ({res['oxygen_free_ft']['passengers_from']}).",
                   f"- {res['convention']}"]),
            caution_panel()]
