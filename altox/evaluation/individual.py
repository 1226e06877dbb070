"""Individual factors: a person's data turned into the keywords of :func:`altox.assess`, and fitness to fly.

Every factor shifts the chain only where published evidence supports it (``docs/individual.md``;
coefficients with their basis in ``altox/data/individual.yaml``):

* age sets the venous admixture, so the alveolar-arterial difference widens with age
  [Mellemgaard1966]_ (the core's default, :func:`altox.physiology.gas_exchange.shunt_fraction_for_age`);
* hemoglobin sets oxygen content (``CaO2 = 1.34 Hb SaO2 + 0.003 PaO2``);
* a measured hypoxic ventilatory response category (``low``, ``normal``, ``high``) scales the
  hypoxic gain to the median of that third of the population's spread;
* acetazolamide lowers plasma bicarbonate (a mild metabolic acidosis), which raises ventilation
  through the central drive [Luks2019]_;
* sleep lowers the chemoreflex drive (``drive_scale``), calibrated on [Tannheimer2002]_;
* a resting SpO2 measured at home (lung disease) fixes the person's venous admixture.

Fitness to fly compares, for a passenger with lung disease, the PaO2 predicted at 8,000 ft by
Dillard's regression on ground PaO2 and FEV1 [Dillard1989]_ (and the chain's own estimate) with
the thresholds the British Thoracic Society applies to a hypoxic challenge test [Coker2022]_.
Guidance only: a prediction is not a hypoxic challenge test, and neither is a clearance to fly.

References
----------
.. [Mellemgaard1966] Mellemgaard K. The alveolar-arterial oxygen difference: its size and
   components in normal man. Acta Physiol Scand 1966;67:10-20.
.. [Luks2019] Luks AM, Auerbach PS, Freer L, et al. Wilderness Medical Society Clinical Practice
   Guidelines for the Prevention and Treatment of Acute Altitude Illness: 2019 Update. Wilderness
   Environ Med 2019;30(4S):S3-S18.
.. [Tannheimer2002] Tannheimer M, Thomas A, Gerngross H. Oxygen saturation course and altitude
   symptomatology during an expedition to Broad Peak (8047 m). Int J Sports Med 2002;23:329-335.
.. [Dillard1989] Dillard TA, Berg BW, Rajagopal KR, Dooley JW, Mehm WJ. Hypoxemia during air
   travel in patients with chronic obstructive pulmonary disease. Ann Intern Med
   1989;111:362-367.
.. [Coker2022] Coker RK, Armstrong A, Church AC, et al. BTS Clinical Statement on air travel for
   passengers with respiratory disease. Thorax 2022;77:329-350.

Why this module is long: individual factors and the fitness-to-fly path are one domain: the published regressions and the screening path read the same person record and the same cited data.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError

__all__ = ["default_cabin_ft", "coefficients", "hvr_gain_scale", "person_kwargs", "people_kwargs", "fit_shunt_fraction",
           "dillard_pao2_altitude_mmhg", "fitness_to_fly", "occupant_fitness_to_fly",
           "SLEEP", "FactorError"]

#: the value of the ``sleeping`` argument that means "asleep"
SLEEP = True
DEFAULT_AGE_Y = 40.0
_HOME_DAYS = 3650.0  # "fully acclimatized to home": both acclimatization fractions are 1


class FactorError(OutOfRangeError):
    """An individual factor that altox cannot use (e.g. an SpO2 the model cannot reach)."""


def coefficients() -> dict:
    """The table of ``altox/data/individual.yaml``, loaded once."""
    from altox.yamlload import load_data_file

    return load_data_file("individual")


def _value(section: str, key: str) -> float:
    return coefficients()[section][key]["value"]


def _norm_ppf(p):
    """Standard normal quantile (the standard library's, exact to double precision)."""
    from statistics import NormalDist

    q = np.asarray(p, dtype=float)
    inv = NormalDist().inv_cdf
    return np.array([inv(v) for v in q.ravel()]).reshape(q.shape) if q.ndim else inv(float(q))


def _norm_cdf(x):
    """Standard normal distribution function, 0.5 erfc(-x / sqrt 2)."""
    from math import erfc, sqrt

    z = np.asarray(x, dtype=float)
    return np.array([0.5 * erfc(-v / sqrt(2.0)) for v in z.ravel()]).reshape(z.shape) if z.ndim else 0.5 * erfc(-float(z) / sqrt(2.0))


def hvr_gain_scale(category=None):
    """Hypoxic-gain multiplier for a ventilatory-response category.

    Parameters
    ----------
    category : {None, 'low', 'normal', 'high'}
        ``None`` and ``'normal'`` give 1 (the population median); ``'low'`` and ``'high'`` give
        the median of the lower and upper third of the log-normal spread of
        ``altox/data/individual.yaml`` (``population.hypoxic_gain_log_sd``).

    Returns
    -------
    float
    """
    if category in (None, "normal"):
        return 1.0
    sd = _value("population", "hypoxic_gain_log_sd")
    q = {"low": 1.0 / 6.0, "high": 5.0 / 6.0}.get(category)
    if q is None:
        raise FactorError(f"hvr: {category!r} is not a category; expected low, normal or high.",
                          field="hvr", value=category, expected="low, normal or high")
    return float(np.exp(sd * _norm_ppf(q)))


def _get(person, *names, default=None):
    for n in names:
        v = getattr(person, n, None) if not isinstance(person, dict) else person.get(n)
        if v is not None:
            return v
    return default


def fit_shunt_fraction(target, *, altitude_m=0.0, atmosphere="mountain", target_kind="sao2",
                       age_y=DEFAULT_AGE_Y, hb_g_dl=None, fio2=0.2095, days=_HOME_DAYS,
                       f_ventilatory=None, f_renal=None):
    """Venous admixture that makes the chain reproduce a measured resting SpO2 or PaO2.

    The chain is evaluated on whole arrays at once and the shunt fraction found by bisection on
    [0, ``lung.shunt_fraction_max``] (the resting PaO2 and SaO2 fall monotonically with it).

    Parameters
    ----------
    target : numeric
        Measured SpO2 (fraction 0-1, ``target_kind='sao2'``) or PaO2 (mmHg, ``'pao2'``).
    altitude_m : numeric
        Where it was measured (home, or the departure field). [m]
    atmosphere : {'mountain', 'isa'}
    target_kind : {'sao2', 'pao2'}
    age_y, hb_g_dl, fio2 : numeric
    days, f_ventilatory, f_renal : numeric
        Acclimatization at the place of measurement; default fully acclimatized (home).

    Returns
    -------
    ndarray
        Shunt fraction(s), shaped like the broadcast inputs.

    Raises
    ------
    FactorError
        A value the model cannot reach: better than a lung without venous admixture, or worse
        than the upper bound.
    """
    from altox.physiology.chain import assess

    key = "sao2_pct" if target_kind == "sao2" else "arterial_po2_mmhg"
    t = np.asarray(target, dtype=float) * (100.0 if target_kind == "sao2" else 1.0)
    qs_max = _value("lung", "shunt_fraction_max")
    kw = dict(atmosphere=atmosphere, fio2=fio2, age_y=age_y, hb_g_dl=hb_g_dl, days=days,
              f_ventilatory=f_ventilatory, f_renal=f_renal)
    shape = np.broadcast(t, np.asarray(altitude_m), np.asarray(age_y)).shape
    alt = np.broadcast_to(np.asarray(altitude_m, dtype=float), shape)
    best = np.asarray(assess(alt, shunt_fraction=np.zeros(shape), **kw)[key])
    worst = np.asarray(assess(alt, shunt_fraction=np.full(shape, qs_max), **kw)[key])
    tb = np.broadcast_to(t, shape)
    what = "SpO2" if target_kind == "sao2" else "PaO2"
    unit = " %" if target_kind == "sao2" else " mmHg"
    if np.any(tb > best + 1e-9):
        v = float(tb[tb > best + 1e-9].flat[0])
        raise FactorError(f"a resting {what} of {v:.1f}{unit} is above what the model gives with no "
                          f"venous admixture ({float(np.max(best)):.1f}{unit}) at that altitude; check "
                          "the value or the altitude.", field=target_kind, value=v)
    if np.any(tb < worst - 1e-9):
        v = float(tb[tb < worst - 1e-9].flat[0])
        raise FactorError(f"a resting {what} of {v:.1f}{unit} needs more venous admixture than altox "
                          f"models (shunt above {qs_max:.0%}); the single-compartment lung does not "
                          "describe this person.", field=target_kind, value=v)
    # saturation and PaO2 fall smoothly and monotonically with venous admixture: two passes of
    # 65 candidates each, evaluated in one vectorised call per pass, then linear interpolation
    def expand(v):
        return v if v is None or np.ndim(v) == 0 else np.asarray(v, dtype=float)[..., None]

    kw_grid = {k: expand(v) for k, v in kw.items()}
    lo = np.zeros(shape)
    hi = np.full(shape, qs_max)
    for _ in range(2):
        grid = lo[..., None] + (hi - lo)[..., None] * np.linspace(0.0, 1.0, 65)
        y = np.asarray(assess(alt[..., None], shunt_fraction=grid, **kw_grid)[key])
        # index of the last candidate still above the target (y decreases along the grid)
        above = y > tb[..., None]
        i = np.clip(above.sum(axis=-1) - 1, 0, 63)
        take = lambda a, j: np.take_along_axis(a, j[..., None], axis=-1)[..., 0]  # noqa: E731
        y0, y1 = take(y, i), take(y, i + 1)
        g0, g1 = take(grid, i), take(grid, i + 1)
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.where(y0 != y1, (y0 - tb) / (y0 - y1), 0.5)
        lo, hi = g0, g1
        estimate = g0 + np.clip(w, 0.0, 1.0) * (g1 - g0)
    lo = hi = estimate
    out = 0.5 * (lo + hi)
    return out if out.shape else float(out)


def _home_shunt(person):
    spo2 = _get(person, "home_spo2")
    if spo2 is None:
        return None
    return fit_shunt_fraction(spo2, altitude_m=float(_get(person, "home_altitude_m", default=0.0)),
                              age_y=float(_get(person, "age_y", default=DEFAULT_AGE_Y)),
                              hb_g_dl=_get(person, "hemoglobin_g_dl"))


def person_kwargs(person, *, sleeping=False) -> dict:
    """Keywords of :func:`altox.assess` for one person.

    Parameters
    ----------
    person : object or dict
        An :class:`altox.evaluation.evaluate.Person`, an :class:`altox.plan.profile.Member` or
        :class:`~altox.plan.profile.Occupant`, or a dict with the same names: ``age_y``,
        ``hemoglobin_g_dl``, ``acetazolamide``, ``hvr``, ``home_spo2``, ``home_altitude_m``.
        Missing values take the reference adult's (age 40, Hb 14.5 g/dL, typical response).
    sleeping : bool or array of bool
        Asleep (lower chemoreflex drive, ``sleep.drive_scale``). An array gives an array.

    Returns
    -------
    dict
        ``age_y``, ``hb_g_dl``, ``hypoxic_gain_scale``, ``drive_scale``,
        ``hco3_offset_mmol_l``, and ``shunt_fraction`` only when fitted to a home SpO2.

    Examples
    --------
    >>> person_kwargs({"age_y": 63.0, "acetazolamide": True})["hco3_offset_mmol_l"]
    -4.0
    """
    from altox.physiology.coefficients import model_coefficients

    hb = _get(person, "hemoglobin_g_dl", default=model_coefficients()["blood"]["hemoglobin_g_dl"]["value"])
    out = {
        "age_y": float(_get(person, "age_y", default=DEFAULT_AGE_Y)),
        "hb_g_dl": float(hb),
        "hypoxic_gain_scale": hvr_gain_scale(_get(person, "hvr")),
        "drive_scale": np.where(np.asarray(sleeping, dtype=bool), _value("sleep", "drive_scale"), 1.0),
        "hco3_offset_mmol_l": _value("acetazolamide", "hco3_offset_mmol_l") if _get(person, "acetazolamide") else 0.0,
    }
    if np.ndim(out["drive_scale"]) == 0:
        out["drive_scale"] = float(out["drive_scale"])
    qs = _home_shunt(person)
    if qs is not None:
        out["shunt_fraction"] = float(qs)
    return out


def people_kwargs(people, sleeping=None) -> dict:
    """Keywords of :func:`altox.assess` for several people at once, shaped (people, 1).

    Broadcasts against arrays shaped (people, samples) as :func:`altox.evaluation.evaluate.evaluate_plan`
    builds them. ``sleeping`` (shape (samples,)) gives ``drive_scale`` shaped (1, samples).
    ``shunt_fraction`` is always present: fitted where a home SpO2 is known, else the age default.
    """
    from altox.physiology.gas_exchange import shunt_fraction_for_age

    each = [person_kwargs(p) for p in people]
    col = lambda key: np.array([e[key] for e in each], dtype=float)[:, None]  # noqa: E731
    qs = np.array([e.get("shunt_fraction", float(shunt_fraction_for_age(e["age_y"]))) for e in each])[:, None]
    drive = 1.0 if sleeping is None else np.where(np.asarray(sleeping, dtype=bool),
                                                   _value("sleep", "drive_scale"), 1.0)[None, :]
    return {"age_y": col("age_y"), "hb_g_dl": col("hb_g_dl"), "hypoxic_gain_scale": col("hypoxic_gain_scale"),
            "hco3_offset_mmol_l": col("hco3_offset_mmol_l"), "shunt_fraction": qs, "drive_scale": drive}


# -- fitness to fly ------------------------------------------------------------------------------
def dillard_pao2_altitude_mmhg(pao2_ground_mmhg, fev1_pct_predicted):
    """PaO2 at 8,000 ft predicted from ground PaO2 and FEV1 (Dillard et al. 1989).

    ``PaO2Alt = 0.453 PaO2G + 0.386 FEV1%pred + 2.440`` (mmHg), fitted in 18 men with severe
    COPD in a hypobaric chamber at 2,438 m (8,000 ft), r = 0.847 [Dillard1989]_.

    Parameters
    ----------
    pao2_ground_mmhg : numeric
        Arterial PO2 at (or near) sea level, breathing air. [mmHg]
    fev1_pct_predicted : numeric
        FEV1 in percent of predicted (31 % for 0.31). [%]

    Returns
    -------
    numeric
        Predicted PaO2 at 8,000 ft. [mmHg]

    Examples
    --------
    The cohort's means (72.4 mmHg, 31 %) give 47.2 mmHg; measured 47.4 +- 6.

    >>> round(float(dillard_pao2_altitude_mmhg(72.4, 31.0)), 1)
    47.2
    """
    c = coefficients()["fitness_to_fly"]["dillard_1989"]
    g = np.asarray(pao2_ground_mmhg, dtype=float)
    f = np.asarray(fev1_pct_predicted, dtype=float)
    out = c["pao2_ground_coefficient"] * g + c["fev1_pct_coefficient"] * f + c["intercept_mmhg"]
    return out if np.ndim(out) else float(out)


def _bts(pao2_mmhg=None, spo2_pct=None) -> dict:
    from altox.units import MMHG_PER_KPA

    b = coefficients()["fitness_to_fly"]["bts_2022"]
    pao2_limit = b["pao2_kpa"] * MMHG_PER_KPA
    checks = {}
    if pao2_mmhg is not None:
        checks["pao2"] = {"value_mmhg": float(pao2_mmhg), "value_kpa": float(pao2_mmhg) / MMHG_PER_KPA,
                          "threshold_kpa": b["pao2_kpa"], "meets": bool(pao2_mmhg >= pao2_limit)}
    if spo2_pct is not None:
        checks["spo2"] = {"value_pct": float(spo2_pct), "threshold_pct": b["spo2_pct"],
                          "meets": bool(spo2_pct >= b["spo2_pct"])}
    met = all(c["meets"] for c in checks.values()) if checks else None
    return {"checks": checks, "meets_thresholds": met,
            "reading": (None if met is None else
                        f"at or above the hypoxic challenge thresholds (PaO2 {b['pao2_kpa']:g} kPa, SpO2 "
                        f"{b['spo2_pct']:g} %)" if met else
                        "below a hypoxic challenge threshold (on a test, the statement then advises a "
                        "repeat test with oxygen)"),
            "source": b["citation"].strip(), "applies_to": b["applies_to"]}


def fitness_to_fly(*, pao2_ground_mmhg=None, fev1_fraction=None, spo2_ground=None,
                   cabin_altitude_ft=8000.0, ground_elevation_ft=0.0, age_y=None,
                   hb_g_dl=None, risk_factors=None) -> dict:
    """Predicted PaO2 and SpO2 at a cabin altitude for a passenger with lung disease, against BTS 2022.

    Two estimates, each compared with the thresholds the BTS clinical statement applies to a
    hypoxic challenge test (PaO2 >= 6.6 kPa and SpO2 >= 85 %: in-flight oxygen not required)
    [Coker2022]_:

    * ``regression``: Dillard's equation [Dillard1989]_ (needs ground PaO2 and FEV1); it was
      fitted at 8,000 ft only, so for another cabin altitude it is reported with a warning;
    * ``model``: altox's chain with the person's venous admixture fitted to the ground PaO2
      (or, failing that, the ground SpO2) at the ground elevation, then evaluated on acute
      exposure at the cabin altitude (ISA pressure altitude).

    Parameters
    ----------
    pao2_ground_mmhg : float, optional
        Arterial PO2 on the ground breathing air. [mmHg]
    fev1_fraction : float, optional
        FEV1 as a fraction of predicted (0.45 for 45 %).
    spo2_ground : float, optional
        SpO2 on the ground breathing air, fraction 0-1.
    cabin_altitude_ft : float
        Cabin pressure altitude. [ft]
    ground_elevation_ft : float
        Pressure altitude where the ground values were measured. [ft]
    age_y, hb_g_dl : float, optional
        Not given: the reference adult's (age 40, Hb 14.5 g/dL), listed in ``defaults_used``.
        An age below 16 takes the paediatric path.
    risk_factors : iterable of str, optional
        The additional risk factors of the BTS screening table present (keys of
        ``fitness_to_fly.bts_2011_screening.risk_factors``); an empty list means all were
        checked and none is present; ``None`` means not stated (unknown).  An FEV1 below 50 %
        of predicted counts whatever is passed.

    Returns
    -------
    dict
        ``verdict`` (``level``: 'not required', 'not concluded', 'hypoxic challenge test' or
        'in-flight oxygen'; ``text``, ``reasons``, ``path``, ``must_know``), ``steps`` (each path
        applied, with its source), ``regression`` and ``model`` (each with ``pao2_mmhg``,
        ``pao2_kpa``, ``sao2_pct`` where known and ``bts``; the model is context only),
        ``defaults_used``, ``notes`` and ``caution``.

    Notes
    -----
    One verdict, the most cautious of the published paths that apply: the ground-SpO2 screening
    table of the BTS 2011 recommendations (risk factors not stated count as unknown, so a
    borderline SpO2 never gives "not required"), and Dillard's regression at the cabin altitude
    it was derived for (8,000 ft) against the BTS 2022 hypoxic challenge thresholds.  A
    regression estimate alone never gives "not required"; nor does the chain.

    Raises
    ------
    FactorError
        No ground PaO2 or SpO2, values out of range, or a ground value the model cannot reach.
    """
    from altox.physiology.atmosphere import pressure_altitude_ft_to_mmhg
    from altox.physiology.chain import assess
    from altox.units import MMHG_PER_KPA

    if pao2_ground_mmhg is None and spo2_ground is None:
        raise FactorError("fitness to fly needs a ground PaO2 or a ground SpO2 breathing air.",
                          field="ground_pao2", expected="a ground PaO2 (e.g. 62 mmHg) or SpO2 (e.g. 91 %)")
    if pao2_ground_mmhg is not None and not 20.0 <= pao2_ground_mmhg <= 150.0:
        raise FactorError(f"ground PaO2 {pao2_ground_mmhg:g} mmHg is outside 20-150 mmHg (breathing air).",
                          field="ground_pao2", value=pao2_ground_mmhg, expected="20 to 150 mmHg")
    if fev1_fraction is not None and not 0.0 < fev1_fraction <= 1.5:
        raise FactorError(f"FEV1 {fev1_fraction:g} is not a fraction of predicted in (0, 1.5].",
                          field="fev1", value=fev1_fraction, expected="a fraction such as 0.45")
    age_given = age_y is not None
    age_y = float(age_y) if age_given else DEFAULT_AGE_Y
    if not 0.0 < age_y <= 110.0:
        raise FactorError(f"age {age_y:g} years is outside 0-110.", field="age", value=age_y,
                          expected="0 to 110 years")
    if not -2000.0 <= cabin_altitude_ft <= 20000.0:
        raise FactorError(f"cabin altitude {cabin_altitude_ft:g} ft is outside -2,000 to 20,000 ft.",
                          field="cabin_altitude", value=cabin_altitude_ft, expected="-2,000 to 20,000 ft")
    dill = coefficients()["fitness_to_fly"]["dillard_1989"]
    notes = []
    out = {"cabin_altitude_ft": float(cabin_altitude_ft), "ground_elevation_ft": float(ground_elevation_ft)}
    if pao2_ground_mmhg is not None and fev1_fraction is not None:
        p = dillard_pao2_altitude_mmhg(pao2_ground_mmhg, 100.0 * fev1_fraction)
        out["regression"] = {"method": "Dillard 1989", "pao2_mmhg": p, "pao2_kpa": p / MMHG_PER_KPA,
                             "valid_at_ft": dill["cabin_altitude_ft"], "bts": _bts(pao2_mmhg=p),
                             "source": dill["citation"].strip()}
        if abs(cabin_altitude_ft - dill["cabin_altitude_ft"]) > 500.0:
            notes.append(f"Dillard's regression was fitted at {dill['cabin_altitude_ft']:,.0f} ft; "
                         f"its value is for that altitude, not {cabin_altitude_ft:,.0f} ft.")
        if abs(ground_elevation_ft) > 1000.0:
            notes.append(f"Dillard's ground values were measured near sea level; these were taken at "
                         f"{ground_elevation_ft:,.0f} ft.")
        if fev1_fraction > 0.6:
            notes.append("Dillard's cohort had severe COPD (FEV1 31 +- 10 % predicted); this FEV1 "
                         "lies outside it.")
    else:
        out["regression"] = None
        notes.append("No regression estimate: it needs both a ground PaO2 and an FEV1.")
    pb_ground = float(pressure_altitude_ft_to_mmhg(ground_elevation_ft))
    pb_cabin = float(pressure_altitude_ft_to_mmhg(cabin_altitude_ft))
    if pao2_ground_mmhg is not None:
        qs = _fit_at_pressure(pao2_ground_mmhg, "pao2", pb_ground, age_y, hb_g_dl)
    else:
        qs = _fit_at_pressure(spo2_ground, "sao2", pb_ground, age_y, hb_g_dl)
    r = assess(pb_mmhg=pb_cabin, atmosphere="isa", f_ventilatory=0.0, f_renal=0.0, age_y=age_y,
               hb_g_dl=hb_g_dl, shunt_fraction=qs)
    out["model"] = {"method": "altox chain (venous admixture fitted to the ground value, acute exposure)",
                    "shunt_fraction": qs, "pao2_mmhg": r["arterial_po2_mmhg"],
                    "pao2_kpa": r["arterial_po2_mmhg"] / MMHG_PER_KPA, "sao2_pct": r["sao2_pct"],
                    "bts": _bts(pao2_mmhg=r["arterial_po2_mmhg"], spo2_pct=r["sao2_pct"])}
    out["model"]["role"] = "context only: never the basis of the verdict"
    out["defaults_used"] = ([] if age_given else [f"age {DEFAULT_AGE_Y:g} years (default)"]) + (
        [] if hb_g_dl is not None else ["hemoglobin 14.5 g/dL (default)"])
    out.update(_verdict(pao2_ground_mmhg, fev1_fraction, spo2_ground, age_y if age_given else None,
                        risk_factors, out["regression"], ground_elevation_ft))
    out["notes"] = notes + ["The BTS thresholds apply to a hypoxic challenge test; these are "
                            "predictions, compared with them for guidance only."]
    out["caution"] = ("Guidance only: not a hypoxic challenge test and not a clearance to fly. The "
                      "passenger's respiratory physician and the airline's medical service decide.")
    return out


def default_cabin_ft() -> float:
    """The cabin altitude assumed without a plan: 8,000 ft, the maximum in normal operation (14 CFR 25.841)."""
    return float(coefficients()["fitness_to_fly"]["cabin_default_ft"]["value"])


_LEVELS = ("not required", "not concluded", "hypoxic challenge test", "in-flight oxygen")


def _verdict(pao2_mmhg, fev1_fraction, spo2_ground, age_y, risk_factors, regression,
             ground_elevation_ft=0.0) -> dict:
    """One verdict from the published paths that apply (see :func:`fitness_to_fly`)."""
    from altox.units import MMHG_PER_KPA

    ftf = coefficients()["fitness_to_fly"]
    scr, ped, bts = ftf["bts_2011_screening"], ftf["paediatric"], ftf["bts_2022"]
    cite = lambda c: " ".join(c.split()).rstrip(".")  # noqa: E731
    steps, must_know = [], []
    if age_y is not None and age_y < ped["child_below_age_y"]:
        steps.append({"path": "paediatric", "level": "hypoxic challenge test",
                      "finding": (f"age {age_y:g}: the adult screening table and regressions do not apply; a "
                                  "paediatric respiratory assessment decides, with a hypoxic challenge test "
                                  f"(in-flight oxygen if SpO2 falls below {ped['hct_spo2_pct']:.0f} % on 15 % "
                                  f"oxygen). {bts['children_note']}"),
                      "source": cite(ped["citation"])})
        return _combine(steps, must_know)
    if age_y is None:
        must_know.append("age (a child takes the paediatric path)")
    if spo2_ground is not None:
        spo2 = 100.0 * float(spo2_ground)
        names = scr["risk_factors"]
        present = set(risk_factors or ())
        unknown_keys = [] if risk_factors is not None else [k for k in names if k != "fev1_below_50"]
        if fev1_fraction is not None:
            if fev1_fraction < scr["fev1_risk_fraction"]:
                present.add("fev1_below_50")
        elif risk_factors is None:
            unknown_keys.insert(1, "fev1_below_50")
        src = cite(scr["citation"])
        if spo2 > scr["no_oxygen_above_pct"]:
            step = ("not required", f"ground SpO2 {spo2:.0f} % is above {scr['no_oxygen_above_pct']:.0f} %: "
                    "in-flight oxygen not required by the screening")
        elif spo2 < scr["borderline_from_pct"]:
            step = ("in-flight oxygen", f"ground SpO2 {spo2:.0f} % is below {scr['borderline_from_pct']:.0f} %: "
                    "in-flight oxygen")
        elif present:
            step = ("hypoxic challenge test",
                    f"ground SpO2 {spo2:.0f} % is in the {scr['borderline_from_pct']:.0f}-"
                    f"{scr['no_oxygen_above_pct']:.0f} % band with a risk factor ("
                    + ", ".join(names[k] for k in sorted(present) if k in names) + "): hypoxic challenge test")
        elif unknown_keys:
            step = ("not concluded",
                    f"ground SpO2 {spo2:.0f} % is in the {scr['borderline_from_pct']:.0f}-"
                    f"{scr['no_oxygen_above_pct']:.0f} % band and the risk factors are not stated: a hypoxic "
                    "challenge test unless every one of them is excluded")
            must_know += [names[k] for k in unknown_keys]
        else:
            step = ("not required", f"ground SpO2 {spo2:.0f} % is in the {scr['borderline_from_pct']:.0f}-"
                    f"{scr['no_oxygen_above_pct']:.0f} % band with no risk factor: in-flight oxygen not required")
        finding = step[1]
        if abs(ground_elevation_ft) > 1000.0:
            finding += (f" (measured at {ground_elevation_ft:,.0f} ft; the table is for sea-level values, and a "
                        "reading taken higher is lower, so this errs on the cautious side)")
        steps.append({"path": "ground SpO2 screening", "level": step[0], "finding": finding, "source": src})
    if regression:
        p = regression["pao2_mmhg"]
        kpa = p / MMHG_PER_KPA
        below = kpa < bts["pao2_kpa"]
        steps.append({"path": f"regression on ground PaO2 and FEV1 at {regression['valid_at_ft']:,.0f} ft",
                      "level": "in-flight oxygen" if below else "hypoxic challenge test",
                      "finding": (f"predicted PaO2 at {regression['valid_at_ft']:,.0f} ft {p:.1f} mmHg "
                                  f"({kpa:.2f} kPa) is {'below' if below else 'at or above'} "
                                  f"{bts['pao2_kpa']:g} kPa: "
                                  + ("in-flight oxygen, its flow set by a hypoxic challenge test with oxygen"
                                     if below else "a prediction, not a test; a hypoxic challenge test "
                                     "confirms")),
                      "source": cite(regression["source"]) + "; thresholds: " + cite(bts["citation"])})
    elif pao2_mmhg is not None and spo2_ground is None:
        must_know.append("FEV1 (for the regression) or ground SpO2 (for the screening)")
    if not steps:
        steps.append({"path": "none", "level": "not concluded",
                      "finding": "no published path applies to the values given", "source": ""})
    return _combine(steps, must_know)


def _combine(steps, must_know) -> dict:
    level = max((s["level"] for s in steps), key=_LEVELS.index)
    texts = {"not required": "IN-FLIGHT OXYGEN NOT REQUIRED by the screening",
             "not concluded": "NOT CONCLUDED: hypoxic challenge test unless the facts below rule it out",
             "hypoxic challenge test": "HYPOXIC CHALLENGE TEST before flying",
             "in-flight oxygen": "IN-FLIGHT OXYGEN"}
    deciding = [s for s in steps if s["level"] == level]
    return {"verdict": {"level": level, "text": texts[level], "path": " + ".join(s["path"] for s in steps),
                        "reasons": [s["finding"] for s in deciding],
                        "sources": list(dict.fromkeys(s["source"] for s in deciding if s["source"])),
                        "must_know": list(must_know)},
            "steps": steps}


def _fit_at_pressure(target, kind, pb_mmhg, age_y, hb_g_dl):
    """Shunt fraction fitted to a ground value measured at a pressure (ISA), awake, acclimatized there."""
    from altox.physiology.atmosphere import altitude_for_pressure

    alt = float(altitude_for_pressure(pb_mmhg, "isa"))
    return float(fit_shunt_fraction(target, altitude_m=alt, atmosphere="isa", target_kind=kind,
                                    age_y=age_y, hb_g_dl=hb_g_dl))


def occupant_fitness_to_fly(occupant, cabin_altitude_ft, ground_elevation_ft=0.0) -> dict:
    """:func:`fitness_to_fly` for an :class:`altox.plan.profile.Occupant` (uses its ground values)."""
    res = fitness_to_fly(pao2_ground_mmhg=occupant.ground_pao2_mmhg, fev1_fraction=occupant.fev1_fraction,
                         spo2_ground=occupant.ground_spo2, cabin_altitude_ft=cabin_altitude_ft,
                         ground_elevation_ft=ground_elevation_ft,
                         age_y=occupant.age_y, hb_g_dl=occupant.hemoglobin_g_dl,
                         risk_factors=getattr(occupant, "risk_factors", None))
    res["name"] = occupant.name
    res["lung_disease"] = occupant.lung_disease
    return res
