"""After a cabin decompression: time of useful consciousness, time to descend, oxygen for the descent.

* :func:`tuc_range_s`: the time of useful consciousness (TUC) at a cabin pressure altitude, as
  a range, from the table of ``altox/data/tuc.yaml`` (FAA AIM 8-1-2 and AC 61-107B Table 1-1).
  Between tabulated altitudes each bound is interpolated linearly in altitude on the logarithm
  of time; below the table the result is "more than" the lowest row's upper bound; above it the
  highest row's range is returned (never extrapolated).  A rapid decompression may shorten TUC
  by up to half (``rapid_decompression_factor``).
* :func:`descent_time_min`: time to descend from one altitude to another at a constant rate.
* :func:`oxygen_free_altitudes_ft`: from guidance rule sets, the lowest cabin altitude at
  which each group (crew, passengers) must have oxygen with no time allowance.
* :func:`descent_oxygen_l`: oxygen per occupant for an emergency descent under the simple,
  documented convention of ``oxygen_devices.yaml`` (``descent_oxygen``): from the
  decompression altitude, after a reaction time, straight down at the given rate to the
  group's oxygen-free altitude, holding the inspired PO2 of air at that altitude.

All functions are vectorised over altitudes; the rule-set part is plain Python.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.evaluation.oxygen import _scalar, load_data
from altox.physiology.tuc import tuc_range_s, tuc_table  # noqa: E402,F401  (re-exported)

__all__ = ["tuc_table", "tuc_range_s", "descent_time_min", "oxygen_free_altitudes_ft",
           "descent_oxygen_l", "descent_convention", "TUC_BELOW", "TUC_WITHIN", "TUC_ABOVE"]

from altox.physiology.tuc import TUC_ABOVE, TUC_BELOW, TUC_WITHIN  # noqa: E402,F401  (re-exported)






def descent_time_min(from_ft, to_ft, rate_ft_min):
    """Time to descend from ``from_ft`` to ``to_ft`` at a constant rate. [min] Zero if already below.

    Raises
    ------
    OutOfRangeError
        A rate that is not a positive number.
    """
    r = np.asarray(rate_ft_min, dtype=float)
    if np.any(~np.isfinite(r) | (r <= 0)):
        raise OutOfRangeError("the descent rate must be a positive number of ft/min", field="rate",
                              expected="> 0 ft/min, e.g. '4,000 ft/min'")
    drop = np.maximum(np.asarray(from_ft, dtype=float) - np.asarray(to_ft, dtype=float), 0.0)
    return _scalar(drop / r)


def descent_convention() -> dict:
    """The documented convention for descent oxygen (``oxygen_devices.yaml``, ``descent_oxygen``)."""
    return dict(load_data("oxygen_devices")["descent_oxygen"])


_CREW = ("crew", "flight crew", "all occupants")
_PASSENGERS = ("passengers", "all occupants")


def oxygen_free_altitudes_ft(rule_sets) -> dict:
    """Lowest cabin altitude at which each group must have oxygen with no time allowance.

    Parameters
    ----------
    rule_sets : iterable of altox.guidance.RuleSet
        Aviation rule sets (others are ignored).

    Returns
    -------
    dict
        ``{'crew': ft, 'passengers': ft, 'crew_from': 'rule-set-id section' or 'default',
        'passengers_from': ...}``.  Thresholds with a duration ("more than 30 min") do not
        count, since a descent is short; without such a threshold the defaults of
        ``descent_oxygen.default_oxygen_free_ft`` apply.
    """
    conv = descent_convention()
    out = {"crew": float(conv["default_oxygen_free_ft"]["crew"]), "crew_from": "default",
           "passengers": float(conv["default_oxygen_free_ft"]["passengers"]), "passengers_from": "default"}
    best = {"crew": None, "passengers": None}
    for rs in rule_sets or ():
        if getattr(rs, "kind", None) != "aviation":
            continue
        for th in rs.thresholds:
            if th.check != "oxygen" or th.duration is not None:
                continue
            ft = float(th.lower_ft)
            for group, who in (("crew", _CREW), ("passengers", _PASSENGERS)):
                if th.applies_to in who and (best[group] is None or ft < best[group][0]):
                    best[group] = (ft, f"{rs.id} {th.section}")
    for group in best:
        if best[group] is not None:
            out[group], out[f"{group}_from"] = best[group]
    return out


def descent_oxygen_l(from_ft, to_ft, rate_ft_min, *, device, activity, reaction_min=None, step_ft=250.0):
    """Oxygen used by one occupant from a decompression at ``from_ft`` until the cabin is at ``to_ft``.

    The occupant breathes through ``device`` enough oxygen to hold the inspired PO2 of ISA air
    at ``to_ft`` (:func:`altox.evaluation.oxygen.oxygen_for_target`), first for ``reaction_min`` at
    ``from_ft``, then along a straight descent at ``rate_ft_min``, integrated on steps of
    ``step_ft`` (midpoint rule).  Where the device cannot hold the target it is taken at its
    most (100 % or its maximum flow) and the result says so.

    Returns
    -------
    dict
        ``oxygen_l`` (reference litres), ``minutes`` (on oxygen), ``target_held`` (throughout),
        ``lowest_fio2_shortfall`` (largest FiO2 short of the target, 0 if held),
        ``pressure_breathing`` (needed somewhere), ``device``, ``activity``, ``to_ft``.
    """
    from altox.physiology.atmosphere import pressure_altitude_ft_to_mmhg
    from altox.evaluation.oxygen import get_device, oxygen_for_target
    from altox.units import M_PER_FT

    conv = descent_convention()
    reaction = float(conv["reaction_min"]) if reaction_min is None else float(reaction_min)
    top, bottom = float(from_ft), float(to_ft)
    rate = float(rate_ft_min)
    if not np.isfinite(rate) or rate <= 0:
        raise OutOfRangeError("the descent rate must be a positive number of ft/min", field="rate",
                              expected="> 0 ft/min")
    result = {"device": device, "activity": activity, "to_ft": bottom, "oxygen_l": 0.0, "minutes": 0.0,
              "target_held": True, "lowest_fio2_shortfall": 0.0, "pressure_breathing": False}
    if top <= bottom:
        return result
    n = max(1, int(np.ceil((top - bottom) / step_ft)))
    edges = np.linspace(top, bottom, n + 1)
    mids = 0.5 * (edges[:-1] + edges[1:])
    alts = np.concatenate([[top], mids])
    minutes = np.concatenate([[reaction], np.abs(np.diff(edges)) / rate])
    r = oxygen_for_target(pressure_altitude_ft_to_mmhg(alts), device, activity,
                          equivalent_altitude_m=_geometric_of_pressure_altitude_m(bottom * M_PER_FT))
    flow = np.asarray(r["flow_l_min"], dtype=float)
    if r["device_kind"] == "continuous":
        flow = np.minimum(flow, float(get_device(device).get("max_flow_l_min", np.inf)))
    shortfall = np.maximum(np.asarray(r["fio2_needed"], dtype=float) - np.asarray(r["fio2_achieved"], dtype=float), 0.0)
    shortfall = np.where(np.asarray(r["reachable"], dtype=bool), shortfall,
                         np.maximum(shortfall, np.asarray(r["fio2_raw"], dtype=float) - 1.0))
    result.update({
        "oxygen_l": float(np.sum(flow * minutes)),
        "minutes": float(np.sum(minutes)),
        "target_held": bool(np.all(np.asarray(r["device_reaches_target"], dtype=bool))),
        "lowest_fio2_shortfall": float(np.max(np.where(np.isfinite(shortfall), shortfall, 1.0))),
        "pressure_breathing": bool(np.any(np.asarray(r["pressure_breathing"], dtype=bool))),
    })
    return result


def _geometric_of_pressure_altitude_m(pressure_altitude_m: float) -> float:
    """ISA geometric altitude of a pressure altitude (the equivalent altitude is geometric)."""
    from altox.physiology.atmosphere import altitude_for_pressure, pressure_altitude_ft_to_mmhg
    from altox.units import M_PER_FT

    return float(altitude_for_pressure(pressure_altitude_ft_to_mmhg(pressure_altitude_m / M_PER_FT), "isa"))


def certification_flow() -> dict:
    """The minimum-flow figures of the certification standard (``certification_flow.yaml``)."""
    from altox.evaluation.oxygen import load_data

    return load_data("certification_flow")


def certification_descent_oxygen_l(from_ft, to_ft, rate_ft_min, group: str, *, reaction_min=None,
                                   step_ft: float = 250.0) -> dict:
    """Oxygen for one occupant over an emergency descent, at the certification standard's minimum flow.

    The standard (14 CFR 25.1443 / CS 25.1443; figures in ``certification_flow.yaml``) sets,
    by cabin pressure altitude, the mean tracheal PO2 (or the oxygen fraction) that the
    equipment must hold at a stated minute ventilation.  With the tracheal PO2
    ``PtO2 = FiO2 (PB - 47)``, the fraction of the inspired gas that must come from the supply
    is ``x = (FiO2 - 0.2095) / (1 - 0.2095)`` (the rest is cabin air), and the supply's flow is
    ``x VE`` (BTPS at the cabin pressure), counted in reference litres.  The occupant breathes
    it for ``reaction_min`` at ``from_ft`` and then along a straight descent at ``rate_ft_min``
    to ``to_ft`` (passengers: not below the standard's lowest band, 10,000 ft), integrated on
    steps of ``step_ft`` (midpoint rule).

    Parameters
    ----------
    from_ft, to_ft : float
        Decompression (cabin = aircraft) and oxygen-free pressure altitudes. [ft]
    rate_ft_min : float
        Emergency descent rate. [ft/min]
    group : {'crew', 'crew-continuous', 'passengers'}
        Flight crew on demand equipment (25.1443(b)), on continuous flow (25.1443(a)), or
        passengers and cabin crew (25.1443(c)).

    Returns
    -------
    dict
        ``oxygen_l`` (reference litres), ``minutes`` (on oxygen), ``beyond_standard`` (the
        descent starts above the standard's top altitude, or 100 % oxygen cannot reach its
        figure somewhere: pressure breathing or a faster descent is needed), ``standard``,
        ``section``, ``group``.

    References
    ----------
    14 CFR 25.1443; EASA CS 25.1443 (ED Decision 2003/2/RM).
    """
    from altox.physiology.atmosphere import pressure_altitude_ft_to_mmhg
    from altox.evaluation.oxygen import btps_to_reference_factor
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG

    data = certification_flow()
    key = {"crew": "crew_demand", "crew-continuous": "crew_continuous", "passengers": "passengers"}.get(group)
    if key is None:
        raise OutOfRangeError(f"group {group!r} is not one of crew, crew-continuous, passengers", field="group",
                              expected="crew, crew-continuous or passengers")
    spec = data[key]
    rate = float(rate_ft_min)
    if not np.isfinite(rate) or rate <= 0:
        raise OutOfRangeError("the descent rate must be a positive number of ft/min", field="rate",
                              expected="> 0 ft/min")
    conv = descent_convention()
    reaction = float(conv["reaction_min"]) if reaction_min is None else float(reaction_min)
    top = float(from_ft)
    bottom = max(float(to_ft), float(spec.get("above_ft", -np.inf)))
    top_ft = float(data["top_ft"])
    result = {"oxygen_l": 0.0, "minutes": 0.0, "beyond_standard": top > top_ft, "standard": data["standard"],
              "section": spec["section"], "group": group, "to_ft": bottom}
    if top <= bottom:
        return result
    n = max(1, int(np.ceil((top - bottom) / step_ft)))
    edges = np.linspace(top, bottom, n + 1)
    alts = np.concatenate([[top], 0.5 * (edges[:-1] + edges[1:])])
    minutes = np.concatenate([[reaction], np.abs(np.diff(edges)) / rate])
    pb = np.asarray(pressure_altitude_ft_to_mmhg(alts), dtype=float)
    dry = pb - 47.0
    fio2 = np.full(alts.shape, np.nan)
    ve = np.full(alts.shape, float(spec.get("ventilation_btps_l_min", np.nan)))
    lower = -np.inf
    for band in spec["bands"]:
        inside = (alts > lower) & (alts <= float(band["up_to_ft"]))
        if "oxygen_fraction" in band:
            fio2[inside] = float(band["oxygen_fraction"])
        else:
            fio2[inside] = float(band["tracheal_po2_mmhg"]) / dry[inside]
        if "ventilation_btps_l_min" in band:
            ve[inside] = float(band["ventilation_btps_l_min"])
        lower = float(band["up_to_ft"])
    above = np.isnan(fio2)                       # above the standard's top altitude
    ve[above] = ve[~above][0] if (~above).any() else ve[above]
    if np.isnan(ve).any():                       # passengers above the top: the highest band's ventilation
        ve[np.isnan(ve)] = float(spec["bands"][-1].get("ventilation_btps_l_min", 30.0))
    unreachable = above | (fio2 > 1.0)
    fio2 = np.where(unreachable, 1.0, fio2)
    x = np.clip((fio2 - 0.2095) / (1.0 - 0.2095), 0.0, 1.0)
    # BTPS litres at the cabin pressure -> reference litres: dry share and pressure of the
    # breath relative to sea-level BTPS, then btps_to_reference_factor
    ref_l_min = x * ve * dry / (SEA_LEVEL_MMHG - 47.0) * btps_to_reference_factor()
    result.update({"oxygen_l": float(np.sum(ref_l_min * minutes)), "minutes": float(np.sum(minutes)),
                   "beyond_standard": bool(unreachable.any())})
    return result
