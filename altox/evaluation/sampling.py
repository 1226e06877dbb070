"""Evaluate the chain along a timeline at knots, and interpolate between them in time.

Along a plan the inputs of the chain are piecewise constant (pressure, oxygen, sleep, the
person's factors change only from one segment of the timeline to the next), except the two
acclimatization fractions, which move smoothly within a segment (first-order kinetics over
days, :func:`altox.physiology.acclimatization.acclimatization_history`).  Every output of the chain is then a
smooth function of time within a segment, and a plan sampled every minute needs the full solve
only at *knots*: both ends of every segment and at most ``spacing_h`` apart within one.  The
samples between knots are linear interpolations in time of the two neighbouring knots' values.

The error of linear interpolation is ``h^2/8 max|y''|``; with the fastest kinetics (renal, time
constant 1.5 days) and knots two hours apart it is of order 1e-3 in SaO2 percentage points
(measured on the fast demo trek's ensemble at 5-minute sampling: 0.017 points at 3 h, 0.005 at
1.5 h; the acclimatized hypoxic gain makes the curve in time steeper early on), and
``tests/test_sampling.py`` holds the interpolated path to the full evaluation of every sample
(SaO2 within 0.01 points, PO2 within 0.01 mmHg) on the demo plans at one-minute sampling.
Samples at knots are the full evaluation itself.  Boolean outputs between knots are the
conservative combination of the two knots (converged only if both are; clamped, clipped or
outside the validated range if either is); the validity status between knots is the worse of
the two knots' and its reasons those of both.
"""

from __future__ import annotations

import numpy as np

__all__ = ["DEFAULT_KNOT_SPACING_H", "SMOOTH_KEYWORDS", "Knots", "assess_along"]

#: largest time between two knots within a segment [h]
DEFAULT_KNOT_SPACING_H = 2.0
#: the assess keywords that may vary smoothly within a segment; all others are piecewise constant
SMOOTH_KEYWORDS = ("f_ventilatory", "f_renal", "days")
_ALL_OF = ("solver_converged",)
_ANY_OF = ("alveolar_po2_clamped", "equivalent_altitude_clipped", "outside_validated_range")
_WORST_OF = {"validity_status": np.maximum, "validity_reasons": np.bitwise_or}   # integer codes


def _compact(a):
    """The array with its broadcast (zero-stride) axes reduced to length 1, as a view."""
    a = np.asarray(a)
    idx = tuple(slice(0, 1) if (a.strides[i] == 0 and a.shape[i] > 1) else slice(None) for i in range(a.ndim))
    return a[idx]


class Knots:
    """Knot samples of a timeline and linear interpolation between them.

    Parameters
    ----------
    time_h : array, shape (n,)
        Sample times, increasing. [h]
    piecewise : iterable of arrays
        Inputs that are constant within a segment; an array whose last axis has length ``n``
        varies along the samples (other arrays are constant and ignored).
    spacing_h : float
        Largest time between knots within a segment. [h]
    """

    def __init__(self, time_h, piecewise=(), spacing_h: float = DEFAULT_KNOT_SPACING_H):
        t = np.asarray(time_h, dtype=float)
        n = t.size
        if not spacing_h > 0.0:
            raise ValueError("knot spacing must be positive")
        change = np.zeros(n, dtype=bool)
        if n:
            change[0] = change[-1] = True
        for x in piecewise:
            x = _compact(x)
            if x.ndim == 0 or x.shape[-1] != n or n < 2:
                continue
            d = np.any((x[..., 1:] != x[..., :-1]).reshape(-1, n - 1), axis=0)
            change[1:] |= d      # first sample of the new segment
            change[:-1] |= d     # last sample of the old one
        if n > 1:
            cell = np.floor((t - t[0]) / spacing_h)
            change[1:] |= cell[1:] != cell[:-1]
        self.n = n
        self.time_h = t
        self.index = np.flatnonzero(change)
        pos = np.clip(np.searchsorted(self.index, np.arange(n), side="right") - 1, 0, max(self.index.size - 1, 0))
        nxt = np.minimum(pos + 1, self.index.size - 1)
        t_left, t_right = t[self.index[pos]], t[self.index[nxt]]
        span = t_right - t_left
        w = np.where(span > 0.0, (t - t_left) / np.where(span > 0.0, span, 1.0), 0.0)
        w[self.index] = 0.0
        self.left, self.right, self.weight = pos, nxt, w

    def __len__(self) -> int:
        return int(self.index.size)

    @classmethod
    def concatenate(cls, parts) -> "Knots":
        """Knots of several independent timelines laid end to end (samples and knots in order).

        Each part keeps its own knots and interpolates only within itself, so evaluating the
        concatenation at its knots in one call gives every part exactly what it alone would get.
        """
        parts = list(parts)
        out = cls.__new__(cls)
        sizes = np.array([p.n for p in parts], dtype=np.int64)
        ks = np.array([p.index.size for p in parts], dtype=np.int64)
        s_off = np.repeat(np.cumsum(sizes) - sizes, ks)
        k_off = np.repeat(np.cumsum(ks) - ks, sizes)
        out.n = int(sizes.sum())
        out.time_h = np.concatenate([p.time_h for p in parts]) if parts else np.zeros(0)
        out.index = (np.concatenate([p.index for p in parts]) if parts else np.zeros(0, dtype=np.int64)) + s_off
        out.left = (np.concatenate([p.left for p in parts]) if parts else np.zeros(0, dtype=np.int64)) + k_off
        out.right = (np.concatenate([p.right for p in parts]) if parts else np.zeros(0, dtype=np.int64)) + k_off
        out.weight = np.concatenate([p.weight for p in parts]) if parts else np.zeros(0)
        return out

    def at_knots(self, a):
        """``a`` restricted to the knots along its last axis when it varies along the samples."""
        a = np.asarray(a)
        if a.ndim and a.shape[-1] == self.n and self.n > 0:
            return a[..., self.index]
        return a

    def interpolate(self, values, samples=slice(None)):
        """Values at the knots (last axis) -> values at ``samples`` (a slice of the timeline)."""
        v = np.asarray(values)
        left, right, w = self.left[samples], self.right[samples], self.weight[samples]
        a = np.take(v, left, axis=-1)
        b = np.take(v, right, axis=-1)
        b -= a
        b *= w
        b += a      # at a knot w = 0: the knot's own value (finite values, as the chain's are)
        return b

    def interpolate_flag(self, values, samples=slice(None), *, combine):
        """Boolean (or integer code) values at the knots -> samples: ``combine`` (np.logical_and /
        _or for flags, np.maximum / np.bitwise_or for codes) of the two knots."""
        v = np.asarray(values)
        left, right, w = self.left[samples], self.right[samples], self.weight[samples]
        a = np.take(v, left, axis=-1)
        return np.where(w == 0.0, a, combine(a, np.take(v, right, axis=-1)))


def assess_along(time_h, *, spacing_h: float | None = None, **kwargs) -> dict:
    """:func:`altox.assess` over a timeline (samples on the last axis), solved at knots only.

    Takes the keywords of :func:`altox.assess`; arrays whose last axis has the timeline's
    length vary along it. Returns what :func:`altox.assess` returns for the same input, with
    samples between knots interpolated in time (see the module docstring for the error bound).
    ``spacing_h`` defaults to :data:`DEFAULT_KNOT_SPACING_H`.
    """
    from altox.physiology.chain import ASSESS_KEYS, assess

    knots = Knots(time_h, [v for k, v in kwargs.items() if k not in SMOOTH_KEYWORDS and v is not None
                           and not isinstance(v, str)], DEFAULT_KNOT_SPACING_H if spacing_h is None else spacing_h)
    if len(knots) == knots.n:
        return assess(**kwargs)
    res = assess(**{k: (knots.at_knots(v) if v is not None and not isinstance(v, str) else v)
                    for k, v in kwargs.items()})
    if np.ndim(res["sao2_pct"]) == 0 or np.shape(res["sao2_pct"])[-1] != len(knots):
        return assess(**kwargs)   # nothing varies along the samples: no knots to interpolate between
    out = {}
    for key in ASSESS_KEYS:
        v = res[key]
        if isinstance(v, str):
            out[key] = v
        elif key in _ALL_OF:
            out[key] = knots.interpolate_flag(v, combine=np.logical_and)
        elif key in _ANY_OF:
            out[key] = knots.interpolate_flag(v, combine=np.logical_or)
        elif key in _WORST_OF:
            out[key] = knots.interpolate_flag(v, combine=_WORST_OF[key])
        else:
            out[key] = knots.interpolate(v)
    return out
