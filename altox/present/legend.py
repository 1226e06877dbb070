"""The one legend of terms that the terminal, the HTML report and ``docs/glossary.md`` share.

Each term is defined once, here, in words a medic or a flight physiologist reads; the
renderers show the terms a plan's output uses, and ``python -m altox.present.legend`` writes the docs
glossary (a test fails when ``docs/glossary.md`` is stale).
"""

from __future__ import annotations

#: (term, definition, where it applies: "all", "expedition" or "flight")
TERMS = (
    ("SaO2", "arterial oxygen saturation expected from the model, in %: a model estimate for a person at "
             "rest, not a measurement", "all"),
    ("SpO2", "oxygen saturation read by a pulse oximeter, in %; it can read high, more so below 80 %",
     "all"),
    ("Range", "5th to 95th percentile of the expected SaO2 of simulated people like this person (age, "
              "hemoglobin, ventilatory response)", "all"),
    ("Worst moment", "the time in the plan with the lowest expected SaO2, awake or asleep", "all"),
    ("Night SaO2", "the lowest expected SaO2 while asleep within the day: the end of the previous night "
                   "(00:00-06:00, at the previous sleeping altitude) or the start of this night (22:00-24:00, "
                   "at the new one); on a descent day it is usually the previous, higher night", "expedition"),
    ("PB", "barometric pressure, mmHg", "all"),
    ("PIO2", "inspired oxygen pressure: (PB - 47 mmHg water vapour) x FiO2", "all"),
    ("FiO2", "fraction of oxygen in the inspired gas (air 0.21)", "all"),
    ("PACO2 / PAO2", "alveolar carbon dioxide and oxygen pressures, mmHg", "all"),
    ("PaO2", "arterial oxygen pressure, mmHg and kPa", "all"),
    ("CaO2", "arterial oxygen content, mL of oxygen per dL of blood", "all"),
    ("Hypoxic dose (km.h)", "altitude above the dose floor (1,500 m), in km, times hours spent there, "
                            "summed over the plan", "all"),
    ("Equivalent altitude", "the altitude whose air gives the same inspired oxygen pressure; with oxygen "
                            "below sea level it is stated as hyperoxic (more oxygen than sea-level air)",
     "all"),
    ("Cabin altitude", "pressure altitude of the cabin (ISA), ft; the rules are stated in cabin altitude",
     "flight"),
    ("FL", "flight level: pressure altitude in hundreds of feet (FL370 = 37,000 ft)", "flight"),
    ("TUC", "time of useful consciousness after a decompression, at rest on air", "flight"),
    ("breaks n", "flag: the plan does not meet finding n of the verdict", "all"),
    ("met n", "flag: finding n asks for oxygen here and the plan provides it", "all"),
    ("outside", "flag: the leg leaves the model: no steady state at rest, so no saturation is shown, "
                "only how long consciousness may last (see the notes under the table)", "all"),
    ("extrapolated", "flag: a steady state beyond the published data the model was checked against; "
                     "treat the numbers with more caution", "all"),
    ("+O2", "supplemental oxygen is planned on this leg", "all"),
    ("O2 % / Air %", "expected SaO2 with the planned oxygen, and without it if it fails (on air, as every "
                     "other figure of the output)", "all"),
    ("(!)", "the assumed device cannot hold the target (see the note beside it)", "all"),
    ("Risk", "risk category of a person under the guideline's risk table (low, moderate, high)",
     "expedition"),
    ("LLS", "2018 Lake Louise acute mountain sickness score", "expedition"),
)


def terms_for(kind: str | None = None) -> list[tuple[str, str]]:
    """(term, definition) for a plan kind (``None``: every term)."""
    return [(t, d) for t, d, where in TERMS if kind is None or where in ("all", kind)]


def legend_lines(kind: str | None = None) -> list[str]:
    """The legend as plain lines, ``term: definition``."""
    return [f"{t}: {d}." for t, d in terms_for(kind)]


def glossary_markdown() -> str:
    """The docs glossary (``docs/glossary.md``), from the same terms."""
    lines = ["# Glossary", "",
             "The terms altox's output uses, defined once. The terminal and the HTML report show the",
             "same definitions (`altox/present/legend.py`; this page is written by `python -m altox.present.legend`).", "",
             "| Term | Meaning |", "|---|---|"]
    lines += [f"| {t} | {d} |" for t, d in terms_for(None)]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":  # pragma: no cover
    print(glossary_markdown(), end="")
