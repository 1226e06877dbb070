"""Published guidance as data, and a pure checker of plans against it.

Rule sets (``altox/data/rules/*.yaml``) transcribe aviation oxygen rules and expedition
acclimatization guidelines with their citations; :mod:`altox.guidance.checker` compares a
flight profile or an itinerary with them and returns :class:`Finding` records.
Everything here is guidance only: it defers to the aviation authority, the operator's
procedures, local codes and licensed aviation or expedition medicine.
"""

from __future__ import annotations

import importlib

# imported on first use, so that the texts in altox.guidance.cautions cost nothing to import
_LAZY = {"Finding": "checker", "check_flight": "checker", "check_itinerary": "checker",
         "risk_category": "checker", "RuleSet": "loader", "Threshold": "loader",
         "available_rule_sets": "loader", "load_rule_set": "loader"}


def __getattr__(name):
    if name in _LAZY:
        value = getattr(importlib.import_module(f"{__name__}.{_LAZY[name]}"), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "Finding", "RuleSet", "Threshold", "available_rule_sets", "check_flight",
    "check_itinerary", "load_rule_set", "risk_category",
]
