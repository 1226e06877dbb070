"""Oxygen-planning commands on the altox app: o2-target, o2-flow, cylinders, room, decompress.

Registered by importing this module (``altox/cli/main.py`` imports it).  Thin: parse options, call
the library, print a rich table or ``--json``; named errors become one ``Error:`` line and
exit status 2 (:func:`altox.cli.main.run_guarded`).  Heavy imports stay inside the commands so
that ``altox --help`` does not load numpy.
"""

from __future__ import annotations

import re
from typing import Optional

import typer

from altox.cli.app import _parse_number, app, run_guarded

_JSON_HELP = "Print one JSON object instead of the table."
_VOLUME_RE = re.compile(r"^\s*(?P<num>\d+(?:\.\d*)?|\.\d+)\s*(?P<unit>l|L|litres?|liters?)\s*$")


def _unit_error(message):
    from altox.errors import UnitError

    return UnitError(message)


def _pressure_at(altitude, pressure, atmosphere):
    """(pb_mmhg, altitude_m) from --altitude/--pressure; flight levels and feet are pressure altitudes."""
    from altox.units import parse_quantity

    if atmosphere not in ("isa", "mountain"):
        raise _unit_error(f"--atmosphere: {atmosphere!r} is not a model; expected isa or mountain.")
    if pressure is not None:
        return parse_quantity(pressure, "pressure", field="--pressure"), None
    if altitude is None:
        raise _unit_error("give --altitude (e.g. 5500m, FL250) or --pressure (e.g. 380mmHg).")
    alt_m = parse_quantity(altitude, "length", field="--altitude")
    from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft_to_mmhg
    from altox.units import M_PER_FT

    try:
        if atmosphere == "isa" and re.search(r"ft|feet|foot|FL|'", altitude, re.IGNORECASE):
            if not -2000.0 <= alt_m / M_PER_FT <= 60000.0:
                raise _unit_error(f"--altitude: {altitude!r} is outside -2,000 to 60,000 ft.")
            return float(pressure_altitude_ft_to_mmhg(alt_m / M_PER_FT)), alt_m  # a pressure altitude
        return float(barometric_pressure(alt_m, atmosphere)), alt_m
    except Exception as exc:  # OutOfRangeError: name the option
        from altox.errors import AltoxError

        if isinstance(exc, AltoxError):
            raise type(exc)(f"--altitude: {altitude!r}: {exc.message}", field="--altitude") from None
        raise


def _flow(text, option):
    from altox.plan.profile import parse_flow

    return parse_flow(text, field=option)


def _fraction(text, option):
    from altox.units import parse_fraction

    return parse_fraction(text, field=option)


def _print(renderables):
    from altox.present.terminal import console as Console

    console = Console(width=80)
    for r in renderables:
        console.print(r)


def _echo_json(data):
    from altox.present.render import CAUTION, to_json

    typer.echo(to_json({**data, "caution": CAUTION}))


def _choice(value, table, option, what):
    if value not in table:
        import difflib

        near = difflib.get_close_matches(value, list(table), n=1)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise _unit_error(f"{option}: {value!r} is not {what}.{hint} Expected one of: {', '.join(table)}.")
    return value


@app.command("o2-target")
def o2_target(
    altitude: Optional[str] = typer.Option(None, "--altitude", help="Where: 5500m, 18,000ft, FL250."),
    pressure: Optional[str] = typer.Option(None, "--pressure", help="Measured or cabin pressure with unit."),
    atmosphere: str = typer.Option("isa", "--atmosphere", help="isa or mountain (for --altitude and targets)."),
    hold_altitude: Optional[str] = typer.Option(None, "--hold-altitude",
                                                help="Target equivalent altitude, e.g. 3000m or 10,000ft."),
    hold_pio2: Optional[str] = typer.Option(None, "--hold-pio2", help="Target inspired PO2, e.g. 100mmHg."),
    hold_alveolar: Optional[str] = typer.Option(None, "--hold-alveolar", help="Target alveolar PO2, e.g. 60mmHg."),
    hold_sao2: Optional[str] = typer.Option(None, "--hold-sao2", help="Target expected SaO2, e.g. '90 %'."),
    device: str = typer.Option("nasal-cannula", "--device", help="Delivery device id (see docs/oxygen.md)."),
    activity: str = typer.Option("rest", "--activity", help="sleep, rest, light-work, trekking or climbing."),
    days: str = typer.Option("0", "--days", help="Days at this altitude (acclimatization)."),
    json_out: bool = typer.Option(False, "--json", help=_JSON_HELP),
):
    """FiO2 that holds a target (equivalent altitude, PIO2, alveolar PO2 or SaO2), and the device flow."""

    def body():
        from altox.evaluation.oxygen import activities, devices, oxygen_for_target
        from altox.units import parse_quantity

        pb, _ = _pressure_at(altitude, pressure, atmosphere)
        given = {k: v for k, v in (("--hold-altitude", hold_altitude), ("--hold-pio2", hold_pio2),
                                   ("--hold-alveolar", hold_alveolar), ("--hold-sao2", hold_sao2)) if v is not None}
        if len(given) != 1:
            raise _unit_error("give exactly one target: --hold-altitude, --hold-pio2, --hold-alveolar or --hold-sao2.")
        (opt, text), = given.items()
        if opt == "--hold-altitude":
            m = parse_quantity(text, "length", field=opt)
            if atmosphere == "isa" and re.search(r"ft|feet|FL", text, re.IGNORECASE):
                from altox.evaluation.decompression import _geometric_of_pressure_altitude_m

                m = _geometric_of_pressure_altitude_m(m)
            target = {"equivalent_altitude_m": m}
        elif opt == "--hold-sao2":
            target = {"sao2_pct": 100.0 * _fraction(text, opt)}
        else:
            key = "pio2_mmhg" if opt == "--hold-pio2" else "alveolar_po2_mmhg"
            target = {key: parse_quantity(text, "pressure", field=opt)}
        _choice(device, devices(), "--device", "a device")
        _choice(activity, activities(), "--activity", "an activity")
        d = _parse_number(days, "--days", 0, 3650, "days")
        res = {"pb_mmhg": pb, **oxygen_for_target(pb, device, activity, atmosphere=atmosphere, days=d, **target)}
        if json_out:
            _echo_json(res)
            return
        from altox.present.render_oxygen import target_renderables

        _print(target_renderables(res, [
            f"Atmosphere {atmosphere}; {activity}; {d:g} days at this altitude; healthy adult, age 40.",
            "Flows are litres per minute at 1 atm and 15 degC, as flowmeters count them.",
            "The device's FiO2 varies widely between people: titrate to a measured SpO2."]))

    run_guarded(body)


@app.command("o2-flow")
def o2_flow(
    altitude: Optional[str] = typer.Option(None, "--altitude", help="Where: 5500m, 18,000ft, FL250."),
    pressure: Optional[str] = typer.Option(None, "--pressure", help="Measured or cabin pressure with unit."),
    atmosphere: str = typer.Option("isa", "--atmosphere", help="isa or mountain."),
    device: str = typer.Option("nasal-cannula", "--device", help="A continuous-flow device id."),
    flow: str = typer.Option(..., "--flow", help="Oxygen flow, e.g. '2 L/min'."),
    activity: str = typer.Option("rest", "--activity", help="sleep, rest, light-work, trekking or climbing."),
    days: str = typer.Option("0", "--days", help="Days at this altitude (acclimatization)."),
    json_out: bool = typer.Option(False, "--json", help=_JSON_HELP),
):
    """FiO2, equivalent altitude and expected SaO2 given by a device at a flow."""

    def body():
        from altox.evaluation.oxygen import activities, device_fio2, devices

        pb, _ = _pressure_at(altitude, pressure, atmosphere)
        _choice(device, devices(), "--device", "a device")
        _choice(activity, activities(), "--activity", "an activity")
        q = _flow(flow, "--flow")
        d = _parse_number(days, "--days", 0, 3650, "days")
        res = device_fio2(device, q, pb, activity, days=d, atmosphere=atmosphere)
        if json_out:
            _echo_json({"pb_mmhg": pb, **res})
            return
        from altox.present.render_oxygen import flow_renderables

        _print(flow_renderables(res, [
            f"Pressure {pb:.0f} mmHg ({atmosphere}); {activity}; {d:g} days at this altitude.",
            "The wearer's ventilation is taken on air at this place (the higher value), so the FiO2 is not overstated."]))

    run_guarded(body)


def _water_l(text):
    m = _VOLUME_RE.match(str(text))
    if not m:
        raise _unit_error(f"--water: {text!r} is not a volume; expected litres, e.g. '10 L' or '2.35L'.")
    v = float(m.group("num"))
    if not 0.0 < v <= 100.0:
        raise _unit_error(f"--water: {text!r} is outside 0-100 L; expected a cylinder's water volume.")
    return v


@app.command("cylinders")
def cylinders_cmd(
    cylinder: Optional[str] = typer.Option(None, "--cylinder", help="A cylinder id (see docs/oxygen.md)."),
    water: Optional[str] = typer.Option(None, "--water", help="Water volume, e.g. '10 L' (instead of --cylinder)."),
    fill: Optional[str] = typer.Option(None, "--fill", help="Gauge fill pressure, e.g. '200 bar' or '2,015 psi'."),
    residual: str = typer.Option("0 bar", "--residual", help="Pressure to leave in the cylinder, e.g. '10 bar'."),
    flow: Optional[str] = typer.Option(None, "--flow", help="Oxygen flow, e.g. '2 L/min'."),
    hours: Optional[str] = typer.Option(None, "--hours", help="Time on oxygen per person, e.g. '8 h' or '90 min'."),
    people: str = typer.Option("1", "--people", help="People on oxygen."),
    margin: Optional[str] = typer.Option(None, "--margin", help="Safety margin, e.g. '25 %' (default from data)."),
    json_out: bool = typer.Option(False, "--json", help=_JSON_HELP),
):
    """Gas in a cylinder, how long it lasts at a flow, and how many cylinders a need takes."""

    def body():
        from altox.evaluation import oxygen as ox
        from altox.units import PA_PER_BAR, PA_PER_MMHG, PA_PER_PSI, parse_quantity

        def bar(text, option):
            return parse_quantity(text, "pressure", field=option) * PA_PER_MMHG / PA_PER_BAR

        if cylinder is not None:
            c = ox.get_cylinder(cylinder, field="--cylinder")
            water_l, fill_bar, res_bar, label = c["water_l"], c["fill_bar"], c["residual_bar"], c["label"]
            if fill is not None:
                fill_bar = bar(fill, "--fill")
        else:
            if water is None or fill is None:
                raise _unit_error("give --cylinder ID, or --water (e.g. '10 L') and --fill (e.g. '200 bar').")
            water_l, fill_bar = _water_l(water), bar(fill, "--fill")
            res_bar, label = bar(residual, "--residual"), f"{water_l:g} L at {fill_bar:.0f} bar"
        if fill_bar <= res_bar:
            raise _unit_error(f"--fill: {fill_bar:.1f} bar is not above the residual ({res_bar:.1f} bar).")
        ref = ox.reference_pressure_bar()
        usable = float(ox.usable_gas_l(water_l, fill_bar, res_bar))
        out = {"cylinder": cylinder, "label": label, "water_l": water_l, "fill_bar": fill_bar,
               "fill_psi": fill_bar * PA_PER_BAR / PA_PER_PSI, "residual_bar": res_bar, "reference_bar": ref,
               "gas_l": float(ox.gas_volume_l(water_l, fill_bar)), "usable_l": usable,
               "flow_l_min": None, "duration_min": None, "hours": None}
        if flow is not None:
            q = _flow(flow, "--flow")
            out.update({"flow_l_min": q, "duration_min": float(ox.duration_min(usable, q))})
        if hours is not None:
            if flow is None:
                raise _unit_error("--hours needs --flow (e.g. '2 L/min').")
            h = parse_quantity(hours, "duration", field="--hours")
            if not 0 < h <= 24 * 365:
                raise _unit_error(f"--hours: {hours!r} is outside (0, 1 year].")
            count = _parse_number(people, "--people", 1, 10000)
            if not float(count).is_integer():
                from altox.errors import UnitError
                raise UnitError(f"--people: {people!r} is not a whole number of people; expected a whole "
                                "number from 1 to 10,000.", field="--people", value=people)
            n = int(count)
            m = None
            if margin is not None:
                text = str(margin).strip()
                if not text.endswith("%"):
                    raise _unit_error(f"--margin: {margin!r} needs its percent sign, e.g. '25 %'.")
                m = _parse_number(text.rstrip("%").strip(), "--margin", 0, 300, "%") / 100.0
            need = out["flow_l_min"] * h * 60.0
            per = int(ox.cylinders_needed(need, usable, m))
            mfrac = m if m is not None else ox.load_data("cylinders")["planning"]["safety_margin_fraction"]
            out.update({"hours": h, "people": n, "litres_per_person": need, "margin_fraction": mfrac,
                        "cylinders_per_person": per, "cylinders_total": per * n})
        if json_out:
            _echo_json(out)
            return
        from altox.present.render_oxygen import cylinder_renderables

        _print(cylinder_renderables(out))

    run_guarded(body)


@app.command("room")
def room(
    site: Optional[str] = typer.Option(None, "--site", help="Site altitude, e.g. 4500m."),
    pressure: Optional[str] = typer.Option(None, "--pressure", help="Measured pressure in the room with unit."),
    atmosphere: str = typer.Option("mountain", "--atmosphere", help="mountain (default) or isa."),
    o2: Optional[str] = typer.Option(None, "--o2", help="The room's oxygen, e.g. '26 %' or 0.26."),
    target: Optional[str] = typer.Option(None, "--target", help="Target equivalent altitude, e.g. 3000m."),
    json_out: bool = typer.Option(False, "--json", help=_JSON_HELP),
):
    """Enriched or hypoxic room: its equivalent altitude, or the oxygen for a target, with the fire caution."""

    def body():
        from altox.evaluation.rooms import room_atmosphere_check, room_equivalent_altitude, room_o2_fraction
        from altox.units import parse_quantity

        pb, _ = _pressure_at(site, pressure, atmosphere)
        if (o2 is None) == (target is None):
            raise _unit_error("give either --o2 (the room's oxygen, e.g. '26 %') or --target (e.g. 3000m).")
        if o2 is not None:
            f = _fraction(o2, "--o2")
            res = room_equivalent_altitude(f, pb_mmhg=pb, atmosphere=atmosphere)
            from altox.physiology.gas_exchange import AIR_FIO2

            res["kind"] = "enriched" if f > AIR_FIO2 else "hypoxic" if f < AIR_FIO2 else "air"
            res["feasible"] = True
        else:
            t = parse_quantity(target, "length", field="--target")
            res = room_o2_fraction(t, pb_mmhg=pb, atmosphere=atmosphere)
            needed = res["o2_fraction"]
            res.update(room_equivalent_altitude(min(needed, 1.0), pb_mmhg=pb, atmosphere=atmosphere))
            res["o2_fraction"] = needed   # the fraction the target needs, even above 1 (infeasible)
        res.update(room_atmosphere_check(min(res["o2_fraction"], 1.0), pb))
        if json_out:
            _echo_json(res)
            return
        from altox.present.render_oxygen import room_renderables

        _print(room_renderables(res))

    run_guarded(body)


@app.command("decompress")
def decompress(
    altitude: str = typer.Option(..., "--altitude", help="Aircraft pressure altitude, e.g. FL410 or 35,000ft."),
    rate: str = typer.Option(..., "--rate", help="Emergency descent rate, e.g. '4,000 ft/min'."),
    rules: list[str] = typer.Option([], "--rules", help="Aviation rule-set id; repeat for several "
                                                        "(default: us-14cfr-91)."),
    json_out: bool = typer.Option(False, "--json", help=_JSON_HELP),
):
    """After a rapid decompression: time of useful consciousness, descent times, oxygen per occupant."""

    def body():
        from altox.evaluation.decompression import (descent_convention, descent_oxygen_l, descent_time_min,
                                                    oxygen_free_altitudes_ft, tuc_range_s, tuc_table)
        from altox.evaluation.oxygen import load_data
        from altox.evaluation.oxygen_plan import _device_for_cabin
        from altox.plan.profile import parse_vertical_speed
        from altox.guidance import load_rule_set
        from altox.units import M_PER_FT, parse_quantity

        alt_ft = parse_quantity(altitude, "length", field="--altitude") / M_PER_FT
        if not 0 < alt_ft <= 60000:
            raise _unit_error(f"--altitude: {altitude!r} is outside 0-60,000 ft.")
        r = parse_vertical_speed(rate, field="--rate")
        sets = [load_rule_set(x) for x in (rules or ["us-14cfr-91"])]
        free = oxygen_free_altitudes_ft(sets)
        conv = descent_convention()
        acts = load_data("activity_ventilation")["plan_defaults"]
        tuc = tuc_range_s(alt_ft)
        t = tuc_table()
        res = {"altitude_ft": alt_ft, "rate_ft_min": r, **{f"tuc_{k}": v for k, v in tuc.items()},
               "minutes_to": {f"{float(c):.0f}": float(descent_time_min(alt_ft, float(c), r))
                              for c in conv["checkpoints_ft"]},
               "oxygen_free_ft": free, "rule_sets": [s.id for s in sets],
               "crew": descent_oxygen_l(alt_ft, free["crew"], r, activity=acts["flight_crew"],
                                        device=_device_for_cabin(alt_ft, conv["crew_device"])),
               "passengers": descent_oxygen_l(alt_ft, free["passengers"], r, activity=acts["flight_passenger"],
                                              device=conv["passenger_device"]),
               "tuc_interpolation": t["interpolation"], "tuc_caution": t["caution"],
               "convention": conv["rule"].strip()}
        if json_out:
            _echo_json(res)
            return
        from altox.present.render_oxygen import decompression_renderables

        _print(decompression_renderables(res))

    run_guarded(body)
