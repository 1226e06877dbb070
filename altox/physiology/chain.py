"""The whole physiology chain over arrays of places: pressure, inspired, alveolar and arterial gas, acid-base, saturation, content.

:func:`assess` is the one entry point that the CLI, plans and every later feature call;
it evaluates all points in one vectorised pass, never a per-point loop.
"""

from __future__ import annotations

import numpy as np

from altox.physiology import blood, gas_exchange, validity, ventilation
from altox.physiology.atmosphere import (ATMOSPHERES, ISA_MAX_M, ISA_MIN_M, MOUNTAIN_MAX_M, MOUNTAIN_MIN_M,
                                         _pressure_span, altitude_for_pressure, barometric_pressure)
from altox.errors import OutOfRangeError

#: keys of the mapping :func:`assess` returns, in display order (also the JSON keys)
ASSESS_KEYS = (
    "altitude_m", "atmosphere", "barometric_mmhg", "fio2", "days_at_altitude",
    "inspired_po2_mmhg", "alveolar_pco2_mmhg", "alveolar_po2_mmhg", "arterial_po2_mmhg",
    "arterial_pco2_mmhg", "arterial_ph", "bicarbonate_mmol_l", "sao2_pct", "hemoglobin_g_dl",
    "o2_content_ml_dl", "equivalent_altitude_m", "ventilation_ratio", "alveolar_arterial_mmhg",
    "alveolar_po2_clamped", "equivalent_altitude_clipped", "solver_converged",
    "validity_status", "validity_reasons", "outside_validated_range",
)


CHUNK_SIZE = 1 << 15   # elements per piece when assess is given large arrays


def _model_range(atmosphere):
    return (ISA_MIN_M, ISA_MAX_M) if atmosphere == "isa" else (MOUNTAIN_MIN_M, MOUNTAIN_MAX_M)


def assess(altitude_m=None, *, atmosphere: str = "isa", pb_mmhg=None, fio2=gas_exchange.AIR_FIO2,
           days=0.0, f_ventilatory=None, f_renal=None, age_y=40.0, hb_g_dl=None,
           rq=gas_exchange.DEFAULT_RQ, body_temp_c=37.0, paco2_mmhg=None, ph=None,
           metabolic_ratio=1.0, hypoxic_gain_scale=1.0, drive_scale=1.0, hco3_offset_mmol_l=0.0,
           shunt_fraction=None, p50_mmhg=None):
    """Evaluate the whole resting physiology chain at arrays of altitudes.

    Parameters
    ----------
    altitude_m : numeric, optional
        Geometric altitude. [m] Needed unless ``pb_mmhg`` is given.
    atmosphere : {'isa', 'mountain'}
        Model atmosphere for pressure from altitude (see :mod:`altox.physiology.atmosphere`).
    pb_mmhg : numeric, optional
        Measured barometric (or cabin) pressure. [mmHg] Overrides the atmosphere model;
        if given alone, the altitude reported is the model altitude of that pressure.
    fio2 : numeric
        Inspired O2 fraction, (0, 1].
    days : numeric
        Days spent at this altitude (0 = acute, the first hours).
    f_ventilatory, f_renal : numeric, optional
        Acclimatization fractions 0-1 that override ``days`` (plans compute them from the
        whole history; see :func:`altox.physiology.ventilation.acclimatization_fractions`).
    age_y : numeric
        Age. [years] Sets the venous admixture (alveolar-arterial difference).
    hb_g_dl : numeric, optional
        Hemoglobin. [g/dL] Default 14.5.
    rq : numeric
        Respiratory exchange ratio.
    body_temp_c : numeric
        [degC]
    paco2_mmhg : numeric, optional
        Measured arterial PCO2. [mmHg] Replaces the ventilation model.
    ph : numeric, optional
        Measured arterial pH. Replaces the acid-base model (bicarbonate is derived).
    metabolic_ratio : numeric
        CO2 output relative to rest.
    hypoxic_gain_scale : numeric
        The person's hypoxic ventilatory response relative to the population's (1 typical).
    drive_scale : numeric
        Overall chemoreflex drive relative to awake rest (sleep is below 1).
    hco3_offset_mmol_l : numeric
        Metabolic shift of bicarbonate (negative with acetazolamide). [mmol/L]
    shunt_fraction : numeric, optional
        Venous admixture; default from age (:func:`altox.physiology.gas_exchange.shunt_fraction_for_age`).
    p50_mmhg : numeric, optional
        The person's standard P50; default the standard curve's 26.8 mmHg. [mmHg]

    Returns
    -------
    dict
        Arrays (or Python scalars for scalar input) under the keys of
        :data:`ASSESS_KEYS`; ``atmosphere`` is a string (``'measured'`` when a pressure
        was given). ``sao2_pct`` is a percentage; all other fractions are 0-1.
        ``validity_status`` (0 validated, 1 extrapolated, 2 no steady state),
        ``validity_reasons`` and ``outside_validated_range`` say whether each value is a
        prediction (:func:`altox.physiology.validity.classify`; names in
        :data:`altox.physiology.validity.STATUS_NAMES`, sentences from :func:`altox.physiology.validity.validity_notes`).

    Raises
    ------
    OutOfRangeError
        Altitude or pressure outside the model, a pressure at or below water vapour
        pressure, FiO2 outside (0, 1], NaN anywhere.

    Examples
    --------
    >>> r = assess(5000.0)
    >>> 75 < r["sao2_pct"] < 85
    True
    """
    if atmosphere not in ATMOSPHERES:
        raise ValueError(f"unknown atmosphere {atmosphere!r}; valid: {', '.join(ATMOSPHERES)}")
    arrays = dict(altitude_m=altitude_m, pb_mmhg=pb_mmhg, fio2=fio2, days=days, f_ventilatory=f_ventilatory,
                  f_renal=f_renal, age_y=age_y, hb_g_dl=hb_g_dl, rq=rq, body_temp_c=body_temp_c,
                  paco2_mmhg=paco2_mmhg, ph=ph, metabolic_ratio=metabolic_ratio,
                  hypoxic_gain_scale=hypoxic_gain_scale, drive_scale=drive_scale,
                  hco3_offset_mmol_l=hco3_offset_mmol_l, shunt_fraction=shunt_fraction, p50_mmhg=p50_mmhg)
    given = {k: np.asarray(v, dtype=float) for k, v in arrays.items() if v is not None}
    shape = np.broadcast_shapes(*(v.shape for v in given.values()))
    size = int(np.prod(shape)) if shape else 1
    if size > CHUNK_SIZE:
        # cache-sized pieces: the same arithmetic, without paging fresh memory for every temporary;
        # inputs that do not vary stay scalars, results go straight into the outputs
        flat = {k: (v.reshape(()) if v.size == 1 else np.broadcast_to(v, shape).ravel()) for k, v in given.items()}
        out = {key: np.empty(size, dtype=_DTYPES.get(key, float))
               for key in ASSESS_KEYS if key != "atmosphere"}
        for i in range(0, size, CHUNK_SIZE):
            j = min(size, i + CHUNK_SIZE)
            part = _evaluate(atmosphere, **{k: (v if v.ndim == 0 else v[i:j]) for k, v in flat.items()})
            for key, value in part.items():
                if key == "atmosphere":
                    out[key] = value
                else:
                    out[key][i:j] = value
        return {key: (out[key] if key == "atmosphere" else out[key].reshape(shape)) for key in ASSESS_KEYS}
    part = _evaluate(atmosphere, **given)
    shape = np.broadcast_shapes(*(np.shape(v) for v in part.values() if not isinstance(v, str)))

    def full(key):
        return np.broadcast_to(np.asarray(part[key], dtype=_DTYPES.get(key, float)), shape).copy()

    if shape == ():
        return {k: (part[k] if k == "atmosphere" else full(k).item()) for k in ASSESS_KEYS}
    return {k: (part[k] if k == "atmosphere" else full(k)) for k in ASSESS_KEYS}


_FLAG_KEYS = ("alveolar_po2_clamped", "equivalent_altitude_clipped", "solver_converged", "outside_validated_range")
_DTYPES = {**{k: bool for k in _FLAG_KEYS}, "validity_status": np.int8, "validity_reasons": np.int16}


def _evaluate(atmosphere, altitude_m=None, pb_mmhg=None, fio2=gas_exchange.AIR_FIO2, days=0.0, f_ventilatory=None,
              f_renal=None, age_y=40.0, hb_g_dl=None, rq=gas_exchange.DEFAULT_RQ, body_temp_c=37.0,
              paco2_mmhg=None, ph=None, metabolic_ratio=1.0, hypoxic_gain_scale=1.0, drive_scale=1.0,
              hco3_offset_mmol_l=0.0, shunt_fraction=None, p50_mmhg=None) -> dict:
    """The chain on one piece: each result as computed (broadcastable, not yet expanded)."""
    if altitude_m is None and pb_mmhg is None:
        raise OutOfRangeError("give an altitude or a measured pressure", field="altitude",
                              expected="an altitude in m or a pressure in mmHg")
    fio2_a = np.asarray(fio2, dtype=float)
    if np.any(~np.isfinite(fio2_a) | (fio2_a <= 0.0) | (fio2_a > 1.0)):
        bad = fio2_a[~np.isfinite(fio2_a) | (fio2_a <= 0.0) | (fio2_a > 1.0)].flat[0] if fio2_a.ndim else float(fio2_a)
        raise OutOfRangeError(f"FiO2 {bad:g} is outside (0, 1]", field="fio2", value=float(bad),
                              expected="a fraction in (0, 1]")
    ph2o = gas_exchange.water_vapour_pressure(body_temp_c)
    if pb_mmhg is not None:
        pb = np.asarray(pb_mmhg, dtype=float)
        bad = ~np.isfinite(pb) | (pb <= ph2o)
        if np.any(bad):
            v = pb[bad].flat[0] if pb.ndim else float(pb)
            raise OutOfRangeError(f"pressure {v:g} mmHg is at or below the water vapour pressure in the "
                                  f"lungs ({float(np.max(ph2o)):.0f} mmHg): no oxygen can be inspired",
                                  field="pressure", value=float(v), expected="a pressure above 47 mmHg")
        if altitude_m is None:
            lo_p, hi_p = _pressure_span(atmosphere)
            alt = np.asarray(altitude_for_pressure(np.clip(pb, lo_p, hi_p), atmosphere))
        else:
            alt = np.asarray(altitude_m, dtype=float)
            lo_m, hi_m = _model_range(atmosphere)
            if not (alt.min(initial=lo_m) >= lo_m and alt.max(initial=hi_m) <= hi_m):  # NaN fails too
                barometric_pressure(alt, atmosphere)  # raises the model's range error
        atm_label = "measured"
    else:
        alt = np.asarray(altitude_m, dtype=float)
        pb = np.asarray(barometric_pressure(alt, atmosphere))
        atm_label = atmosphere
        if np.any(pb <= ph2o):  # cannot happen within the models' ranges; kept as a guard
            raise OutOfRangeError("pressure at or below water vapour pressure", field="altitude")

    hb = np.asarray(ventilation.model_coefficients()["blood"]["hemoglobin_g_dl"]["value"]
                    if hb_g_dl is None else hb_g_dl, dtype=float)
    if np.any(~np.isfinite(hb) | (hb <= 0.0)):
        raise OutOfRangeError("hemoglobin must be a positive number of g/dL", field="hb", expected="> 0 g/dL")
    if f_ventilatory is None or f_renal is None:
        fv_d, fr_d = ventilation.acclimatization_fractions(days)
        fv = fv_d if f_ventilatory is None else np.asarray(f_ventilatory, dtype=float)
        fr = fr_d if f_renal is None else np.asarray(f_renal, dtype=float)
    else:
        fv, fr = np.asarray(f_ventilatory, dtype=float), np.asarray(f_renal, dtype=float)

    pio2 = np.asarray(gas_exchange.inspired_po2(pb, fio2_a, body_temp_c))
    factor = gas_exchange.alveolar_gas_factor(fio2_a, rq)
    if paco2_mmhg is None:
        eq = ventilation.equilibrium(pio2, fio2_a, rq, fv, fr, metabolic_ratio,
                                     hypoxic_gain_scale=hypoxic_gain_scale, drive_scale=drive_scale,
                                     hco3_offset_mmol_l=hco3_offset_mmol_l)
        paco2 = eq["paco2_mmhg"]
        vent_ratio = eq["ventilation_ratio"]
        hco3 = eq["hco3_mmol_l"]
        ph_a = eq["ph"]
        converged = eq["converged"]
    else:
        paco2 = np.asarray(paco2_mmhg, dtype=float)
        if np.any(~np.isfinite(paco2) | (paco2 <= 0.0)):
            raise OutOfRangeError("PaCO2 must be a positive number of mmHg", field="paco2", expected="> 0 mmHg")
        vent_ratio = ventilation.default_parameters().baseline_paco2_mmhg * np.asarray(metabolic_ratio) / paco2
        hco3 = np.asarray(blood.compensated_bicarbonate(paco2, fr)) + np.asarray(hco3_offset_mmol_l, dtype=float)
        ph_a = blood.ph_from_bicarbonate(hco3, paco2)
        converged = np.ones(np.shape(paco2), dtype=bool)
    if ph is not None:
        ph_a = np.asarray(ph, dtype=float)
        if np.any(~np.isfinite(ph_a) | (ph_a < 6.5) | (ph_a > 8.0)):
            raise OutOfRangeError("pH must lie between 6.5 and 8.0", field="ph", expected="6.5 to 8.0")
        hco3 = blood.CO2_SOLUBILITY_MMOL_L_MMHG * paco2 * 10.0 ** (ph_a - blood.PK_CARBONIC)

    pao2_raw = pio2 - paco2 * factor
    clamped = pao2_raw < 0.0
    pao2 = np.maximum(pao2_raw, 0.0)
    qs = gas_exchange.shunt_fraction_for_age(age_y) if shunt_fraction is None else shunt_fraction
    pao2_art, sao2 = gas_exchange.arterial_blood(pao2, hb, qs, ph_a, paco2, body_temp_c, p50_mmhg=p50_mmhg)
    content = np.asarray(blood.oxygen_content(hb, sao2, pao2_art))

    # equivalent altitude: ambient air with the same PIO2, in the same atmosphere (ISA when measured)
    pb_eq = pio2 / gas_exchange.AIR_FIO2 + ph2o
    p_min, p_max = _pressure_span(atmosphere)
    clipped = (pb_eq < p_min) | (pb_eq > p_max)
    eq_alt = np.asarray(altitude_for_pressure(np.clip(pb_eq, p_min, p_max), atmosphere))

    state = validity.classify(pio2, fv, age_y, converged, clamped, body_temp_c)
    return {
        **state,
        "altitude_m": alt,
        "atmosphere": atm_label,
        "barometric_mmhg": pb,
        "fio2": fio2_a,
        "days_at_altitude": days if (f_ventilatory is None and f_renal is None) else _equivalent_days(fv),
        "inspired_po2_mmhg": pio2,
        "alveolar_pco2_mmhg": paco2,
        "alveolar_po2_mmhg": pao2,
        "arterial_po2_mmhg": pao2_art,
        "arterial_pco2_mmhg": paco2,
        "arterial_ph": ph_a,
        "bicarbonate_mmol_l": hco3,
        "sao2_pct": 100.0 * sao2,
        "hemoglobin_g_dl": hb,
        "o2_content_ml_dl": content,
        "equivalent_altitude_m": eq_alt,
        "ventilation_ratio": vent_ratio,
        "alveolar_arterial_mmhg": pao2 - pao2_art,
        "alveolar_po2_clamped": clamped,
        "equivalent_altitude_clipped": clipped,
        "solver_converged": converged,
    }


def _equivalent_days(f_ventilatory):
    """Days at a constant altitude that give this ventilatory acclimatization fraction.

    When :func:`assess` is given the acclimatization fractions directly (as plans do, from the
    history along a timeline), ``days_at_altitude`` is the constant-altitude equivalent,
    ``-tau ln(1 - f)`` with the ventilatory time constant of the model table (the inverse of
    :func:`altox.physiology.ventilation.acclimatization_fractions`); a fraction of 1 gives the
    largest finite number of days.
    """
    tau = ventilation.default_parameters().ventilatory_time_constant_days
    f = np.clip(np.asarray(f_ventilatory, dtype=float), 0.0, 1.0)
    with np.errstate(divide="ignore"):
        d = -tau * np.log1p(-f)
    return np.minimum(d, np.finfo(float).max)

