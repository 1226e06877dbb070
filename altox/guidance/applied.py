"""The rule sets a plan result was checked against, as objects: shipped ids, the plan's own rule file and files given on the command line."""

from __future__ import annotations

from pathlib import Path


# -- rule sets --------------------------------------------------------------------------------
def threshold_of(rule_sets, finding):
    """The :class:`~altox.guidance.loader.Threshold` a finding was raised under, or None."""
    for rs in rule_sets or ():
        if rs.id == finding.rule_set_id:
            for th in rs.thresholds:
                if th.id == finding.threshold_id:
                    return th
    return None


def applied_rule_sets(result, rule_files=()) -> tuple[list, list[str]]:
    """The :class:`~altox.guidance.RuleSet` objects of ``result.rule_sets``.

    Shipped ids load directly; a user's rule set (``rule_file`` in the plan, or a file given
    to ``--rules``) is found among ``rule_files`` or the plan's own ``rule_file``.

    Returns
    -------
    (rule_sets, missing)
        The rule sets found, in the plan's order, and the ids that could not be found.
    """
    from altox.errors import AltoxError
    from altox.guidance import available_rule_sets, load_rule_set

    shipped = set(available_rule_sets())
    wanted = list(result.rule_sets)
    found: dict[str, object] = {}
    for rid in wanted:
        if rid in shipped:
            found[rid] = load_rule_set(rid)
    extra = [Path(f) for f in rule_files]
    if any(rid not in found for rid in wanted) and result.source:
        try:
            if hasattr(result, "rule_file"):   # an evaluated plan knows its rule file: no second read
                own = result.rule_file
            else:
                from altox.plan.profile import load_plan

                own = load_plan(result.source).rule_file_path
            if own is not None:
                extra.append(own)
        except (AltoxError, OSError):
            pass
    for path in extra:
        try:
            rs = load_rule_set(path)
        except (AltoxError, OSError):
            continue
        if rs.id in wanted and rs.id not in found:
            found[rs.id] = rs
    return [found[r] for r in wanted if r in found], [r for r in wanted if r not in found]
