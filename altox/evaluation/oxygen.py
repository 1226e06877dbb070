"""Supplemental oxygen: the FiO2 that holds a target, the flow a device needs for it, ventilation by activity, cylinders.

Everything here is pure and vectorised (scalars or numpy arrays in, the same shape out) and
reads its coefficients from data files with their sources: ``altox/data/oxygen_devices.yaml``,
``altox/data/activity_ventilation.yaml`` and ``altox/data/cylinders.yaml``.

Methods
-------
Targets.  A target is an equivalent altitude (the altitude whose ambient air gives the same
inspired PO2, West 1995), an inspired PO2, an alveolar PO2 or an expected arterial
saturation.  The first two have closed forms from ``PIO2 = FIO2 (PB - PH2O)``; the last two
are found by bisection on whole FiO2 arrays (a fixed number of halvings) through
:func:`altox.assess`, which carries the ventilatory response to the oxygen given.  Where
100 % oxygen cannot reach the target, the highest altitude at which it can (the *ceiling*)
is found the same way, on pressure.

Devices.  The wearer inspires ``n`` litres of gas a minute (litres at the reference conditions
of ``cylinders.yaml``, the same litres in which oxygen flows and cylinder contents are
counted).  Of the device's flow ``Q`` the share ``d`` (``delivery_fraction``) reaches the
inspired gas and air makes up the rest (a perfect-mixing low-flow model)::

    FiO2 = 0.2095 + 0.7905 min(1, d Q / n)        capped at the device's max_fio2

With ``d = 1`` this is ``FiO2 = (Q 1.0 + (n - Q) 0.21) / n`` (respiratory-care teaching, from
memory).  ``n`` is the sea-level minute ventilation of the activity (BTPS), converted to
reference litres, times the alveolar-ventilation ratio of :func:`altox.assess` at the place
(hypoxic ventilatory response and acclimatization).  Because oxygen flows are counted in
reference litres, the same regulator setting is worth more at altitude, where the gas expands.

Cylinders.  ``V_gas = V_water P_gauge / P_ref`` (ideal gas; the gas left at ambient pressure
is the water volume itself, so gauge pressure gives the gas that can leave); usable gas stops
at the residual pressure; duration ``= V_usable / Q``; count ``= ceil(V_need (1 + margin) /
V_usable)``.

References
----------
.. [West1995] West JB. Oxygen enrichment of room air to relieve the hypoxia of high altitude.
   Respir Physiol 1995;99:225-232.

Why this module is long: the oxygen targets, delivery devices, ventilation by activity and cylinders are one domain sharing the device and cylinder data and the chain's inversion to a target.
"""

from __future__ import annotations

import numpy as np

from altox.errors import AltoxError, OutOfRangeError
from altox.physiology.gas_exchange import AIR_FIO2, water_vapour_pressure
from altox.units import PA_PER_BAR, PA_PER_MMHG

__all__ = [
    "load_data", "devices", "get_device", "activities", "activity_ventilation_btps_l_min",
    "reference_pressure_bar", "btps_to_reference_factor", "inspired_gas_l_min",
    "fio2_from_flow", "flow_for_fio2", "fio2_for_target", "oxygen_for_target", "device_fio2",
    "cylinders", "get_cylinder", "gas_volume_l", "usable_gas_l", "duration_min",
    "cylinders_needed", "TARGET_KINDS",
]

#: target keyword -> what it is, its unit
TARGET_KINDS = {
    "equivalent_altitude_m": ("equivalent altitude", "m"),
    "pio2_mmhg": ("inspired PO2", "mmHg"),
    "alveolar_po2_mmhg": ("alveolar PO2", "mmHg"),
    "sao2_pct": ("expected SaO2", "%"),
}
_NON_AIR = 1.0 - AIR_FIO2
_BISECT_STEPS = 36
_PB_FLOOR_MMHG = 50.0   # lowest pressure searched for a ceiling (just above PH2O at 37 degC)
_MMHG_PER_BAR = PA_PER_BAR / PA_PER_MMHG


# -- data --------------------------------------------------------------------------------
def load_data(name: str) -> dict:
    """A data file of ``altox/data`` (``'oxygen_devices'``, ``'cylinders'``, ``'tuc'``,
    ``'activity_ventilation'``), parsed once."""
    from altox.yamlload import load_data_file

    return load_data_file(name)


def _lookup(table: dict, key: str, what: str, field: str) -> dict:
    if key not in table:
        import difflib

        near = difflib.get_close_matches(str(key), list(table), n=1)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise AltoxError(f"{field}: unknown {what} {key!r}.{hint} Expected one of: {', '.join(table)}.",
                         field=field, value=key, expected="one of " + ", ".join(table))
    return {"id": key, **table[key]}


def devices() -> dict:
    """All delivery devices by id (see ``altox/data/oxygen_devices.yaml``)."""
    return load_data("oxygen_devices")["devices"]


def get_device(device_id: str, field: str = "device") -> dict:
    """One delivery device as a dict (with its ``id``).

    Raises
    ------
    AltoxError
        Unknown id; the message lists the known ones.
    """
    return _lookup(devices(), device_id, "oxygen device", field)


def activities() -> dict:
    """Activities and their sea-level minute ventilation (``activity_ventilation.yaml``)."""
    return load_data("activity_ventilation")["activities"]


def activity_ventilation_btps_l_min(activity: str, field: str = "activity") -> float:
    """Sea-level minute ventilation of an activity, BTPS. [L/min]"""
    return float(_lookup(activities(), activity, "activity", field)["ventilation_l_min"])


def reference_pressure_bar() -> float:
    """Pressure at which gas volumes and flows are counted (``cylinders.yaml``). [bar]"""
    return float(load_data("cylinders")["reference"]["pressure_bar"])


def btps_to_reference_factor(body_temp_c=37.0):
    """Litres at reference conditions per litre of sea-level BTPS gas, counted dry.

    ``(P_ref - PH2O) / P_ref * T_ref / T_body`` with temperatures in kelvin: the dry gas of
    one litre breathed at sea level, at the reference pressure and temperature of
    ``cylinders.yaml`` (about 0.88).
    """
    ref = load_data("cylinders")["reference"]
    p_ref = float(ref["pressure_bar"]) * _MMHG_PER_BAR
    t_ref_k = float(ref["temperature_c"]) + 273.15
    ph2o = water_vapour_pressure(body_temp_c)
    return (p_ref - ph2o) / p_ref * t_ref_k / (np.asarray(body_temp_c, dtype=float) + 273.15)


# -- ventilation by activity --------------------------------------------------------------
def inspired_gas_l_min(activity, pb_mmhg, fio2=AIR_FIO2, *, days=0.0, f_ventilatory=None,
                       f_renal=None, age_y=40.0, hb_g_dl=None, metabolic_ratio=1.0):
    """Gas inspired per minute, in reference litres, for an activity at a pressure and FiO2.

    ``n = VE_sl(activity) * F_btps * x * (PB - PH2O) / (760 - PH2O)`` where ``VE_sl`` is the
    activity's sea-level minute ventilation (``activity_ventilation.yaml``), ``F_btps`` is
    :func:`btps_to_reference_factor` and ``x`` the alveolar-ventilation ratio of
    :func:`altox.assess` at ``pb_mmhg`` breathing ``fio2`` (hypoxic ventilatory response and
    acclimatization over ``days``).  ``x`` is a ratio of BTPS volumes at the ambient pressure
    (the alveolar ventilation equation ``PACO2 = 0.863 VCO2 / VA`` holds for VA in BTPS at
    any pressure), so the last factor turns it into an amount of gas: at altitude a breath
    holds less gas, and a fixed oxygen flow is a larger share of it.  The ratio found at rest
    is applied to every activity (an assumption: the hypoxic response scales working
    ventilation in proportion).

    Parameters
    ----------
    activity : str
        An activity id: ``sleep``, ``rest``, ``light-work``, ``trekking``, ``climbing``.
    pb_mmhg : numeric
        Pressure of the gas breathed (ambient or cabin). [mmHg]
    fio2 : numeric
        Inspired O2 fraction at which ventilation is evaluated.
    days, f_ventilatory, f_renal, age_y, hb_g_dl, metabolic_ratio
        As for :func:`altox.assess`.

    Returns
    -------
    numeric
        Inspired gas. [reference L/min]
    """
    ve = activity_ventilation_btps_l_min(activity)
    r = _assess(pb_mmhg, fio2, days=days, f_ventilatory=f_ventilatory, f_renal=f_renal,
               age_y=age_y, hb_g_dl=hb_g_dl, metabolic_ratio=metabolic_ratio)
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG

    ph2o = water_vapour_pressure(37.0)
    density = (np.asarray(pb_mmhg, dtype=float) - ph2o) / (SEA_LEVEL_MMHG - ph2o)
    out = ve * btps_to_reference_factor() * np.asarray(r["ventilation_ratio"], dtype=float) * density
    return _scalar(out)


def fio2_from_flow(flow_l_min, inspired_l_min, delivery_fraction=1.0, max_fio2=1.0):
    """FiO2 of a low-flow device: ``0.2095 + 0.7905 min(1, d Q / n)``, capped at ``max_fio2``.

    Parameters
    ----------
    flow_l_min : numeric
        Oxygen flow. [reference L/min]
    inspired_l_min : numeric
        Gas inspired by the wearer (:func:`inspired_gas_l_min`). [reference L/min]
    delivery_fraction : numeric
        Share of the flow that reaches the inspired gas, (0, 1].
    max_fio2 : numeric
        Highest FiO2 the device gives (leaks, entrainment).

    Returns
    -------
    numeric
        FiO2, never below air and never decreasing with flow.
    """
    q = np.maximum(np.asarray(flow_l_min, dtype=float), 0.0)
    n = np.asarray(inspired_l_min, dtype=float)
    share = np.minimum(1.0, np.asarray(delivery_fraction, dtype=float) * q / n)
    f = AIR_FIO2 + _NON_AIR * share
    return _scalar(np.maximum(np.minimum(f, np.asarray(max_fio2, dtype=float)), AIR_FIO2))


def flow_for_fio2(fio2, inspired_l_min, delivery_fraction=1.0):
    """Oxygen flow that gives ``fio2`` on a low-flow device (inverse of :func:`fio2_from_flow`
    without its cap). [reference L/min] Zero at or below air."""
    f = np.asarray(fio2, dtype=float)
    n = np.asarray(inspired_l_min, dtype=float)
    q = n * np.maximum(f - AIR_FIO2, 0.0) / _NON_AIR / np.asarray(delivery_fraction, dtype=float)
    return _scalar(q)


# -- targets ------------------------------------------------------------------------------
def _target(kwargs: dict):
    given = [(k, v) for k, v in kwargs.items() if v is not None]
    if len(given) != 1:
        raise AltoxError("give exactly one target: " + ", ".join(TARGET_KINDS),
                         field="target", expected="one of " + ", ".join(TARGET_KINDS))
    return given[0]


def _pio2_of_equivalent_altitude(alt_m, atmosphere, body_temp_c):
    from altox.physiology.atmosphere import barometric_pressure

    return AIR_FIO2 * (np.asarray(barometric_pressure(alt_m, atmosphere)) - water_vapour_pressure(body_temp_c))


def fio2_for_target(pb_mmhg, *, equivalent_altitude_m=None, pio2_mmhg=None, alveolar_po2_mmhg=None,
                    sao2_pct=None, atmosphere="isa", positive_pressure_mmhg=0.0, days=0.0,
                    f_ventilatory=None, f_renal=None, age_y=40.0, hb_g_dl=None, body_temp_c=37.0):
    """The inspired O2 fraction that holds one target at a pressure, and the ceiling of 100 % O2.

    Exactly one target is given.  Equivalent altitude and PIO2 are closed form,
    ``FIO2 = PIO2_target / (PB + P_pos - PH2O)``; alveolar PO2 and SaO2 are found by
    bisection on FiO2 arrays through :func:`altox.assess` (36 halvings of [0.2095, 1]).
    The target is met at or above it, so a higher target never needs less oxygen.

    Parameters
    ----------
    pb_mmhg : numeric
        Ambient or cabin pressure. [mmHg]
    equivalent_altitude_m : numeric, optional
        Hold the inspired PO2 of ambient air at this altitude in ``atmosphere``. [m]
    pio2_mmhg : numeric, optional
        Hold this inspired PO2. [mmHg]
    alveolar_po2_mmhg : numeric, optional
        Hold this alveolar PO2 (model ventilation). [mmHg]
    sao2_pct : numeric, optional
        Hold this expected arterial saturation. [%]
    atmosphere : {'isa', 'mountain'}
        Atmosphere of the equivalent altitude and of the ceiling's altitude.
    positive_pressure_mmhg : numeric
        Pressure breathing: added to ``pb_mmhg`` for gas exchange. [mmHg]
    days, f_ventilatory, f_renal, age_y, hb_g_dl, body_temp_c
        As for :func:`altox.assess`.

    Returns
    -------
    dict
        ``target_kind``, ``target_value``, ``fio2_raw`` (may exceed 1, or be ``inf`` where even
        100 % fails, for the bisected kinds), ``fio2_needed`` (clipped to [0.2095, 1]),
        ``oxygen_needed`` (air is not enough), ``reachable`` (100 % is enough),
        ``ceiling_pb_mmhg``, ``ceiling_altitude_m`` (in ``atmosphere``) and
        ``ceiling_pressure_altitude_ft``: the lowest pressure at which 100 % oxygen (with the
        positive pressure) still holds the target (NaN where not even sea level does).

    Raises
    ------
    AltoxError
        No target or more than one; a target outside physical sense.
    """
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG

    kind, value = _target({"equivalent_altitude_m": equivalent_altitude_m, "pio2_mmhg": pio2_mmhg,
                           "alveolar_po2_mmhg": alveolar_po2_mmhg, "sao2_pct": sao2_pct})
    pb = np.asarray(pb_mmhg, dtype=float)
    pp = np.asarray(positive_pressure_mmhg, dtype=float)
    tv = np.asarray(value, dtype=float)
    if np.any(~np.isfinite(tv)):
        raise OutOfRangeError(f"the target {kind} is not a finite number", field=kind, expected="a number")
    ph2o = water_vapour_pressure(body_temp_c)
    opts = dict(days=days, f_ventilatory=f_ventilatory, f_renal=f_renal, age_y=age_y, hb_g_dl=hb_g_dl,
                body_temp_c=body_temp_c)
    shape = np.broadcast(pb, pp, tv).shape
    pb_b, pp_b, tv_b = (np.broadcast_to(a, shape).astype(float) for a in (pb, pp, tv))
    if kind in ("equivalent_altitude_m", "pio2_mmhg"):
        if kind == "pio2_mmhg" and np.any(tv_b <= 0):
            raise OutOfRangeError("the target inspired PO2 must be above 0 mmHg", field=kind,
                                  expected="> 0 mmHg")
        pio2_t = (_pio2_of_equivalent_altitude(tv_b, atmosphere, body_temp_c) if kind == "equivalent_altitude_m"
                  else tv_b)
        raw = pio2_t / np.maximum(pb_b + pp_b - ph2o, 1e-9)
        ceiling_pb = pio2_t + ph2o - pp_b
    else:
        key = "alveolar_po2_mmhg" if kind == "alveolar_po2_mmhg" else "sao2_pct"
        if kind == "sao2_pct" and np.any((tv_b <= 0) | (tv_b >= 100)):
            raise OutOfRangeError("the target SaO2 must lie between 0 and 100 %", field=kind,
                                  expected="0-100 %")
        raw = _bisect_fio2(pb_b + pp_b, tv_b, key, opts)
        ceiling_pb = _bisect_ceiling(tv_b, pp_b, key, opts)
    ceiling_pb = np.where(ceiling_pb > SEA_LEVEL_MMHG, np.nan, np.maximum(ceiling_pb, _PB_FLOOR_MMHG))
    ceil_m, ceil_ft = _altitudes_of(ceiling_pb, atmosphere)
    result = {
        "target_kind": kind,
        "target_value": _scalar(tv_b),
        "fio2_raw": _scalar(raw),
        "fio2_needed": _scalar(np.clip(raw, AIR_FIO2, 1.0)),
        "oxygen_needed": _scalar(raw > AIR_FIO2 + 1e-9),
        "reachable": _scalar(raw <= 1.0 + 1e-12),
        "ceiling_pb_mmhg": _scalar(ceiling_pb),
        "ceiling_altitude_m": _scalar(ceil_m),
        "ceiling_pressure_altitude_ft": _scalar(ceil_ft),
    }
    return result


def _altitudes_of(pb, atmosphere):
    """Altitude in ``atmosphere`` and ISA pressure altitude of pressures, NaN outside the models."""
    from altox.physiology.atmosphere import (ISA_MAX_M, ISA_MIN_M, MOUNTAIN_MAX_M, MOUNTAIN_MIN_M, altitude_for_pressure,
                                             barometric_pressure, pressure_altitude_ft)

    pb = np.asarray(pb, dtype=float)
    lo_m, hi_m = (ISA_MIN_M, ISA_MAX_M) if atmosphere == "isa" else (MOUNTAIN_MIN_M, MOUNTAIN_MAX_M)
    p_lo, p_hi = float(barometric_pressure(hi_m, atmosphere)), float(barometric_pressure(lo_m, atmosphere))
    ok = np.isfinite(pb) & (pb >= p_lo) & (pb <= p_hi)
    safe = np.where(ok, pb, p_hi)
    alt = np.where(ok, np.asarray(altitude_for_pressure(safe, atmosphere), dtype=float), np.nan)
    ok_isa = np.isfinite(pb) & (pb > float(barometric_pressure(ISA_MAX_M, "isa")))
    ft = np.where(ok_isa, np.asarray(pressure_altitude_ft(np.where(ok_isa, pb, 760.0)), dtype=float), np.nan)
    return alt, ft


def _assess(pb_mmhg, fio2, **opts):
    """:func:`altox.assess` on at least 1-d arrays (pressure and FiO2 broadcast), reshaped back."""
    from altox.physiology.chain import assess

    pb, f = np.broadcast_arrays(np.asarray(pb_mmhg, dtype=float), np.asarray(fio2, dtype=float))
    shape = pb.shape
    r = assess(pb_mmhg=np.atleast_1d(pb), fio2=np.atleast_1d(f), **opts)
    return {k: (v if isinstance(v, str) else np.asarray(v).reshape(shape) if np.size(v) == max(1, pb.size)
                else np.asarray(v)) for k, v in r.items()}


def _metric(pb, fio2, key, opts):
    return np.asarray(_assess(pb, fio2, **opts)[key], dtype=float)


def _bisect_fio2(pb, target, key, opts):
    lo = np.full(pb.shape, AIR_FIO2)
    hi = np.ones(pb.shape)
    met_air = _metric(pb, lo, key, opts) >= target
    met_full = _metric(pb, hi, key, opts) >= target
    for _ in range(_BISECT_STEPS):
        mid = 0.5 * (lo + hi)
        ok = _metric(pb, mid, key, opts) >= target
        hi = np.where(ok, mid, hi)
        lo = np.where(ok, lo, mid)
    raw = np.where(met_air, AIR_FIO2, hi)
    return np.where(met_full, raw, np.inf)


def _bisect_ceiling(target, pp, key, opts):
    """Lowest ambient pressure at which 100 % O2 (plus ``pp``) holds the target; bisection on log PB."""
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG

    lo = np.full(target.shape, np.log(_PB_FLOOR_MMHG))
    hi = np.full(target.shape, np.log(SEA_LEVEL_MMHG))
    full = np.ones(target.shape)
    met_hi = _metric(np.exp(hi) + pp, full, key, opts) >= target
    for _ in range(_BISECT_STEPS):
        mid = 0.5 * (lo + hi)
        ok = _metric(np.exp(mid) + pp, full, key, opts) >= target
        hi = np.where(ok, mid, hi)
        lo = np.where(ok, lo, mid)
    return np.where(met_hi, np.exp(hi), np.inf)


def oxygen_for_target(pb_mmhg, device: str, activity: str = "rest", *, atmosphere="isa", days=0.0,
                      f_ventilatory=None, f_renal=None, age_y=40.0, hb_g_dl=None, **target):
    """What holds a target at a pressure, and what a device must do for it.

    :func:`fio2_for_target`, then the device: for continuous-flow devices the flow
    (:func:`flow_for_fio2`) with the wearer's inspired gas evaluated at the FiO2 breathed
    (:func:`inspired_gas_l_min`); for demand regulators the mean consumption
    ``n (FIO2 - 0.2095) / 0.7905``.  A pressure-demand regulator adds its breathing pressure
    where 100 % oxygen alone no longer holds the target.

    Parameters
    ----------
    pb_mmhg : numeric
        Ambient or cabin pressure. [mmHg]
    device : str
        Device id (``oxygen_devices.yaml``).
    activity : str
        Activity id (``activity_ventilation.yaml``).
    **target
        One of ``equivalent_altitude_m``, ``pio2_mmhg``, ``alveolar_po2_mmhg``, ``sao2_pct``.

    Returns
    -------
    dict
        The keys of :func:`fio2_for_target` plus ``device``, ``device_kind``,
        ``inspired_gas_l_min``, ``flow_l_min`` (the setting, or the mean consumption of a demand
        regulator; at least the device's minimum), ``fio2_achieved`` (at that flow, within the
        device's limits), ``device_reaches_target``, ``flow_above_device_max``,
        ``pressure_breathing`` (the regulator's positive pressure is needed),
        ``pressure_altitude_ft`` of ``pb_mmhg`` and ``above_device_ceiling``.
    """
    dev = get_device(device)
    opts = dict(atmosphere=atmosphere, days=days, f_ventilatory=f_ventilatory, f_renal=f_renal,
                age_y=age_y, hb_g_dl=hb_g_dl)
    base = fio2_for_target(pb_mmhg, **opts, **target)
    pb = np.asarray(pb_mmhg, dtype=float)
    pp_dev = float(dev.get("positive_pressure_mmhg", 0.0)) if dev["kind"] == "pressure-demand" else 0.0
    pressure_breathing = np.zeros(np.shape(base["fio2_raw"]), dtype=bool)
    if pp_dev > 0.0:
        boosted = fio2_for_target(pb_mmhg, positive_pressure_mmhg=pp_dev, **opts, **target)
        pressure_breathing = ~np.asarray(base["reachable"], dtype=bool)
        for k in ("fio2_raw", "fio2_needed", "reachable", "ceiling_pb_mmhg", "ceiling_altitude_m",
                  "ceiling_pressure_altitude_ft"):
            if k.startswith("ceiling"):
                base[k] = boosted[k]
            else:
                base[k] = _scalar(np.where(pressure_breathing, boosted[k], base[k]))
    pp = np.where(pressure_breathing, pp_dev, 0.0)
    max_fio2 = float(dev.get("max_fio2", 1.0))
    d = float(dev.get("delivery_fraction", 1.0))
    breathed = np.minimum(np.asarray(base["fio2_needed"], dtype=float), max_fio2)
    n = np.asarray(inspired_gas_l_min(activity, pb + pp, breathed, days=days, f_ventilatory=f_ventilatory,
                                      f_renal=f_renal, age_y=age_y, hb_g_dl=hb_g_dl), dtype=float)
    needed = np.asarray(base["fio2_needed"], dtype=float)
    reach = np.asarray(base["reachable"], dtype=bool) & (needed <= max_fio2 + 1e-12)
    if dev["kind"] == "continuous":
        flow = np.asarray(flow_for_fio2(breathed, n, d), dtype=float)
        flow = np.where(np.asarray(base["oxygen_needed"], dtype=bool),
                        np.maximum(flow, float(dev.get("min_flow_l_min", 0.0))), 0.0)
        max_flow = float(dev.get("max_flow_l_min", np.inf))
        too_much = flow > max_flow + 1e-9
        achieved = np.asarray(fio2_from_flow(np.minimum(flow, max_flow), n, d, max_fio2), dtype=float)
        reach = reach & ~too_much
    else:
        flow = n * (breathed - AIR_FIO2) / _NON_AIR
        too_much = np.zeros(np.shape(flow), dtype=bool)
        achieved = breathed
    _, pa_ft = _altitudes_of(pb, "isa")
    ceiling = dev.get("ceiling_ft")
    base.update({
        "device": dev["id"],
        "device_kind": dev["kind"],
        "activity": activity,
        "inspired_gas_l_min": _scalar(n),
        "flow_l_min": _scalar(flow),
        "fio2_achieved": _scalar(achieved),
        "device_reaches_target": _scalar(reach),
        "flow_above_device_max": _scalar(too_much),
        "pressure_breathing": _scalar(pressure_breathing),
        "pressure_altitude_ft": _scalar(pa_ft),
        "above_device_ceiling": _scalar(pa_ft > float(ceiling) if ceiling is not None
                                        else np.zeros(np.shape(pa_ft), dtype=bool)),
    })
    return base


def device_fio2(device: str, flow_l_min, pb_mmhg, activity: str = "rest", *, days=0.0, age_y=40.0,
                hb_g_dl=None, atmosphere="isa"):
    """FiO2, inspired PO2, equivalent altitude and expected SaO2 of a continuous-flow device at a flow.

    The wearer's inspired gas is evaluated on air at the place (:func:`inspired_gas_l_min`),
    the higher ventilation, so the FiO2 is not overstated.

    Returns
    -------
    dict
        ``device``, ``flow_l_min``, ``inspired_gas_l_min``, ``fio2``, ``inspired_po2_mmhg``,
        ``equivalent_altitude_m``, ``sao2_pct``, ``flow_outside_device_range``.

    Raises
    ------
    AltoxError
        A demand regulator (its FiO2 is set by the regulator, not by a flow).
    """
    dev = get_device(device)
    if dev["kind"] != "continuous":
        raise AltoxError(f"device: {device!r} is a {dev['kind']} regulator; it sets the FiO2 itself, so "
                         "there is no flow to give. Use a target instead.", field="device", value=device,
                         expected="a continuous-flow device")
    q = np.asarray(flow_l_min, dtype=float)
    if np.any(~np.isfinite(q) | (q < 0)):
        raise OutOfRangeError("the flow must be a number of L/min, 0 or more", field="flow", expected=">= 0 L/min")
    n = inspired_gas_l_min(activity, pb_mmhg, AIR_FIO2, days=days, age_y=age_y, hb_g_dl=hb_g_dl)
    f = fio2_from_flow(q, n, float(dev["delivery_fraction"]), float(dev["max_fio2"]))
    r = {k: _scalar(v) for k, v in _assess(pb_mmhg, f, days=days, age_y=age_y, hb_g_dl=hb_g_dl,
                                           atmosphere=atmosphere).items()}
    lo, hi = float(dev.get("min_flow_l_min", 0.0)), float(dev.get("max_flow_l_min", np.inf))
    return {"device": dev["id"], "activity": activity, "flow_l_min": _scalar(q), "inspired_gas_l_min": n,
            "fio2": f, "inspired_po2_mmhg": r["inspired_po2_mmhg"],
            "equivalent_altitude_m": r["equivalent_altitude_m"], "sao2_pct": r["sao2_pct"],
            "flow_outside_device_range": _scalar((q > 0) & ((q < lo - 1e-9) | (q > hi + 1e-9)))}


# -- cylinders ----------------------------------------------------------------------------
def cylinders() -> dict:
    """All cylinder types by id (``altox/data/cylinders.yaml``)."""
    return load_data("cylinders")["cylinders"]


def _bar(text, field):
    from altox.units import parse_quantity

    return parse_quantity(text, "pressure", field=field) / _MMHG_PER_BAR


def get_cylinder(cylinder_id: str, field: str = "cylinder") -> dict:
    """One cylinder type with ``water_l``, ``fill_bar`` and ``residual_bar`` (gauge pressures)."""
    c = _lookup(cylinders(), cylinder_id, "cylinder", field)
    c["fill_bar"] = _bar(c["fill_pressure"], f"{cylinder_id}.fill_pressure")
    c["residual_bar"] = _bar(c.get("residual", "0 bar"), f"{cylinder_id}.residual")
    return c


def gas_volume_l(water_l, fill_bar, reference_bar=None):
    """Gas a cylinder gives down to empty, at the reference pressure: ``V_water P_gauge / P_ref``. [L]

    Parameters
    ----------
    water_l : numeric
        Water (internal) volume. [L]
    fill_bar : numeric
        Gauge fill pressure. [bar]
    reference_bar : numeric, optional
        Reference pressure; default that of ``cylinders.yaml`` (1.01325 bar). The trade's
        shortcut "litres x bar" uses 1 bar.

    Examples
    --------
    >>> gas_volume_l(10.0, 200.0, reference_bar=1.0)
    2000.0
    """
    ref = reference_pressure_bar() if reference_bar is None else reference_bar
    w, p, r = (np.asarray(a, dtype=float) for a in (water_l, fill_bar, ref))
    if np.any(~np.isfinite(w) | (w <= 0)) or np.any(~np.isfinite(p) | (p < 0)) or np.any(r <= 0):
        raise OutOfRangeError("cylinder water volume must be above 0 L and pressures 0 or more",
                              field="cylinder", expected="water volume > 0 L, pressure >= 0")
    return _scalar(w * p / r)


def usable_gas_l(water_l, fill_bar, residual_bar=0.0, reference_bar=None):
    """Gas usable before the residual pressure is reached. [L] Zero where fill <= residual."""
    return _scalar(np.maximum(np.asarray(gas_volume_l(water_l, fill_bar, reference_bar))
                              - np.asarray(gas_volume_l(water_l, residual_bar, reference_bar)), 0.0))


def duration_min(usable_l, flow_l_min):
    """How long usable gas lasts at a flow. [min] ``inf`` at zero flow."""
    v = np.asarray(usable_l, dtype=float)
    q = np.asarray(flow_l_min, dtype=float)
    with np.errstate(divide="ignore"):
        return _scalar(np.where(q > 0, v / np.where(q > 0, q, 1.0), np.inf))


def cylinders_needed(volume_l, usable_per_cylinder_l, margin_fraction=None):
    """Whole cylinders for a volume of gas with a safety margin: ``ceil(V (1 + m) / V_usable)``.

    Never falls as the volume grows.  ``margin_fraction`` defaults to the planning margin of
    ``cylinders.yaml``.
    """
    m = load_data("cylinders")["planning"]["safety_margin_fraction"] if margin_fraction is None else margin_fraction
    v = np.maximum(np.asarray(volume_l, dtype=float), 0.0)
    u = np.asarray(usable_per_cylinder_l, dtype=float)
    if np.any(u <= 0) or np.any(np.asarray(m, dtype=float) < 0):
        raise OutOfRangeError("a cylinder must hold usable gas and the margin must be 0 or more",
                              field="cylinder", expected="usable gas > 0 L, margin >= 0")
    # a tiny tolerance so that an exact fit is not rounded up by floating point
    return _scalar(np.ceil(v * (1.0 + np.asarray(m, dtype=float)) / u - 1e-9).astype(int))


def _scalar(a):
    a = np.asarray(a)
    return a.item() if a.ndim == 0 else a
