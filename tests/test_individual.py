"""Individual factors and fitness to fly: published worked examples, the acetazolamide effect, properties."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from altox.evaluation import individual as ind
from altox.physiology.chain import assess
from altox.units import MMHG_PER_KPA


# -- fitness to fly: Dillard's regression and the BTS thresholds ---------------------------------
def test_dillard_1989_worked_example_cohort_means():
    # Dillard TA, Berg BW, Rajagopal KR, Dooley JW, Mehm WJ. Ann Intern Med 1989;111:362-367,
    # abstract: PaO2Alt = 0.453 PaO2G + 0.386 FEV1%pred + 2.440; cohort PaO2G 72.4 mmHg, FEV1 31 %,
    # measured PaO2Alt 47.4 +- 6 mmHg (n = 18) at 2,438 m (8,000 ft).
    predicted = ind.dillard_pao2_altitude_mmhg(72.4, 31.0)
    assert predicted == pytest.approx(0.453 * 72.4 + 0.386 * 31.0 + 2.440, abs=1e-9)
    assert predicted == pytest.approx(47.2, abs=0.05)
    # against the measured cohort mean: within its standard error (6 / sqrt(18) = 1.4 mmHg)
    assert abs(predicted - 47.4) < 6.0 / np.sqrt(18)


def test_dillard_is_vectorised():
    out = ind.dillard_pao2_altitude_mmhg(np.array([60.0, 72.4, 90.0]), np.array([20.0, 31.0, 60.0]))
    assert out.shape == (3,) and np.all(np.diff(out) > 0)


def test_bts_2022_thresholds_in_both_units():
    # Coker RK et al. BTS Clinical Statement on air travel. Thorax 2022;77:329-350, hypoxic
    # challenge table: PaO2 >= 6.6 kPa (>= 50 mm Hg) and SpO2 >= 85 %: in-flight oxygen not required.
    limit_mmhg = 6.6 * MMHG_PER_KPA
    assert limit_mmhg == pytest.approx(49.5, abs=0.05)
    assert ind._bts(pao2_mmhg=limit_mmhg + 0.01, spo2_pct=85.0)["meets_thresholds"] is True
    assert ind._bts(pao2_mmhg=limit_mmhg - 0.01)["meets_thresholds"] is False
    assert ind._bts(spo2_pct=84.9)["meets_thresholds"] is False


def test_fitness_to_fly_reports_both_estimates_and_cautions():
    r = ind.fitness_to_fly(pao2_ground_mmhg=72.4, fev1_fraction=0.31, age_y=68.0)
    assert r["regression"]["pao2_mmhg"] == pytest.approx(47.2, abs=0.05)
    assert r["regression"]["bts"]["meets_thresholds"] is False          # 6.29 kPa < 6.6
    assert 40.0 < r["model"]["pao2_mmhg"] < 70.0 and "sao2_pct" in r["model"]
    assert "not a clearance" in r["caution"]
    far = ind.fitness_to_fly(pao2_ground_mmhg=72.4, fev1_fraction=0.31, cabin_altitude_ft=5000.0)
    assert any("8,000 ft" in n for n in far["notes"])


def test_fitness_to_fly_refuses_missing_or_absurd_input():
    with pytest.raises(ind.FactorError):
        ind.fitness_to_fly()
    with pytest.raises(ind.FactorError):
        ind.fitness_to_fly(pao2_ground_mmhg=400.0)
    with pytest.raises(ind.FactorError):
        ind.fitness_to_fly(spo2_ground=0.999, ground_elevation_ft=0.0, age_y=80.0)  # above a perfect lung


def test_fitted_shunt_reproduces_the_target():
    qs = ind.fit_shunt_fraction(np.array([0.93, 0.95]), altitude_m=100.0, age_y=60.0)
    r = assess(np.array([100.0, 100.0]), atmosphere="mountain", days=3650.0, age_y=60.0, shunt_fraction=qs)
    assert r["sao2_pct"] == pytest.approx([93.0, 95.0], abs=0.01)


# -- person -> assess keywords ------------------------------------------------------------------
def test_person_kwargs_factors():
    base = ind.person_kwargs({})
    assert base == {"age_y": 40.0, "hb_g_dl": 14.5, "hypoxic_gain_scale": 1.0, "drive_scale": 1.0,
                    "hco3_offset_mmol_l": 0.0}
    assert ind.person_kwargs({"acetazolamide": True})["hco3_offset_mmol_l"] == -4.0
    assert ind.person_kwargs({"hvr": "low"})["hypoxic_gain_scale"] < 1.0 < ind.person_kwargs({"hvr": "high"})["hypoxic_gain_scale"]
    asleep = ind.person_kwargs({}, sleeping=True)["drive_scale"]
    assert asleep == ind.coefficients()["sleep"]["drive_scale"]["value"] and 0.0 < asleep < 1.0
    assert "shunt_fraction" in ind.person_kwargs({"home_spo2": 0.94, "age_y": 50.0})
    with pytest.raises(ind.FactorError):
        ind.hvr_gain_scale("medium")


def test_people_kwargs_broadcast_with_samples():
    from altox.plan.profile import load_plan

    plan = load_plan("profiles/trek-teskavor.yaml")
    kw = ind.people_kwargs(plan.party, sleeping=np.array([True, False, False]))
    assert kw["age_y"].shape == (4, 1) and kw["drive_scale"].shape == (1, 3)
    r = assess(np.full((4, 3), 4000.0), atmosphere="mountain", days=2.0, **kw)
    assert r["sao2_pct"].shape == (4, 3)
    assert np.all(r["sao2_pct"][:, 0] < r["sao2_pct"][:, 1])          # asleep is lower


# -- acetazolamide: its effect on ventilation against the published size ------------------------------
def _acetazolamide_ratio():
    # Rapid ascent from sea level to 4,394 m in about 33.5 h (Larson et al., abstract): 1.4 days.
    kw = dict(atmosphere="mountain", days=33.5 / 24.0)
    placebo = assess(4394.0, **kw)
    drug = assess(4394.0, hco3_offset_mmol_l=ind.person_kwargs({"acetazolamide": True})["hco3_offset_mmol_l"], **kw)
    return placebo, drug


def test_acetazolamide_raises_ventilation_lowers_paco2_and_bicarbonate():
    placebo, drug = _acetazolamide_ratio()
    assert drug["ventilation_ratio"] > placebo["ventilation_ratio"]
    assert drug["arterial_pco2_mmhg"] < placebo["arterial_pco2_mmhg"] - 2.0
    assert drug["arterial_po2_mmhg"] > placebo["arterial_po2_mmhg"] + 2.0
    assert drug["arterial_ph"] < placebo["arterial_ph"]                   # a metabolic acidosis


def test_acetazolamide_eupnoeic_paco2_against_schmickl_2021():
    # Schmickl CN, Landry S, Orr JE, et al. Effects of acetazolamide on control of breathing in sleep
    # apnea patients: mechanistic insights using meta-analyses and physiological model simulations.
    # Physiol Rep 2021;9:e15071, Figure 2 legend (read): from meta-analysed effects, the eupnoeic
    # PaCO2 falls by 4.4 mmHg (-11 %) from a 40 mmHg baseline, CO2 output unchanged, i.e. alveolar
    # ventilation x 1/(1 - 0.11). Comparison: the tool's acetazolamide factor at sea level, awake,
    # at rest. Tolerance 1.5 mmHg: the pooled effects behind it span about that much.
    placebo = assess(0.0)
    drug = assess(0.0, hco3_offset_mmol_l=ind.person_kwargs({"acetazolamide": True})["hco3_offset_mmol_l"])
    assert drug["arterial_pco2_mmhg"] - placebo["arterial_pco2_mmhg"] == pytest.approx(-4.4, abs=1.5)
    ratio = drug["ventilation_ratio"] / placebo["ventilation_ratio"]
    assert ratio == pytest.approx(1.0 / (1.0 - 0.11), abs=0.05)


def test_acetazolamide_bicarbonate_fall_within_pooled_estimate():
    # Wongboonsin J, Thongprayoon C, Bathini T, et al. Acetazolamide therapy in patients with heart
    # failure: a meta-analysis. J Clin Med 2019;8:349 (abstract read): serum bicarbonate mean
    # difference -6.42 mmol/L (95 % CI -10.05 to -2.79). The tool's total fall at sea level (its
    # -4 mmol/L metabolic shift plus the fall that follows the lower PaCO2) must lie within that CI.
    placebo = assess(0.0)
    drug = assess(0.0, hco3_offset_mmol_l=ind.person_kwargs({"acetazolamide": True})["hco3_offset_mmol_l"])
    assert -10.05 <= drug["bicarbonate_mmol_l"] - placebo["bicarbonate_mmol_l"] <= -2.79


@pytest.mark.xfail(strict=True, reason=(
    "Known gap, not tuned away: a resting model against exertion. The model's resting alveolar "
    "ventilation rises 13 % at 4,394 m; Larson et al. (Mt Rainier) report +47 % minute ventilation "
    "measured on the summit after a climb. See docs/individual.md."))
def test_acetazolamide_ventilation_against_larson_mt_rainier():
    # Larson EB et al., acetazolamide prophylaxis during rapid, active ascent of Mt Rainier
    # (4,394 m), abstract (scilit): summit minute ventilation 24.9 +- 2.0 vs 16.9 +- 3.8 L/min
    # (acetazolamide, n = 31; placebo, n = 33): ratio 1.47. Tolerance: +-0.15 on the ratio
    # (the spread of the two means if '+-' is an SD, ~0.06, widened for the summit's exertion).
    placebo, drug = _acetazolamide_ratio()
    ratio = drug["ventilation_ratio"] / placebo["ventilation_ratio"]
    assert ratio == pytest.approx(24.9 / 16.9, abs=0.15)


# -- properties -------------------------------------------------------------------------------------
_alt = st.floats(0.0, 6500.0)
_days = st.floats(0.0, 30.0)


@settings(max_examples=40, deadline=None)
@given(alt=_alt, days=_days, hb_low=st.floats(7.0, 20.0), d_hb=st.floats(0.01, 5.0),
       age=st.floats(18.0, 85.0), acz=st.booleans())
def test_lower_hemoglobin_never_raises_oxygen_content(alt, days, hb_low, d_hb, age, acz):
    kw = dict(atmosphere="mountain", days=days, age_y=age, hco3_offset_mmol_l=-4.0 if acz else 0.0)
    low = assess(np.array([alt]), hb_g_dl=hb_low, **kw)
    high = assess(np.array([alt]), hb_g_dl=hb_low + d_hb, **kw)
    assert low["o2_content_ml_dl"][0] <= high["o2_content_ml_dl"][0] + 1e-9


@settings(max_examples=40, deadline=None)
@given(alt=_alt, days=_days, age=st.floats(18.0, 85.0), d_age=st.floats(0.5, 40.0), hb=st.floats(9.0, 19.0),
       sleeping=st.booleans())
def test_older_age_never_lowers_alveolar_arterial_difference(alt, days, age, d_age, hb, sleeping):
    kw = dict(atmosphere="mountain", days=days, hb_g_dl=hb, drive_scale=ind.coefficients()["sleep"]["drive_scale"]["value"] if sleeping else 1.0)
    young = assess(np.array([alt]), age_y=age, **kw)
    old = assess(np.array([alt]), age_y=age + d_age, **kw)
    assert old["alveolar_arterial_mmhg"][0] >= young["alveolar_arterial_mmhg"][0] - 1e-6


@pytest.mark.xfail(strict=True, reason=(
    "Known gap, not tuned away: the bicarbonate and pH now follow the study (renal compensation is not "
    "applied on top of the drug's acidosis: HCO3 falls 4.1 mmol/L, pH 7.455 -> 7.393), but the model's "
    "ventilation rises only 12 % (PaCO2 -2.8 mmHg), so SaO2 gains +0.7 points at day 3 against +4 measured "
    "(tolerance 1.5): the acclimatized hypoxic drive withdraws as PaO2 rises. See docs/individual.md."))
def test_renal_carbonic_anhydrase_inhibition_against_swenson_1991():
    # Swenson ER, Leatham KL, Roach RC, Schoene RB, Mills WJ Jr, Hackett PH. Renal carbonic anhydrase
    # inhibition reduces high altitude sleep periodic breathing. Respir Physiol 1991;86:333-343
    # (abstract read): at 4,400 m, daytime SaO2 81 -> 85 % and venous HCO3 18.9 -> 14.8 mM with
    # benzolamide, a renal-selective inhibitor (so its action is the metabolic acidosis this model has).
    # Comparison: the model's day-3 SaO2 gain for the measured bicarbonate shift; tolerance 1.5 points.
    placebo = assess(4400.0, atmosphere="mountain", days=3.0)
    drug = assess(4400.0, atmosphere="mountain", days=3.0, hco3_offset_mmol_l=-(18.9 - 14.8))
    assert drug["sao2_pct"] - placebo["sao2_pct"] == pytest.approx(85.0 - 81.0, abs=1.5)


def test_renal_carbonic_anhydrase_inhibition_bicarbonate_and_ph_against_swenson_1991():
    # Same study (abstract read): venous HCO3 18.9 -> 14.8 mM with benzolamide at 4,400 m, and the
    # drug's acidosis brings pH back toward normal. The kidney's answer to the hypocapnia must not be
    # added on top of the drug's acidosis: the total fall stays the drug's (tolerance 1 mmol/L, the
    # venous-arterial difference), and pH comes back within 0.03 of 7.40, not below it.
    placebo = assess(4400.0, atmosphere="mountain", days=3.0)
    drug = assess(4400.0, atmosphere="mountain", days=3.0, hco3_offset_mmol_l=-(18.9 - 14.8))
    assert drug["bicarbonate_mmol_l"] - placebo["bicarbonate_mmol_l"] == pytest.approx(-(18.9 - 14.8), abs=1.0)
    assert placebo["arterial_ph"] > 7.43 and abs(drug["arterial_ph"] - 7.40) < 0.03


# -- fitness to fly: one verdict by the published path ------------------------------------------------------
# Screening: Ahmedzai S et al. BTS recommendations, Thorax 2011;66 Suppl 1, Table 1 (read): sea-level SpO2
# > 95 %: oxygen not required; 92-95 % without risk factor: not required; with one: hypoxic challenge test;
# < 92 %: in-flight oxygen.  Regression: Dillard 1989 at 8,000 ft against the BTS 2022 challenge threshold
# (PaO2 6.6 kPa, Coker RK et al. Thorax 2022;77:329, table read).
@pytest.mark.parametrize("spo2, risk, level", [
    (0.96, None, "not required"),                     # > 95 %
    (0.95, [], "not required"),                       # 92-95 %, every risk factor excluded
    (0.95, None, "not concluded"),                    # 92-95 %, risk factors not stated: unknown
    (0.92, None, "not concluded"),
    (0.92, ["hypercapnia"], "hypoxic challenge test"),
    (0.919, [], "in-flight oxygen"),                  # < 92 %
], ids=["BTS2011-above-95", "BTS2011-band-no-risk", "BTS2011-band-unknown-95", "BTS2011-band-unknown-92",
        "BTS2011-band-risk", "BTS2011-below-92"])
def test_screening_path_bts_2011_table_1(spo2, risk, level):
    r = ind.fitness_to_fly(spo2_ground=spo2, risk_factors=risk, age_y=60.0)
    assert r["verdict"]["level"] == level and r["verdict"]["path"] == "ground SpO2 screening"
    assert "Thorax 2011" in r["verdict"]["sources"][0]


def test_ground_spo2_92_with_unknown_risk_factors_never_says_not_required():
    r = ind.fitness_to_fly(spo2_ground=0.92)
    assert r["verdict"]["level"] == "not concluded"
    assert "NOT REQUIRED" not in r["verdict"]["text"]
    assert "hypercapnia" in r["verdict"]["must_know"] and any("age" in m for m in r["verdict"]["must_know"])
    # the chain alone would pass this person at 8,000 ft; it is context, never the basis
    assert r["model"]["role"].startswith("context only")
    # an FEV1 below 50 % of predicted is a listed risk factor whatever else is stated
    assert ind.fitness_to_fly(spo2_ground=0.93, fev1_fraction=0.45, risk_factors=[])["verdict"]["level"] \
        == "hypoxic challenge test"


@pytest.mark.parametrize("pao2, fev1, level", [
    (72.4, 0.31, "in-flight oxygen"),          # Dillard cohort means: 47.2 mmHg = 6.29 kPa < 6.6
    (80.0, 0.70, "hypoxic challenge test"),    # 65.7 mmHg: above, but a prediction only: test confirms
], ids=["Dillard1989-cohort-below-6.6kPa", "Dillard1989-above-prediction-only"])
def test_regression_path_at_its_derivation_altitude(pao2, fev1, level):
    r = ind.fitness_to_fly(pao2_ground_mmhg=pao2, fev1_fraction=fev1, cabin_altitude_ft=5000.0, age_y=68.0)
    assert r["verdict"]["level"] == level
    assert r["regression"]["valid_at_ft"] == 8000.0 and r["cabin_altitude_ft"] == 5000.0
    assert "8,000 ft" in r["verdict"]["path"]


def test_paediatric_path():
    # Children: the adult table does not apply; hypoxic challenge, in-flight oxygen below SpO2 90 % on
    # 15 % O2 (BTS 2011 criterion as quoted by Jamieson & Carden, Eur Respir J 2012;40 Suppl 56:4334).
    r = ind.fitness_to_fly(spo2_ground=0.97, age_y=6.0)
    assert r["verdict"]["level"] == "hypoxic challenge test" and r["verdict"]["path"] == "paediatric"
    assert "90 %" in r["verdict"]["reasons"][0]


def test_fitness_command_one_verdict_and_cabin_conflict():
    from typer.testing import CliRunner

    import altox.cli.people  # noqa: F401
    from altox.cli.main import app

    res = CliRunner().invoke(app, ["fitness-to-fly", "profiles/medevac-transfer.yaml"])
    assert res.exit_code == 0, res.output
    assert res.stdout.count("IN-FLIGHT OXYGEN") == 1 and "Path:" in res.stdout and "Thorax" in res.stdout
    assert "oxygen not required" not in res.stdout.lower()
    assert "for 8,000 ft" in res.stdout and "cabin is 5,000 ft" in res.stdout
    assert max(len(line) for line in res.stdout.splitlines()) <= 80
    res = CliRunner().invoke(app, ["fitness-to-fly", "profiles/medevac-transfer.yaml", "--cabin", "6000ft"])
    assert res.exit_code == 2 and "--cabin" in res.output
    res = CliRunner().invoke(app, ["fitness-to-fly", "--spo2", "92 %"])
    assert res.exit_code == 0 and "NOT CONCLUDED" in res.stdout and "not required" not in res.stdout.lower()
