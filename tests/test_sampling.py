"""Fast paths along a timeline equal the reference paths.

* ``altox.evaluation.sampling``: the chain solved at knots and interpolated in time, against the chain
  solved at every sample (the reference), on the demo plans at one-minute sampling.
* ``altox.physiology.acclimatization``: the closed form per run of constant altitude, against the
  per-sample first-order recurrence written out here (the reference).
"""

import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import altox.evaluation.evaluate as evaluate_module
from altox.evaluation import population as pop
from altox.physiology.acclimatization import acclimatization_history
from altox.physiology.atmosphere import SEA_LEVEL_MMHG
from altox.physiology.chain import assess
from altox.physiology.gas_exchange import inspired_po2
from altox.plan.profile import load_plan_text
from altox.evaluation.sampling import Knots, assess_along
from altox.plan.timeline import expand
from altox.physiology.ventilation import acclimatization_fractions, default_parameters


def _resampled(path, every):
    text = open(path, encoding="utf-8").read()
    if re.search(r"(?m)^sample_every:", text):
        return load_plan_text(re.sub(r"(?m)^sample_every:.*$", f"sample_every: {every}", text))
    return load_plan_text(f"sample_every: {every}\n" + text)


def _reference_history(pio2, duration_h, initial_pio2):
    """The per-sample recurrence: Dacc moves toward D by exp(-dt/tau), tau up or down per sample."""
    p = default_parameters()
    pio2_sl = float(inspired_po2(SEA_LEVEL_MMHG))
    deficit = np.maximum(pio2_sl - pio2, 0.0)
    out = []
    for tau_up in (p.ventilatory_time_constant_days, p.renal_time_constant_days):
        acc = np.broadcast_to(np.maximum(pio2_sl - initial_pio2, 0.0), pio2.shape[:-1]).astype(float)
        frac = np.empty_like(deficit)
        for i in range(deficit.shape[-1]):
            d = deficit[..., i]
            tau = np.where(d > acc, tau_up, p.deacclimatization_time_constant_days)
            acc = d + (acc - d) * np.exp(-duration_h[i] / 24.0 / tau)
            frac[..., i] = np.where(d > 1e-9, np.minimum(1.0, acc / np.where(d > 1e-9, d, 1.0)), 1.0)
        out.append(frac)
    return out


@settings(max_examples=60, deadline=None)
@given(levels=st.lists(st.floats(40.0, 150.0), min_size=1, max_size=12),
       repeats=st.lists(st.integers(1, 6), min_size=12, max_size=12),
       hours=st.floats(0.05, 30.0), home=st.floats(40.0, 150.0))
def test_acclimatization_closed_form_equals_recurrence(levels, repeats, hours, home):
    pio2 = np.repeat(np.array(levels), repeats[:len(levels)])[None, :] * np.ones((2, 1))
    dur = np.full(pio2.shape[-1], hours)
    fast = acclimatization_history(pio2, dur, np.array([home, 149.0]))
    ref = _reference_history(pio2, dur, np.array([home, 149.0]))
    for a, b in zip(fast, ref):
        assert np.all(np.isfinite(a)) and np.all((a >= 0.0) & (a <= 1.0))
        np.testing.assert_allclose(a, b, rtol=0.0, atol=1e-12)


def test_acclimatization_at_constant_altitude_is_the_fractions():
    pio2 = np.full((1, 240), 90.0)
    f_v, f_r = acclimatization_history(pio2, np.full(240, 1.0))
    e_v, e_r = acclimatization_fractions(np.arange(1, 241) / 24.0)
    np.testing.assert_allclose(f_v[0], e_v, rtol=1e-12)
    np.testing.assert_allclose(f_r[0], e_r, rtol=1e-12)


def test_knots_hold_segment_ends_and_are_exact_there():
    t = np.arange(0.0, 10.0, 0.25)
    pb = np.where(t < 3.1, 500.0, 450.0)
    k = Knots(t, [pb], spacing_h=1.0)
    assert {0, t.size - 1, 12, 13} <= set(k.index.tolist())       # ends, and both sides of the change
    assert np.all(np.diff(t[k.index]) <= 1.0 + 1e-12)
    y = np.sin(t)
    np.testing.assert_array_equal(k.interpolate(y[k.index])[k.index], y[k.index])
    # linear data is reproduced exactly between knots
    np.testing.assert_allclose(k.interpolate((2.0 * t + 1.0)[k.index]), 2.0 * t + 1.0, rtol=0, atol=1e-12)


@pytest.mark.parametrize("path", ["profiles/trek-teskavor.yaml", "profiles/trek-teskavor-fast.yaml"])
def test_plan_on_knots_equals_every_sample(path, monkeypatch):
    plan = _resampled(path, "1 min")
    fast = evaluate_module.evaluate_plan(plan)
    monkeypatch.setattr(evaluate_module, "assess_along", lambda time_h, **kw: assess(**kw))
    full = evaluate_module.evaluate_plan(plan)
    assert len(fast.samples["time_h"]) > 5000
    tol = {"sao2_pct": 0.01, "arterial_po2_mmhg": 0.01, "alveolar_po2_mmhg": 0.01, "alveolar_pco2_mmhg": 0.01,
           "arterial_ph": 1e-4, "o2_content_ml_dl": 0.005, "barometric_mmhg": 1e-9, "inspired_po2_mmhg": 1e-9}
    for key, atol in tol.items():
        np.testing.assert_allclose(fast.samples[key], full.samples[key], rtol=0.0, atol=atol, err_msg=key)
    for name, values in full.member_samples.items():
        np.testing.assert_allclose(fast.member_samples[name]["sao2_pct"], values["sao2_pct"], rtol=0.0, atol=0.01)
    assert [leg["sao2_pct"] for leg in fast.legs] == pytest.approx([leg["sao2_pct"] for leg in full.legs], abs=0.01)


def test_flight_profile_changes_every_sample_so_every_sample_is_a_knot():
    plan = _resampled("profiles/jet-highcruise.yaml", "1 min")
    tl = expand(plan)
    k = Knots(tl.time_h, [tl.pb_mmhg])
    climb = np.flatnonzero(np.diff(tl.pb_mmhg) != 0.0)
    assert set(climb.tolist()) <= set(k.index.tolist())


def test_assess_along_flags_are_conservative():
    # at the edge of the steady state (acute, inspired PO2 about 40 mmHg) the flag flips along the
    # interval: a sample the knots call converged is converged in the reference, never the reverse
    t = np.arange(0.0, 6.0, 0.1)
    f = np.linspace(0.0, 0.05, t.size)
    kw = dict(altitude_m=np.full(t.size, 8848.0), atmosphere="mountain", fio2=0.195, f_ventilatory=f, f_renal=f)
    r = assess_along(t, spacing_h=1.0, **kw)
    ref = assess(**kw)
    assert r["solver_converged"].dtype == bool
    assert ref["solver_converged"].any() and not ref["solver_converged"].all()
    assert not (r["solver_converged"] & ~ref["solver_converged"]).any()


def test_ensemble_on_knots_equals_every_sample(monkeypatch):
    import altox.evaluation.sampling as sampling

    plan = _resampled("profiles/trek-teskavor-fast.yaml", "5 min")
    fast = pop.expected_range(plan, n=40, seed=3)
    monkeypatch.setattr(sampling, "DEFAULT_KNOT_SPACING_H", 1e-6)   # every sample a knot: the reference
    ref = pop.expected_range(plan, n=40, seed=3)
    assert len(ref["time_h"]) > 1000
    for a, b in zip(fast["people"], ref["people"]):
        np.testing.assert_allclose(a["sao2_pct_percentiles"], b["sao2_pct_percentiles"], rtol=0.0, atol=0.01)
        np.testing.assert_allclose(a["central_sao2_pct"], b["central_sao2_pct"], rtol=0.0, atol=0.01)
