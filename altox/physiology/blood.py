"""Blood: the oxygen dissociation curve with its Bohr and temperature shifts, acid-base, and oxygen content.

Functions take scalars or numpy arrays and return the shape of their input.

References
----------
.. [Severinghaus1979] Severinghaus JW. Simple, accurate equations for human blood O2
   dissociation computations. J Appl Physiol 1979;46:599-602.
.. [AdrogueMadias2010] Adrogue HJ, Madias NE. Secondary responses to altered acid-base
   status: the rules of engagement. J Am Soc Nephrol 2010;21:920-923.
"""

from __future__ import annotations

import numpy as np

# Severinghaus (1979) standard curve: S = 1 / (23400 / (P^3 + 150 P) + 1), P in mmHg
_SEV_A = 23400.0
_SEV_B = 150.0
# standard conditions of the curve
STANDARD_PH = 7.40
STANDARD_PCO2_MMHG = 40.0
STANDARD_TEMP_C = 37.0
# P50 of the standard curve equation (the published standard value is 26.8 mmHg)
STANDARD_P50_MMHG = 26.856800143073972
# Henderson-Hasselbalch for plasma bicarbonate: pK' 6.1, CO2 solubility 0.0307 mmol/L/mmHg
PK_CARBONIC = 6.1
CO2_SOLUBILITY_MMOL_L_MMHG = 0.0307
# bicarbonate that gives pH 7.40 at PCO2 40 with the constants above (24.5 mmol/L)
NORMAL_HCO3_MMOL_L = CO2_SOLUBILITY_MMOL_L_MMHG * 40.0 * 10.0 ** (7.40 - PK_CARBONIC)
# oxygen content: Huefner-type factor and O2 solubility in plasma
HUEFNER_ML_PER_G = 1.34
O2_SOLUBILITY_ML_DL_MMHG = 0.003


def _out(result, *inputs):
    """Python float when every input was a scalar, else an array."""
    if all(np.ndim(x) == 0 for x in inputs):
        return float(result)
    return np.asarray(result, dtype=float)


def virtual_po2(po2_mmhg, ph=STANDARD_PH, pco2_mmhg=STANDARD_PCO2_MMHG, temp_c=STANDARD_TEMP_C,
                p50_mmhg=None):
    """PO2 that gives the same saturation on the standard curve (Severinghaus 1979).

    ``PO2v = PO2 * 10**(0.024 (37 - T) + 0.40 (pH - 7.40) + 0.06 log10(40 / PCO2))``

    An alkaline pH, a low PCO2 or a low temperature raise the virtual PO2 and so the
    saturation: the Bohr and temperature shifts of the curve to the left.

    Parameters
    ----------
    po2_mmhg : numeric
        Measured or predicted PO2. [mmHg]
    ph : numeric
        Blood pH (at the stated temperature).
    pco2_mmhg : numeric
        Blood PCO2, > 0. [mmHg]
    temp_c : numeric
        Blood temperature. [degC]
    p50_mmhg : numeric, optional
        A person's standard P50 (pH 7.40, PCO2 40, 37 degC), when it differs from the
        curve's 26.86 mmHg (variation between people, 2,3-DPG); the curve is scaled along
        the PO2 axis, as the virtual-PO2 corrections are.

    Returns
    -------
    numeric
        Virtual PO2. [mmHg]
    """
    po2 = np.asarray(po2_mmhg, dtype=float)
    log_factor = (0.024 * (STANDARD_TEMP_C - np.asarray(temp_c, dtype=float))
                  + 0.40 * (np.asarray(ph, dtype=float) - STANDARD_PH)
                  + 0.06 * np.log10(STANDARD_PCO2_MMHG / np.asarray(pco2_mmhg, dtype=float)))
    scale = 1.0 if p50_mmhg is None else STANDARD_P50_MMHG / np.asarray(p50_mmhg, dtype=float)
    return _out(po2 * 10.0**log_factor * scale, po2_mmhg, ph, pco2_mmhg, temp_c,
                0.0 if p50_mmhg is None else p50_mmhg)


def standard_saturation(po2_mmhg):
    """Saturation on the standard curve (pH 7.40, PCO2 40 mmHg, 37 degC), Severinghaus (1979).

    ``S = 1 / (23400 / (P^3 + 150 P) + 1)``, within 0.0055 of the standard human curve.
    P50 is 26.8 mmHg (published; the equation gives 26.86). PO2 at or below 0 gives 0.

    Returns
    -------
    numeric
        Saturation as a fraction 0-1.
    """
    p = np.maximum(np.asarray(po2_mmhg, dtype=float), 0.0)
    cube = p**3 + _SEV_B * p
    with np.errstate(divide="ignore"):
        s = np.where(cube > 0.0, cube / (cube + _SEV_A), 0.0)
    return _out(s, po2_mmhg)


def saturation(po2_mmhg, ph=STANDARD_PH, pco2_mmhg=STANDARD_PCO2_MMHG, temp_c=STANDARD_TEMP_C, p50_mmhg=None):
    """Hemoglobin O2 saturation for a PO2 under stated pH, PCO2 and temperature.

    The standard curve of Severinghaus (1979) evaluated at the virtual PO2
    (:func:`virtual_po2`), which applies the Bohr shift (pH and PCO2) and the temperature
    shift.

    Parameters
    ----------
    po2_mmhg : numeric
        PO2. [mmHg]
    ph : numeric, default 7.40
    pco2_mmhg : numeric, default 40
        [mmHg]
    temp_c : numeric, default 37
        [degC]

    Returns
    -------
    numeric
        Saturation as a fraction 0-1.

    Examples
    --------
    >>> round(saturation(26.8), 3)
    0.499
    >>> saturation(40.0, ph=7.55, pco2_mmhg=20.0) > saturation(40.0)
    True
    """
    return standard_saturation(virtual_po2(po2_mmhg, ph, pco2_mmhg, temp_c, p50_mmhg))


def standard_po2_for_saturation(so2):
    """Inverse of :func:`standard_saturation`: PO2 on the standard curve. [mmHg]

    Solves ``P^3 + 150 P - 23400 S / (1 - S) = 0`` exactly (Cardano; the cubic has one
    real root since its linear coefficient is positive). ``S`` must lie in [0, 1).
    """
    s = np.asarray(so2, dtype=float)
    q = _SEV_A * s / (1.0 - s)
    p3 = _SEV_B / 3.0
    root = np.sqrt((q / 2.0) ** 2 + p3**3)
    po2 = np.cbrt(q / 2.0 + root) + np.cbrt(q / 2.0 - root)
    return _out(po2, so2)


def po2_for_saturation(so2, ph=STANDARD_PH, pco2_mmhg=STANDARD_PCO2_MMHG, temp_c=STANDARD_TEMP_C,
                       p50_mmhg=None):
    """PO2 that gives a saturation under stated pH, PCO2 and temperature. [mmHg]

    Inverse of :func:`saturation`: the standard-curve PO2 divided by the virtual-PO2 factor.

    Parameters
    ----------
    so2 : numeric
        Saturation as a fraction in [0, 1).
    """
    standard = np.asarray(standard_po2_for_saturation(so2))
    factor = np.asarray(virtual_po2(1.0, ph, pco2_mmhg, temp_c, p50_mmhg))
    return _out(standard / factor, so2, ph, pco2_mmhg, temp_c)


def p50(ph=STANDARD_PH, pco2_mmhg=STANDARD_PCO2_MMHG, temp_c=STANDARD_TEMP_C):
    """PO2 at 50 % saturation under stated conditions. [mmHg]"""
    return po2_for_saturation(0.5 * np.ones_like(np.asarray(ph, dtype=float)), ph, pco2_mmhg, temp_c)


def ph_from_bicarbonate(hco3_mmol_l, pco2_mmhg):
    """Henderson-Hasselbalch: ``pH = 6.1 + log10(HCO3 / (0.0307 PCO2))``.

    Parameters
    ----------
    hco3_mmol_l : numeric
        Plasma bicarbonate. [mmol/L]
    pco2_mmhg : numeric
        PCO2. [mmHg]
    """
    hco3 = np.asarray(hco3_mmol_l, dtype=float)
    pco2 = np.asarray(pco2_mmhg, dtype=float)
    return _out(PK_CARBONIC + np.log10(hco3 / (CO2_SOLUBILITY_MMOL_L_MMHG * pco2)), hco3_mmol_l, pco2_mmhg)


# metabolic (renal) compensation of a respiratory alkalosis: fall in HCO3 per mmHg fall in PCO2
ACUTE_HCO3_PER_MMHG = 0.2     # acute: 2 mmol/L per 10 mmHg  [AdrogueMadias2010]
CHRONIC_HCO3_PER_MMHG = 0.5   # chronic (days): 4-5 mmol/L per 10 mmHg  [AdrogueMadias2010]
# respiratory acidosis (PCO2 above 40): 1 and 3.5 mmol/L per 10 mmHg  [AdrogueMadias2010]
ACUTE_HCO3_PER_MMHG_ACIDOSIS = 0.1
CHRONIC_HCO3_PER_MMHG_ACIDOSIS = 0.35


def secondary_response_slopes(compensation):
    """Bicarbonate change per mmHg of PCO2 below and above 40 mmHg, for a degree of compensation 0-1.

    Returns
    -------
    (k_below, k_above) : numeric
        [mmol/L per mmHg]
    """
    f = np.clip(np.asarray(compensation, dtype=float), 0.0, 1.0)
    k_below = ACUTE_HCO3_PER_MMHG + (CHRONIC_HCO3_PER_MMHG - ACUTE_HCO3_PER_MMHG) * f
    k_above = ACUTE_HCO3_PER_MMHG_ACIDOSIS + (CHRONIC_HCO3_PER_MMHG_ACIDOSIS - ACUTE_HCO3_PER_MMHG_ACIDOSIS) * f
    return k_below, k_above


def compensated_bicarbonate(pco2_mmhg, compensation=0.0, hco3_normal_mmol_l=NORMAL_HCO3_MMOL_L):
    """Plasma bicarbonate after a change in PCO2, from acute buffering to renal compensation.

    ``HCO3 = HCO3n - k (40 - PCO2)`` (``HCO3n`` 24.5 mmol/L, pH 7.40 at PCO2 40) with ``k`` moving from 0.2 (acute: blood buffers only)
    to 0.5 mmol/L per mmHg (chronic: renal compensation over 2-3 days), the secondary
    responses of Adrogue & Madias (2010) for respiratory alkalosis (and acidosis, where the
    chronic value is 0.35; altox uses the alkalosis values for PCO2 below 40 and
    0.1 -> 0.35 above).

    Parameters
    ----------
    pco2_mmhg : numeric
        Arterial PCO2. [mmHg]
    compensation : numeric
        Degree of renal compensation, 0 (acute) to 1 (chronic, complete).
    hco3_normal_mmol_l : numeric
        Bicarbonate at PCO2 40 mmHg before the change. [mmol/L]

    Returns
    -------
    numeric
        Bicarbonate. [mmol/L]
    """
    pco2 = np.asarray(pco2_mmhg, dtype=float)
    k_low, k_high = secondary_response_slopes(compensation)
    k = np.where(pco2 < STANDARD_PCO2_MMHG, k_low, k_high)
    hco3 = hco3_normal_mmol_l - k * (STANDARD_PCO2_MMHG - pco2)
    return _out(np.maximum(hco3, 1.0), pco2_mmhg, compensation, hco3_normal_mmol_l)


def oxygen_content(hb_g_dl, so2, po2_mmhg, huefner_ml_per_g=HUEFNER_ML_PER_G):
    """Blood oxygen content, bound plus dissolved. [mL O2 / dL blood]

    ``CO2 = 1.34 Hb S + 0.003 PO2``. The binding factor is 1.34 mL/g here (the value
    in wide clinical use; 1.36-1.39 appear in other sources, which raises content by up to
    4 %). 0.003 mL/dL/mmHg is the solubility of O2 in blood at 37 degC.

    Parameters
    ----------
    hb_g_dl : numeric
        Hemoglobin concentration. [g/dL]
    so2 : numeric
        Saturation, fraction 0-1.
    po2_mmhg : numeric
        PO2. [mmHg]
    """
    content = (huefner_ml_per_g * np.asarray(hb_g_dl, dtype=float) * np.asarray(so2, dtype=float)
               + O2_SOLUBILITY_ML_DL_MMHG * np.asarray(po2_mmhg, dtype=float))
    return _out(content, hb_g_dl, so2, po2_mmhg)
