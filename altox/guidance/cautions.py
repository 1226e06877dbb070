"""The texts every output carries: the guidance caution (one place, imported by evaluation and every back end)."""

from __future__ import annotations


CAUTION = (
    "GUIDANCE ONLY. altox computes model estimates for planning; they are not measurements "
    "and not a clearance to fly, climb or travel. Thresholds shown are guidance drawn from "
    "published rules and guidelines: the aviation authority's rules, the operator's "
    "procedures, local codes and licensed aviation or expedition medicine take precedence. "
    "Individuals vary widely; check people, not numbers."
)
