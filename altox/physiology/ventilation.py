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

from altox.physiology import blood
from altox.physiology.coefficients import model_coefficients  # noqa: F401  (re-exported)
from altox.physiology.gas_exchange import AIR_FIO2, alveolar_gas_factor, alveolar_po2
from altox.physiology.atmosphere import SEA_LEVEL_MMHG

_LN10 = float(np.log(10.0))


@dataclass(frozen=True)
class VentilationParameters:
    """Coefficients of the ventilation model (see ``altox/data/models.yaml``)."""

    baseline_paco2_mmhg: float
    central_ph_gain: float
    hypoxic_gain_acute: float
    acclimatized_gain_multiplier: float
    sensor_aado2_mmhg: float
    sleep_hypoxic_gain_exponent: float
    ventilatory_time_constant_days: float
    renal_time_constant_days: float
    deacclimatization_time_constant_days: float


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


def _desaturation_terms(po2):
    """Standard-curve saturation at ``po2`` (clamped at 0) and its derivative dS/dP (Severinghaus 1979)."""
    p = np.maximum(po2, 0.0)
    cube = p * p
    cube += 150.0
    cube *= p
    denom = cube + 23400.0
    s = cube / denom
    ds = (3.0 * p * p + 150.0) * 23400.0 / (denom * denom)
    ds *= po2 > 0.0
    return s, ds


@lru_cache(maxsize=1)
def _sea_level_saturation() -> float:
    p = default_parameters()
    pa_sl = float(alveolar_po2(SEA_LEVEL_MMHG, p.baseline_paco2_mmhg))
    return float(blood.standard_saturation(pa_sl - p.sensor_aado2_mmhg))


def _make_state(pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio, hypoxic_gain_scale,
                drive_scale, hco3_offset_mmol_l, params):
    """The inputs (PIO2 broadcast to the common shape, the others as given) and the residual-and-state
    function of ``u = ln x``.

    Everything that does not depend on ``u`` is folded into coefficients once. The sensed PO2 is
    ``P = PIO2 - sensor AaDO2 - PACO2 F`` (F the alveolar gas factor); the hypoxic drive is
    ``h = 1 + G (S_sl - S(P))`` on the standard curve; with ``r = ln(HCO3 / PCO2)`` the central
    drive is ``b0 - b1 r`` with the alkaline or the acid gain (``pH = pK' - log10(0.0307) + r / ln 10``).
    """
    p = params or default_parameters()
    arrays = [np.asarray(a, dtype=float) for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                                                   hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l)]
    pio2 = np.broadcast_to(arrays[0], np.broadcast_shapes(*(a.shape for a in arrays)))
    _, fio2_a, rq_a, fv, fr, met, gscale, dscale, off = arrays
    factor = alveolar_gas_factor(fio2_a, rq_a)
    p0 = pio2 - p.sensor_aado2_mmhg
    # sleep (drive_scale < 1) lowers the hypoxic gain too, by drive_scale ** exponent
    gain = (gscale * p.hypoxic_gain_acute * (1.0 + (p.acclimatized_gain_multiplier - 1.0) * fv)
            * dscale ** p.sleep_hypoxic_gain_exponent)
    s_sl = _sea_level_saturation()
    k_acute = blood.ACUTE_HCO3_PER_MMHG
    k_low, k_high = blood.secondary_response_slopes(fr)
    k_renal = k_low - k_acute
    # the kidney's answer to alkalosis is not applied to the hypocapnia that compensates a metabolic
    # acidosis (Adrogue & Madias 2010: PCO2 falls about 1.2 mmHg per mmol/L of bicarbonate lost)
    shift = METABOLIC_ACIDOSIS_PCO2_PER_HCO3 * np.maximum(-off, 0.0)
    hco3_n = blood.NORMAL_HCO3_MMOL_L + off
    base = p.baseline_paco2_mmhg * met
    ph0 = blood.PK_CARBONIC - np.log10(blood.CO2_SOLUBILITY_MMOL_L_MMHG)
    kgain = p.central_ph_gain

    def state(u, derivative=False, exact=True):
        """``g`` and the state at ``u``; with ``derivative`` also ``dg/du``.

        ``exact`` is kept for the callers; the derivative is the same either way."""
        shape = np.broadcast_shapes(np.shape(u), pio2.shape)
        if not shape:
            return tuple(a.reshape(()) for a in state(np.reshape(u, 1), derivative, exact))
        paco2 = base * np.exp(-u)
        d = paco2 - 40.0
        below = np.minimum(d, 0.0)
        renal = np.minimum(d + shift, 0.0)
        hco3_raw = hco3_n + k_acute * below + k_renal * renal + k_high * np.maximum(d, 0.0)
        hco3 = np.maximum(hco3_raw, 1.0)
        r = np.log(hco3 / paco2)
        ph = ph0 + r / _LN10
        central_raw = 1.0 - kgain * (ph - 7.40)
        central = np.maximum(central_raw, 0.0)
        sens = p0 - factor * paco2
        sat, dsat = _desaturation_terms(sens)
        hyp_raw = 1.0 + gain * (s_sl - sat)
        hypoxic = np.maximum(hyp_raw, 0.5)
        drive = dscale * central * hypoxic
        g = u - np.log(np.maximum(drive, 1e-12))
        if not derivative:
            return g, paco2, hco3, ph
        # d PCO2 / du = -PCO2; d HCO3 / du = -k PCO2 with the slope in use
        k = k_acute * (d < 0.0) + k_renal * (d + shift < 0.0) + k_high * (d > 0.0)
        dr = 1.0 - k * paco2 * (hco3_raw > 1.0) / hco3              # dr/du
        dln_central = -kgain / _LN10 * dr / np.where(central > 0.0, central, 1.0)
        dln_hyp = -gain * dsat * factor * paco2 / hypoxic            # d ln h / du (dP/du = F PCO2)
        with np.errstate(divide="ignore", invalid="ignore"):
            dg = np.where(drive > 1e-12, 1.0 - np.where(central_raw > 0.0, dln_central, 0.0)
                          - np.where(hyp_raw > 0.5, dln_hyp, 0.0), 1.0)
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
    The fast path starts from a trilinear guess in a table of solved points (PIO2 x
    ventilatory x renal acclimatization, cached per set of scalar inputs), takes two Newton
    steps (four when other inputs vary between elements) with the analytic derivative on the whole array and evaluates the exact residual
    at the result; any element not within ``|g| <= tolerance`` there continues with Newton
    steps on its own, then by the robust path, the Illinois variant of regula falsi on the
    bracket after four halvings.  Roots pinned to the bracket's ends, or not settled after
    ``max_iterations``, are reported as not converged.  So are roots on the cliff of the
    residual where the central drive is cut off (PIO2 below about 30 mmHg): where one unit in
    the last place of ``u`` moves ``g`` by more than ten times the tolerance, the drive is a
    product of a vanishing central and an unbounded hypoxic term and no steady state exists.
    """
    inputs = [np.asarray(a, dtype=float) for a in (pio2_mmhg, fio2, rq, f_ventilatory, f_renal, metabolic_ratio,
                                                   hypoxic_gain_scale, drive_scale, hco3_offset_mmol_l)]
    shape = np.broadcast_shapes(*(a.shape for a in inputs))
    # PIO2 and every array input flat at the full size; scalars stay scalars
    flat = [np.broadcast_to(a, shape).ravel() if (a.ndim or i == 0) else a for i, a in enumerate(inputs)]
    pio2, state, args = _make_state(*flat, params)
    lo, hi = np.log(0.3), np.log(40.0)
    u = _initial_guess(args, params)
    converged = np.ones(pio2.shape, dtype=bool)
    # Whole-array Newton steps from the tabulated guess, then the exact residual at the result:
    # an element is done only where that residual is within the tolerance.
    # inputs other than PIO2 and acclimatization that vary between elements are keyed on a rounded
    # mean in the guess table, so the guess is rougher: more whole-array steps then cost less than
    # sending many elements down the per-element path
    varied = any(a.ndim and a.size > 1 and a.min() != a.max() for a in args[1:3] + args[5:])
    with np.errstate(divide="ignore", invalid="ignore"):
        for used in range(1, FAST_NEWTON_STEPS + 1 + (VARIED_EXTRA_STEPS if varied else 0)):
            g, dg = state(u, derivative=True, exact=False)[:2]
            g /= dg
            u -= g
            np.clip(u, lo, hi, out=u)
    g, paco2, hco3, ph = state(u)
    todo = ~(np.abs(g) <= tolerance)
    if not (u.min(initial=hi) > lo + 1e-9 and u.max(initial=lo) < hi - 1e-9):
        todo |= (u <= lo + 1e-9) | (u >= hi - 1e-9)
    # near the central drive's cut-off (below about 30 mmHg of PIO2) the residual becomes a cliff:
    # those roots are checked on their own below, for whether double precision can resolve them
    ph_cliff = 7.40 + (1.0 - CLIFF_CENTRAL_DRIVE) / (params or default_parameters()).central_ph_gain
    cliff = ph > ph_cliff if ph.max(initial=0.0) > ph_cliff else None
    if cliff is not None:
        todo |= cliff
    if todo.any():
        # ... the few left (near the kinks of the controller) continue on their own, then the
        # bracketed solver takes any Newton did not settle
        idx = np.flatnonzero(todo)
        sub_args = [a[idx] if a.ndim else a for a in args]
        sub_pio2, sub_state, _ = _make_state(*sub_args, params)
        us = u[idx]
        us[~np.isfinite(us)] = 0.5 * (lo + hi)
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
            b_pio2, b_state, b_args = _make_state(*[a[inner] if a.ndim else a for a in sub_args], params)
            u_b, conv_b, more = _solve_bracketed(b_pio2, b_state, max_iterations, tolerance, b_args, params)
            us[inner] = u_b
            converged[idx[inner]] = conv_b
            used += more
        u[idx] = us
        _, dgs, paco2[idx], hco3[idx], ph[idx] = sub_state(us, derivative=True)
        if cliff is not None:
            # a root is only a root if the residual can tell it apart from the neighbouring numbers:
            # where one unit in the last place of u moves g by more than the bracketed solver's
            # acceptance (10 x tolerance) the drive product is 0 x infinity, no steady state
            unresolved = cliff[idx] & ~(np.abs(dgs) * np.spacing(np.abs(us)) <= 10.0 * tolerance)
            converged[idx[unresolved]] = False
    # no steady state where the inspired gas cannot support the PCO2 found: alveolar PO2 at or below
    # zero (the saturation-linear drive is bounded, so the equation still has a root there)
    converged &= (pio2 - alveolar_gas_factor(args[1], args[2]) * paco2) > 0.0
    return {"paco2_mmhg": paco2.reshape(shape), "ventilation_ratio": np.exp(u).reshape(shape),
            "hco3_mmol_l": hco3.reshape(shape), "ph": ph.reshape(shape),
            "converged": converged.reshape(shape), "iterations": used}


#: respiratory compensation of a metabolic acidosis: fall in PCO2 per mmol/L of bicarbonate lost [AdrogueMadias2010]
METABOLIC_ACIDOSIS_PCO2_PER_HCO3 = 1.2
FAST_NEWTON_STEPS = 2
VARIED_EXTRA_STEPS = 2
# central drive (1 at pH 7.40) below which a root is checked for being resolvable (see equilibrium)
CLIFF_CENTRAL_DRIVE = 1e-3
NEWTON_STEPS = 6
_GUESS_PIO2 = np.linspace(15.0, 215.0, 201)   # 1 mmHg steps
_GUESS_F = np.linspace(0.0, 1.0, 6)           # ventilatory and renal acclimatization, 0.2 steps
# the guess table is built for scalar stand-ins of the other inputs, rounded to these steps so that
# nearby values share one table (the guess only needs to be close; Newton does the rest)
_GUESS_KEY_STEPS = (0.05, 0.05, 0.1, 0.5, 0.1, 4.0)   # fio2, rq, metabolic, gain, drive, HCO3 offset


@lru_cache(maxsize=32)
def _guess_store(fio2, rq, met, gscale, dscale, off):
    """The (partly built) guess table of one key: ln x per PIO2 row x f_ventilatory x f_renal, and
    which PIO2 rows are solved. Rows are solved when first needed (:func:`_guess_rows`)."""
    nf = _GUESS_F.size
    return np.full(_GUESS_PIO2.size * nf * nf, np.nan), np.zeros(_GUESS_PIO2.size, dtype=bool)


def _guess_rows(key, first, last, params=None):
    """The flat guess table of ``key`` with at least PIO2 rows ``first`` to ``last`` solved."""
    table, built = _guess_store(*key) if params is None else _guess_store.__wrapped__(*key)
    missing = np.flatnonzero(~built[first:last + 1]) + first
    if missing.size:
        pio2, fv, fr = np.meshgrid(_GUESS_PIO2[missing], _GUESS_F, _GUESS_F, indexing="ij")
        fio2, rq, met, gscale, dscale, off = key
        g_pio2, state, args = _make_state(pio2.ravel(), fio2, rq, fv.ravel(), fr.ravel(), met, gscale, dscale, off,
                                          params)
        u, _, _ = _solve_bracketed(g_pio2, state, 80, 1e-12, args, params)
        nf2 = _GUESS_F.size ** 2
        table.reshape(_GUESS_PIO2.size, nf2)[missing] = u.reshape(missing.size, nf2)
        built[missing] = True
    return table


def _guess_table(fio2, rq, met, gscale, dscale, off):
    """ln x solved on the whole grid of PIO2 x f_ventilatory x f_renal (flat array)."""
    return _guess_rows((fio2, rq, met, gscale, dscale, off), 0, _GUESS_PIO2.size - 1)


def _axis_position(values, grid):
    """Index of the cell and the weight within it, for a uniform grid (clamped to its ends)."""
    pos = np.subtract(values, grid[0], out=np.empty(np.shape(values)))
    pos *= 1.0 / (grid[1] - grid[0])
    np.clip(pos, 0.0, grid.size - 1.000001, out=pos)
    i = pos.astype(np.intp)
    pos -= i
    return i, pos


#: below this many elements a table built for exact scalar inputs costs more than it saves: such
#: calls share the tables of rounded inputs
EXACT_KEY_MIN_SIZE = 4096


def _key_value(a, step, exact):
    """Stand-in of one input for the guess table: a scalar as given (``exact``), else rounded to ``step``
    (an array by its mean)."""
    if a.ndim == 0 and exact:
        return round(float(a), 9)
    return round(round(float(np.mean(a)) / step) * step, 6)


def _initial_guess(args, params):
    """Trilinear interpolation in the guess table; scalar stand-ins for the other inputs."""
    pio2, fio2_a, rq_a, fv, fr, met, gscale, dscale, off = args
    exact = pio2.size >= EXACT_KEY_MIN_SIZE
    key = tuple(_key_value(a, step, exact)
                for a, step in zip((fio2_a, rq_a, met, gscale, dscale, off), _GUESS_KEY_STEPS))
    i, wi = _axis_position(pio2, _GUESS_PIO2)
    # only the PIO2 rows this input needs (and the next, for the interpolation) are solved
    first, last = (int(i.min()), int(i.max()) + 1) if i.size else (0, 1)
    table = _guess_rows(key, first, last, params)
    j, wj = _axis_position(np.asarray(fv, dtype=float), _GUESS_F)
    k, wk = _axis_position(np.asarray(fr, dtype=float), _GUESS_F)
    nf = _GUESS_F.size
    cell = i * (nf * nf)
    cell += j * nf + k
    # lerp along f_renal at the four (PIO2, f_ventilatory) corners, then along f_ventilatory, then PIO2;
    # the table's views shifted by a corner's offset take the corner values without index arithmetic
    edges = []
    for offset in (0, nf, nf * nf, nf * nf + nf):
        v0 = table[offset:].take(cell)
        v1 = table[offset + 1:].take(cell)
        v1 -= v0
        v1 *= wk
        v1 += v0
        edges.append(v1)
    for a, b in ((0, 1), (2, 3)):
        edges[b] -= edges[a]
        edges[b] *= wj
        edges[a] += edges[b]
    out = edges[2]
    out -= edges[0]
    out *= wi
    out += edges[0]
    return out


def _solve_bracketed(pio2, state, max_iterations, tolerance, args=None, params=None):
    """Illinois regula falsi on u = ln x in [ln 0.3, ln 40], after four halvings (robust path).

    With ``args`` (the flat inputs :func:`_make_state` was built from) each iteration evaluates
    only the elements still active, on a residual rebuilt for them whenever the active set has
    halved; the arithmetic per element is the same either way.
    """
    lo_u, hi_u = np.log(0.3), np.log(40.0)
    size = pio2.shape
    g_lo = state(np.full(size, lo_u))[0]
    g_hi = state(np.full(size, hi_u))[0]
    pinned_low = g_lo >= 0.0
    pinned_high = g_hi <= 0.0
    u = np.where(pinned_low, lo_u, np.where(pinned_high, hi_u, 0.5 * (lo_u + hi_u)))
    act = np.flatnonzero(~(pinned_low | pinned_high))           # flat indices still being solved
    lo, hi = np.full(act.size, lo_u), np.full(act.size, hi_u)
    g_lo, g_hi = g_lo.ravel()[act], g_hi.ravel()[act]
    side = np.zeros(act.size, dtype=np.int8)
    # the residual over a superset of the active elements: `where` maps the active ones into it
    cur_state, cur_size, where = state, u.size, act

    def residual(values):
        if cur_state is state:
            full = u.ravel().copy()
            full[act] = values
            return cur_state(full.reshape(size))[0].ravel()[act]
        full = np.zeros(cur_size)
        full[where] = values
        return cur_state(full)[0][where]

    for _ in range(4):  # a few halvings first: the ends of the bracket are far from linear
        mid = 0.5 * (lo + hi)
        g = residual(mid)
        pos = g > 0.0
        hi, g_hi = np.where(pos, mid, hi), np.where(pos, g, g_hi)
        lo, g_lo = np.where(pos, lo, mid), np.where(pos, g_lo, g)
    cur = 0.5 * (lo + hi)
    used = 4
    flat_u = u.ravel().copy()
    for used in range(5, max_iterations + 1):
        if act.size == 0:
            break
        denom = g_hi - g_lo
        new = (lo * g_hi - hi * g_lo) / np.where(denom != 0.0, denom, 1.0)
        new = np.where((new > lo) & (new < hi), new, 0.5 * (lo + hi))
        g = residual(new)
        cur = new
        pos = g > 0.0
        neg = ~pos
        hi = np.where(pos, cur, hi)
        g_lo = np.where(pos & (side == 1), 0.5 * g_lo, g_lo)
        g_hi = np.where(pos, g, g_hi)
        lo = np.where(neg, cur, lo)
        g_hi = np.where(neg & (side == -1), 0.5 * g_hi, g_hi)
        g_lo = np.where(neg, g, g_lo)
        side = np.where(pos, 1, -1).astype(np.int8)
        done = np.abs(g) <= tolerance
        if done.any():
            flat_u[act[done]] = cur[done]
            keep = ~done
            act, lo, hi, g_lo, g_hi, cur, side = (x[keep] for x in (act, lo, hi, g_lo, g_hi, cur, side))
            where = where[keep]
            if args is not None and act.size and act.size * 2 <= cur_size:
                cur_state = _make_state(*[a.ravel()[act] if a.ndim else a for a in args], params)[1]
                cur_size, where = act.size, np.arange(act.size)
    flat_u[act] = cur
    u = flat_u.reshape(size)
    g = state(u)[0]
    converged = (np.abs(g) <= tolerance * 10.0) & ~pinned_low & ~pinned_high
    return u, converged, used
