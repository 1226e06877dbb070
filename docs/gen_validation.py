"""Build docs/validation.md: the model against published blood gases and saturations of lowlanders at altitude.

Reads the same transcribed tables as the reference tests (tests/reference_data/*.csv), where every
published value carries its tolerance and the reason for it, the exposure the model is run at, and
whether the row calibrated a parameter, validates the model, or is excluded (and why).
Run from the repository root:  python docs/gen_validation.py > docs/validation.md

The acceptance rule (tests/test_validation.py applies it to every case this module builds):

* a residual (model minus published) is *optimistic* when it shows people better oxygenated than
  measured: a higher PO2, saturation or pH, a lower PCO2 or alveolar-arterial difference, a smaller
  fall in saturation; the other sign is *conservative*;
* no optimistic residual may exceed its tolerance;
* a conservative residual may exceed its tolerance by at most the allowance below, except against a
  row whose ``waive_conservative`` names a less oxygenated source it conflicts with.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from refdata import number, rows  # noqa: E402

AGE_Y = 35.0               # the model's person for every row: resting adult lowlander, hemoglobin 14.5 g/dL
ACUTE_DAYS = 0.25          # a row that says "acute" but gives no time: a few hours
ACCLIMATIZED_DAYS = 30.0   # a row that says "acclimatized" but gives no time
# column: model key, label, unit, tolerance column, sign of an optimistic residual, conservative allowance
QUANTITIES = {
    "pao2_mmhg": ("arterial_po2_mmhg", "PaO2", "mmHg", "tol_pao2_mmhg", +1, 4.0),
    "paco2_mmhg": ("arterial_pco2_mmhg", "PaCO2", "mmHg", "tol_paco2_mmhg", -1, 4.0),
    "pAo2_alveolar_mmhg": ("alveolar_po2_mmhg", "PAO2", "mmHg", "tol_pAo2_mmhg", +1, 4.0),
    "pAco2_alveolar_mmhg": ("alveolar_pco2_mmhg", "PACO2", "mmHg", "tol_pAco2_mmhg", -1, 4.0),
    "aado2_mmhg": ("alveolar_arterial_mmhg", "AaDO2", "mmHg", "tol_aado2_mmhg", -1, 4.0),
    "ph": ("arterial_ph", "pH", "", "tol_ph", +1, 0.04),
    "sao2_pct": ("sao2_pct", "SaO2", "%", "tol_sao2_pct", +1, 3.0),
}
SPO2 = ("sao2_pct", "SpO2", "%", "tol_spo2_pct", +1, 3.0)
#: altitude bands of the bias table [m]
BANDS = ((-1e9, 1500.0, "below 1,500 m"), (1500.0, 3500.0, "1,500-3,499 m"), (3500.0, 5500.0, "3,500-5,499 m"),
         (5500.0, 7500.0, "5,500-7,499 m"), (7500.0, 1e9, "7,500 m and above"))
STATES = ("acute", "acclimatized", "asleep")
TITLES = {"saturation points": "Saturation (points)", "mmHg": "Gas tensions (mmHg)", "pH": "pH"}


@dataclass
class Case:
    """One published value against the model."""

    row: dict
    table: str
    label: str
    unit: str
    published: float
    model: float
    tolerance: float
    optimistic_sign: int
    allowance: float
    exposure: str
    calibration: bool
    waived: bool

    @property
    def id(self) -> str:
        return f"{self.row['id']}-{self.label}"

    @property
    def residual(self) -> float:
        return self.model - self.published

    @property
    def directed(self) -> float:
        """Residual signed so that positive is optimistic."""
        return self.optimistic_sign * self.residual

    @property
    def excess(self) -> float:
        """How far the residual lies beyond its tolerance (negative: within)."""
        return abs(self.residual) - self.tolerance

    @property
    def verdict(self) -> str:
        if self.excess <= 0.0:
            return "within"
        return "OPTIMISTIC beyond" if self.directed > 0 else "conservative beyond"

    @property
    def passes(self) -> bool:
        if self.excess <= 0.0:
            return True
        if self.directed > 0:
            return False
        return self.waived or self.excess <= self.allowance + 1e-9

    @property
    def state(self) -> str:
        return self.row["state"] if self.row["state"] in STATES else "acute"

    @property
    def altitude_m(self) -> float:
        return float(self.row["altitude_m"])

    @property
    def band(self) -> str:
        return next(name for lo, hi, name in BANDS if lo <= self.altitude_m < hi)


def _sleep_kwargs() -> dict:
    from altox.evaluation.individual import person_kwargs

    return {"drive_scale": person_kwargs({}, sleeping=True)["drive_scale"]}


def _itinerary(text: str):
    """[(altitude m, days), ...] of an itinerary cell 'alt:days;alt:days'."""
    return [(float(a), float(d)) for a, d in (seg.split(":") for seg in text.split(";"))]


def _exposures(row) -> list[tuple[dict, str]]:
    """The model keywords for the row's exposure (several for '|'-separated nights, averaged), and its text."""
    from altox.physiology.acclimatization import acclimatization_history
    from altox.physiology.atmosphere import barometric_pressure
    from altox.physiology.gas_exchange import inspired_po2

    out = []
    if row.get("itinerary"):
        for variant in row["itinerary"].split("|"):
            legs = _itinerary(variant)
            pio2 = np.array([inspired_po2(barometric_pressure(a, "mountain")) for a, _ in legs])
            fv, fr = acclimatization_history(pio2, np.array([d * 24.0 for _, d in legs]))
            text = " > ".join(f"{a:g} m {d:g} d" for a, d in legs)
            out.append(({"f_ventilatory": float(fv[-1]), "f_renal": float(fr[-1])}, text))
        return out
    days = number(row, "model_days")
    if days is None:
        days = number(row, "days_at_altitude")
    if days is None:
        days = ACUTE_DAYS if row["state"] == "acute" else ACCLIMATIZED_DAYS
    return [({"days": days}, f"{days:g} d")]


def _model(row, alt, keys) -> tuple[dict, str]:
    """Model values (mean over the row's exposures) for the row's conditions at ``alt``."""
    from altox import assess

    kw = {"atmosphere": row.get("atmosphere") or "mountain", "age_y": AGE_Y}
    if row.get("pb_mmhg") and alt == number(row, "altitude_m"):
        kw["pb_mmhg"] = number(row, "pb_mmhg")
    if row.get("fio2"):
        kw["fio2"] = number(row, "fio2")
    if row["state"] == "asleep":
        kw.update(_sleep_kwargs())
    values = {k: [] for k in keys}
    texts = []
    for exposure, text in _exposures(row):
        r = assess(alt, **kw, **exposure)
        for k in keys:
            values[k].append(float(r[k]))
        texts.append(text)
    return {k: float(np.mean(v)) for k, v in values.items()}, " / ".join(texts)


def _calibrated_labels(row) -> set:
    return {part.split("=")[0].split(":")[-1].strip() for part in (row.get("calibrates") or "").split(";")
            if "=" in part}


def _case(row, table, spec, published, model, exposure) -> Case:
    _key, label, unit, tol_col, sign, allowance = spec
    tol = number(row, tol_col)
    if tol is None:
        raise ValueError(f"{row['id']}: {label} has no tolerance ({tol_col})")
    waived = label in (row.get("waive_conservative") or "").split(":")[0]
    calibration = row["role"] == "calibrate" or label in _calibrated_labels(row)
    return Case(row, table, label, unit, published, model, tol, sign, allowance, exposure, calibration, waived)


def blood_gas_cases() -> list[Case]:
    """Every published blood-gas value of a row not excluded."""
    out = []
    for row in rows("blood_gases_altitude.csv"):
        present = [c for c in QUANTITIES if number(row, c) is not None]
        if row["role"] == "exclude" or not present:
            continue
        values, exposure = _model(row, float(row["altitude_m"]), [QUANTITIES[c][0] for c in present])
        for c in present:
            out.append(_case(row, "blood gas", QUANTITIES[c], number(row, c), values[QUANTITIES[c][0]], exposure))
    return out


def spo2_cases() -> list[Case]:
    """Every published SpO2 mean (or fall) of a row not excluded."""
    out = []
    for row in rows("spo2_altitude.csv"):
        mean = number(row, "spo2_mean_pct")
        if row["role"] == "exclude" or mean is None:
            continue
        values, exposure = _model(row, float(row["altitude_m"]), ["sao2_pct"])
        model = values["sao2_pct"]
        if row["compare"] == "drop":
            base, _ = _model(row, number(row, "baseline_altitude_m"), ["sao2_pct"])
            model = base["sao2_pct"] - model
            spec = ("sao2_pct", "SpO2 fall", "points", "tol_spo2_pct", -1, 3.0)
        else:
            spec = SPO2
        out.append(_case(row, "SpO2", spec, mean, model, exposure))
    return out


def all_cases() -> list[Case]:
    return blood_gas_cases() + spo2_cases()


def _unit_group(case: Case) -> str:
    if case.label == "pH":
        return "pH"
    return "mmHg" if case.unit == "mmHg" else "saturation points"


def bias_table(cases: list[Case]) -> list[str]:
    """Mean signed error by altitude band and state over the validation cases, optimistic and conservative apart."""
    lines = []
    validation = [c for c in cases if not c.calibration]
    for group in ("saturation points", "mmHg", "pH"):
        sub = [c for c in validation if _unit_group(c) == group]
        if not sub:
            continue
        digits = 3 if group == "pH" else 1
        lines += [f"### {TITLES[group]}", "",
                  "| altitude band | state | n | optimistic: n, mean, largest | beyond tolerance | "
                  "conservative: n, mean, largest | beyond tolerance + allowance |",
                  "|---|---|---|---|---|---|---|"]
        for _lo, _hi, band in BANDS:
            for state in STATES:
                cell = [c for c in sub if c.band == band and c.state == state]
                if not cell:
                    continue
                opt = [c.directed for c in cell if c.directed > 0]
                con = [-c.directed for c in cell if c.directed <= 0]
                beyond_opt = sum(1 for c in cell if c.directed > 0 and c.excess > 0)
                beyond_con = sum(1 for c in cell if c.directed <= 0 and not c.passes)

                def summary(values):
                    if not values:
                        return "0"
                    return f"{len(values)}, {np.mean(values):.{digits}f}, {max(values):.{digits}f}"

                lines.append(f"| {band} | {state} | {len(cell)} | {summary(opt)} | {beyond_opt} | "
                             f"{summary(con)} | {beyond_con} |")
        lines.append("")
    return lines


def trust_by_band(cases: list[Case]) -> list[str]:
    """Per altitude band: how far the model can be trusted on saturation and in which direction it errs."""
    lines = ["| altitude band | states compared | saturation residuals (validation) | direction | "
             "comparisons breaking the rule |", "|---|---|---|---|---|"]
    for _lo, _hi, band in BANDS:
        cell = [c for c in cases if c.band == band and not c.calibration and _unit_group(c) == "saturation points"]
        if not cell:
            continue
        lo = min(c.directed for c in cell)
        hi = max(c.directed for c in cell)
        mean = float(np.mean([c.directed for c in cell]))
        direction = ("optimistic" if mean > 0.5 else "conservative" if mean < -0.5 else "unbiased") + \
            f" on average ({mean:+.1f})"
        broken = [c.id for c in cell if not c.passes]
        states = ", ".join(s for s in STATES if any(c.state == s for c in cell))
        lines.append(f"| {band} | {states} | {lo:+.1f} to {hi:+.1f} points (n = {len(cell)}) | {direction} | "
                     f"{', '.join(broken) if broken else 'none'} |")
    return lines + [""]


def _fmt(value: float, label: str) -> str:
    return f"{value:.3f}" if label == "pH" else f"{value:.1f}"


def _short(source: str) -> str:
    return source.split(".")[0][:48]


def main() -> str:
    cases = all_cases()
    lines = [
        "# Validation: the model against published measurements",
        "",
        "Generated by `python docs/gen_validation.py > docs/validation.md` from the tables in",
        "`tests/reference_data/` that `tests/test_validation.py` reads (that test fails when this page",
        "is out of date, and fails on any comparison that breaks the acceptance rule below).",
        "",
        "Every row is run as the model's person: a resting adult lowlander of 35 years, hemoglobin",
        "14.5 g/dL, breathing air, at the measured pressure where the study gives one and otherwise on",
        "the mountain model atmosphere (the ISA for aircraft cabins). The exposure column gives the days",
        "at the row's altitude, or the itinerary the acclimatization is carried along, as stated or",
        "assumed in the row (`days_assumption`). `asleep` rows use the sleep state of the model.",
        "",
        "## Tolerances and the acceptance rule",
        "",
        "Each published value carries a tolerance fixed from the source before the comparison: twice",
        "the standard error of the mean plus the instrument's error (blood gases 2 mmHg and 0.02 pH;",
        "pulse oximetry 2 points at or above 85 % and 4 below, Hannhart et al. Eur Respir J",
        "1991;4:115-119). Where the source gives no n or SD the row states the assumption made.",
        "",
        "- A residual (model minus published) is **optimistic** when the model shows people better",
        "  oxygenated than measured: higher PO2, saturation or pH, lower PCO2 or alveolar-arterial",
        "  difference, a smaller fall in saturation. The other sign is conservative.",
        "- No optimistic residual may exceed its tolerance.",
        "- A conservative residual may exceed its tolerance by at most 3 saturation points, 4 mmHg or",
        "  0.04 pH, except against a source that conflicts with a less oxygenated one (below).",
        "",
        "## Calibration and validation split",
        "",
        "These rows fitted the model's parameters (the coefficients and their sources are in",
        "`altox/data/models.yaml` and `altox/data/individual.yaml`). They are still checked against the",
        "acceptance rule, but they are kept out of the bias table; every other row is validation.",
        "",
    ]
    fitted: dict[str, list[str]] = {}
    for case in cases:
        if not case.calibration:
            continue
        for part in (case.row.get("calibrates") or "").split(";"):
            if "=" in part:
                label, param = part.split("=", 1)
                if label.split(":")[-1].strip() in (case.label, case.label.split()[0]) or case.row["role"] == "calibrate":
                    fitted.setdefault(param.strip(), [])
                    tag = f"`{case.row['id']}` ({label.split(':')[-1].strip()})"
                    if tag not in fitted[param.strip()]:
                        fitted[param.strip()].append(tag)
    for param, tags in fitted.items():
        lines.append(f"- `{param}`: {', '.join(tags)}")
    lines += [
        "",
        "## Conflicting sources",
        "",
        "Where published sources disagree beyond both tolerances, the model must not be optimistic",
        "against the less oxygenated one; the conservative allowance is waived against the other:",
        "",
    ]
    seen = set()
    for case in cases:
        text = case.row.get("waive_conservative")
        if text and case.row["id"] not in seen:
            seen.add(case.row["id"])
            lines.append(f"- `{case.row['id']}`: {text}.")
    lines += ["", "## How far the model can be trusted, by altitude band", "",
              "Saturation residuals of the validation rows (model minus published, signed so that",
              "positive is optimistic), from the bias table below. A planner should read the",
              "expected saturation as no better than the published mean plus the optimistic end of",
              "the range in its band.", ""]
    lines += trust_by_band(cases)
    lines += ["## Bias by altitude band and state (validation rows)", "",
              "Residuals signed so that positive is optimistic; the mean and largest are in the unit of",
              "the heading. `beyond` counts the comparisons that break the acceptance rule.", ""]
    lines += bias_table(cases)
    lines += [
        "## Every comparison",
        "",
        "| row | source | basis | role | altitude m | exposure | quantity | published | model | residual | "
        "tolerance | verdict |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for c in cases:
        role = "calibration" if c.calibration else "validation"
        pb = f" (PB {c.row['pb_mmhg']})" if c.row.get("pb_mmhg") else ""
        fio2 = f", FIO2 {c.row['fio2']}" if c.row.get("fio2") else ""
        verdict = c.verdict + (" (waived)" if c.waived and c.verdict.startswith("conservative") else "")
        lines.append(
            f"| {c.row['id']} | {_short(c.row['source'] or '')} | {c.row['basis']} | {role} | "
            f"{c.row['altitude_m']}{pb}{fio2} | {c.state}, {c.exposure} | {c.label} {c.unit} | "
            f"{_fmt(c.published, c.label)} | {_fmt(c.model, c.label)} | {c.residual:+.{3 if c.label == 'pH' else 1}f} | "
            f"{c.tolerance:g} | {verdict} |")
    lines += ["", "## Rows not compared", ""]
    for name in ("blood_gases_altitude.csv", "spo2_altitude.csv"):
        for row in rows(name):
            if row["role"] == "exclude":
                lines.append(f"- `{row['id']}`: {row['exclude_reason']}.")
    lines.append("")
    return "\n".join(lines)


if __name__ == "__main__":
    sys.stdout.write(main())
