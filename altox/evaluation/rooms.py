"""Rooms with their oxygen changed: enriched rooms at high sites, hypoxic rooms and tents at low sites, and their fire caution.

Both directions use the equivalent altitude of West (1995): the altitude whose ambient air
gives the same inspired PO2, ``0.2095 (PB_eq - PH2O) = F_room (PB_site - PH2O)``.

* :func:`room_equivalent_altitude`: the equivalent altitude of a room with a given oxygen
  fraction at a site;
* :func:`room_o2_fraction`: the fraction for a target equivalent altitude, the inverse;
* :func:`room_atmosphere_check`: the room's oxygen partial pressure against sea-level air and
  the published definitions of oxygen-enriched and oxygen-deficient atmospheres
  (``altox/data/oxygen_devices.yaml``, ``room_limits``), with the fire caution.

Fire.  West (1997) analysed burning rates of paper and cotton in oxygen-enriched rooms at
4,000-5,500 m raised to a PO2 of 110 mmHg (equivalent altitude about 3,000 m) and found them
much lower than in sea-level air, *because the PO2 stays low*; but the burning rate depends
on the oxygen concentration as well as on its partial pressure, so a room at sea-level PO2 but
a higher concentration burns faster than sea-level air.  West (2002) found that resorts up to
3,250 m can be brought to an equivalent altitude of 1,000 m, and sites at 4,250 m to 1,500 m,
without a fire hazard greater than sea-level air.  Local fire codes decide.

References
----------
.. [West1995] West JB. Oxygen enrichment of room air to relieve the hypoxia of high altitude.
   Respir Physiol 1995;99:225-232.
.. [West1997] West JB. Fire hazard in oxygen-enriched atmospheres at low barometric pressures.
   Aviat Space Environ Med 1997;68:159-162.
.. [West2002] West JB. Potential use of oxygen enrichment of room air in mountain resorts.
   High Alt Med Biol 2002;3:59-64.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.physiology.gas_exchange import AIR_FIO2, water_vapour_pressure
from altox.evaluation.oxygen import _altitudes_of, _scalar, load_data

__all__ = ["room_equivalent_altitude", "room_o2_fraction", "room_atmosphere_check", "room_limits",
           "FIRE_CAUTION"]

#: the fire caution of oxygen enrichment, with its published basis
FIRE_CAUTION = (
    "Oxygen enrichment raises the fire hazard. The burning rate of materials depends on the "
    "oxygen concentration as well as on its partial pressure (West JB, Aviat Space Environ Med "
    "1997;68:159-162; High Alt Med Biol 2002;3:59-64): at high sites a modest enrichment can "
    "stay below the hazard of sea-level air, but a concentration above about 23.5 % is an "
    "'oxygen-enriched atmosphere' under common safety definitions (NFPA 99, OSHA). Local fire "
    "codes, the building's fire engineer and the oxygen supplier decide: monitor the oxygen "
    "level, ban open flames and smoking, and keep oxygen sources out of sleeping spaces "
    "unless they are designed for it."
)
HYPOXIC_CAUTION = (
    "A room below about 19.5 % oxygen is an 'oxygen-deficient atmosphere' under common safety "
    "definitions (OSHA): it needs oxygen monitoring with alarms, ventilation that fails safe "
    "to fresh air, and a person's own medical clearance; anyone with heart or lung disease, "
    "pregnancy or a history of altitude illness should ask a licensed physician first."
)


def room_limits() -> dict:
    """The published definitions of enriched and deficient atmospheres, with their source."""
    return dict(load_data("oxygen_devices")["room_limits"])


def _site_pressure(site_altitude_m, pb_mmhg, atmosphere):
    from altox.physiology.atmosphere import barometric_pressure

    if pb_mmhg is not None:
        return np.asarray(pb_mmhg, dtype=float)
    if site_altitude_m is None:
        raise OutOfRangeError("give the site's altitude or its measured pressure", field="site",
                              expected="an altitude in m or a pressure in mmHg")
    return np.asarray(barometric_pressure(site_altitude_m, atmosphere), dtype=float)


def room_equivalent_altitude(o2_fraction, site_altitude_m=None, *, pb_mmhg=None, atmosphere="mountain",
                             body_temp_c=37.0):
    """Equivalent altitude of a room with oxygen fraction ``o2_fraction`` at a site.

    Parameters
    ----------
    o2_fraction : numeric
        Oxygen fraction of the room air (dry), (0, 1].
    site_altitude_m : numeric, optional
        Altitude of the site. [m]
    pb_mmhg : numeric, optional
        Measured pressure at the site; overrides the altitude. [mmHg]
    atmosphere : {'mountain', 'isa'}
        Model atmosphere of the site and of the equivalent altitude.

    Returns
    -------
    dict
        ``pb_mmhg``, ``o2_fraction``, ``inspired_po2_mmhg``, ``equivalent_altitude_m``
        (NaN outside the atmosphere model: a room richer than sea-level air at a low site).

    Examples
    --------
    West (1995): at 4,000-5,000 m, each 1 % of oxygen added lowers the equivalent altitude
    by about 300 m.

    >>> a = room_equivalent_altitude(0.2095, 4500.0)["equivalent_altitude_m"]
    >>> b = room_equivalent_altitude(0.2195, 4500.0)["equivalent_altitude_m"]
    >>> 250 < a - b < 350
    True
    """
    f = np.asarray(o2_fraction, dtype=float)
    if np.any(~np.isfinite(f) | (f <= 0) | (f > 1)):
        raise OutOfRangeError("the room's oxygen fraction must lie in (0, 1]", field="o2",
                              expected="a fraction in (0, 1], e.g. 0.26 or '26 %'")
    pb = _site_pressure(site_altitude_m, pb_mmhg, atmosphere)
    ph2o = water_vapour_pressure(body_temp_c)
    pio2 = f * (pb - ph2o)
    eq_alt, _ = _altitudes_of(pio2 / AIR_FIO2 + ph2o, atmosphere)
    return {"pb_mmhg": _scalar(pb), "o2_fraction": _scalar(f), "inspired_po2_mmhg": _scalar(pio2),
            "equivalent_altitude_m": _scalar(eq_alt)}


def room_o2_fraction(target_equivalent_altitude_m, site_altitude_m=None, *, pb_mmhg=None,
                     atmosphere="mountain", body_temp_c=37.0):
    """Oxygen fraction that gives a room at a site a target equivalent altitude.

    ``F_room = 0.2095 (PB(target) - PH2O) / (PB_site - PH2O)``: above 0.2095 for an enriched
    room (target below the site), below it for a hypoxic room (target above the site).

    Returns
    -------
    dict
        ``pb_mmhg``, ``target_equivalent_altitude_m``, ``o2_fraction``, ``kind``
        (``'enriched'``, ``'hypoxic'`` or ``'air'``), ``feasible`` (fraction at most 1).
    """
    from altox.physiology.atmosphere import barometric_pressure

    pb = _site_pressure(site_altitude_m, pb_mmhg, atmosphere)
    target = np.asarray(target_equivalent_altitude_m, dtype=float)
    ph2o = water_vapour_pressure(body_temp_c)
    f = AIR_FIO2 * (np.asarray(barometric_pressure(target, atmosphere)) - ph2o) / (pb - ph2o)
    kind = np.where(f > AIR_FIO2 + 5e-5, "enriched", np.where(f < AIR_FIO2 - 5e-5, "hypoxic", "air"))
    return {"pb_mmhg": _scalar(pb), "target_equivalent_altitude_m": _scalar(target),
            "o2_fraction": _scalar(f), "kind": _scalar(kind), "feasible": _scalar(f <= 1.0)}


def room_atmosphere_check(o2_fraction, pb_mmhg):
    """The room's oxygen partial pressure and concentration against sea-level air and the definitions.

    Parameters
    ----------
    o2_fraction : numeric
        Oxygen fraction of the room air.
    pb_mmhg : numeric
        Pressure in the room. [mmHg]

    Returns
    -------
    dict
        ``po2_mmhg`` (dry, ``F PB``), ``sea_level_po2_mmhg`` (0.2095 x 760),
        ``po2_vs_sea_level`` (ratio), ``enriched`` (fraction above the enriched-atmosphere
        definition), ``deficient`` (below the deficient definition),
        ``enriched_above_fraction``, ``deficient_below_fraction``, ``fire_caution`` and
        ``hypoxic_caution`` (texts, or ``None`` where they do not apply).
    """
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG

    lim = room_limits()
    f = np.asarray(o2_fraction, dtype=float)
    pb = np.asarray(pb_mmhg, dtype=float)
    po2 = f * pb
    sl = AIR_FIO2 * SEA_LEVEL_MMHG
    enriched = f > float(lim["enriched_above_fraction"])
    deficient = f < float(lim["deficient_below_fraction"])
    return {"po2_mmhg": _scalar(po2), "sea_level_po2_mmhg": sl, "po2_vs_sea_level": _scalar(po2 / sl),
            "enriched": _scalar(enriched), "deficient": _scalar(deficient),
            "enriched_above_fraction": float(lim["enriched_above_fraction"]),
            "deficient_below_fraction": float(lim["deficient_below_fraction"]),
            "fire_caution": FIRE_CAUTION if np.any(f > AIR_FIO2 + 5e-5) else None,
            "hypoxic_caution": HYPOXIC_CAUTION if np.any(f < AIR_FIO2 - 5e-5) else None,
            "limits_source": lim["source"]}
