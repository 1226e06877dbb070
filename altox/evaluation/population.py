"""The expected range: a Monte Carlo ensemble of people over a plan's timeline.

People differ in their hypoxic ventilatory response, venous admixture (alveolar-arterial
difference), hemoglobin-oxygen affinity (P50) and, when not given, hemoglobin.  altox draws an
ensemble of ``n`` members for every person from those spreads (``altox/data/individual.yaml``,
``population``), with a fixed seed and common random numbers (member ``i`` has the same
standard-normal deviates for every person), runs the vectorised chain over
people x members x samples, and reports percentiles (default 5th, 50th, 95th) of SaO2 per
sample and per leg, beside the central value (the person's own factors, no spread).

Memory is bounded by evaluating the timeline in chunks of samples (every chunk holds all
members, so the percentiles are exact); a callback reports progress after each chunk.  The full
chain is solved at the timeline's knots and every sample in between is interpolated in time
(:mod:`altox.evaluation.sampling`, with its error bound).  Sleeping
samples use the sleep drive (``sleep.drive_scale``).  Values are on air, like
:func:`altox.evaluation.evaluate.evaluate_plan`: planned oxygen is not applied.

The spread of the hypoxic response is calibrated so that the ensemble SD of SpO2 at 4,250 m
matches Botella de Maglia et al. (Med Intensiva 2008;32:277-281); the other spreads are from
published SDs or memory (see the data file).  ``docs/individual.md`` lists the residuals
against the rows not used.
"""

from __future__ import annotations

import numpy as np

from altox.errors import OutOfRangeError
from altox.evaluation.individual import _get, _home_shunt, _norm_cdf, _norm_ppf, _value, coefficients, hvr_gain_scale

__all__ = ["expected_range", "point_range", "draw_factors", "DEFAULT_SEED", "DEFAULT_PERCENTILES",
           "DEFAULT_MEMBERS", "MAX_CHUNK_ELEMENTS", "MAX_ENSEMBLE_SOLVES", "check_ensemble_size"]

from altox.evaluation.defaults import ENSEMBLE_MEMBERS as DEFAULT_MEMBERS, ENSEMBLE_SEED as DEFAULT_SEED  # noqa: E402
DEFAULT_PERCENTILES = (5.0, 50.0, 95.0)
MAX_CHUNK_ELEMENTS = 400_000   # people x members x samples evaluated at once
#: people (with the reference adult) x members x knots solved for one expected range: the knot results
#: alone take 8 bytes each (160 MB at the limit), and the solve about 40 s on a 2-core machine
MAX_ENSEMBLE_SOLVES = 20_000_000
_HB_LIMITS_G_DL = (7.0, 22.0)
_TERTILES = {"low": 0, "normal": 1, "high": 2}


def _check_args(n, percentiles):
    if not isinstance(n, (int, np.integer)) or isinstance(n, bool) or not 10 <= n <= 1_000_000:
        raise OutOfRangeError(f"ensemble size {n!r} is not a whole number from 10 to 1,000,000.",
                              field="n", value=n, expected="10 to 1,000,000 members")
    p = np.asarray(percentiles, dtype=float)
    if p.ndim != 1 or p.size == 0 or np.any(~np.isfinite(p) | (p < 0) | (p > 100)):
        raise OutOfRangeError(f"percentiles {percentiles!r} must be numbers from 0 to 100.",
                              field="percentiles", value=percentiles, expected="e.g. (5, 50, 95)")
    return p


def _knots_of(tl, gas=None):
    """The knots of a timeline for the expected range: every change of pressure, drive (sleep) or
    inspired gas, at most DEFAULT_KNOT_SPACING_H apart."""
    from altox.evaluation.sampling import DEFAULT_KNOT_SPACING_H, Knots

    drive = np.where(tl.sleeping, _value("sleep", "drive_scale"), 1.0)
    pieces = (np.asarray(tl.pb_mmhg, dtype=float), drive) + (() if gas is None else (gas,))
    return Knots(tl.time_h, pieces, DEFAULT_KNOT_SPACING_H)


def check_ensemble_size(plan, n, *, field: str = "--members", timeline=None, people=None, gas=None) -> None:
    """Refuse, before any solving, an expected range larger than :data:`MAX_ENSEMBLE_SOLVES`.

    The work is people (with the reference adult) x ``n`` members x the timeline's knots; the
    message names the largest ``n`` that fits.
    """
    from altox.plan.timeline import expand

    if not n:
        return
    tl = expand(plan) if timeline is None else timeline
    if people is None:
        people = 1 + len(plan.party if plan.kind == "expedition" else plan.aboard)
    knots = len(_knots_of(tl, gas))
    solves = people * int(n) * knots
    if solves > MAX_ENSEMBLE_SOLVES:
        fits = MAX_ENSEMBLE_SOLVES // (people * knots)
        if fits < 10:
            raise OutOfRangeError(
                f"{field}: {people} people over {knots:,} time points is too large for an expected range "
                f"(even 10 simulated people each is over the limit of {MAX_ENSEMBLE_SOLVES:,} model solves); "
                "expected a shorter plan or fewer people" + (", or --members 0." if field == "--members" else "."),
                field=field, value=n, expected="a smaller plan")
        raise OutOfRangeError(
            f"{field}: {n:,} simulated people for each of {people} people over {knots:,} time points is "
            f"{solves:,} model solves, over the limit of {MAX_ENSEMBLE_SOLVES:,}; expected {field} "
            f"{fits:,} or fewer for this plan" + (" (0 skips the range)." if field == "--members" else "."),
            field=field, value=n, expected=f"at most {fits:,}")


def _deviates(n, seed):
    """Standard-normal deviates, shape (4, n): HVR, shunt, P50, Hb. The same for every person."""
    return np.random.default_rng(seed).standard_normal((4, n))


def draw_factors(person, z):
    """Ensemble factors for one person from standard-normal deviates ``z`` (shape (4, n)).

    Parameters
    ----------
    person : object or dict
        As for :func:`altox.evaluation.individual.person_kwargs`.
    z : ndarray, shape (4, n)

    Returns
    -------
    (central, members) : (dict, dict)
        Keywords of :func:`altox.assess` without spread (scalars) and with it (arrays (n,)).
        Keys: ``age_y``, ``hb_g_dl``, ``hypoxic_gain_scale``, ``hco3_offset_mmol_l``,
        ``shunt_fraction``, ``p50_mmhg``.
    """
    from altox.physiology.blood import STANDARD_P50_MMHG
    from altox.physiology.gas_exchange import shunt_fraction_for_age
    from altox.physiology.coefficients import model_coefficients

    pop = coefficients()["population"]
    sd_g = pop["hypoxic_gain_log_sd"]["value"]
    age = float(_get(person, "age_y", default=40.0))
    hb_given = _get(person, "hemoglobin_g_dl")
    hb0 = float(hb_given if hb_given is not None else model_coefficients()["blood"]["hemoglobin_g_dl"]["value"])
    qs_fit = _home_shunt(person)
    qs0 = float(qs_fit if qs_fit is not None else shunt_fraction_for_age(age))
    cat = _get(person, "hvr")
    acz = _value("acetazolamide", "hco3_offset_mmol_l") if _get(person, "acetazolamide") else 0.0
    zg = z[0]
    if cat is not None:
        k = _TERTILES[cat]
        zg = _norm_ppf((k + _norm_cdf(zg)) / 3.0)  # the same member rank, inside that third
    n = z.shape[1]
    central = {"age_y": age, "hb_g_dl": hb0, "hypoxic_gain_scale": hvr_gain_scale(cat),
               "hco3_offset_mmol_l": acz, "shunt_fraction": qs0, "p50_mmhg": STANDARD_P50_MMHG}
    members = {
        "age_y": np.full(n, age),
        "hb_g_dl": (np.full(n, hb0) if hb_given is not None else
                    np.clip(hb0 + pop["hemoglobin_sd_g_dl"]["value"] * z[3], *_HB_LIMITS_G_DL)),
        "hypoxic_gain_scale": np.exp(sd_g * zg),
        "hco3_offset_mmol_l": np.full(n, acz),
        "shunt_fraction": np.clip(qs0 * np.exp(pop["shunt_fraction_log_sd"]["value"] * z[1]), 0.0,
                                  _value("lung", "shunt_fraction_max")),
        "p50_mmhg": STANDARD_P50_MMHG + pop["p50_sd_mmhg"]["value"] * z[2],
    }
    return central, members


def point_range(altitude_m, *, person=None, days=0.0, sleeping=False, atmosphere="mountain",
                n=DEFAULT_MEMBERS, seed=DEFAULT_SEED, percentiles=DEFAULT_PERCENTILES) -> dict:
    """Central value and population percentiles of SaO2 at places, for one person.

    Parameters
    ----------
    altitude_m : numeric
        Altitudes (any shape). [m]
    person : object or dict, optional
        Individual factors (:func:`altox.evaluation.individual.person_kwargs`); default the reference adult
        drawn from the whole population.
    days : numeric
        Days at that altitude (acclimatization), broadcast with ``altitude_m``.
    sleeping : bool
    atmosphere : {'mountain', 'isa'}
    n, seed, percentiles
        Ensemble size, seed and percentiles (0-100).

    Returns
    -------
    dict
        ``central_sao2_pct`` (shape of ``altitude_m``), ``percentiles``,
        ``sao2_pct_percentiles`` (shape (len(percentiles),) + that shape), ``mean_sao2_pct``,
        ``sd_sao2_pct``.
    """
    from altox.physiology.chain import assess

    p = _check_args(n, percentiles)
    alt = np.asarray(altitude_m, dtype=float)
    central, members = draw_factors(person or {}, _deviates(n, seed))
    drive = _value("sleep", "drive_scale") if sleeping else 1.0
    c = assess(alt, atmosphere=atmosphere, days=days, drive_scale=drive, **central)
    shaped = {k: v.reshape((n,) + (1,) * alt.ndim) for k, v in members.items()}
    r = assess(alt[None, ...], atmosphere=atmosphere, days=days, drive_scale=drive, **shaped)
    s = np.asarray(r["sao2_pct"])
    return {"central_sao2_pct": np.asarray(c["sao2_pct"]), "percentiles": p.tolist(),
            "sao2_pct_percentiles": np.percentile(s, p, axis=0), "mean_sao2_pct": s.mean(axis=0),
            "sd_sao2_pct": s.std(axis=0), "n": int(n), "seed": seed}


def _people_of(plan, result):
    """Plan people (Member/Occupant objects, which carry every factor) in the result's order.

    People aboard a flight with a ground SpO2 carry it as the SpO2 'at home' (the departure field),
    so that their venous admixture is fitted to it as in :func:`altox.evaluation.evaluate.evaluate_plan`.
    """
    from types import SimpleNamespace

    source = list(plan.party if plan.kind == "expedition" else plan.aboard)
    if plan.kind == "flight":
        ground_m = float(plan.departure_elevation_m)
        source = [SimpleNamespace(name=o.name, role=o.role, age_y=o.age_y, hemoglobin_g_dl=o.hemoglobin_g_dl,
                                  home_spo2=o.ground_spo2, home_altitude_m=ground_m if o.ground_spo2 else None)
                  for o in source]
    if result is None:
        return source
    by_name = {m.name: m for m in source}
    return [by_name.get(p.name, p) for p in result.people]


def expected_range(plan, result=None, *, n=DEFAULT_MEMBERS, seed=DEFAULT_SEED,
                   percentiles=DEFAULT_PERCENTILES, progress=None,
                   max_chunk_elements=MAX_CHUNK_ELEMENTS, fio2=None) -> dict:
    """Expected SaO2 range of every person along a plan, by Monte Carlo.

    Parameters
    ----------
    plan : ExpeditionPlan or FlightPlan
        A loaded plan (:func:`altox.plan.profile.load_plan`).
    result : PlanResult, optional
        :func:`altox.evaluation.evaluate.evaluate_plan`'s result; only its list of people is used (so a
        ``people_override`` carries over). Default: the plan's party or people aboard.
    n : int
        Ensemble members per person (10 to 1,000,000).
    seed : int
        Seed of the random generator; the same seed gives the same numbers.
    percentiles : sequence of float
        Percentiles to report, 0-100.
    progress : callable, optional
        ``progress(done, total)`` after each chunk, in units of work (knots solved, then samples
        summarised); ``done == total`` at the end.
    max_chunk_elements : int
        Upper bound of people x members x samples evaluated at once (memory).
    fio2 : array, optional
        Inspired O2 fraction of each timeline sample (planned oxygen); default air.  It also
        sets the acclimatization stimulus (less on oxygen).

    Returns
    -------
    dict
        ``n``, ``seed``, ``percentiles``; ``time_h``, ``duration_h``, ``leg`` (1-based),
        ``altitude_m``, ``sleeping`` per sample; ``people``: a list with, for the reference adult (first, the
        whole population) and each person, ``name``, ``role``, ``factors`` (the central
        keywords), ``central_sao2_pct`` (samples), ``sao2_pct_percentiles`` (percentiles x
        samples) and ``legs`` (per leg: at the central value's lowest sample, the central value,
        the percentiles and whether asleep; and the lowest of each percentile over the leg);
        ``notes``.

    Raises
    ------
    OutOfRangeError
        Bad ``n`` or ``percentiles``.
    """
    from altox.physiology.atmosphere import barometric_pressure
    from altox.physiology.acclimatization import acclimatization_history
    from altox.physiology.chain import assess
    from altox.physiology.gas_exchange import inspired_po2
    from altox.plan.timeline import expand

    p = _check_args(n, percentiles)
    tl = expand(plan)
    people = [None] + _people_of(plan, result)
    names = ["reference adult"] + [x.name for x in people[1:]]
    roles = ["reference"] + [(_get(x, "role") or "member") for x in people[1:]]
    z = _deviates(n, seed)
    drawn = [draw_factors(x or {}, z) for x in people]
    n_people, n_samples = len(people), len(tl)
    pb = np.asarray(tl.pb_mmhg, dtype=float)
    from altox.physiology.gas_exchange import AIR_FIO2

    gas = np.full(n_samples, AIR_FIO2) if fio2 is None else np.broadcast_to(np.asarray(fio2, dtype=float), (n_samples,))
    check_ensemble_size(plan, n, field="n", timeline=tl, people=n_people, gas=gas)
    if plan.kind == "expedition":
        home = np.array([min(max(float(_get(x, "home_altitude_m", default=0.0) or 0.0), -500.0), 9000.0)
                         if x is not None else 0.0 for x in people])
        home_pio2 = np.asarray(inspired_po2(np.asarray(barometric_pressure(home, "mountain"))))
        pio2 = np.broadcast_to(np.asarray(inspired_po2(pb, gas)), (n_people, n_samples))
        f_v, f_r = acclimatization_history(pio2, tl.duration_h, home_pio2)
        atmosphere = "mountain"
    else:
        f_v = f_r = np.zeros((n_people, n_samples))
        atmosphere = "isa"
    drive = np.where(tl.sleeping, _value("sleep", "drive_scale"), 1.0)
    alt = np.asarray(tl.altitude_m, dtype=float)
    gas_kw = {} if fio2 is None else {"fio2": gas}

    def col(dicts, key):
        return np.array([d[key] for d in dicts], dtype=float)[:, None]

    centrals = [d[0] for d in drawn]
    # the full solve at the knots of the timeline (segment ends, at most DEFAULT_KNOT_SPACING_H apart),
    # then every sample by interpolation in time (altox.evaluation.sampling), chunked to bound memory
    knots = _knots_of(tl, gas)
    k_index = knots.index
    n_knots = k_index.size
    cres = assess(np.broadcast_to(alt[k_index], (n_people, n_knots)),
                  pb_mmhg=np.broadcast_to(pb[k_index], (n_people, n_knots)), atmosphere=atmosphere,
                  f_ventilatory=f_v[:, k_index], f_renal=f_r[:, k_index], drive_scale=drive[None, k_index],
                  **{k: v[None, k_index] for k, v in gas_kw.items()},
                  **{k: col(centrals, k) for k in centrals[0]})
    central = knots.interpolate(np.asarray(cres["sao2_pct"]))
    # where the central solve leaves the model (no steady state, alveolar PO2 clamped at zero, inspired
    # PO2 below the validated floor) the numbers are not a prediction: carried per sample and per leg
    # (altox.physiology.validity: acute exposure in the time-of-useful-consciousness regime counts too)
    from altox.physiology.validity import NO_STEADY_STATE, limits

    min_pio2 = limits()["min_inspired_po2_mmhg"]
    valid_k = np.asarray(cres["validity_status"]) < NO_STEADY_STATE
    valid = knots.interpolate_flag(valid_k, combine=np.logical_and)
    member_kw = {k: np.stack([d[1][k] for d in drawn])[:, :, None] for k in drawn[0][1]}  # (P, n, 1)
    total = n_knots + n_samples
    sao2_k = np.empty((n_people, n, n_knots))
    step = max(1, int(max_chunk_elements // max(1, n_people * n)))
    # awake and asleep knots in separate calls: each call then has one chemoreflex drive (and the
    # solver one tabulated first guess for it)
    asleep = tl.sleeping[k_index]
    done = 0
    for group in (np.flatnonzero(~asleep), np.flatnonzero(asleep)):
        for a in range(0, group.size, step):
            pos = group[a:a + step]
            ks = k_index[pos]
            r = assess(np.broadcast_to(alt[ks], (n_people, n, pos.size)),
                       pb_mmhg=np.broadcast_to(pb[ks], (n_people, n, pos.size)), atmosphere=atmosphere,
                       f_ventilatory=f_v[:, None, ks], f_renal=f_r[:, None, ks],
                       drive_scale=drive[None, None, ks], **member_kw,
                       **{k: v[None, None, ks] for k, v in gas_kw.items()})
            sao2_k[:, :, pos] = r["sao2_pct"]
            done += pos.size
            if progress is not None:
                progress(done, total)
    out = np.empty((len(p), n_people, n_samples))
    for a in range(0, n_samples, step):
        b = min(n_samples, a + step)
        out[:, :, a:b] = np.percentile(knots.interpolate(sao2_k, slice(a, b)), p, axis=1)
        if progress is not None:
            progress(n_knots + b, total)

    people_out = []
    for j in range(n_people):
        legs = []
        for i, label in enumerate(tl.leg_labels):
            idx = np.flatnonzero(tl.leg == i)
            if idx.size == 0:
                continue
            w = idx[np.argmin(central[j, idx])]
            legs.append({"leg": i + 1, "label": label, "time_h": float(tl.time_h[w]),
                         "sleeping": bool(tl.sleeping[w]), "central_sao2_pct": float(central[j, w]),
                         "model_valid": bool(np.all(valid[j, idx])),
                         "sao2_pct_percentiles": [float(v) for v in out[:, j, w]],
                         "lowest_sao2_pct_percentiles": [float(v) for v in out[:, j, idx].min(axis=1)]})
        people_out.append({"name": names[j], "role": roles[j], "factors": dict(centrals[j]),
                           "central_sao2_pct": central[j], "sao2_pct_percentiles": out[:, j, :],
                           "model_valid": valid[j], "legs": legs})
    notes = [f"Expected range: {n:,} simulated people per person (seed {seed}), percentiles "
             f"{', '.join(f'{v:g}' for v in p)} of SaO2; spreads of the hypoxic ventilatory response, "
             "venous admixture, P50 and (when not given) hemoglobin, see docs/individual.md.",
             "Sleeping samples use a lower chemoreflex drive; values are on air (planned oxygen not applied).",
             "A population range for planning, not a diagnosis: people outside it exist."]
    outside = sorted({leg["leg"] for person in people_out for leg in person["legs"] if not leg["model_valid"]})
    if outside:
        notes.insert(0, "OUTSIDE THE MODEL on leg(s) " + ", ".join(map(str, outside)) + ": breathing air there "
                     f"gives no resting steady state (acute exposure at 20,000 ft or more, where the time of useful "
                     f"consciousness is minutes, or an inspired PO2 below {min_pio2:.0f} mmHg); no range is "
                     "shown there (marked ?): it would not be a prediction.")
    return {"n": int(n), "seed": seed, "percentiles": p.tolist(), "time_h": np.asarray(tl.time_h),
            "duration_h": np.asarray(tl.duration_h), "leg": np.asarray(tl.leg) + 1,
            "altitude_m": np.asarray(tl.altitude_m),
            "sleeping": np.asarray(tl.sleeping), "people": people_out, "notes": notes}
