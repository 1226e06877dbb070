"""Decompression oxygen at the minimum flow of the certification standard (14 CFR / CS 25.1443).

Figures checked against CS 25.1443(b)-(c) (ED Decision 2003/2/RM): crew on demand equipment,
mean tracheal PO2 122 mmHg up to and including 35,000 ft and 95 % oxygen from 35,000 to
40,000 ft at 20 L/min BTPS; passengers 100 mmHg above 10,000 ft up to 18,500 ft at 15 L/min
BTPS and 83.8 mmHg above 18,500 ft up to 40,000 ft at 30 L/min BTPS.  The hand calculations
below use the ICAO standard atmosphere's closed form (Doc 7488/3) and the alveolar-gas
convention PtO2 = FiO2 (PB - 47); tolerances are rounding only (exact arithmetic).
"""

import pytest

from altox.evaluation.decompression import certification_descent_oxygen_l
from altox.evaluation.oxygen import load_data
from altox.units import M_PER_FT

PA_PER_MMHG = 133.322387415


def _isa_mmhg(ft):
    h = ft * M_PER_FT      # a pressure altitude is the standard atmosphere's geopotential altitude [m]
    if h <= 11000.0:
        return 101325.0 * (1 - 0.0065 * h / 288.15) ** 5.255877 / PA_PER_MMHG
    return 22632.06 * 2.718281828459045 ** (-9.80665 * 0.0289644 * (h - 11000.0) / (8.3144598 * 216.65)) / PA_PER_MMHG


def _ref_factor():
    ref = load_data("cylinders")["reference"]
    p_ref = float(ref["pressure_bar"]) * 750.0616827
    return (p_ref - 47.0) / p_ref * (float(ref["temperature_c"]) + 273.15) / 310.15   # dry, at T_ref


def _one_minute_at(ft, group):
    # one minute (the reaction time) at ft, then a descent of 0.001 ft: the litres of that minute
    return certification_descent_oxygen_l(ft, ft - 1e-3, 4000.0, group, reaction_min=1.0)


def _hand_l_min(ft, fio2, ve_btps):
    pb = _isa_mmhg(ft)
    x = (fio2 - 0.2095) / (1 - 0.2095)
    return x * ve_btps * (pb - 47.0) / (760.0 - 47.0) * _ref_factor()


@pytest.mark.parametrize("ft,group,fio2_of_pb,ve", [
    (35_000, "crew", lambda pb: 122.0 / (pb - 47.0), 20.0),       # 25.1443(b), up to and including 35,000 ft
    (35_001, "crew", lambda pb: 0.95, 20.0),                      # 95 % above 35,000 ft
    (40_000, "crew", lambda pb: 0.95, 20.0),
    (14_000, "crew", lambda pb: 122.0 / (pb - 47.0), 20.0),
    (18_500, "passengers", lambda pb: 100.0 / (pb - 47.0), 15.0),  # 25.1443(c)(1)
    (18_501, "passengers", lambda pb: 83.8 / (pb - 47.0), 30.0),   # 25.1443(c)(2)
    (35_000, "passengers", lambda pb: 83.8 / (pb - 47.0), 30.0),
])
def test_flow_at_the_standards_boundaries(ft, group, fio2_of_pb, ve):
    got = _one_minute_at(ft, group)
    hand = _hand_l_min(ft, fio2_of_pb(_isa_mmhg(ft)), ve)
    assert got["oxygen_l"] == pytest.approx(hand, rel=2e-4)   # ISA closed form vs altox's ISA: rounding
    assert got["beyond_standard"] is False


def test_above_the_standards_top_says_so_and_counts_pure_oxygen():
    at_top = _one_minute_at(40_000, "crew")
    above = _one_minute_at(41_000, "crew")
    assert not at_top["beyond_standard"] and above["beyond_standard"]
    assert above["oxygen_l"] == pytest.approx(_hand_l_min(41_000, 1.0, 20.0), rel=2e-4)
    # passengers at 40,000 ft: 83.8 mmHg needs FiO2 0.89 (PB - 47 is about 94 mmHg), within the standard
    assert not _one_minute_at(40_000, "passengers")["beyond_standard"]
    assert _one_minute_at(40_001, "passengers")["beyond_standard"]


def test_passengers_need_nothing_at_or_below_10000_ft():
    assert certification_descent_oxygen_l(10_000, 5_000, 3000.0, "passengers")["oxygen_l"] == 0.0


def test_jet_demo_review_gives_litres_on_the_certification_basis():
    from pathlib import Path

    from altox.evaluation.evaluate import evaluate_plan
    from altox.evaluation.oxygen_plan import decompression_review
    from altox.plan.profile import load_plan

    plan = load_plan(Path(__file__).resolve().parents[1] / "profiles" / "jet-highcruise.yaml")
    review = decompression_review(plan, evaluate_plan(plan))
    assert review["certification_basis"]["standard"] == "14 CFR 25.1443 / CS 25.1443"
    top = max(review["legs"], key=lambda r: r["aircraft_ft"])
    crew, pax = top["crew_cert"]["oxygen_l"], top["passengers_cert"]["oxygen_l"]
    # at FL410 the standard's crew flow is several times the old inspired-PO2-of-14,000-ft target
    assert crew > 2.5 * top["crew"]["oxygen_l"]
    assert top["oxygen_total_l"] == pytest.approx(2 * crew + 3 * pax)
    assert any("pressure breathing or a faster descent" in n for n in review["notes"])
    assert any(n.startswith("Carriage: 14 CFR 91.211(b)(1)(i)") for n in review["notes"])
