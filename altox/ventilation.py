"""Ventilation: the resting alveolar PCO2 that the chemoreflexes settle on, acute and over days of acclimatization.

The model joins three published relations and solves them together, vectorised:

* the alveolar ventilation equation: with CO2 output fixed, ``PACO2 = PACO2_0 m / x``
  where ``x`` is alveolar ventilation relative to sea level and ``m`` the metabolic rate
  relative to rest;
* the alveolar gas equation (Fenn, Rahn & Otis 1946) for PAO2 given PACO2;
* a chemoreflex controller ``x = c(pH) h(PaO2)``: a central drive that falls as arterial
  pH rises, ``c = max(0, 1 - Kc (pH - 7.40))``, times a peripheral hypoxic drive of
  Weil's hyperbolic form, ``h = 1 + A [phi(PaO2) - phi(PaO2,sl)]``, ``phi(P) = 1 /
  softplus(P - 32)`` [Weil1970]_.

Acclimatization enters through two fractions, each 0 (acute) to 1 (complete):
ventilatory acclimatization raises the hypoxic gain ``A`` up to ``M`` times its acute
value (carotid-body sensitization), and renal compensation lowers bicarbonate from the
acute to the chronic secondary response [AdrogueMadias2010]_, releasing the alkaline
brake on the central drive.  Both develop with first-order kinetics
(:func:`acclimatization_fractions`).  The coefficients are in ``altox/data/models.yaml``
with their basis; ``docs/validation.md`` compares the result with published alveolar
and arterial gases of lowlanders, acute and acclimatized, up to the highest summit.

References
----------
.. [Weil1970] Weil JV, Byrne-Quinn E, Sodal IE, et al. Hypoxic ventilatory drive in
   normal man. J Clin Invest 1970;49:1061-1072.
.. [AdrogueMadias2010] Adrogue HJ, Madias NE. Secondary responses to altered acid-base
   status: the rules of engagement. J Am Soc Nephrol 2010;21:920-923.
.. [West1983b] West JB, Hackett PH, Maret KH, et al. Pulmonary gas exchange on the summit
   of Mount Everest. J Appl Physiol 1983;55:678-687.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from . import blood
from .gas_exchange import AIR_FIO2, alveolar_gas_factor, alveolar_po2, inspired_po2
from .atmosphere import SEA_LEVEL_MMHG


@dataclass(frozen=True)
class VentilationParameters:
    """Coefficients of the ventilation model (see ``altox/data/models.yaml``)."""

    baseline_paco2_mmhg: float
    central_ph_gain: float
    hypoxic_gain_acute_mmhg: float
    hypoxic_asymptote_mmhg: float
    hypoxic_smoothing_mmhg: float
    acclimatized_gain_multiplier: float
    sensor_aado2_mmhg: float
    ventilatory_time_constant_days: float
    renal_time_constant_days: float
    deacclimatization_time_constant_days: float


@lru_cache(maxsize=1)
def model_coefficients() -> dict:
    """The model coefficient table, loaded once from ``altox/data/models.yaml``."""
    from importlib.resources import files

    import yaml

    return yaml.safe_load(files("altox").joinpath("data/models.yaml").read_text(encoding="utf-8"))


@lru_cache(maxsize=1)
def default_parameters() -> VentilationParameters:
    table = model_coefficients()
    values = {k: float(v["value"]) for k, v in table["ventilation"].items()}
    values.update({k: float(v["value"]) for k, v in table["acclimatization"].items()})
    return VentilationParameters(**values)


def acclimatization_fractions(days, params: VentilationParameters | None = None):
    """Ventilatory and renal acclimatization after ``days`` at a constant altitude.

    ``f = 1 - exp(-t / tau)`` for each, with the time constants of the model table
    (ventilatory about 3 days, renal about 1.5 days).

    Returns
    -------
    (f_ventilatory, f_renal) : tuple of numeric, each 0-1
    """
    p = params or default_parameters()
    t = np.maximum(np.asarray(days, dtype=float), 0.0)
    f_v = 1.0 - np.exp(-t / p.ventilatory_time_constant_days)
    f_r = 1.0 - np.exp(-t / p.renal_time_constant_days)
    return f_v, f_r


def _phi(po2, p: VentilationParameters):
    w = p.hypoxic_smoothing_mmhg
    return 1.0 / (w * np.logaddexp(0.0, (po2 - p.hypoxic_asymptote_mmhg) / w))


@lru_cache(maxsize=1)
def _sea_level_phi() -> float:
    p = default_parameters()
    pa_sl = float(alveolar_po2(SEA_LEVEL_MMHG, p.baseline_paco2_mmhg))
    return float(_phi(pa_sl - p.sensor_aado2_mmhg, p))


def equilibrium(pio2_mmhg, fio2=AIR_FIO2, rq=0.8, f_ventilatory=0.0, f_renal=0.0,
                metabolic_ratio=1.0, *, iterations: int = 60, params: VentilationParameters | None = None):
    """Solve the chemoreflex equilibrium for alveolar PCO2 at rest.

    Parameters
    ----------
    pio2_mmhg : numeric
        Inspired PO2. [mmHg]
    fio2 : numeric
        Inspired O2 fraction (for the alveolar gas equation).
    rq : numeric
        Respiratory exchange ratio.
    f_ventilatory, f_renal : numeric
        Acclimatization fractions, 0 (acute) to 1 (complete).
    metabolic_ratio : numeric
        CO2 output relative to rest (1 at rest).

    Returns
    -------
    dict of arrays
        ``paco2_mmhg`` (alveolar = arterial PCO2), ``ventilation_ratio`` (alveolar
        ventilation relative to sea level rest), ``hco3_mmol_l``, ``ph``,
        ``converged`` (bool).

    Notes
    -----
    ``g(u) = e^u - c h`` is increasing in ``u = ln x`` (more ventilation lowers PCO2 and
    raises PO2, both lowering the drive), so the root is unique.  It is bracketed in
    ``x`` from 0.3 to 40 and found by bisection on whole arrays, a fixed number of steps;
    60 halvings fix ``x`` to 1e-16 relative.
    """
    p = params or default_parameters()
    pio2, fio2_a, rq_a, fv, fr, met = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio)))
    factor = alveolar_gas_factor(fio2_a, rq_a)
    gain = p.hypoxic_gain_acute_mmhg * (1.0 + (p.acclimatized_gain_multiplier - 1.0) * fv)
    phi_sl = _sea_level_phi()

    def drive(u):
        x = np.exp(u)
        paco2 = p.baseline_paco2_mmhg * met / x
        pao2 = pio2 - paco2 * factor
        hco3 = blood.compensated_bicarbonate(paco2, fr)
        ph = blood.ph_from_bicarbonate(hco3, paco2)
        central = np.maximum(0.0, 1.0 - p.central_ph_gain * (ph - 7.40))
        hypoxic = 1.0 + gain * (_phi(pao2 - p.sensor_aado2_mmhg, p) - phi_sl)
        return x - central * np.maximum(hypoxic, 0.5), paco2, hco3, ph

    lo = np.full(pio2.shape, np.log(0.3))
    hi = np.full(pio2.shape, np.log(40.0))
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        g = drive(mid)[0]
        hi = np.where(g > 0.0, mid, hi)
        lo = np.where(g > 0.0, lo, mid)
    u = 0.5 * (lo + hi)
    g, paco2, hco3, ph = drive(u)
    converged = (hi - lo) < 1e-9
    return {"paco2_mmhg": paco2, "ventilation_ratio": np.exp(u), "hco3_mmol_l": hco3, "ph": ph,
            "converged": converged & (u < np.log(40.0) - 1e-6) & (u > np.log(0.3) + 1e-6)}


def inspired_and_equilibrium(pb_mmhg, fio2=AIR_FIO2, rq=0.8, body_temp_c=37.0, days=0.0):
    """Convenience: PIO2 from pressure, then :func:`equilibrium` after ``days`` at altitude."""
    f_v, f_r = acclimatization_fractions(days)
    return equilibrium(inspired_po2(pb_mmhg, fio2, body_temp_c), fio2, rq, f_v, f_r)


def acclimatization_history(pio2_mmhg, duration_h, initial_pio2_mmhg=None,
                            params: VentilationParameters | None = None):
    """Acclimatization fractions along a timeline, carrying time spent high and remembering descent.

    The hypoxic stimulus is the inspired-PO2 deficit below sea level, ``D = PIO2,sl - PIO2``.
    For each of the two processes (ventilatory, renal) altox keeps the deficit a person is
    acclimatized to, ``Dacc``, which moves toward the current deficit with first-order
    kinetics, exactly integrated over each sample: up with the process's time constant, down
    (after descent) with the slower de-acclimatization time constant.  The fraction at a sample
    is ``min(1, Dacc / D)``: complete when the person is acclimatized to this altitude or higher,
    partial after an ascent. At a constant altitude from sea level this is exactly
    :func:`acclimatization_fractions`.

    Parameters
    ----------
    pio2_mmhg : array, shape (..., n)
        Inspired PO2 at each sample, time along the last axis. [mmHg]
    duration_h : array, shape (n,)
        Length of each sample. [h] The state at a sample is the state at its *end*.
    initial_pio2_mmhg : numeric, optional
        PIO2 the person is fully acclimatized to at the start (their home altitude); broadcasts
        against ``pio2_mmhg[..., 0]``. Default: sea level.

    Returns
    -------
    (f_ventilatory, f_renal) : arrays shaped like ``pio2_mmhg``
    """
    p = params or default_parameters()
    pio2 = np.asarray(pio2_mmhg, dtype=float)
    dt_days = np.asarray(duration_h, dtype=float) / 24.0
    pio2_sl = float(inspired_po2(SEA_LEVEL_MMHG))
    deficit = np.maximum(pio2_sl - pio2, 0.0)
    start = np.zeros(pio2.shape[:-1]) if initial_pio2_mmhg is None else np.broadcast_to(
        np.maximum(pio2_sl - np.asarray(initial_pio2_mmhg, dtype=float), 0.0), pio2.shape[:-1]).astype(float)
    out = []
    for tau_up in (p.ventilatory_time_constant_days, p.renal_time_constant_days):
        acc = start.copy()
        frac = np.empty_like(deficit)
        decay_up = np.exp(-dt_days / tau_up)
        decay_down = np.exp(-dt_days / p.deacclimatization_time_constant_days)
        for i in range(deficit.shape[-1]):
            d = deficit[..., i]
            decay = np.where(d > acc, decay_up[i], decay_down[i])
            acc = d + (acc - d) * decay
            with np.errstate(divide="ignore", invalid="ignore"):
                frac[..., i] = np.where(d > 1e-9, np.minimum(1.0, acc / np.where(d > 1e-9, d, 1.0)), 1.0)
        out.append(frac)
    return out[0], out[1]
