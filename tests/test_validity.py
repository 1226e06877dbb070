"""Whether a number is a prediction: altox.physiology.validity, assess and `altox point`.

Limits and their sources (altox/data/validity.yaml):
- no steady state on acute exposure from 20,000 ft: FAA Aeronautical Information Manual
  para 8-1-2 a.3, "5 to 12 minutes at 20,000 ft" (read; tests/reference_data/tuc.csv);
  TUC 3-5 min at 25,000 ft from FAA AC 61-107B Change 1, Table 1-1 (from memory);
- the model's inspired-PO2 floor, 40 mmHg: the highest summit's PIO2 of about 43 mmHg at the
  measured PB 253 mmHg (West JB et al. J Appl Physiol 1983;54:1188-1194, abstract read), less
  a margin (models.yaml);
- acute data up to about 5,000 m: SpO2 on arrival at 5,050 m, Pomidori L et al. High Alt Med
  Biol 2009;10:233-237 (abstract read), and the 4,559 m arterial gases (reference_data);
- acclimatized from 7 days: most ventilatory acclimatization in 4-7 days, Huang SY et al.
  J Appl Physiol 1984;56:602-606 (from memory), a documented convention;
- adults 18 to 70 years: a documented convention (the reference data are adult lowlanders).
"""

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from altox import assess
from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft_to_mmhg
from altox.cli.main import app
from altox.physiology.gas_exchange import inspired_po2
from altox.units import M_PER_FT
from altox.physiology.validity import (ACUTE_ABOVE_DATA, AGE_OUTSIDE_DATA, BELOW_FLOOR, EXTRAPOLATED, NO_SOLUTION,
                                       NO_STEADY_STATE, TUC_REGIME, VALIDATED, air_equivalent_altitude_ft, classify,
                                       limits, time_limited_text, tuc_text, validity_notes)


def _pio2_ft(ft):
    """Inspired PO2 of air at a pressure altitude (ISA geopotential feet, as in aviation)."""
    return float(inspired_po2(pressure_altitude_ft_to_mmhg(ft)))


def _point(*args):
    r = CliRunner().invoke(app, ["point", *args, "--json"])
    assert r.exit_code == 0, r.output
    return json.loads(r.output)


# -- the "Done when" cases ------------------------------------------------------------
@pytest.mark.parametrize("args, status", [
    (("--altitude", "25000ft"), "no_steady_state"),     # FAA AIM 8-1-2 / AC 61-107B: TUC minutes
    (("--altitude", "8848m"), "no_steady_state"),       # acute; and PIO2 below the summit's (West 1983)
    (("--altitude", "18000ft"), "extrapolated"),        # acute above the ~5,000 m acute data (Pomidori 2009)
    (("--altitude", "2500m"), "validated"),
    (("--altitude", "8000ft"), "validated"),            # the cabin limit, 14 CFR 25.841
    (("--altitude", "4000m", "--days", "7"), "validated"),
], ids=["25000ft-acute", "8848m-acute", "18000ft-acute", "2500m", "8000ft", "4000m-7d"])
def test_point_json_says_whether_a_prediction(args, status):
    data = _point(*args)
    assert data["validity_status"] == status
    assert data["outside_validated_range"] is (status != "validated")
    assert data["validity_notes"] and all(isinstance(n, str) and n.endswith(".") for n in data["validity_notes"])
    assert (data["time_limited"] is not None) == (status == "no_steady_state")


def test_point_no_steady_state_names_the_tuc_not_a_saturation():
    # FAA AC 61-107B Table 1-1 (from memory): 3-5 min at 25,000 ft
    data = _point("--altitude", "25000ft")
    assert data["time_limited"] == "no steady state: time of useful consciousness 3-5 min"
    r = CliRunner().invoke(app, ["point", "--altitude", "25000ft"], env={"COLUMNS": "100"})
    assert r.exit_code == 0
    first = r.output.splitlines()[0]
    assert first.startswith("No steady state: time of useful consciousness 3-5 min")
    sat_row = next(line for line in r.output.splitlines() if "Expected saturation" in line)
    assert "none" in sat_row and "%" not in sat_row


def test_point_extrapolated_note_beside_the_number():
    r = CliRunner().invoke(app, ["point", "--altitude", "18000ft"], env={"COLUMNS": "100"})
    sat_row = next(line for line in r.output.splitlines() if "Expected saturation" in line)
    assert "(extrapolated)" in sat_row
    assert r.output.startswith("EXTRAPOLATED")


def test_point_acclimatized_summit_pressure_is_validated():
    # resting acclimatized at the measured summit pressure, PB 253 mmHg (West 1983): PIO2 ~43 mmHg,
    # above the floor; the chamber and summit data are after weeks at altitude
    data = _point("--pressure", "253mmHg", "--days", "40")
    assert data["validity_status"] == "validated"
    assert _point("--pressure", "253mmHg")["validity_status"] == "no_steady_state"


def test_child_is_extrapolated():
    data = _point("--altitude", "2500m", "--age", "9")
    assert data["validity_status"] == "extrapolated"
    assert any("age 9 years" in n for n in data["validity_notes"])


# -- the classifier ---------------------------------------------------------------------------
def test_limits_come_from_the_data_file():
    lim = limits()
    assert lim["no_steady_state_min_altitude_ft"] == 20000.0      # FAA AIM 8-1-2 a.3
    assert lim["acute_validated_max_m"] == 5000.0
    # 7 days at a constant altitude with the model's ventilatory time constant
    from altox.physiology.ventilation import acclimatization_fractions
    assert lim["acclimatized_min_fraction"] == pytest.approx(float(acclimatization_fractions(7.0)[0]))


def test_boundaries():
    lim = limits()
    acc = lim["acclimatized_min_fraction"]
    acute_limit = lim["acute_max_fraction"]
    pio2 = [_pio2_ft(19900), _pio2_ft(20000), _pio2_ft(20000), _pio2_ft(20000), _pio2_ft(15000),
            _pio2_ft(17000), _pio2_ft(17000)]
    fv = [0.0, 0.0, acute_limit, acc, 0.0, 0.0, acc]
    r = classify(pio2, fv)
    assert r["validity_status"].tolist() == [EXTRAPOLATED, NO_STEADY_STATE, EXTRAPOLATED, VALIDATED,
                                             VALIDATED, EXTRAPOLATED, VALIDATED]
    assert r["validity_reasons"][1] & TUC_REGIME and r["validity_reasons"][0] & ACUTE_ABOVE_DATA
    assert r["outside_validated_range"].tolist() == [s > 0 for s in r["validity_status"].tolist()]


def test_floor_age_and_solver():
    lim = limits()
    r = classify([lim["min_inspired_po2_mmhg"] - 0.1, 100.0, 100.0, 100.0, 100.0], 1.0,
                 age_y=[40, 17, 71, 40, 40], solver_converged=[True, True, True, False, True],
                 alveolar_po2_clamped=[False, False, False, False, True])
    assert r["validity_reasons"].tolist() == [BELOW_FLOOR, AGE_OUTSIDE_DATA, AGE_OUTSIDE_DATA, NO_SOLUTION,
                                              NO_SOLUTION]
    assert r["validity_status"].tolist() == [NO_STEADY_STATE, EXTRAPOLATED, EXTRAPOLATED, NO_STEADY_STATE,
                                             NO_STEADY_STATE]


def test_vectorised_equals_elementwise_and_keeps_shape():
    pio2 = np.linspace(30.0, 150.0, 12).reshape(3, 4)
    fv = np.array([[0.0], [0.5], [1.0]])
    r = classify(pio2, fv, age_y=40.0)
    assert r["validity_status"].shape == (3, 4)
    for i in range(3):
        for j in range(4):
            one = classify(float(pio2[i, j]), float(fv[i, 0]))
            assert int(one["validity_status"]) == r["validity_status"][i, j]
            assert int(one["validity_reasons"]) == r["validity_reasons"][i, j]


def test_status_never_improves_with_altitude():
    # a property: at fixed acclimatization, going higher never makes a state more valid
    alt = np.linspace(0.0, 12000.0, 400)
    for fv in (0.0, 0.5, 1.0):
        s = classify(inspired_po2(barometric_pressure(alt)), fv)["validity_status"]
        assert np.all(np.diff(s) >= 0)


def test_air_equivalent_altitude_round_trip_and_oxygen():
    assert float(air_equivalent_altitude_ft(_pio2_ft(25000))) == pytest.approx(25000, abs=0.01)
    # with added oxygen the air-equivalent altitude is lower: 30 % O2 at 25,000 ft is a steady state
    r = assess(25000 * M_PER_FT, fio2=0.30)
    assert r["validity_status"] != NO_STEADY_STATE


def test_tuc_text_rounds_outward():
    # FAA AC 61-107B Table 1-1 (from memory): 25,000 ft 3-5 min; 35,000 ft 30-60 s; 40,000 ft 15-20 s
    assert tuc_text(25000) == "3-5 min"
    assert tuc_text(35000) == "30-60 s"
    assert tuc_text(40000) == "15-20 s"
    # AIM 8-1-2: 5-12 min at 20,000 ft
    assert tuc_text(20000) == "5-12 min"
    assert time_limited_text(_pio2_ft(25000)) == "no steady state: time of useful consciousness 3-5 min"


def test_notes_are_plain_sentences_without_maintainer_words():
    for reasons in (0, ACUTE_ABOVE_DATA, AGE_OUTSIDE_DATA, TUC_REGIME | ACUTE_ABOVE_DATA, BELOW_FLOOR, NO_SOLUTION):
        for note in validity_notes(reasons, inspired_po2_mmhg=_pio2_ft(25000), age_y=9):
            assert note.endswith(".")
            assert ".yaml" not in note and "memory" not in note and "_" not in note
    # the extrapolation note is not repeated where there is no steady state
    assert len(validity_notes(TUC_REGIME | ACUTE_ABOVE_DATA, inspired_po2_mmhg=_pio2_ft(25000))) == 1


def test_assess_carries_validity_scalar_and_array():
    r = assess(7620.0)
    assert r["validity_status"] == NO_STEADY_STATE and r["outside_validated_range"] is True
    arr = assess(np.array([2500.0, 5486.4, 7620.0]), days=np.array([[0.0], [30.0]]))
    assert arr["validity_status"].tolist() == [[VALIDATED, EXTRAPOLATED, NO_STEADY_STATE],
                                               [VALIDATED, VALIDATED, VALIDATED]]
    assert arr["validity_status"].dtype == np.int8


def test_known_optimistic_band_is_said_in_the_output():
    # The one optimistic residual beyond tolerance (tests/reference_data/spo2_altitude.csv,
    # spo2_tannheimer_7100: Tannheimer et al., Int J Sports Med 2002, median 63 % at 7,100 m,
    # model about 72 %) must show in the user's output wherever the model is in that band.
    from altox.cli.main import app
    from typer.testing import CliRunner

    import json

    def notes(*args):
        r = CliRunner().invoke(app, ["point", *args, "--json"])
        assert r.exit_code == 0, r.output
        return " ".join(json.loads(r.stdout)["validity_notes"])

    assert "Known optimistic error" in notes("--altitude", "7100m", "--atmosphere", "mountain", "--days", "20")
    assert "Known optimistic error" in notes("--altitude", "5600m", "--atmosphere", "mountain", "--days", "20")
    assert "Known optimistic error" not in notes("--altitude", "4000m", "--days", "7")
    assert "Known optimistic error" not in notes("--pressure", "253mmHg", "--days", "40")
