"""Each hand-written numerical routine against its general-purpose library counterpart.

altox carries small routines of its own where a library call would cost start-up time or a
per-element Python loop (the reasons, measured, are in docs/methods.md, "Hand-written numerical
routines"). Each is held here to numpy's or scipy's routine on the same problem; the ISA layer
table and closed form are held to ambiance in tests/test_atmosphere.py, the vectorised
equilibrium solve to scipy's brentq in tests/test_chain.py, the normal quantiles to scipy's
ndtri in tests/test_atmosphere.py.
"""

import numpy as np
import pytest

from altox.physiology import blood
from altox.physiology import gas_exchange as ge
from altox.evaluation.sampling import Knots


def test_cardano_inverse_of_the_severinghaus_curve_against_brentq():
    # standard_po2_for_saturation (closed-form cubic root) vs scipy.optimize.brentq on
    # standard_saturation (Severinghaus 1979) over the whole curve
    from scipy.optimize import brentq

    for s in np.concatenate([np.linspace(0.01, 0.99, 99), [0.995, 0.999]]):
        ref = brentq(lambda p: float(blood.standard_saturation(p)) - s, 1e-9, 2000.0, xtol=1e-12, rtol=1e-14)
        assert float(blood.standard_po2_for_saturation(s)) == pytest.approx(ref, rel=1e-9, abs=1e-9)


def test_knot_interpolation_against_numpy_interp():
    # Knots.interpolate (in-place linear interpolation between knots) vs numpy.interp over the
    # same knots, on an uneven timeline with piecewise-constant segments
    rng = np.random.default_rng(11)
    t = np.cumsum(rng.uniform(0.01, 0.7, 400))
    seg = np.repeat(np.arange(8), 50)
    k = Knots(t, piecewise=[seg], spacing_h=1.5)
    y = np.sin(t) + 0.1 * t
    got = k.interpolate(y[k.index].copy())
    want = np.interp(t, t[k.index], y[k.index])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    # a people x samples array interpolates row by row
    yy = np.stack([y, 2.0 * y + 1.0])
    np.testing.assert_allclose(k.interpolate(yy[:, k.index].copy())[1], np.interp(t, t[k.index], yy[1, k.index]),
                               rtol=0, atol=1e-12)


def test_content_inversion_against_brentq():
    # gas_exchange._po2_for_content (Newton, checked at the result) vs scipy.optimize.brentq on
    # bound + dissolved content (Severinghaus curve, Huefner factor, O2 solubility)
    from scipy.optimize import brentq

    rng = np.random.default_rng(3)
    n = 200
    hb = rng.uniform(8.0, 20.0, n)
    factor = rng.uniform(0.7, 2.0, n)
    upper = rng.uniform(30.0, 600.0, n)

    def content(p, i):
        return blood.HUEFNER_ML_PER_G * hb[i] * float(blood.standard_saturation(p * factor[i])) \
            + blood.O2_SOLUBILITY_ML_DL_MMHG * p

    target = np.array([content(upper[i], i) for i in range(n)]) * rng.uniform(0.3, 0.99, n)
    p_fast, _ = ge._po2_for_content(target, hb, factor, upper)
    for i in range(n):
        ref = brentq(lambda p: content(p, i) - target[i], 0.0, upper[i], xtol=1e-12)
        assert p_fast[i] == pytest.approx(ref, abs=1e-6)
