"""Decompression: TUC table, descent times, descent oxygen (altox.evaluation.decompression)."""

import numpy as np
import pytest

from altox.evaluation.decompression import (TUC_ABOVE, TUC_BELOW, descent_oxygen_l, descent_time_min,
                                            oxygen_free_altitudes_ft, tuc_range_s)
from refdata import number, rows


@pytest.mark.parametrize("row", rows("tuc.csv"), ids=lambda r: r["id"])
def test_tuc_at_tabulated_altitudes(row):
    # FAA AIM 8-1-2 (read) and AC 61-107B Table 1-1 (from memory): tests/reference_data/tuc.csv
    r = tuc_range_s(number(row, "altitude_ft"))
    assert r["min_s"] == pytest.approx(number(row, "tuc_min_s"))
    assert r["max_s"] == pytest.approx(number(row, "tuc_max_s"))


def test_tuc_interpolation_is_between_and_monotone():
    alts = np.linspace(18000.0, 45000.0, 200)
    r = tuc_range_s(alts)
    assert np.all(np.diff(r["min_s"]) <= 1e-9) and np.all(np.diff(r["max_s"]) <= 1e-9)
    assert np.all(r["min_s"] <= r["max_s"])
    mid = tuc_range_s(32500.0)  # halfway between 30,000 (60-120 s) and 35,000 ft (30-60 s), log-linear
    assert mid["min_s"] == pytest.approx(np.sqrt(60.0 * 30.0))


def test_tuc_outside_table():
    below, above = tuc_range_s(15000.0), tuc_range_s(50000.0)
    assert below["position"] == TUC_BELOW and np.isnan(below["min_s"]) and below["max_s"] == 1800.0
    assert above["position"] == TUC_ABOVE and above["min_s"] == pytest.approx(9.0)
    assert tuc_range_s(35000.0)["rapid_min_s"] == pytest.approx(15.0)  # up to 50 % shorter


def test_descent_times():
    assert descent_time_min(41000.0, 14000.0, 4500.0) == pytest.approx(6.0)
    assert descent_time_min(41000.0, 10000.0, 4500.0) == pytest.approx(31000.0 / 4500.0)
    assert descent_time_min(9000.0, 10000.0, 4500.0) == 0.0


def test_oxygen_free_altitudes_from_rule_sets():
    from altox.guidance import load_rule_set

    f = oxygen_free_altitudes_ft([load_rule_set("us-14cfr-91")])
    assert f["crew"] == 14000.0 and f["passengers"] == 15000.0  # 91.211(a)(2), (a)(3)
    d = oxygen_free_altitudes_ft([])
    assert d["crew_from"] == "default"


def test_descent_oxygen_grows_with_altitude_and_slower_descent():
    a = descent_oxygen_l(35000.0, 14000.0, 4000.0, device="diluter-demand", activity="light-work")
    b = descent_oxygen_l(41000.0, 14000.0, 4000.0, device="diluter-demand", activity="light-work")
    c = descent_oxygen_l(41000.0, 14000.0, 2000.0, device="diluter-demand", activity="light-work")
    assert 0 < a["oxygen_l"] < b["oxygen_l"] < c["oxygen_l"]
    assert descent_oxygen_l(12000.0, 14000.0, 4000.0, device="diluter-demand", activity="rest")["oxygen_l"] == 0.0


def test_bad_rate_is_refused():
    from altox.errors import AltoxError

    with pytest.raises(AltoxError):
        descent_time_min(41000.0, 10000.0, 0.0)
