"""Acclimatization along a timeline: the state a person carries from sample to sample.

The kinetics are those of :func:`altox.physiology.ventilation.acclimatization_fractions` (first order, a
ventilatory and a renal process), extended to a changing altitude with the memory of time spent
high. Along a plan the altitude is piecewise constant, and within a run of constant stimulus the
first-order approach is exact in closed form, so the work is one vectorised step per run, not
per sample.
"""

from __future__ import annotations

import numpy as np

__all__ = ["acclimatization_history"]


def _runs(deficit):
    """Start and end (exclusive) sample indices of the runs of constant deficit along the last axis."""
    n = deficit.shape[-1]
    if n < 2:
        return np.array([0]), np.array([n])
    change = np.any((deficit[..., 1:] != deficit[..., :-1]).reshape(-1, n - 1), axis=0)
    starts = np.concatenate(([0], np.flatnonzero(change) + 1))
    return starts, np.append(starts[1:], n)


def acclimatization_history(pio2_mmhg, duration_h, initial_pio2_mmhg=None, params=None):
    """Acclimatization fractions along a timeline, carrying time spent high and remembering descent.

    The hypoxic stimulus is the inspired-PO2 deficit below sea level, ``D = PIO2,sl - PIO2``.
    For each of the two processes (ventilatory, renal) altox keeps the deficit a person is
    acclimatized to, ``Dacc``, which moves toward the current deficit with first-order
    kinetics, ``Dacc(t) = D + (Dacc(0) - D) exp(-t / tau)``: up with the process's time
    constant, down (after descent) with the slower de-acclimatization time constant.  Within a
    run of constant ``D`` the approach is monotone, so the time constant chosen at the start of
    the run holds for all of it and the closed form is exact.  The fraction at a sample is
    ``min(1, Dacc / D)``: complete when the person is acclimatized to this altitude or higher,
    partial after an ascent. At a constant altitude from sea level this is exactly
    :func:`altox.physiology.ventilation.acclimatization_fractions`.

    Parameters
    ----------
    pio2_mmhg : array, shape (..., n)
        Inspired PO2 at each sample, time along the last axis. [mmHg]
    duration_h : array, shape (n,)
        Length of each sample. [h] The state at a sample is the state at its *end*.
    initial_pio2_mmhg : numeric, optional
        PIO2 the person is fully acclimatized to at the start (their home altitude); broadcasts
        against ``pio2_mmhg[..., 0]``. Default: sea level.
    params : VentilationParameters, optional
        Time constants; default the model table's.

    Returns
    -------
    (f_ventilatory, f_renal) : arrays shaped like ``pio2_mmhg``
    """
    from altox.physiology.atmosphere import SEA_LEVEL_MMHG
    from altox.physiology.gas_exchange import inspired_po2
    from altox.physiology.ventilation import default_parameters

    p = params or default_parameters()
    pio2 = np.asarray(pio2_mmhg, dtype=float)
    n = pio2.shape[-1]
    elapsed_days = np.cumsum(np.broadcast_to(np.asarray(duration_h, dtype=float), (n,))) / 24.0
    pio2_sl = float(inspired_po2(SEA_LEVEL_MMHG))
    deficit = np.maximum(pio2_sl - pio2, 0.0)
    lead = pio2.shape[:-1]
    start = np.zeros(lead) if initial_pio2_mmhg is None else np.broadcast_to(
        np.maximum(pio2_sl - np.asarray(initial_pio2_mmhg, dtype=float), 0.0), lead).astype(float)
    starts, ends = _runs(deficit)
    out = []
    for tau_up in (p.ventilatory_time_constant_days, p.renal_time_constant_days):
        acc = start.copy()
        frac = np.empty_like(deficit)
        for a, b in zip(starts, ends):
            d = deficit[..., a]
            t = elapsed_days[a:b] - (elapsed_days[a - 1] if a else 0.0)   # from the run's start to each sample's end
            tau = np.where(d > acc, tau_up, p.deacclimatization_time_constant_days)
            run = d[..., None] + (acc - d)[..., None] * np.exp(-t / tau[..., None])
            with np.errstate(divide="ignore", invalid="ignore"):
                frac[..., a:b] = np.where(d[..., None] > 1e-9,
                                          np.minimum(1.0, run / np.where(d > 1e-9, d, 1.0)[..., None]), 1.0)
            acc = run[..., -1]
        out.append(frac)
    return out[0], out[1]
