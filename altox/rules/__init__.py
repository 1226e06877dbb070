"""Published guidance as data, and a pure checker of plans against it.

Rule sets (``altox/data/rules/*.yaml``) transcribe aviation oxygen rules and expedition
acclimatization guidelines with their citations; :mod:`altox.rules.checker` compares a
flight profile or an itinerary with them and returns :class:`Finding` records.
Everything here is guidance only: it defers to the aviation authority, the operator's
procedures, local codes and licensed aviation or expedition medicine.
"""

from .checker import Finding, check_flight, check_itinerary, risk_category
from .loader import RuleSet, Threshold, available_rule_sets, load_rule_set

__all__ = [
    "Finding", "RuleSet", "Threshold", "available_rule_sets", "check_flight",
    "check_itinerary", "load_rule_set", "risk_category",
]
