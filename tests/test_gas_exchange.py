"""Water vapour, inspired and alveolar gas, the A-a difference and equivalent altitude."""

import numpy as np
import pytest

from altox import alveolar_po2, equivalent_altitude, inspired_po2, water_vapour_pressure
from altox.physiology.gas_exchange import arterial_po2, sea_level_aado2, shunt_fraction_for_age
from altox.units import M_PER_FT


def test_water_vapour_at_body_temperature():
    # 47 mmHg at 37 C (Fenn, Rahn & Otis 1946; common practice); Buck 1981 gives 47.1.
    assert water_vapour_pressure(37.0) == pytest.approx(47.0, abs=0.2)
    assert water_vapour_pressure(39.0) > water_vapour_pressure(37.0)


def test_inspired_and_alveolar_at_sea_level():
    # PIO2 = 0.2095 (760 - 47) = 149 mmHg; PAO2 = 149 - 40 (0.2095 + 0.7905/0.8) = 100 mmHg
    # (alveolar gas equation, Fenn, Rahn & Otis 1946; the usual worked example, common practice).
    assert inspired_po2(760.0) == pytest.approx(149.4, abs=0.3)
    assert alveolar_po2(760.0, 40.0) == pytest.approx(101.4, abs=0.5)
    # the simplified form PIO2 - PACO2/R gives 99.4; the full form is ~2 mmHg higher
    assert alveolar_po2(760.0, 40.0) - (inspired_po2(760.0) - 40.0 / 0.8) == pytest.approx(2.0, abs=0.2)


def test_alveolar_clamped_at_zero():
    assert alveolar_po2(200.0, 60.0) == 0.0


def test_hypoxic_challenge_equivalence():
    # Josephs LK, Coker RK, Thomas M. Prim Care Respir J 2013 (equivalences.csv): 15.1 % O2 at sea
    # level equals an 8,000 ft cabin. Equal-PIO2 gives 8,170 ft; tolerance 300 ft (0.1 % O2 is ~150 ft).
    eq_ft = equivalent_altitude(0.151, 760.0) / M_PER_FT
    assert eq_ft == pytest.approx(8000.0, abs=300.0)


def test_oxygen_enrichment_rule_of_thumb():
    # West JB. Respir Physiol 1995;99:225-232: each 1 % of O2 added lowers the equivalent altitude by
    # about 300 m at 4,000-5,000 m.
    for site_m in (4000.0, 4500.0, 5000.0):
        from altox import barometric_pressure

        pb = barometric_pressure(site_m, "mountain")
        drop = equivalent_altitude(0.2095, pb, "mountain") - equivalent_altitude(0.2195, pb, "mountain")
        assert drop == pytest.approx(300.0, abs=60.0)


@pytest.mark.parametrize("age", [20.0, 40.0, 60.0, 80.0])
def test_sea_level_aado2_matches_age_regression(age):
    # Mellemgaard K. Acta Physiol Scand 1966;67:10-20: AaDO2 = 2.5 + 0.21 age (from memory).
    pa = alveolar_po2(760.0, 40.0)
    aad = pa - arterial_po2(pa, shunt_fraction=shunt_fraction_for_age(age))
    assert aad == pytest.approx(sea_level_aado2(age), abs=0.05)


def test_aado2_narrows_at_altitude():
    # A-a differences at rest at altitude are a few mmHg: 5.4 calculated at 8,400 m
    # (Grocott MPW et al. N Engl J Med 2009;360:140-149); 7.9 +- 3.7 at 4,559 m (blood_gases_altitude.csv).
    pa = 40.0
    aad = pa - arterial_po2(pa, shunt_fraction=shunt_fraction_for_age(35.0), ph=7.47, pco2_mmhg=30.0)
    assert 1.0 < aad < 8.0
    assert aad < sea_level_aado2(35.0)


def test_arterial_never_above_alveolar():
    pa = np.linspace(20.0, 600.0, 200)
    assert np.all(arterial_po2(pa) <= pa)


def test_content_inversion_fallback_on_two_dimensional_input():
    # elements Newton cannot settle (no PO2 has a negative content) take the bracketed path by their
    # flat index, also when the input is 2-D (people x samples)
    from altox.physiology.gas_exchange import _po2_for_content, _po2_for_content_safeguarded

    content = np.array([[15.0, -0.1, -0.2], [18.0, -1.0, 10.0]])
    upper = np.full(content.shape, 100.0)
    p, s = _po2_for_content(content, 14.5, 1.0, upper)
    ref = _po2_for_content_safeguarded(content.ravel(), np.full(6, 14.5), np.ones(6), upper.ravel())
    np.testing.assert_allclose(p.ravel(), ref, atol=1e-6)
    assert p.shape == s.shape == content.shape
