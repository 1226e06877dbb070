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
    z = (po2 - p.hypoxic_asymptote_mmhg) / w
    return 1.0 / (w * (np.maximum(z, 0.0) + np.log1p(np.exp(-np.abs(z)))))


def _phi_and_slope(po2, p: VentilationParameters):
    """phi(P) and dphi/dP: phi = 1/S, S = w softplus(z), dS/dP = sigmoid(z)."""
    w = p.hypoxic_smoothing_mmhg
    z = (po2 - p.hypoxic_asymptote_mmhg) / w
    e = np.exp(-np.abs(z))
    big_s = w * (np.maximum(z, 0.0) + np.log1p(e))
    sigmoid = np.where(z >= 0.0, 1.0 / (1.0 + e), e / (1.0 + e))
    phi = 1.0 / big_s
    return phi, -sigmoid * phi * phi


@lru_cache(maxsize=1)
def _sea_level_phi() -> float:
    p = default_parameters()
    pa_sl = float(alveolar_po2(SEA_LEVEL_MMHG, p.baseline_paco2_mmhg))
    return float(_phi(pa_sl - p.sensor_aado2_mmhg, p))


def _make_state(pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio, hypoxic_gain_scale,
                drive_scale, hco3_offset_mmol_l, params):
    """Broadcast the inputs and return them with the residual-and-state function of ``u = ln x``."""
    p = params or default_parameters()
    pio2, fio2_a, rq_a, fv, fr, met, gscale, dscale, off = np.broadcast_arrays(
        *(np.asarray(a, dtype=float) for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                                               hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l)))
    factor = alveolar_gas_factor(fio2_a, rq_a)
    gain = gscale * p.hypoxic_gain_acute_mmhg * (1.0 + (p.acclimatized_gain_multiplier - 1.0) * fv)
    phi_sl = _sea_level_phi()
    k_low, k_high = blood.secondary_response_slopes(fr)
    hco3_n = blood.NORMAL_HCO3_MMOL_L + off
    base = p.baseline_paco2_mmhg * met
    log_sol = np.log10(blood.CO2_SOLUBILITY_MMOL_L_MMHG)

    def state(u, derivative=False, outputs_only=False):
        x = np.exp(u)
        paco2 = base / x
        k = np.where(paco2 < 40.0, k_low, k_high)
        hco3_raw = hco3_n - k * (40.0 - paco2)
        hco3 = np.maximum(hco3_raw, 1.0)
        ph = blood.PK_CARBONIC + np.log10(hco3) - log_sol - np.log10(paco2)
        if outputs_only:
            return paco2, hco3, ph
        pao2 = pio2 - paco2 * factor
        central = np.maximum(0.0, 1.0 - p.central_ph_gain * (ph - 7.40))
        if not derivative:
            hypoxic = np.maximum(1.0 + gain * (_phi(pao2 - p.sensor_aado2_mmhg, p) - phi_sl), 0.5)
            return u - np.log(np.maximum(dscale * central * hypoxic, 1e-12)), paco2, hco3, ph
        phi, dphi = _phi_and_slope(pao2 - p.sensor_aado2_mmhg, p)
        hyp_raw = 1.0 + gain * (phi - phi_sl)
        hypoxic = np.maximum(hyp_raw, 0.5)
        drive = dscale * central * hypoxic
        g = u - np.log(np.maximum(drive, 1e-12))
        dhco3 = np.where(hco3_raw > 1.0, -k * paco2, 0.0)
        dph = (dhco3 / hco3 + 1.0) / np.log(10.0)
        dcentral = np.where(central > 0.0, -p.central_ph_gain * dph, 0.0)
        dhyp = np.where(hyp_raw > 0.5, gain * dphi * factor * paco2, 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            dg = np.where(drive > 1e-12, 1.0 - dcentral / central - dhyp / hypoxic, 1.0)
        return g, dg, paco2, hco3, ph

    return pio2, state, (pio2, fio2_a, rq_a, fv, fr, met, gscale, dscale, off)


def equilibrium_residual(ventilation_ratio, pio2_mmhg, fio2=AIR_FIO2, rq=0.8, f_ventilatory=0.0, f_renal=0.0,
                         metabolic_ratio=1.0, *, hypoxic_gain_scale=1.0, drive_scale=1.0,
                         hco3_offset_mmol_l=0.0, params: VentilationParameters | None = None):
    """The residual ``g = ln x - ln(s c h)`` that :func:`equilibrium` drives to zero (for checks)."""
    _, state, _ = _make_state(pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                              hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l, params)
    return state(np.log(np.asarray(ventilation_ratio, dtype=float)))[0]


def equilibrium(pio2_mmhg, fio2=AIR_FIO2, rq=0.8, f_ventilatory=0.0, f_renal=0.0,
                metabolic_ratio=1.0, *, hypoxic_gain_scale=1.0, drive_scale=1.0, hco3_offset_mmol_l=0.0,
                max_iterations: int = 60, tolerance: float = 1e-11,
                params: VentilationParameters | None = None):
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
    hypoxic_gain_scale : numeric
        Individual hypoxic ventilatory response relative to the population's (1 = typical).
    drive_scale : numeric
        Overall chemoreflex drive relative to awake rest (sleep lowers it).
    hco3_offset_mmol_l : numeric
        Shift of plasma bicarbonate from a metabolic cause (negative for the metabolic
        acidosis of acetazolamide). [mmol/L]

    Returns
    -------
    dict of arrays
        ``paco2_mmhg`` (alveolar = arterial PCO2), ``ventilation_ratio`` (alveolar
        ventilation relative to sea level rest), ``hco3_mmol_l``, ``ph``,
        ``converged`` (bool), ``iterations`` (int, the number used).

    Notes
    -----
    ``g(u) = u - ln(s c h)`` is increasing in ``u = ln x`` (more ventilation lowers PCO2 and
    raises PO2, both lowering the drive), so the root is unique in ``x`` from 0.3 to 40.
    The fast path starts from a bilinear guess in a small table of solved points (PIO2 x
    acclimatization, cached per set of scalar inputs) and takes at most six Newton steps
    with the analytic derivative on the whole array; any element not within
    ``|g| < tolerance`` then is solved by the robust path, the Illinois variant of regula
    falsi on the bracket after four halvings.  Roots pinned to the bracket's ends, or not
    settled after ``max_iterations``, are reported as not converged.
    """
    shape = np.broadcast(*(np.asarray(a) for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                                                     hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l))).shape
    flat = [np.broadcast_to(np.asarray(a, dtype=float), shape).ravel()
            for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                      hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l)]
    pio2, state, args = _make_state(*flat, params)
    lo, hi = np.log(0.3), np.log(40.0)
    u = _initial_guess(args, params)
    converged = np.ones(pio2.shape, dtype=bool)
    # Two Newton steps on the whole array from the tabulated guess. Convergence is quadratic, so a
    # second step below 1e-6 (from a residual below 1e-6) leaves an error of order its square
    # (< 1e-11): those points are done without a third evaluation.
    for used in (1, 2):
        g, dg = state(u, derivative=True)[:2]
        ok = np.isfinite(g) & (dg > 0.0)
        step = np.where(ok, g / np.where(ok, dg, 1.0), 0.0)
        u = np.clip(u - step, lo, hi)
    # a small residual too: a tiny step on a cliff of the residual (the central drive's cut-off) is no root
    todo = ~(ok & (np.abs(step) < 1e-6) & (np.abs(g) < 1e-6)) | (u <= lo + 1e-9) | (u >= hi - 1e-9)
    paco2, hco3, ph = state(u, outputs_only=True)
    if todo.any():
        # ... the few left (near the kinks of the controller) continue on their own, then the
        # bracketed solver takes any Newton did not settle
        idx = np.flatnonzero(todo)
        sub_args = [np.asarray(a)[idx] for a in args]
        sub_pio2, sub_state, _ = _make_state(*sub_args, params)
        us = u[idx]
        for _ in range(NEWTON_STEPS):
            gs, dgs, *_ = sub_state(us, derivative=True)
            left = ~(np.abs(gs) <= tolerance)
            if not left.any():
                break
            us = np.clip(us - np.where(left & (dgs > 0.0), gs / np.where(dgs > 0.0, dgs, 1.0), 0.0), lo, hi)
        else:
            left = ~(np.abs(sub_state(us)[0]) <= tolerance)
        used += NEWTON_STEPS
        if left.any():
            inner = np.flatnonzero(left)
            b_pio2, b_state, _ = _make_state(*[a[inner] for a in sub_args], params)
            u_b, conv_b, more = _solve_bracketed(b_pio2, b_state, max_iterations, tolerance)
            us[inner] = u_b
            converged[idx[inner]] = conv_b
            used += more
        u = u.copy()
        u[idx] = us
        _, sub_paco2, sub_hco3, sub_ph = sub_state(us)
        paco2, hco3, ph = paco2.copy(), hco3.copy(), ph.copy()
        paco2[idx], hco3[idx], ph[idx] = sub_paco2, sub_hco3, sub_ph
    return {"paco2_mmhg": paco2.reshape(shape), "ventilation_ratio": np.exp(u).reshape(shape),
            "hco3_mmol_l": hco3.reshape(shape), "ph": ph.reshape(shape),
            "converged": converged.reshape(shape), "iterations": used}


NEWTON_STEPS = 6
_GUESS_PIO2 = np.linspace(15.0, 215.0, 201)   # 1 mmHg steps
_GUESS_F = np.linspace(0.0, 1.0, 6)           # ventilatory and renal acclimatization, 0.2 steps
# the guess table is built for scalar stand-ins of the other inputs, rounded to these steps so that
# nearby values share one table (the guess only needs to be close; Newton does the rest)
_GUESS_KEY_STEPS = (0.05, 0.05, 0.1, 0.1, 0.05, 1.0)   # fio2, rq, metabolic, gain, drive, HCO3 offset


@lru_cache(maxsize=32)
def _guess_table(fio2, rq, met, gscale, dscale, off):
    """ln x solved on a grid of PIO2 x f_ventilatory x f_renal, for the initial guess (flat array)."""
    pio2, fv, fr = np.meshgrid(_GUESS_PIO2, _GUESS_F, _GUESS_F, indexing="ij")
    g_pio2, state, _ = _make_state(pio2.ravel(), fio2, rq, fv.ravel(), fr.ravel(), met, gscale, dscale, off,
                                   None)
    u, _, _ = _solve_bracketed(g_pio2, state, 80, 1e-12)
    return u


def _axis_position(values, grid):
    """Index of the cell and the weight within it, for a uniform grid (clamped to its ends)."""
    step = grid[1] - grid[0]
    pos = np.clip((values - grid[0]) / step, 0.0, grid.size - 1.000001)
    i = pos.astype(np.intp)
    return i, pos - i


def _initial_guess(args, params):
    """Trilinear interpolation in the guess table; scalar stand-ins (means) for the other inputs."""
    pio2, fio2_a, rq_a, fv, fr, met, gscale, dscale, off = args
    key = tuple(round(round(float(np.mean(a)) / step) * step, 6)
                for a, step in zip((fio2_a, rq_a, met, gscale, dscale, off), _GUESS_KEY_STEPS))
    table = _guess_table(*key) if params is None else _guess_table.__wrapped__(*key)
    i, wi = _axis_position(pio2, _GUESS_PIO2)
    j, wj = _axis_position(fv, _GUESS_F)
    k, wk = _axis_position(fr, _GUESS_F)
    nf = _GUESS_F.size
    base = (i * nf + j) * nf + k
    out = np.zeros_like(wi)
    for di, w1 in ((0, 1.0 - wi), (1, wi)):
        for dj, w2 in ((0, 1.0 - wj), (1, wj)):
            w12 = w1 * w2
            flat = base + (di * nf + dj) * nf
            out += w12 * ((1.0 - wk) * table[flat] + wk * table[flat + 1])
    return out


def _solve_bracketed(pio2, state, max_iterations, tolerance):
    """Illinois regula falsi on u = ln x in [ln 0.3, ln 40], after four halvings (robust path)."""
    lo = np.full(pio2.shape, np.log(0.3))
    hi = np.full(pio2.shape, np.log(40.0))
    g_lo = state(lo)[0]
    g_hi = state(hi)[0]
    pinned_low = g_lo >= 0.0
    pinned_high = g_hi <= 0.0
    side = np.zeros(pio2.shape, dtype=np.int8)
    u = np.where(pinned_low, lo, np.where(pinned_high, hi, 0.5 * (lo + hi)))
    active = ~(pinned_low | pinned_high)
    for _ in range(4):  # a few halvings first: the ends of the bracket are far from linear
        mid = 0.5 * (lo + hi)
        g = state(mid)[0]
        pos = active & (g > 0.0)
        neg = active & (g <= 0.0)
        hi, g_hi = np.where(pos, mid, hi), np.where(pos, g, g_hi)
        lo, g_lo = np.where(neg, mid, lo), np.where(neg, g, g_lo)
    used = 4
    for used in range(5, max_iterations + 1):
        denom = g_hi - g_lo
        u_new = np.where(active, (lo * g_hi - hi * g_lo) / np.where(denom != 0.0, denom, 1.0), u)
        u_new = np.where(active & ~((u_new > lo) & (u_new < hi)), 0.5 * (lo + hi), u_new)
        g = state(u_new)[0]
        u = u_new
        pos = active & (g > 0.0)
        neg = active & (g <= 0.0)
        hi = np.where(pos, u, hi)
        g_lo = np.where(pos & (side == 1), 0.5 * g_lo, g_lo)
        g_hi = np.where(pos, g, g_hi)
        lo = np.where(neg, u, lo)
        g_hi = np.where(neg & (side == -1), 0.5 * g_hi, g_hi)
        g_lo = np.where(neg, g, g_lo)
        side = np.where(pos, 1, np.where(neg, -1, side)).astype(np.int8)
        active = active & (np.abs(g) > tolerance)
        if not active.any():
            break
    g = state(u)[0]
    converged = (np.abs(g) <= tolerance * 10.0) & ~pinned_low & ~pinned_high
    return u, converged, used


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
