"""The whole chain against published blood gases and saturations of lowlanders at altitude.

Every case comes from tests/reference_data/blood_gases_altitude.csv and spo2_altitude.csv, where each
published value has its source, its tolerance and the reason for it (fixed from the source before the
comparison), the exposure the model is run at, and its role (calibration rows are checked too, but
kept out of the bias table). docs/gen_validation.py builds the cases and docs/validation.md; the
acceptance rule is in its docstring: no optimistic residual beyond its tolerance; a conservative one
at most 3 saturation points, 4 mmHg or 0.04 pH beyond it, unless the row conflicts with a less
oxygenated source.
"""

import runpy
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
GEN = runpy.run_path(str(ROOT / "docs" / "gen_validation.py"), run_name="gen_validation")
CASES = GEN["all_cases"]()

# Gaps not closed yet, each with its residual (model minus published) and tolerance.
OPEN = {
    "spo2_tannheimer_7100-SpO2": (
        "residual +9.3 points against tolerance 6.3 (optimistic): the model's acclimatized curve is too "
        "flat between 5,200 and 7,100 m for climbers who have spent a night or two at a high camp "
        "(Botella 7,000 m passes: +2.5 against 8.1). Not closed this session."),
}


def _marks(case):
    if case.id in OPEN:
        return [pytest.mark.xfail(strict=True, reason=OPEN[case.id])]
    return []


@pytest.mark.parametrize("case", [pytest.param(c, marks=_marks(c), id=c.id) for c in CASES])
def test_published_value(case):
    assert case.passes, (f"{case.row['source']}: {case.label} published {case.published:g}, model "
                         f"{case.model:.3f}, residual {case.residual:+.3f} ({case.verdict}, tolerance "
                         f"{case.tolerance:g}, allowance {case.allowance:g}{', waived' if case.waived else ''})")


def test_acceptance_rule_can_fail():
    # the rule itself: an optimistic residual just beyond its tolerance fails, a conservative one within
    # the allowance passes, and beyond it fails unless waived
    case = next(c for c in CASES if c.label == "SpO2")
    base = dict(vars(case))

    def with_model(model, waived=False):
        return GEN["Case"](**{**base, "model": model, "waived": waived})

    tol = case.tolerance
    assert not with_model(case.published + tol + 0.01).passes          # optimistic beyond
    assert with_model(case.published - tol - 2.9).passes               # conservative within allowance
    assert not with_model(case.published - tol - 3.1).passes           # conservative beyond allowance
    assert with_model(case.published - tol - 3.1, waived=True).passes  # ... waived against a conflict


def test_every_compared_value_has_a_tolerance_and_a_reason():
    for case in CASES:
        assert case.tolerance > 0 and case.row["tolerance_reason"], case.id
        assert case.row["role"] in ("calibrate", "validate"), case.id


def test_enough_independent_rows():
    # acute, acclimatized and asleep, moderate and extreme altitude, must all be validated
    validation = [c for c in CASES if not c.calibration]
    assert {"acute", "acclimatized", "asleep"} <= {c.state for c in validation}
    assert {c.band for c in validation} >= {"below 1,500 m", "1,500-3,499 m", "3,500-5,499 m",
                                            "5,500-7,499 m", "7,500 m and above"}


def test_validation_page_is_current():
    page = (ROOT / "docs" / "validation.md").read_text(encoding="utf-8")
    assert page == GEN["main"](), "docs/validation.md is stale: run python docs/gen_validation.py > docs/validation.md"


def test_acclimatization_raises_saturation_and_lowers_pco2():
    # Ventilatory acclimatization (Rahn & Otis, Am J Physiol 1949;157:445-462): at a fixed altitude
    # PACO2 falls and saturation rises over the first days; Botella de Maglia 2008 at 5,200 m:
    # SpO2 78.4 % on day 1 and 87.4 % a month later.
    from altox import assess

    r = assess(5200.0, atmosphere="mountain", days=[0.25, 1, 3, 7, 30])
    assert all(a > b for a, b in zip(r["alveolar_pco2_mmhg"], r["alveolar_pco2_mmhg"][1:]))
    assert all(a < b for a, b in zip(r["sao2_pct"], r["sao2_pct"][1:]))


def test_alkalosis_raises_affinity():
    # The respiratory alkalosis of altitude shifts the curve left (Bohr effect): saturation at the
    # same PaO2 is higher than on the standard curve (Winslow et al. J Appl Physiol 1984;56:109-116).
    from altox import assess, saturation

    r = assess(8848.0, atmosphere="mountain", days=40)
    assert r["arterial_ph"] > 7.5
    assert r["sao2_pct"] / 100 > saturation(r["arterial_po2_mmhg"]) + 0.05
