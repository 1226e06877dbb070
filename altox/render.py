"""Rendering of results for people (rich tables) and for other tools (JSON, CSV); no physics here."""

from __future__ import annotations

import csv
import io
import json
import math

CAUTION = (
    "GUIDANCE ONLY. altox computes model estimates for planning; they are not measurements "
    "and not a clearance to fly, climb or travel. Thresholds shown are guidance drawn from "
    "published rules and guidelines: the aviation authority's rules, the operator's "
    "procedures, local codes and licensed aviation or expedition medicine take precedence. "
    "Individuals vary widely; check people, not numbers."
)

# rows of the point table: key, label, unit, digits; pressures get a kPa column
_POINT_ROWS = (
    ("altitude_m", "Altitude", "m", 0),
    ("barometric_mmhg", "Barometric pressure (PB)", "mmHg", 1),
    ("fio2", "Inspired O2 fraction (FiO2)", "", 4),
    ("inspired_po2_mmhg", "Inspired PO2 (PIO2)", "mmHg", 1),
    ("alveolar_pco2_mmhg", "Alveolar PCO2 (PACO2)", "mmHg", 1),
    ("alveolar_po2_mmhg", "Alveolar PO2 (PAO2)", "mmHg", 1),
    ("arterial_po2_mmhg", "Arterial PO2 (PaO2)", "mmHg", 1),
    ("alveolar_arterial_mmhg", "Alveolar-arterial difference", "mmHg", 1),
    ("arterial_ph", "Arterial pH", "", 3),
    ("bicarbonate_mmol_l", "Bicarbonate (HCO3)", "mmol/L", 1),
    ("sao2_pct", "Expected saturation (SaO2)", "%", 1),
    ("hemoglobin_g_dl", "Hemoglobin", "g/dL", 1),
    ("o2_content_ml_dl", "O2 content (CaO2)", "mL/dL", 1),
    ("ventilation_ratio", "Alveolar ventilation vs sea level", "x", 2),
    ("equivalent_altitude_m", "Equivalent altitude (same PIO2, air)", "m", 0),
)
KPA_PER_MMHG = 0.133322387415


def _clean(value):
    """JSON-safe scalar: floats rounded sensibly, NaN as None, numpy types unwrapped."""
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float):
        if math.isnan(value) or math.isinf(value):
            return None
        return round(value, 6)
    return value


def to_json(obj) -> str:
    """JSON text of a mapping or list of mappings of scalars (numpy types allowed)."""
    def walk(o):
        if isinstance(o, dict):
            return {k: walk(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [walk(v) for v in o]
        if hasattr(o, "tolist") and getattr(o, "ndim", 0) > 0:
            return [walk(v) for v in o.tolist()]
        return _clean(o)
    return json.dumps(walk(obj), indent=2, ensure_ascii=False)


def to_csv(rows: list[dict]) -> str:
    """CSV text of a list of flat mappings; the header is the union of keys in first-seen order."""
    keys: list[str] = []
    for row in rows:
        for k in row:
            if k not in keys:
                keys.append(k)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=keys, lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow({k: _clean(row.get(k)) for k in keys})
    return buf.getvalue()


def caution_panel():
    from rich.panel import Panel

    return Panel(CAUTION, title="Caution", title_align="left", border_style="bold")


def point_table(result: dict, assumptions: list[str]):
    """A rich renderable: every quantity of one point with its unit, then assumptions and caution."""
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    table = Table(title="altox point: resting physiology at one place", title_justify="left")
    table.add_column("Quantity")
    table.add_column("Value", justify="right")
    table.add_column("Unit")
    table.add_column("kPa", justify="right")
    for key, label, unit, digits in _POINT_ROWS:
        value = result[key]
        text = f"{value:.{digits}f}"
        kpa = f"{value * KPA_PER_MMHG:.2f}" if unit == "mmHg" else ""
        if key == "altitude_m":
            text += f"  ({value / 0.3048:,.0f} ft)"
        if key == "equivalent_altitude_m" and result.get("equivalent_altitude_clipped"):
            text += " (beyond model)"
        table.add_row(label, text, unit, kpa)
    notes = list(assumptions)
    if result.get("alveolar_po2_clamped"):
        notes.append("WARNING: the alveolar gas equation fell below zero here; PAO2 was set to 0.")
    if not result.get("solver_converged", True):
        notes.append("WARNING: the ventilation model did not converge; values are unreliable.")
    body = Text("Assumptions:\n" + "\n".join(f"- {n}" for n in notes))
    return Group(table, body, caution_panel())
