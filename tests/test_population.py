"""The expected range: calibration against a published SpO2 distribution, validation, sleep, properties."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from altox.evaluation import population as pop
from altox.physiology.chain import assess
from altox.errors import OutOfRangeError
from altox.evaluation.individual import coefficients
from altox.plan.profile import load_plan

N = 4000  # members for the calibration checks (sampling error of the SD about 1 %)


def _row(alt, days, **kw):
    return pop.point_range(float(alt), days=float(days), n=N, **kw)


# -- calibration: Botella de Maglia 2008 at 4,250 m ---------------------------------------------------
def test_spread_calibrated_on_botella_4250():
    # Botella de Maglia J, Real Soriano R, Compte Torrero L. Med Intensiva 2008;32:277-281 (abstract):
    # resting SpO2 85.0 +- 4.3 % at 4,250 m on the approach march (row spo2_botella_4250 of
    # tests/reference_data/spo2_altitude.csv); days there not given, taken as 2. The log-SD of the
    # hypoxic gain (altox/data/individual.yaml) was set so that the ensemble SD is 4.3.
    r = _row(4250, 2)
    assert float(r["sd_sao2_pct"]) == pytest.approx(4.3, abs=0.1)
    # the mean comes from the core model, not from the calibration: residual -0.7 points
    assert float(r["mean_sao2_pct"]) == pytest.approx(85.0, abs=2.0)


# -- validation on rows not used (days stated in the source) -------------------------------------------
VALIDATION = [  # id, altitude, days, published mean, published SD (Botella de Maglia 2008, abstract)
    ("spo2_botella_5200_d1", 5200, 1, 78.4, 9.5),
    ("spo2_botella_5200_d30", 5200, 30, 87.4, 3.0),
]


@pytest.mark.parametrize("row", VALIDATION, ids=[v[0] for v in VALIDATION])
def test_published_mean_lies_inside_the_range(row):
    _, alt, days, mean, _sd = row
    lo, _mid, hi = _row(alt, days)["sao2_pct_percentiles"]
    assert lo <= mean <= hi


SPREAD_OPEN = {"spo2_botella_5200_d30": (
    "Honest residual: the calibrated spread does not transfer to acclimatized climbers: model SD 4.9 "
    "vs 3.0 a month at 5,200 m (too wide: acclimatization narrows the real spread). See docs/individual.md.")}


@pytest.mark.parametrize("row", [pytest.param(v, id=v[0], marks=[pytest.mark.xfail(strict=True, reason=SPREAD_OPEN[v[0]])]
                                              if v[0] in SPREAD_OPEN else []) for v in VALIDATION])
def test_spread_against_rows_not_calibrated_on(row):
    # tolerance: the sampling error of an SD from about 20 people, +-32 % (95 %)
    _, alt, days, _mean, sd = row
    assert float(_row(alt, days)["sd_sao2_pct"]) == pytest.approx(sd, rel=0.32)


# -- sleep ------------------------------------------------------------------------------------------------
def test_sleep_raises_paco2_a_little_at_sea_level_and_lowers_saturation_more_at_altitude():
    # The sleep drive is calibrated on the normal sleeping PaCO2 rise at sea level (+5 mmHg; 3-7 is
    # the usual range, common practice) and its hypoxic exponent on the first night at 4,559 m
    # (Nussbaumer-Ochsner Y et al. Sleep 2012;35:419-423); the nights it was not fitted on are in
    # tests/test_validation.py. Here the relation: the same sleep state costs little saturation at
    # sea level and much more high up, where the curve is steep.
    ds = coefficients()["sleep"]["drive_scale"]["value"]
    awake = assess(np.array([0.0, 4559.0]), atmosphere="mountain", days=1.0)
    asleep = assess(np.array([0.0, 4559.0]), atmosphere="mountain", days=1.0, drive_scale=ds)
    rise = asleep["arterial_pco2_mmhg"] - awake["arterial_pco2_mmhg"]
    assert 3.0 <= rise[0] <= 7.0
    drop = awake["sao2_pct"] - asleep["sao2_pct"]
    assert drop[0] < 2.0 < 3.0 * drop[0] < drop[1]


# -- properties --------------------------------------------------------------------------------------------
@settings(max_examples=12, deadline=None)
@given(alt=st.floats(1500.0, 6500.0), days=st.floats(0.0, 20.0), age=st.floats(18.0, 80.0),
       hvr=st.sampled_from([None, "low", "normal", "high"]), acz=st.booleans(), sleeping=st.booleans(),
       seed=st.integers(0, 2**31))
def test_range_contains_the_central_value(alt, days, age, hvr, acz, sleeping, seed):
    person = {"age_y": age, "hvr": hvr, "acetazolamide": acz}
    r = pop.point_range(np.array([alt]), person=person, days=days, sleeping=sleeping, n=300, seed=seed)
    lo, _mid, hi = r["sao2_pct_percentiles"][:, 0]
    assert lo <= r["central_sao2_pct"][0] <= hi


# -- the plan ensemble -----------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def trek():
    return load_plan("profiles/trek-teskavor.yaml")


def test_expected_range_over_a_plan(trek):
    calls = []
    r = pop.expected_range(trek, n=200, seed=7, progress=lambda d, t: calls.append((d, t)))
    n_samples = len(r["time_h"])
    assert [p["name"] for p in r["people"]][0] == "reference adult" and len(r["people"]) == 5
    for p in r["people"]:
        q = p["sao2_pct_percentiles"]
        assert q.shape == (3, n_samples)
        assert np.all(q[0] <= q[1]) and np.all(q[1] <= q[2])
        assert len(p["legs"]) == len(trek.days)
        for leg in p["legs"]:
            lo, _, hi = leg["sao2_pct_percentiles"]
            assert lo <= leg["central_sao2_pct"] <= hi
    assert calls and calls[-1][0] == calls[-1][1] and all(a[0] <= b[0] for a, b in zip(calls, calls[1:]))
    # the range is wider high up than low down
    ref = r["people"][0]
    width = ref["sao2_pct_percentiles"][2] - ref["sao2_pct_percentiles"][0]
    assert width[np.argmax(r["altitude_m"])] > width[np.argmin(r["altitude_m"])]


def test_fixed_seed_and_chunking_do_not_change_numbers(trek):
    a = pop.expected_range(trek, n=100, seed=3)
    b = pop.expected_range(trek, n=100, seed=3, max_chunk_elements=10_000)
    c = pop.expected_range(trek, n=100, seed=4)
    for pa, pb, pc in zip(a["people"], b["people"], c["people"]):
        np.testing.assert_allclose(pa["sao2_pct_percentiles"], pb["sao2_pct_percentiles"], rtol=0, atol=1e-9)
    assert not np.allclose(a["people"][1]["sao2_pct_percentiles"], c["people"][1]["sao2_pct_percentiles"])


def test_flight_plan_range_and_bad_arguments():
    jet = load_plan("profiles/medevac-transfer.yaml")
    r = pop.expected_range(jet, n=50)
    assert not r["sleeping"].any() and len(r["people"]) == 4
    with pytest.raises(OutOfRangeError):
        pop.expected_range(jet, n=5)
    with pytest.raises(OutOfRangeError):
        pop.point_range(3000.0, percentiles=(5, 120))
