"""The fast paths of the chain against their reference paths, on the same inputs.

Each test names the fast path and the reference it is held to; timing is never asserted here
(see benchmarks/run.py).
"""

import numpy as np
import pytest

from altox.physiology import ventilation as v


def _bracketed_reference(pio2, fio2, fv, fr, **kw):
    """The robust path alone (Illinois regula falsi on the whole bracket) on the same residual."""
    pio2_a, state, _ = v._make_state(pio2, fio2, 0.8, fv, fr, kw.get("metabolic_ratio", 1.0),
                                     kw.get("hypoxic_gain_scale", 1.0), kw.get("drive_scale", 1.0),
                                     kw.get("hco3_offset_mmol_l", 0.0), None)
    u, conv, _ = v._solve_bracketed(np.broadcast_to(pio2_a, np.shape(pio2_a)), state, 200, 1e-12)
    return np.exp(u), conv


@pytest.mark.parametrize("case", ["independent-fractions", "days-linked", "array-fio2-and-gain"])
def test_equilibrium_fast_path_matches_bracketed_solve(case):
    # fast path (tabulated guess, whole-array Newton, exact residual check) vs the bracketed solver
    rng = np.random.default_rng(11)
    n = 4000
    pio2 = rng.uniform(35.0, 215.0, n)
    kw = {}
    fio2 = 0.2095
    if case == "days-linked":
        fv, fr = v.acclimatization_fractions(rng.uniform(0.0, 30.0, n))
    else:
        fv, fr = rng.uniform(0.0, 1.0, n), rng.uniform(0.0, 1.0, n)
    if case == "array-fio2-and-gain":
        fio2 = rng.uniform(0.15, 1.0, n)
        pio2 = fio2 * rng.uniform(200.0, 713.0, n)
        kw = {"hypoxic_gain_scale": rng.uniform(0.5, 2.0, n), "drive_scale": rng.uniform(0.7, 1.0, n)}
    fast = v.equilibrium(pio2, fio2, 0.8, fv, fr, **kw)
    x_ref, conv_ref = _bracketed_reference(pio2, fio2, fv, fr, **kw)
    assert conv_ref.all()
    # the fast path flags exactly the roots whose alveolar PO2 is not positive (no steady state)
    pao2 = pio2 - (fio2 + (1.0 - fio2) / 0.8) * fast["paco2_mmhg"]
    np.testing.assert_array_equal(fast["converged"], pao2 > 0.0)
    np.testing.assert_allclose(fast["ventilation_ratio"], x_ref, rtol=1e-9)
    # every element the fast path returns satisfies the stated tolerance on the exact residual
    g = v.equilibrium_residual(fast["ventilation_ratio"], pio2, fio2, 0.8, fv, fr, **kw)
    assert np.all(np.abs(g) <= 1e-11)


def test_equilibrium_guess_table_equals_full_solve_at_its_nodes():
    # the response surface (guess table) against the bracketed solve of the same points
    table = v._guess_table(0.2095, 0.8, 1.0, 1.0, 1.0, 0.0)
    p, fv, fr = np.meshgrid(v._GUESS_PIO2[::10], v._GUESS_F, v._GUESS_F, indexing="ij")
    x_ref, _ = _bracketed_reference(p.ravel(), 0.2095, fv.ravel(), fr.ravel())
    nf = v._GUESS_F.size
    stored = table.reshape(v._GUESS_PIO2.size, nf, nf)[::10].ravel()
    np.testing.assert_allclose(np.exp(stored), x_ref, rtol=1e-9)


def test_equilibrium_scalar_and_chunk_agree():
    # one element solved alone (0-d path) against the same element inside a whole array
    rng = np.random.default_rng(3)
    pio2 = rng.uniform(40.0, 150.0, 50)
    fv, fr = rng.uniform(0.0, 1.0, 50), rng.uniform(0.0, 1.0, 50)
    whole = v.equilibrium(pio2, f_ventilatory=fv, f_renal=fr)
    for i in range(0, 50, 7):
        one = v.equilibrium(pio2[i], f_ventilatory=fv[i], f_renal=fr[i])
        assert one["paco2_mmhg"].shape == ()
        assert float(one["paco2_mmhg"]) == pytest.approx(whole["paco2_mmhg"][i], rel=1e-10)


def test_no_steady_state_below_the_cliff_is_flagged_and_above_converges():
    # acute exposure below about the highest summit's inspired PO2 (43 mmHg) has no resting steady state
    # (the inspired gas cannot support the PCO2 the drive leaves); acclimatized, it converges down to
    # 40 mmHg (the chamber summit, Operation Everest III, PB 253 mmHg); below that floor altox marks
    # results outside the model whatever the solver says (validity.min_inspired_po2_mmhg)
    pio2 = np.linspace(15.0, 60.0, 451)
    for fio2 in (0.12, 0.2095):
        acute = v.equilibrium(pio2, fio2, 0.8, 0.0, 0.0)
        assert not acute["converged"][pio2 <= 40.0].any() and acute["converged"][pio2 >= 50.0].all()
        adapted = v.equilibrium(pio2, fio2, 0.8, 1.0, 1.0)
        assert adapted["converged"][pio2 >= 40.0].all()


def test_content_inversion_fast_path_matches_safeguarded_newton():
    # Newton without a bracket (checked at the result) vs the bracketed Newton, PO2 for a content
    from altox.physiology import blood
    from altox.physiology import gas_exchange as ge

    rng = np.random.default_rng(5)
    n = 5000
    hb = rng.uniform(8.0, 20.0, n)
    factor = rng.uniform(0.7, 2.0, n)
    upper = rng.uniform(15.0, 600.0, n)
    s_up = np.asarray(blood.standard_saturation(upper * factor))
    c_up = blood.HUEFNER_ML_PER_G * hb * s_up + blood.O2_SOLUBILITY_ML_DL_MMHG * upper
    content = c_up - rng.uniform(0.0, 1.5, n)
    content[:20] = -0.1   # no PO2 has this content: both give the bracket's lower end
    p_fast, s_fast = ge._po2_for_content(content, hb, factor, upper)
    p_ref = ge._po2_for_content_safeguarded(content, hb, factor, upper)

    def residual(p):
        return blood.HUEFNER_ML_PER_G * hb * np.asarray(blood.standard_saturation(p * factor)) \
            + blood.O2_SOLUBILITY_ML_DL_MMHG * p - content

    assert np.all(np.abs(residual(p_fast)[20:]) < 1e-9)
    # where the bracketed Newton met the same 1e-9 mL/dL, the two agree to what that allows
    # (the content curve is never flatter than the dissolved O2's 0.003 mL/dL/mmHg)
    both = np.abs(residual(p_ref)) < 1e-9
    assert both[20:].mean() > 0.99
    np.testing.assert_allclose(p_fast[both], p_ref[both], rtol=0, atol=2e-9 / blood.O2_SOLUBILITY_ML_DL_MMHG)
    np.testing.assert_allclose(p_fast[:20], p_ref[:20], atol=1e-6)
    np.testing.assert_allclose(s_fast, blood.standard_saturation(p_fast * factor), rtol=1e-12, atol=1e-15)


def test_assess_range_check_still_raises_with_measured_pressure():
    # the cheap min/max check of the altitude beside a measured pressure raises the model's own error
    import altox
    from altox.errors import OutOfRangeError

    with pytest.raises(OutOfRangeError, match="mountain"):
        altox.assess(np.array([1000.0, 9500.0]), pb_mmhg=500.0, atmosphere="mountain")
    with pytest.raises(OutOfRangeError, match="outside"):
        altox.assess(np.array([1000.0, np.nan]), pb_mmhg=500.0, atmosphere="mountain")


def test_cached_pressure_spans_and_rule_figures_equal_fresh_computation():
    """The pressure span of each atmosphere and the rule thresholds' figures are computed once; same values."""
    import altox.physiology.atmosphere as atm
    from altox.guidance import available_rule_sets, load_rule_set
    from altox.guidance.loader import _altitude_ft

    for name, (top, bottom) in (("isa", (atm.ISA_MAX_M, atm.ISA_MIN_M)),
                                ("mountain", (atm.MOUNTAIN_MAX_M, atm.MOUNTAIN_MIN_M))):
        assert atm._pressure_span(name) == (float(atm.barometric_pressure(top, name)),
                                           float(atm.barometric_pressure(bottom, name)))
    for rule_id in available_rule_sets():
        for th in load_rule_set(rule_id).thresholds:
            if th.quantity == "cabin_pressure_altitude":
                assert th.lower_ft == th.lower_ft == _altitude_ft(th.value, th.quantity, "value")
                if th.band_top is not None:
                    assert th.top_ft == _altitude_ft(th.band_top, th.quantity, "band_top")
