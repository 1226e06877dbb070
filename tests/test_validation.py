"""The whole chain against published blood gases and saturations of lowlanders at altitude, acute and acclimatized.

Sources are named per row in tests/reference_data/blood_gases_altitude.csv and spo2_altitude.csv
(Grocott et al. N Engl J Med 2009;360:140-149; Sutton et al. J Appl Physiol 1988;64:1309-1321;
Richalet et al. Adv Exp Med Biol 1999;474:297-317; West et al. Science 1984;223:784-788 and
J Appl Physiol 1983;55:678-687; the 4,559 m arterial gases table; Botella de Maglia et al.
Med Intensiva 2008;32:277-281; Cobb et al. Physiol Rep 2021;9:e14809). The tolerances and the
reasons for the known disagreements live in docs/gen_validation.py, which also writes
docs/validation.md from the same rows.
"""

import runpy
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
GEN = runpy.run_path(str(ROOT / "docs" / "gen_validation.py"), run_name="gen_validation")

BG = GEN["blood_gas_cases"]()
SPO2 = GEN["spo2_cases"]()
KNOWN = GEN["KNOWN"]


@pytest.mark.parametrize("case", BG, ids=[f"{c[0]['id']}-{c[1][2]}" for c in BG])
def test_blood_gases(case):
    row, q, days, published, model = case
    tol = KNOWN[(row["id"], q[2])][1] if (row["id"], q[2]) in KNOWN else q[4]
    assert abs(model - published) <= tol, (row["source"], q[2], published, model)


@pytest.mark.parametrize("case", SPO2, ids=[c[0]["id"] for c in SPO2])
def test_spo2_within_model_range(case):
    row, mean, sd, days, lo, hi = case
    tol = GEN["spo2_tolerance"](sd)
    assert lo - tol <= mean <= hi + tol, (row["source"], mean, lo, hi)


def test_enough_independent_rows():
    # acute and acclimatized, moderate and extreme altitude, must all be represented
    states = {c[0]["state"] for c in BG}
    assert {"acute", "acclimatized"} <= states
    assert len(SPO2) >= 6


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
