"""Enriched and hypoxic rooms (altox.evaluation.rooms)."""

import numpy as np
import pytest

from altox.physiology.gas_exchange import AIR_FIO2
from altox.evaluation.rooms import room_atmosphere_check, room_equivalent_altitude, room_o2_fraction


@pytest.mark.parametrize("site_m", [4000.0, 4500.0, 5000.0])
def test_west_1995_about_300_m_per_percent(site_m):
    # West JB, Respir Physiol 1995;99:225-232 (abstract, read): at 4,000-5,000 m, raising O2 by
    # 1 % (e.g. 21 -> 22 %) lowers the equivalent altitude by about 300 m.
    a = room_equivalent_altitude(0.21, site_m)["equivalent_altitude_m"]
    b = room_equivalent_altitude(0.22, site_m)["equivalent_altitude_m"]
    assert a - b == pytest.approx(300.0, abs=50.0)


def test_west_1995_mine_example():
    # West 1995 (abstract, read): +5 % O2 at mines at about 4,500 m -> equivalent altitude about 3,000 m;
    # West 1997 (abstract, read): +5 % (21 -> 26 %) lowers it by 1,500 m.
    r = room_equivalent_altitude(0.26, 4500.0)["equivalent_altitude_m"]
    assert r == pytest.approx(3000.0, abs=200.0)


@pytest.mark.parametrize("target_m", [2000.0, 2500.0, 3000.0, 4000.0])
def test_hypoxic_room_setting_and_inverse_agree(target_m):
    # a normobaric hypoxic room at sea level for a target altitude, then the room's equivalent altitude
    f = room_o2_fraction(target_m, 0.0)
    assert f["kind"] == "hypoxic" and f["o2_fraction"] < AIR_FIO2
    back = room_equivalent_altitude(f["o2_fraction"], 0.0)["equivalent_altitude_m"]
    assert back == pytest.approx(target_m, abs=0.5)


def test_hypoxic_room_at_8000_ft_is_about_15_percent():
    # Josephs et al., Prim Care Respir J 2013;22:234 (abstract, read): 8,000 ft ~ 15.1 % O2 at sea level
    f = room_o2_fraction(2438.4, 0.0, atmosphere="isa")["o2_fraction"]
    assert f == pytest.approx(0.151, abs=0.002)


def test_enriched_room_inverse_and_fire_caution():
    f = room_o2_fraction(3000.0, 4500.0)
    assert f["kind"] == "enriched"
    assert room_equivalent_altitude(f["o2_fraction"], 4500.0)["equivalent_altitude_m"] == pytest.approx(3000.0, abs=0.5)
    chk = room_atmosphere_check(f["o2_fraction"], f["pb_mmhg"])
    assert chk["enriched"] and "concentration" in chk["fire_caution"] and "fire codes" in chk["fire_caution"]
    # the PO2 stays below sea-level air (West 1997: the burn rate is much less than at sea level)
    assert chk["po2_vs_sea_level"] < 1.0


def test_deficient_room_caution():
    chk = room_atmosphere_check(0.15, 760.0)
    assert chk["deficient"] and chk["hypoxic_caution"] and chk["fire_caution"] is None


def test_infeasible_enrichment():
    assert room_o2_fraction(0.0, 8800.0)["feasible"]            # about 72 % O2
    assert not room_o2_fraction(0.0, pb_mmhg=150.0)["feasible"]  # would need more than 100 %


def test_vectorised():
    r = room_equivalent_altitude(np.array([0.21, 0.24, 0.27]), 4500.0)
    assert np.all(np.diff(r["equivalent_altitude_m"]) < 0)
