"""Atmosphere models against the standard atmosphere tables, an independent implementation, and measured pressures."""

import math

import numpy as np
import pytest

from altox import altitude_for_pressure, barometric_pressure
from altox.physiology.atmosphere import pressure_altitude_ft, pressure_altitude_ft_to_mmhg
from altox.errors import OutOfRangeError
from altox.units import PA_PER_MMHG

from refdata import number, rows

ISA_ROWS = [r for r in rows("isa_pressure.csv") if r["altitude_kind"] == "geometric"]


# U.S. Standard Atmosphere 1976 (= ICAO Doc 7488/3 1993 below 32 km), pressure at geometric
# altitudes; values transcribed in tests/reference_data/isa_pressure.csv (basis: from memory,
# each checked there against the standard's defining equations). Tolerance 0.1 %.
@pytest.mark.parametrize("row", ISA_ROWS, ids=[f"USSA1976-{r['altitude_m']}m" for r in ISA_ROWS])
def test_isa_table(row):
    pb = barometric_pressure(number(row, "altitude_m"), "isa")
    assert pb * PA_PER_MMHG == pytest.approx(number(row, "pressure_pa"), rel=1e-3)


def test_isa_defining_constants():
    # ICAO Doc 7488/3 (1993): P0 101325 Pa at 0 m; 22632.1 Pa at 11 km geopotential.
    assert barometric_pressure(0.0) * PA_PER_MMHG == pytest.approx(101325.0, rel=1e-6)
    assert pressure_altitude_ft_to_mmhg(11000.0 / 0.3048) * PA_PER_MMHG == pytest.approx(22632.1, rel=1e-4)


@pytest.mark.parametrize("altitude_m", [-1000.0, 0.0, 1500.0, 3000.0, 5000.0, 8848.0, 11000.0, 15000.0,
                                        20000.0, 30000.0])
def test_isa_against_fluids(altitude_m):
    # Independent implementation: fluids.ATMOSPHERE_1976 (Bell C. fluids, U.S. Standard Atmosphere 1976).
    fluids = pytest.importorskip("fluids")  # installed by the test extra
    ref_pa = fluids.ATMOSPHERE_1976(altitude_m).P
    assert barometric_pressure(altitude_m) * PA_PER_MMHG == pytest.approx(ref_pa, rel=1e-4)


MEASURED = [r for r in rows("measured_pressures.csv") if r["id"].startswith("pb_west83")]


# West JB, Lahiri S, Maret KH, Peters RM Jr, Pizzo CJ. J Appl Physiol 1983;54:1188-1194 (abstract):
# measured 400.4 Torr at 5400 m, 351.0 at 6300 m, 283.6 at 8050 m, 253.0 on the summit (28 N, autumn).
# The West (1996) model atmosphere should be within 1.5 % (its published fit is about 1 %).
@pytest.mark.parametrize("row", MEASURED, ids=[r["id"] for r in MEASURED])
def test_mountain_model_against_measured(row):
    model = barometric_pressure(number(row, "altitude_m"), "mountain")
    assert model == pytest.approx(number(row, "pb_mmhg"), rel=0.015)


def test_standard_atmosphere_underestimates_summit_pressure():
    # West 1983: 253 Torr measured on the summit against about 236 Torr in the standard atmosphere.
    isa = barometric_pressure(8848.0, "isa")
    assert isa == pytest.approx(236.0, abs=1.0)
    assert barometric_pressure(8848.0, "mountain") - isa > 15.0


@pytest.mark.parametrize("atmosphere", ["isa", "mountain"])
def test_round_trip(atmosphere):
    alts = np.linspace(-400.0, 8900.0, 301)
    back = altitude_for_pressure(barometric_pressure(alts, atmosphere), atmosphere)
    np.testing.assert_allclose(back, alts, atol=1e-3)


def test_scalar_and_array_agree():
    alts = np.array([0.0, 2500.0, 5000.0])
    arr = barometric_pressure(alts, "mountain")
    assert isinstance(barometric_pressure(2500.0, "mountain"), float)
    assert arr[1] == barometric_pressure(2500.0, "mountain")
    assert barometric_pressure(alts.reshape(3, 1)).shape == (3, 1)


def test_pressure_altitude_round_trip():
    # 8,000 ft cabin = 565 mmHg (Muhm JM et al. N Engl J Med 2007;357:18-27, methods; equivalences.csv)
    assert pressure_altitude_ft_to_mmhg(8000.0) == pytest.approx(565.0, abs=1.0)
    assert pressure_altitude_ft(pressure_altitude_ft_to_mmhg(41000.0)) == pytest.approx(41000.0, abs=0.5)


@pytest.mark.parametrize("bad", [90000.0, -6000.0, math.nan, math.inf])
def test_isa_out_of_range(bad):
    with pytest.raises(OutOfRangeError, match="outside"):
        barometric_pressure(bad, "isa")


def test_mountain_out_of_range_and_unknown_model():
    with pytest.raises(OutOfRangeError, match="-500 to 9000 m"):
        barometric_pressure(12000.0, "mountain")
    with pytest.raises(ValueError, match="valid: isa, mountain"):
        barometric_pressure(1000.0, "arctic")


def test_isa_layer_table_is_ambiances():
    # the embedded ICAO layer table and constants are exactly ambiance's (ambiance stays the reference)
    from ambiance.ambiance import CONST

    from altox.physiology import atmosphere

    assert [tuple(row[:4]) for row in CONST.LAYER_SPEC_PROP] == list(atmosphere.ISA_LAYERS)
    assert (CONST.g_0, CONST.R, CONST.r) == (atmosphere.ISA_G0_M_S2, atmosphere.ISA_R_J_KG_K,
                                             atmosphere.ISA_EARTH_RADIUS_M)


def test_norm_quantiles_match_scipy():
    # the standard-library normal quantiles used for response categories equal scipy's ndtri/ndtr
    from scipy.special import ndtr, ndtri

    from altox.evaluation.individual import _norm_cdf, _norm_ppf

    p = np.linspace(0.001, 0.999, 501)
    np.testing.assert_allclose(_norm_ppf(p), ndtri(p), rtol=1e-12, atol=1e-12)
    z = np.linspace(-6.0, 6.0, 501)
    np.testing.assert_allclose(_norm_cdf(z), ndtr(z), rtol=1e-12, atol=1e-15)


def test_closed_form_isa_equals_ambiance_over_its_whole_range():
    # the fast path must be ambiance's own formulas: identical within 1e-9 relative, -5004 to 81020 m
    from ambiance import Atmosphere

    from altox.physiology.atmosphere import isa_altitude_for_pressure_m, isa_pressure_pa

    h = np.linspace(-5004.0, 81020.0, 100001)
    np.testing.assert_allclose(isa_pressure_pa(h), Atmosphere(h).pressure, rtol=1e-9, atol=0.0)
    p = np.geomspace(Atmosphere(81020.0).pressure[0], Atmosphere(-5004.0).pressure[0], 1001)
    np.testing.assert_allclose(isa_altitude_for_pressure_m(p), Atmosphere.from_pressure(p).h, rtol=1e-9, atol=1e-6)
