"""Gas exchange: water vapour, inspired and alveolar gas, the alveolar-arterial PO2 difference, equivalent altitude.

All functions are vectorised: scalars or numpy arrays in, the same shape out.

References
----------
.. [Buck1981] Buck AL. New equations for computing vapor pressure and enhancement factor.
   J Appl Meteorol 1981;20:1527-1532.
.. [Fenn1946] Fenn WO, Rahn H, Otis AB. A theoretical study of the composition of the
   alveolar air at altitude. Am J Physiol 1946;146:637-653.
.. [Mellemgaard1966] Mellemgaard K. The alveolar-arterial oxygen difference: its size and
   components in normal man. Acta Physiol Scand 1966;67:10-20.
.. [PiiperScheid1981] Piiper J, Scheid P. Model for capillary-alveolar equilibration with
   special reference to O2 uptake in hypoxia. Respir Physiol 1981;46:193-208.
.. [West1995] West JB. Oxygen enrichment of room air to relieve the hypoxia of high
   altitude. Respir Physiol 1995;99:225-232.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from altox.physiology import blood
from altox.physiology.atmosphere import SEA_LEVEL_MMHG, altitude_for_pressure
from altox.units import PA_PER_MMHG

AIR_FIO2 = 0.2095   # dry air, by volume (U.S. Standard Atmosphere 1976 composition)
DEFAULT_RQ = 0.8    # respiratory exchange ratio at rest on a mixed diet (common practice)


def _out(result, *inputs):
    if all(np.ndim(x) == 0 for x in inputs):
        return float(result)
    return np.asarray(result, dtype=float)


def water_vapour_pressure(temp_c=37.0):
    """Saturation water vapour pressure over liquid water (Buck 1981, eq. 8). [mmHg]

    ``e_s = 6.1121 exp(17.502 T / (240.97 + T))`` hPa; 47.1 mmHg at 37 degC (the trade's
    rounded value is 47 mmHg).

    Parameters
    ----------
    temp_c : numeric
        Body (gas) temperature, valid about -20 to 50 degC. [degC]
    """
    t = np.asarray(temp_c, dtype=float)
    e_hpa = 6.1121 * np.exp(17.502 * t / (240.97 + t))
    return _out(e_hpa * 100.0 / PA_PER_MMHG, temp_c)


def inspired_po2(pb_mmhg, fio2=AIR_FIO2, body_temp_c=37.0):
    """Inspired PO2 of gas warmed and saturated with water at body temperature.

    ``PIO2 = FIO2 (PB - PH2O)``

    Parameters
    ----------
    pb_mmhg : numeric
        Barometric (or cabin) pressure. [mmHg]
    fio2 : numeric
        Inspired O2 fraction, dry gas. 0-1.
    body_temp_c : numeric
        [degC]

    Returns
    -------
    numeric
        PIO2, not below zero. [mmHg]

    Examples
    --------
    >>> round(inspired_po2(760.0), 1)
    149.4
    """
    ph2o = water_vapour_pressure(body_temp_c)
    pio2 = np.asarray(fio2, dtype=float) * (np.asarray(pb_mmhg, dtype=float) - ph2o)
    return _out(np.maximum(pio2, 0.0), pb_mmhg, fio2, body_temp_c)


def alveolar_gas_factor(fio2=AIR_FIO2, rq=DEFAULT_RQ):
    """The factor ``FIO2 + (1 - FIO2) / R`` of the full alveolar gas equation."""
    f = np.asarray(fio2, dtype=float)
    return f + (1.0 - f) / np.asarray(rq, dtype=float)


def alveolar_po2(pb_mmhg, paco2_mmhg, fio2=AIR_FIO2, rq=DEFAULT_RQ, body_temp_c=37.0):
    """Alveolar PO2 by the full alveolar gas equation (Fenn, Rahn & Otis 1946).

    ``PAO2 = PIO2 - PACO2 [FIO2 + (1 - FIO2) / R]``

    Parameters
    ----------
    pb_mmhg : numeric
        Barometric pressure. [mmHg]
    paco2_mmhg : numeric
        Alveolar (taken as arterial) PCO2. [mmHg]
    fio2 : numeric
        Inspired O2 fraction. 0-1.
    rq : numeric
        Respiratory exchange ratio.
    body_temp_c : numeric
        [degC]

    Returns
    -------
    numeric
        PAO2. [mmHg] Where the equation gives less than zero (a PCO2 that the inspired gas
        cannot support) the result is clamped to 0; :func:`altox.assess` flags it.

    Examples
    --------
    >>> round(alveolar_po2(760.0, 40.0), 1)
    101.5
    """
    pio2 = inspired_po2(pb_mmhg, fio2, body_temp_c)
    pao2 = np.asarray(pio2) - np.asarray(paco2_mmhg, dtype=float) * alveolar_gas_factor(fio2, rq)
    return _out(np.maximum(pao2, 0.0), pb_mmhg, paco2_mmhg, fio2, rq, body_temp_c)


def equivalent_altitude(fio2, pb_mmhg, atmosphere="isa", body_temp_c=37.0):
    """Altitude whose ambient air gives the same inspired PO2 as ``fio2`` at ``pb_mmhg``.

    Solves ``0.2095 (PBeq - PH2O) = FIO2 (PB - PH2O)`` for ``PBeq`` and converts it to
    altitude in the chosen atmosphere: a hypoxic gas at sea level, or oxygen-enriched room
    air at altitude (West 1995).  Equal PIO2 is the usual definition; it ignores the small
    differences between hypobaric and normobaric hypoxia.

    Parameters
    ----------
    fio2 : numeric
        O2 fraction of the gas breathed. 0-1.
    pb_mmhg : numeric
        Pressure at which it is breathed. [mmHg]
    atmosphere : {'isa', 'mountain'}

    Returns
    -------
    numeric
        Equivalent altitude. [m]

    Raises
    ------
    OutOfRangeError
        The equivalent pressure lies outside the atmosphere model (e.g. enough oxygen to be
        "below" the model's lowest altitude).

    Examples
    --------
    >>> round(equivalent_altitude(0.151, 760.0) / 0.3048, -2)   # hypoxic challenge test
    8000.0
    """
    ph2o = water_vapour_pressure(body_temp_c)
    pio2 = np.asarray(fio2, dtype=float) * (np.asarray(pb_mmhg, dtype=float) - ph2o)
    pb_equivalent = pio2 / AIR_FIO2 + ph2o
    return altitude_for_pressure(_out(pb_equivalent, fio2, pb_mmhg, body_temp_c), atmosphere)


# -- alveolar-arterial difference -----------------------------------------------------------
# Model parameters, resting adult; see altox/data/models.yaml for their sources.
REST_AV_DIFFERENCE_ML_DL = 4.5       # arterial - mixed venous O2 content at rest
REST_CARDIAC_OUTPUT_ML_MIN = 6000.0


def sea_level_aado2(age_y):
    """Alveolar-arterial PO2 difference of healthy adults breathing air at sea level.

    ``AaDO2 = 2.5 + 0.21 age`` mmHg (Mellemgaard 1966, seated, regression on age).
    """
    return _out(2.5 + 0.21 * np.asarray(age_y, dtype=float), age_y)


def _content_residual(p, content_ml_dl, cap, factor):
    """Total O2 content at PO2 ``p`` minus ``content``, with the saturation, virtual PO2 and
    ``v^3 + 150 v`` there (Severinghaus curve)."""
    v = p * factor
    cube = v * v
    cube += 150.0
    cube *= v
    s = cube / (cube + 23400.0)
    f = cap * s
    f += blood.O2_SOLUBILITY_ML_DL_MMHG * p
    f -= content_ml_dl
    return f, s, v, cube


def _po2_for_content(content_ml_dl, hb_g_dl, factor, upper_mmhg):
    """PO2 whose total content (bound + dissolved) equals ``content``, and the saturation there.

    Newton from the PO2 that ignores the change in dissolved O2 (the standard curve inverted
    in closed form).  The result is accepted only where the residual at the returned PO2 is
    below 1e-9 mL/dL (PO2 to ~1e-8 mmHg) and the PO2 is not negative; any other element (a
    content at or below zero, say) takes the bracketed Newton of
    :func:`_po2_for_content_safeguarded`.  ``factor`` is the virtual-PO2 factor of the blood
    (:func:`altox.physiology.blood.virtual_po2` of 1 mmHg).
    """
    shape = np.shape(content_ml_dl)
    if len(shape) != 1:
        # the Newton below and its fallback work on flat element indices: one axis only
        def flat(a):
            return np.broadcast_to(np.asarray(a, dtype=float), shape).reshape(-1)
        p, s = _po2_for_content(np.reshape(content_ml_dl, -1), flat(hb_g_dl), flat(factor), flat(upper_mmhg))
        return p.reshape(shape), s.reshape(shape)
    cap = blood.HUEFNER_ML_PER_G * np.asarray(hb_g_dl, dtype=float)
    upper = np.maximum(np.asarray(upper_mmhg, dtype=float), 1e-6)
    s0 = np.clip((content_ml_dl - blood.O2_SOLUBILITY_ML_DL_MMHG * upper) / cap, 1e-6, 1 - 1e-9)
    p = np.asarray(blood.standard_po2_for_saturation(s0)) / factor
    with np.errstate(all="ignore"):
        for _ in range(6):  # three steps from this start over the physiological range
            f, s, v, cube = _content_residual(p, content_ml_dl, cap, factor)
            if np.abs(f).max(initial=0.0) < 1e-9 and p.min(initial=0.0) >= 0.0:
                return p, s
            # dF/dP = cap factor dS/dv + solubility, dS/dv = 23400 (3 v^2 + 150) / (v^3 + 150 v + 23400)^2
            v *= v
            v *= 3.0
            v += 150.0
            cube += 23400.0
            cube *= cube
            v /= cube
            v *= 23400.0 * cap * factor
            v += blood.O2_SOLUBILITY_ML_DL_MMHG
            f /= v
            p = p - f
        f, s, _, _ = _content_residual(p, content_ml_dl, cap, factor)
        bad = np.flatnonzero(~((np.abs(f) < 1e-9) & (p >= 0.0)))
    if bad.size:
        # flat indices: index the flattened arrays (p and s are fresh arrays of the full shape)
        def sub(a):
            return np.broadcast_to(a, p.shape).reshape(-1)[bad]
        p_flat, s_flat = p.reshape(-1), s.reshape(-1)
        p_flat[bad] = _po2_for_content_safeguarded(sub(content_ml_dl), sub(hb_g_dl), sub(factor), sub(upper))
        s_flat[bad] = blood.standard_saturation(p_flat[bad] * sub(factor))
    return p, s


def _po2_for_content_safeguarded(content_ml_dl, hb_g_dl, factor, upper_mmhg):
    """:func:`_po2_for_content` with each Newton step kept inside a shrinking bracket [0, upper]."""
    cap = blood.HUEFNER_ML_PER_G * hb_g_dl
    lo = np.zeros_like(content_ml_dl)
    hi = np.maximum(np.asarray(upper_mmhg, dtype=float), 1e-6) + np.zeros_like(content_ml_dl)
    # start from the value that ignores dissolved O2
    s0 = np.clip((content_ml_dl - blood.O2_SOLUBILITY_ML_DL_MMHG * hi) / cap, 1e-6, 1 - 1e-9)
    p = np.clip(np.asarray(blood.standard_po2_for_saturation(s0)) / factor, lo, hi)
    for _ in range(12):  # usually 3-4 steps from this start; stops when every residual < 1e-9 mL/dL (PO2 to ~1e-8 mmHg)
        v = p * factor
        cube = v**3 + 150.0 * v
        s = cube / (cube + 23400.0)
        ds_dv = 23400.0 * (3.0 * v**2 + 150.0) / (cube + 23400.0) ** 2
        f = cap * s + blood.O2_SOLUBILITY_ML_DL_MMHG * p - content_ml_dl
        df = cap * ds_dv * factor + blood.O2_SOLUBILITY_ML_DL_MMHG
        lo = np.where(f < 0, p, lo)
        hi = np.where(f > 0, p, hi)
        if np.max(np.abs(f)) < 1e-9:
            break
        step = p - f / df
        p = np.where((step > lo) & (step < hi), step, 0.5 * (lo + hi))
    return p


@lru_cache(maxsize=1)
def default_dlo2_ml_min_mmhg() -> float:
    """The lung's effective resting diffusing capacity for O2 (``altox/data/models.yaml``). [mL/min/mmHg]"""
    from altox.physiology.coefficients import model_coefficients

    return float(model_coefficients()["blood"]["dlo2_ml_min_mmhg"]["value"])


def arterial_blood(pao2_mmhg, hb_g_dl=14.5, shunt_fraction=0.02, ph=7.40, pco2_mmhg=40.0,
                   temp_c=37.0, dlo2_ml_min_mmhg=None,
                   cardiac_output_ml_min=REST_CARDIAC_OUTPUT_ML_MIN,
                   av_difference_ml_dl=REST_AV_DIFFERENCE_ML_DL, p50_mmhg=None):
    """Arterial PO2 and O2 saturation from alveolar PO2: diffusion limitation, then venous admixture.

    Two mechanisms open the alveolar-arterial difference, and both are computed from the
    dissociation curve, so the difference narrows at altitude where the curve is steep
    and widens again where diffusion starts to limit, as measured in climbers:

    1. Diffusion (Piiper & Scheid 1981, linear-curve Bohr integration):
       ``Pc' = PA - (PA - Pv) exp(-DL / (beta Q))``, ``beta`` the chord slope of the
       content curve between mixed-venous and alveolar PO2. The limitation matters only on the
       steep part of the curve (at altitude, where ``beta`` is large), hardly at sea level; the
       lung's effective resting DL is calibrated on the acute A-a difference measured at 4,559 m.
    2. Venous admixture (shunt fraction ``Qs/Qt``) mixing mixed-venous blood
       (``Cv = Ca - (a-v difference)``) into end-capillary blood:
       ``Ca = Cc' - (Qs/Qt) avd / (1 - Qs/Qt)``; PaO2 is the PO2 of that content.

    Parameters
    ----------
    pao2_mmhg : numeric
        Alveolar PO2. [mmHg]
    hb_g_dl : numeric
        Hemoglobin. [g/dL]
    shunt_fraction : numeric
        Venous admixture as a fraction of cardiac output (see
        :func:`shunt_fraction_for_age`).
    ph, pco2_mmhg, temp_c : numeric
        Arterial acid-base state and temperature for the curve. [-, mmHg, degC]
    dlo2_ml_min_mmhg : numeric, optional
        Lung diffusing capacity for O2; default the model table's effective resting value. [mL/min/mmHg]
    cardiac_output_ml_min : numeric
        [mL/min]
    av_difference_ml_dl : numeric
        Arterial minus mixed-venous O2 content. [mL/dL]
    p50_mmhg : numeric, optional
        The person's standard P50 (see :func:`altox.physiology.blood.virtual_po2`). [mmHg]

    Returns
    -------
    (pao2, sao2) : arrays
        PaO2 [mmHg] and the saturation of that blood on the shifted curve (0-1), both
        shaped like the broadcast inputs.
    """
    pa = np.asarray(pao2_mmhg, dtype=float)
    hb = np.asarray(hb_g_dl, dtype=float)
    cap = blood.HUEFNER_ML_PER_G * hb
    sol = blood.O2_SOLUBILITY_ML_DL_MMHG
    factor = np.asarray(blood.virtual_po2(1.0, ph, pco2_mmhg, temp_c, p50_mmhg))   # once for all curve uses
    s_alv = np.asarray(blood.standard_saturation(pa * factor))
    c_alv = cap * s_alv + sol * pa
    avd = np.asarray(av_difference_ml_dl, dtype=float)
    # mixed venous, from blood equilibrated with alveolar gas (first pass)
    s_ven = np.clip((c_alv - avd) / cap, 1e-4, 0.999)
    pv = np.minimum(np.asarray(blood.standard_po2_for_saturation(s_ven)) / factor, pa)
    gap = np.maximum(pa - pv, 1e-9)
    beta_ml_ml = (cap * (s_alv - s_ven) / gap + sol) / 100.0
    dl = default_dlo2_ml_min_mmhg() if dlo2_ml_min_mmhg is None else dlo2_ml_min_mmhg
    ratio = np.asarray(dl, dtype=float) / (beta_ml_ml * np.asarray(cardiac_output_ml_min))
    p_end = pa - (pa - pv) * np.exp(-ratio)
    s_end = np.asarray(blood.standard_saturation(p_end * factor))
    c_end = cap * s_end + sol * p_end
    qs = np.asarray(shunt_fraction, dtype=float)
    c_art = c_end - qs * avd / (1.0 - qs)
    shape = np.broadcast(pa, hb, qs, factor).shape
    return _po2_for_content(np.broadcast_to(c_art, shape).astype(float), hb, factor, np.broadcast_to(p_end, shape))


def arterial_po2(pao2_mmhg, hb_g_dl=14.5, shunt_fraction=0.02, ph=7.40, pco2_mmhg=40.0,
                 temp_c=37.0, dlo2_ml_min_mmhg=None,
                 cardiac_output_ml_min=REST_CARDIAC_OUTPUT_ML_MIN,
                 av_difference_ml_dl=REST_AV_DIFFERENCE_ML_DL, p50_mmhg=None):
    """Arterial PO2 from alveolar PO2: diffusion limitation, then venous admixture.

    The PaO2 of :func:`arterial_blood`; see there for the method, parameters and references.

    Returns
    -------
    numeric
        PaO2. [mmHg]
    """
    pao2_art, _ = arterial_blood(pao2_mmhg, hb_g_dl, shunt_fraction, ph, pco2_mmhg, temp_c, dlo2_ml_min_mmhg,
                                 cardiac_output_ml_min, av_difference_ml_dl, p50_mmhg)
    return _out(pao2_art, pao2_mmhg, hb_g_dl, shunt_fraction, ph, pco2_mmhg, temp_c)


_SHUNT_TABLE: tuple[np.ndarray, np.ndarray] | None = None


def shunt_fraction_for_age(age_y):
    """Venous admixture that reproduces Mellemgaard's sea-level AaDO2 at a given age.

    The sea-level model (air, PB 760 mmHg, PACO2 40 mmHg, R 0.8, Hb 14.5 g/dL) is inverted
    once on a grid of ages 0-110 by bisection; other ages are interpolated. About 2.4 %
    at age 20 and 4.4 % at age 70.
    """
    global _SHUNT_TABLE
    if _SHUNT_TABLE is None:
        ages = np.arange(0.0, 111.0, 1.0)
        target = np.asarray(sea_level_aado2(ages))
        pa = float(alveolar_po2(SEA_LEVEL_MMHG, 40.0))
        lo = np.zeros_like(ages)
        hi = np.full_like(ages, 0.3)
        for _ in range(50):
            mid = 0.5 * (lo + hi)
            aad = pa - np.asarray(arterial_po2(np.full_like(ages, pa), shunt_fraction=mid))
            lo = np.where(aad < target, mid, lo)
            hi = np.where(aad >= target, mid, hi)
        _SHUNT_TABLE = (ages, 0.5 * (lo + hi))
    ages, qs = _SHUNT_TABLE
    return _out(np.interp(np.asarray(age_y, dtype=float), ages, qs), age_y)
