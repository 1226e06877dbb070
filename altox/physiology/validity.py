"""Whether a computed state is a prediction: validated, extrapolated, or without a steady state.

Every state :func:`altox.assess` evaluates falls in one of three classes (limits and their
sources in ``altox/data/validity.yaml``):

``validated`` (code 0)
    Inside the published resting data the model is compared with: acclimatized resting adults
    up to the highest summit (an inspired PO2 down to the model's floor), and acute exposure up
    to the highest acute resting data (about 5,000 m).
``extrapolated`` (code 1)
    A steady state exists but lies outside those data: acute or partly acclimatized exposure
    above the acute limit, children, ages outside the adult population of the data.
``no_steady_state`` (code 2)
    Acute exposure at a pressure altitude of 20,000 ft or more, where the published time of
    useful consciousness (TUC) is minutes; an inspired PO2 below the model's floor; or no
    solution of the ventilation model. A saturation computed there is not a prediction and
    is never shown as one: :func:`time_limited_text` gives the time-limited state instead.

Altitudes here are the *air-equivalent pressure altitude*: the ISA altitude at which air gives
the same inspired PO2 (the cabin or pressure altitude when breathing air; lower with added
oxygen). "Acclimatized" and "acute" are read from the ventilatory acclimatization fraction the
model already carries, converted from days at a constant altitude
(:func:`altox.physiology.ventilation.acclimatization_fractions`): acclimatized from the fraction 7 days
give, acute below the fraction of a first day. Along a plan the fraction carries the history,
so a new, higher camp is not yet acclimatized.

The core, :func:`classify`, is vectorised and pure; :func:`validity_notes` and
:func:`time_limited_text` build the plain sentences for one state.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

__all__ = ["VALIDATED", "EXTRAPOLATED", "NO_STEADY_STATE", "STATUS_NAMES", "ACUTE_ABOVE_DATA", "KNOWN_OPTIMISTIC",
           "AGE_OUTSIDE_DATA", "TUC_REGIME", "BELOW_FLOOR", "NO_SOLUTION", "limits", "classify",
           "air_equivalent_altitude_ft", "status_name", "validity_notes", "time_limited_text",
           "tuc_text", "describe", "describe_samples"]

VALIDATED, EXTRAPOLATED, NO_STEADY_STATE = 0, 1, 2
STATUS_NAMES = ("validated", "extrapolated", "no_steady_state")

# reasons, as bits of ``validity_reasons``
ACUTE_ABOVE_DATA = 1     # extrapolated: not acclimatized, above the acute data
AGE_OUTSIDE_DATA = 2     # extrapolated: age outside the adult data
TUC_REGIME = 4           # no steady state: acute, at or above 20,000 ft
BELOW_FLOOR = 8          # no steady state: inspired PO2 below the model's floor
NO_SOLUTION = 16         # no steady state: the ventilation model has no resting solution
KNOWN_OPTIMISTIC = 32    # a steady state where the model is known to read high (status unchanged)

_EXTRAPOLATED_BITS = ACUTE_ABOVE_DATA | AGE_OUTSIDE_DATA
_NO_STEADY_BITS = TUC_REGIME | BELOW_FLOOR | NO_SOLUTION


@lru_cache(maxsize=1)
def limits() -> dict:
    """The limits of ``altox/data/validity.yaml`` as numbers, with the acclimatization fractions.

    Returns
    -------
    dict
        ``acute_validated_max_m``, ``acclimatized_min_days``, ``acute_max_days``,
        ``no_steady_state_min_altitude_ft``, ``adult_min_age_y``, ``adult_max_age_y``,
        ``min_inspired_po2_mmhg`` (the model's floor, from ``models.yaml``),
        ``acclimatized_min_fraction`` and ``acute_max_fraction`` (ventilatory
        acclimatization fractions of those many days at a constant altitude),
        ``acute_validated_max_pb_mmhg`` and ``no_steady_state_max_pb_mmhg`` (ISA pressures of
        the two altitude limits).
    """
    from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft_to_mmhg
    from altox.physiology.coefficients import model_coefficients
    from altox.physiology.ventilation import acclimatization_fractions
    from altox.yamlload import load_data_file

    data = load_data_file("validity")
    out = {k: float(data[k]["value"]) for k in ("acute_validated_max_m", "acclimatized_min_days",
                                                "acute_max_days", "no_steady_state_min_altitude_ft")}
    out["adult_min_age_y"] = float(data["adult_age_y"]["min"])
    out["adult_max_age_y"] = float(data["adult_age_y"]["max"])
    out["min_inspired_po2_mmhg"] = float(model_coefficients()["validity"]["min_inspired_po2_mmhg"]["value"])
    out["acclimatized_min_fraction"] = float(acclimatization_fractions(out["acclimatized_min_days"])[0])
    out["acute_max_fraction"] = float(acclimatization_fractions(out["acute_max_days"])[0])
    out["acute_validated_max_pb_mmhg"] = float(barometric_pressure(out["acute_validated_max_m"], "isa"))
    out["no_steady_state_max_pb_mmhg"] = float(pressure_altitude_ft_to_mmhg(out["no_steady_state_min_altitude_ft"]))
    band = data["known_optimistic_band"]
    out["known_optimistic_min_m"] = float(band["min_m"])
    out["known_optimistic_max_m"] = float(band["max_m"])
    out["known_optimistic_points"] = float(band["residual_points"])
    out["known_optimistic_min_pb_mmhg"] = float(barometric_pressure(out["known_optimistic_max_m"], "mountain"))
    out["known_optimistic_max_pb_mmhg"] = float(barometric_pressure(out["known_optimistic_min_m"], "mountain"))
    return out


def _air_equivalent_pb(inspired_po2_mmhg, body_temp_c=37.0):
    """Pressure at which air gives this inspired PO2, clipped to the ISA range. [mmHg]"""
    from altox.physiology.atmosphere import _pressure_span
    from altox.physiology.gas_exchange import AIR_FIO2, water_vapour_pressure

    pb = np.asarray(inspired_po2_mmhg, dtype=float) / AIR_FIO2 + water_vapour_pressure(body_temp_c)
    return np.clip(pb, *_pressure_span("isa"))


def air_equivalent_altitude_ft(inspired_po2_mmhg, body_temp_c=37.0):
    """Pressure altitude at which air gives this inspired PO2. [ft]

    Parameters
    ----------
    inspired_po2_mmhg : numeric
        Inspired PO2. [mmHg]
    body_temp_c : numeric
        Body temperature (sets the water vapour pressure). [degC]

    Returns
    -------
    numeric
        The pressure altitude of aviation (ISA geopotential height,
        :func:`altox.physiology.atmosphere.pressure_altitude_ft`) of ``PB`` with
        ``PIO2 = 0.2095 (PB - PH2O)`` (Fenn, Rahn and Otis 1946), clipped to the ISA range.
    """
    from altox.physiology.atmosphere import pressure_altitude_ft

    return pressure_altitude_ft(_air_equivalent_pb(inspired_po2_mmhg, body_temp_c))


def _shown_ft(inspired_po2_mmhg, body_temp_c=37.0) -> float:
    """The air-equivalent pressure altitude as shown to people: to the nearest 100 ft."""
    return float(np.round(air_equivalent_altitude_ft(inspired_po2_mmhg, body_temp_c), -2))


def classify(inspired_po2_mmhg, f_ventilatory, age_y=40.0, solver_converged=True,
             alveolar_po2_clamped=False, body_temp_c=37.0) -> dict:
    """Validity of evaluated states, element by element.

    Parameters
    ----------
    inspired_po2_mmhg : numeric
        Inspired PO2 of each state. [mmHg]
    f_ventilatory : numeric
        Ventilatory acclimatization fraction, 0 (acute) to 1.
    age_y : numeric
        Age. [years]
    solver_converged, alveolar_po2_clamped : bool or array of bool
        From :func:`altox.assess`: whether the ventilation model found its steady state, and
        whether the alveolar gas equation fell below zero.
    body_temp_c : numeric
        [degC]

    Returns
    -------
    dict
        ``validity_status`` (int8: :data:`VALIDATED`, :data:`EXTRAPOLATED` or
        :data:`NO_STEADY_STATE`), ``validity_reasons`` (int16 bits: :data:`ACUTE_ABOVE_DATA`,
        :data:`AGE_OUTSIDE_DATA`, :data:`TUC_REGIME`, :data:`BELOW_FLOOR`,
        :data:`NO_SOLUTION`), ``outside_validated_range`` (bool); arrays of the broadcast
        shape of the inputs.

    Notes
    -----
    Limits from ``altox/data/validity.yaml`` (:func:`limits`): validated up to 5,000 m
    air-equivalent whatever the acclimatization, and above it when acclimatized (at least the
    ventilatory fraction of 7 days) down to the model's inspired-PO2 floor; no steady state
    for acute exposure (below the fraction of one day) at 20,000 ft air-equivalent or more
    (FAA AIM 8-1-2: TUC 5-12 min at 20,000 ft), below the floor, or without a solution.

    Examples
    --------
    >>> from altox.physiology.gas_exchange import inspired_po2
    >>> from altox.physiology.atmosphere import barometric_pressure
    >>> pio2 = inspired_po2(barometric_pressure(7620.0))          # 25,000 ft
    >>> [STATUS_NAMES[s] for s in classify([pio2, pio2], [0.0, 1.0])["validity_status"]]
    ['no_steady_state', 'validated']
    """
    from altox.physiology.gas_exchange import AIR_FIO2, water_vapour_pressure

    lim = limits()
    pio2 = np.asarray(inspired_po2_mmhg, dtype=float)
    fv = np.asarray(f_ventilatory, dtype=float)
    age = np.asarray(age_y, dtype=float)
    # the altitude limits as inspired PO2 of air (compared directly: no inversion per element)
    ph2o = water_vapour_pressure(body_temp_c)
    pio2_acute = AIR_FIO2 * (lim["acute_validated_max_pb_mmhg"] - ph2o)
    pio2_tuc = AIR_FIO2 * (lim["no_steady_state_max_pb_mmhg"] - ph2o)

    acclimatized = fv >= lim["acclimatized_min_fraction"] - 1e-9
    acute = fv < lim["acute_max_fraction"]
    above_data = pio2 < pio2_acute * (1.0 - 1e-9)
    reasons = np.where(above_data & ~acclimatized, ACUTE_ABOVE_DATA, 0)
    reasons = reasons | np.where((age < lim["adult_min_age_y"]) | (age > lim["adult_max_age_y"]),
                                 AGE_OUTSIDE_DATA, 0)
    reasons = reasons | np.where(acute & (pio2 <= pio2_tuc * (1.0 + 1e-9)), TUC_REGIME, 0)
    reasons = reasons | np.where(pio2 < lim["min_inspired_po2_mmhg"], BELOW_FLOOR, 0)
    reasons = reasons | np.where(~np.asarray(solver_converged, dtype=bool)
                                 | np.asarray(alveolar_po2_clamped, dtype=bool), NO_SOLUTION, 0)
    pio2_band_lo = AIR_FIO2 * (lim["known_optimistic_min_pb_mmhg"] - ph2o)
    pio2_band_hi = AIR_FIO2 * (lim["known_optimistic_max_pb_mmhg"] - ph2o)
    in_band = (pio2 >= pio2_band_lo) & (pio2 <= pio2_band_hi)
    reasons = np.where(in_band & ~np.asarray(reasons & _NO_STEADY_BITS, dtype=bool), reasons | KNOWN_OPTIMISTIC, reasons)
    reasons = np.asarray(reasons, dtype=np.int16)
    status = np.where(reasons & _NO_STEADY_BITS, NO_STEADY_STATE,
                      np.where(reasons & _EXTRAPOLATED_BITS, EXTRAPOLATED, VALIDATED)).astype(np.int8)
    return {"validity_status": status, "validity_reasons": reasons, "outside_validated_range": status > VALIDATED}


def status_name(code) -> str:
    """``'validated'``, ``'extrapolated'`` or ``'no_steady_state'`` for a status code."""
    return STATUS_NAMES[int(code)]


def _round_down(x, step):
    return np.floor(x / step + 1e-9) * step     # the tolerance keeps exp(log(300)) at 300


def _round_up(x, step):
    return np.ceil(x / step - 1e-9) * step


def tuc_text(altitude_ft) -> str:
    """Time of useful consciousness at a pressure altitude as text, e.g. ``'3-5 min'``.

    From :func:`altox.evaluation.decompression.tuc_range_s` (FAA AIM 8-1-2; FAA AC 61-107B Table 1-1).
    The range is widened outward when rounded (lower bound down, upper bound up), so the
    text never promises more time than the table. Below the table: ``'more than 30 min'``.
    """
    from altox.physiology.tuc import TUC_BELOW, tuc_range_s

    t = tuc_range_s(float(altitude_ft))
    lo, hi = float(t["min_s"]), float(t["max_s"])
    if int(t["position"]) == TUC_BELOW:
        return f"more than {hi / 60:.0f} min"
    if hi < 120.0:
        return f"{max(_round_down(lo, 1.0), 1.0):.0f}-{_round_up(hi, 1.0):.0f} s"
    return f"{max(_round_down(lo / 60.0, 0.5), 0.5):g}-{_round_up(hi / 60.0, 0.5):g} min"


def time_limited_text(inspired_po2_mmhg, body_temp_c=37.0) -> str:
    """What to show instead of a saturation where there is no steady state.

    ``'no steady state: time of useful consciousness 3-5 min'`` at the air-equivalent
    pressure altitude of this inspired PO2 (or ``'no steady state'`` below the TUC table).
    """
    if float(_air_equivalent_pb(inspired_po2_mmhg, body_temp_c)) > limits()["no_steady_state_max_pb_mmhg"] * (1 + 1e-9):
        return "no steady state"
    alt_ft = _shown_ft(inspired_po2_mmhg, body_temp_c)
    return f"no steady state: time of useful consciousness {tuc_text(alt_ft)}"


def validity_notes(reasons, *, inspired_po2_mmhg, age_y=40.0, body_temp_c=37.0) -> list[str]:
    """Plain sentences saying why one state is (or is not) a prediction.

    Parameters
    ----------
    reasons : int
        ``validity_reasons`` bits of the state (or the bitwise OR over several states).
    inspired_po2_mmhg : float
        Inspired PO2 of the state (the lowest, for several). [mmHg]
    age_y : float
        Age. [years]

    Returns
    -------
    list of str
        One sentence for the absence of a steady state (the most telling reason: the time of
        useful consciousness, then the floor, then no solution), one per reason for an
        extrapolation, or one saying the state is within the validated range.
    """
    from altox.physiology.atmosphere import altitude_for_pressure

    lim = limits()
    reasons = int(reasons)
    alt_ft = _shown_ft(inspired_po2_mmhg, body_temp_c)
    alt_m = float(altitude_for_pressure(_air_equivalent_pb(inspired_po2_mmhg, body_temp_c), "isa"))
    not_a_prediction = " The values computed here are not a prediction."
    notes = []
    # one sentence for the absence of a steady state, the most telling reason first
    if reasons & TUC_REGIME:
        notes.append(f"No steady state: acute exposure at a pressure altitude of {alt_ft:,.0f} ft "
                     f"(breathing air, or its equivalent), at or above "
                     f"{lim['no_steady_state_min_altitude_ft']:,.0f} ft, where the time of useful "
                     f"consciousness is about {tuc_text(alt_ft)} at rest and shorter after a rapid "
                     "decompression (FAA Aeronautical Information Manual 8-1-2; FAA AC 61-107B, "
                     "Table 1-1)." + not_a_prediction)
    elif reasons & BELOW_FLOOR:
        notes.append(f"No steady state in the model: the inspired PO2 of {float(inspired_po2_mmhg):.1f} mmHg "
                     f"is below {lim['min_inspired_po2_mmhg']:.1f} mmHg, lower than any published "
                     "resting measurement the model is checked against (the highest summit, "
                     "West et al., J Appl Physiol 1983)." + not_a_prediction)
    elif reasons & NO_SOLUTION:
        notes.append("No steady state in the model: the ventilation model has no resting solution "
                     "here." + not_a_prediction)
    if reasons & ACUTE_ABOVE_DATA and not reasons & _NO_STEADY_BITS:
        notes.append(f"Extrapolated: above {lim['acute_validated_max_m']:,.0f} m "
                     f"(here {alt_m:,.0f} m pressure altitude on air) with less than about "
                     f"{lim['acclimatized_min_days']:g} days of acclimatization; published resting "
                     "measurements this high are from acclimatized people only.")
    if reasons & AGE_OUTSIDE_DATA:
        notes.append(f"Extrapolated: age {float(age_y):g} years is outside the adults "
                     f"({lim['adult_min_age_y']:g} to {lim['adult_max_age_y']:g} years) of the "
                     "published measurements the model is checked against.")
    if not notes and not reasons & KNOWN_OPTIMISTIC:
        notes.append(f"Within the validated range: resting adults, acute exposure up to "
                     f"{lim['acute_validated_max_m']:,.0f} m or acclimatized (about "
                     f"{lim['acclimatized_min_days']:g} days or more) up to the highest summit.")
    if reasons & KNOWN_OPTIMISTIC and not reasons & _NO_STEADY_BITS:
        notes.append(f"Known optimistic error: between about {lim['known_optimistic_min_m']:,.0f} and "
                     f"{lim['known_optimistic_max_m']:,.0f} m the model has read up to "
                     f"{lim['known_optimistic_points']:.0f} points above the resting SpO2 published for "
                     "climbers at a high camp (Tannheimer et al., Int J Sports Med 2002): expect lower "
                     "saturations than shown here.")
    return notes


def describe(status, reasons, *, inspired_po2_mmhg, age_y=40.0, body_temp_c=37.0) -> dict:
    """Everything a presenter shows about one state's validity.

    Returns
    -------
    dict
        ``validity_status`` (name), ``outside_validated_range`` (bool), ``validity_notes``
        (sentences, :func:`validity_notes`) and ``time_limited`` (the text to show instead of
        a saturation, :func:`time_limited_text`, or None when there is a steady state).
    """
    code = int(status)
    return {"validity_status": status_name(code), "outside_validated_range": code > VALIDATED,
            "validity_notes": validity_notes(reasons, inspired_po2_mmhg=inspired_po2_mmhg, age_y=age_y,
                                             body_temp_c=body_temp_c),
            "time_limited": (time_limited_text(inspired_po2_mmhg, body_temp_c) if code == NO_STEADY_STATE
                             else None)}


def describe_samples(status, reasons, inspired_po2_mmhg, *, age_y=40.0, body_temp_c=37.0) -> dict:
    """:func:`describe` for a set of states (a leg, or one person over a plan): the worst of them.

    The status is the worst status; the notes cover the reasons of every state; the inspired PO2
    quoted (and the time of useful consciousness) is the lowest among the states of the worst status.
    """
    status = np.asarray(status).ravel()
    worst = int(status.max(initial=VALIDATED))
    pio2 = np.asarray(inspired_po2_mmhg, dtype=float).ravel()
    at_worst = pio2[status == worst] if status.size else pio2
    all_reasons = int(np.bitwise_or.reduce(np.asarray(reasons, dtype=np.int64).ravel(), initial=0))
    return describe(worst, all_reasons, inspired_po2_mmhg=float(at_worst.min()), age_y=age_y,
                    body_temp_c=body_temp_c)
