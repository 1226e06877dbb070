"""Fleet review: many plans in, one result line per plan out, and a summary across the fleet.

A flight physiologist reviewing an operator's cabin profiles, or a medical service reviewing a
season's itineraries, has thousands of plans.  :func:`review_plans` takes files, directories,
glob patterns and JSON Lines streams of plans and yields one plain mapping per plan (the
*result line*, schema in ``docs/fleet.md``) in input order, holding only one batch of plans
in memory at a time; :class:`FleetSummary` folds the lines into a summary across the fleet
(which rules break how often, the worst plans, time above each cabin threshold) in constant
memory.  A plan that cannot be read or evaluated becomes a result line with ``status:
"error"`` naming its problem; the run goes on.

The physiology is that of ``altox plan``'s summary: the resting reference adult (age 40,
hemoglobin 14.5 g/dL) on air, acclimatizing along an expedition from sea level, acute on a
flight.  Within a batch every plan is expanded to its timeline
(:func:`altox.plan.timeline.expand`), solved at its own knots
(:class:`altox.evaluation.sampling.Knots`), and all plans' knots of one kind go through the chain
(:func:`altox.assess`) in one call; each plan's samples are then interpolated between its
own knots only, so a plan gets the same numbers as when evaluated alone.

Guidance only: every verdict is a model estimate checked against published guidance, never
a clearance.

Why this module is long: the streaming review keeps reading, batching, one chain call per batch, the result line and the fleet summary together, so that constant memory is visible in one file.
"""

from __future__ import annotations

import csv
import glob
import heapq
import io
import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable, Iterator

import numpy as np

from altox.errors import AltoxError
from altox.evaluation.evaluate import SUMMARY_CABIN_FT

__all__ = ["PlanSource", "iter_sources", "review_sources", "review_plans", "review_batch",
           "FleetSummary", "CABIN_THRESHOLDS_FT", "CSV_COLUMNS", "DEFAULT_BATCH", "result_csv_row",
           "CsvWriter", "to_json_line"]

#: cabin pressure altitudes the review reports time above [ft] (``altox plan``'s summary figures)
CABIN_THRESHOLDS_FT = tuple(int(x) for x in SUMMARY_CABIN_FT)
#: plans evaluated together in one call of the chain
DEFAULT_BATCH = 256
_PLAN_SUFFIXES = (".yaml", ".yml")
_STREAM_SUFFIXES = (".jsonl", ".ndjson")
from altox.guidance.cautions import CAUTION  # noqa: E402  the one caution every output carries


# -- sources ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class PlanSource:
    """Where one plan comes from: a YAML file (``path``) or one line of a JSON Lines stream (``text``).

    ``name`` is what result lines and errors call it: the file's path, or ``stream:line``.
    Small and picklable, so batches of sources can be shipped to other processes or machines.
    """

    name: str
    path: str | None = None
    text: str | None = None

    def load(self):
        """The validated plan (:func:`altox.plan.profile.load_plan` or the same checks on a JSON line)."""
        from altox.plan.profile import load_plan, plan_from_data

        if self.path is not None:
            return load_plan(self.path)
        from altox.errors import ProfileError

        try:
            data = json.loads(self.text)
        except ValueError as exc:
            raise ProfileError(f"{self.name}: not a JSON object ({exc.args[0] if exc.args else exc}); "
                               "expected one plan as a JSON object per line.", path=self.name) from None
        return plan_from_data(data, self.name)


def _stream_sources(handle, label: str) -> Iterator[PlanSource]:
    for lineno, line in enumerate(handle, start=1):
        if line.strip():
            yield PlanSource(f"{label}:{lineno}", text=line)


def _walk(directory: str) -> Iterator[str]:
    entries = sorted(os.scandir(directory), key=lambda e: e.name)
    for e in entries:
        if e.is_dir():
            yield from _walk(e.path)
        elif e.name.endswith(_PLAN_SUFFIXES + _STREAM_SUFFIXES):
            yield e.path


def iter_sources(inputs: Iterable[str | os.PathLike], *, stdin=None) -> Iterator[PlanSource]:
    """The plans named by ``inputs``, lazily, in order.

    Each input is a plan file (``.yaml``/``.yml``), a JSON Lines file of plans (``.jsonl``,
    ``.ndjson``: one plan per line as a JSON object with the fields of the plan format), a
    directory (its plan and JSON Lines files, recursively, in name order), a glob pattern
    (``fleet/**/*.yaml``, matches in name order) or ``-`` for a JSON Lines stream on ``stdin``.
    An input that names nothing yields one source whose loading fails with a located message,
    so it is reported like any bad plan.
    """
    for item in inputs:
        text = os.fspath(item)
        if text == "-":
            yield from _stream_sources(stdin, "<stdin>")
        elif os.path.isdir(text):
            for path in _walk(text):
                yield from _file_sources(path)
        elif os.path.exists(text):
            yield from _file_sources(text)
        elif glob.has_magic(text):
            matches = sorted(glob.iglob(text, recursive=True))
            if not matches:
                yield PlanSource(text, path=text)     # load() names it: no such file
            for path in matches:
                if os.path.isdir(path):
                    continue
                yield from _file_sources(path)
        else:
            yield PlanSource(text, path=text)


def _file_sources(path: str) -> Iterator[PlanSource]:
    if path.endswith(_STREAM_SUFFIXES):
        try:
            with open(path, encoding="utf-8") as handle:
                yield from _stream_sources(handle, path)
        except (OSError, UnicodeDecodeError) as exc:
            yield PlanSource(path, text="\0" + f"cannot read {path}: {exc}")
    else:
        yield PlanSource(path, path=path)


# -- evaluation of a batch --------------------------------------------------------------------
_RULE_CACHE: dict = {}


def _rule_sets(plan, rules: tuple) -> list:
    """The plan's rule sets (``rules`` replaces the plan's list), parsed once per process."""
    from altox.evaluation.evaluate import DEFAULT_RULES
    from altox.guidance import load_rule_set

    ids = [r for r in rules if not _is_file(r)] or list(plan.rules) or list(DEFAULT_RULES[plan.kind])
    files = [r for r in rules if _is_file(r)]
    if not files and plan.rule_file_path is not None:
        files = [str(plan.rule_file_path)]
    out = []
    for key in ids + files:
        if key not in _RULE_CACHE:
            _RULE_CACHE[key] = load_rule_set(key)
        out.append(_RULE_CACHE[key])
    return out


def _is_file(text: str) -> bool:
    return str(text).endswith(_PLAN_SUFFIXES) or "/" in str(text)


def _reference_factors(kind: str) -> dict:
    """assess keywords of the reference adult: values awake (column 0) and asleep (column 1)."""
    from altox.evaluation.evaluate import REFERENCE_PERSON
    from altox.evaluation.individual import people_kwargs

    key = ("factors", kind)
    if key not in _RULE_CACHE:
        ref = {"age_y": REFERENCE_PERSON["age_y"], "hemoglobin_g_dl": REFERENCE_PERSON["hemoglobin_g_dl"]}
        kw = people_kwargs([ref], sleeping=np.array([False, True]) if kind == "expedition" else None)
        _RULE_CACHE[key] = {k: np.broadcast_to(np.asarray(v, dtype=float), (1, 2))[0].copy()
                            for k, v in kw.items()}
    return _RULE_CACHE[key]


def _physiology(kind: str, timelines: list) -> list:
    """Reference adult's SaO2, inspired PO2 and model-validity along each timeline, one chain call."""
    from altox.physiology.acclimatization import acclimatization_history
    from altox.physiology.atmosphere import barometric_pressure
    from altox.physiology.chain import assess
    from altox.physiology.gas_exchange import inspired_po2
    from altox.evaluation.sampling import DEFAULT_KNOT_SPACING_H, Knots

    factors = _reference_factors(kind)
    cols = {k: [] for k in ("altitude_m", "pb_mmhg", "f_ventilatory", "f_renal", *factors)}
    knots = []
    home_pio2 = float(inspired_po2(barometric_pressure(0.0, "mountain")))
    for tl in timelines:
        n = len(tl)
        asleep = tl.sleeping.astype(np.intp)
        cols["altitude_m"].append(tl.altitude_m)
        cols["pb_mmhg"].append(tl.pb_mmhg)
        if kind == "expedition":
            f_v, f_r = acclimatization_history(np.asarray(inspired_po2(tl.pb_mmhg)), tl.duration_h, home_pio2)
        else:
            f_v = f_r = np.zeros(n)
        cols["f_ventilatory"].append(np.broadcast_to(f_v, (n,)))
        cols["f_renal"].append(np.broadcast_to(f_r, (n,)))
        per_sample = {k: v[asleep] for k, v in factors.items()}
        for k, v in per_sample.items():
            cols[k].append(v)
        knots.append(Knots(tl.time_h, [tl.altitude_m, tl.pb_mmhg, per_sample["drive_scale"]],
                           DEFAULT_KNOT_SPACING_H))
    allk = Knots.concatenate(knots)
    inputs = {k: allk.at_knots(np.concatenate(v)) for k, v in cols.items()}
    res = assess(atmosphere="isa" if kind == "flight" else "mountain", **inputs)
    sao2 = allk.interpolate(np.asarray(res["sao2_pct"], dtype=float))
    pio2 = allk.interpolate(np.asarray(res["inspired_po2_mmhg"], dtype=float))
    # a resting steady state (altox.physiology.validity: not in the time-of-useful-consciousness regime, above the
    # inspired-PO2 floor, a solution of the ventilation model)
    from altox.physiology.validity import NO_STEADY_STATE

    ok = allk.interpolate_flag(res["validity_status"], combine=np.maximum) < NO_STEADY_STATE
    out, start = [], 0
    for tl in timelines:
        s = slice(start, start + len(tl))
        out.append((sao2[s], pio2[s], ok[s]))
        start += len(tl)
    return out


def _finding_rows(findings) -> list[dict]:
    return [{"rule_set": f.rule_set_id, "threshold": f.threshold_id, "citation": f.citation, "status": f.status,
             "broken": f.status in ("required-not-planned", "limit-exceeded"), "legs": [int(x) for x in f.legs],
             "minutes": None if f.band_hours is None else round(60.0 * f.band_hours, 2)}
            for f in findings]


def _oxygen_line(review: dict) -> dict:
    need = review.get("would_need") or []
    cyl = review.get("cylinders")
    fio2 = [r["fio2_needed"] for r in need if r.get("fio2_needed") is not None]
    flows = [r["flow_l_min"] for r in need if r.get("flow_l_min") is not None]
    return {"target_equivalent_altitude_m": review["target"]["equivalent_altitude_m"],
            "legs_needing_oxygen": [r["leg"] for r in need],
            "highest_fio2_needed": max(fio2) if fio2 else None,
            "highest_flow_l_min": max(flows) if flows else None,
            "legs_beyond_reach": [r["leg"] for r in need if not r.get("reachable", True)
                                  or not r.get("device_reaches_target", True)],
            "planned_litres": cyl["litres_total"] if cyl else 0.0,
            "planned_cylinders": cyl["cylinders_total"] if cyl else 0}


def _decompression_line(review: dict) -> dict:
    worst = review.get("worst_leg")
    if isinstance(worst, int):
        worst = next((leg for leg in review.get("legs", []) if leg.get("leg") == worst), None)
    out = {"applicable": bool(review.get("applicable")), "worst_leg": None, "tuc_min_s": None,
           "tuc_max_s": None, "oxygen_total_l": None}
    if out["applicable"] and worst:
        out.update(worst_leg=worst.get("leg"), tuc_min_s=worst.get("tuc_min_s"),
                   tuc_max_s=worst.get("tuc_max_s"), oxygen_total_l=worst.get("oxygen_total_l"))
    return out


def _error_line(source: PlanSource, exc: BaseException) -> dict:
    if isinstance(exc, AltoxError):
        message = exc.message
        if not message.startswith(source.name):
            message = f"{source.name}: {message}"
    else:
        message = f"{source.name}: could not be evaluated ({type(exc).__name__}: {exc})"
    return {"plan": None, "source": source.name, "kind": None, "status": "error", "error": message}


def review_batch(sources: list, *, rules: tuple = (), oxygen: bool = False,
                 decompression: bool = False) -> list[dict]:
    """Review a batch of plans; one result line per source, in order (errors as lines, never raised).

    This is the function every engine maps over its partitions.

    Parameters
    ----------
    sources : list of PlanSource
    rules : tuple of str
        Rule-set ids or rule files that replace each plan's own list (as ``altox plan --rules``).
    oxygen, decompression : bool
        Add each plan's oxygen review and decompression review (:mod:`altox.evaluation.oxygen_plan`); these
        evaluate every person aboard and cost several times the review itself.

    Returns
    -------
    list of dict
        Result lines (schema in ``docs/fleet.md``).
    """
    from altox.plan.timeline import expand

    rules = tuple(rules)
    lines: list = [None] * len(sources)
    loaded = []          # (position, source, plan, timeline, rule sets)
    for i, src in enumerate(sources):
        try:
            if src.text is not None and src.text.startswith("\0"):
                from altox.errors import ProfileError

                raise ProfileError(src.text[1:], path=src.name)
            plan = src.load()
            loaded.append((i, src, plan, expand(plan), _rule_sets(plan, rules)))
        except Exception as exc:  # noqa: BLE001 - a bad plan is reported and skipped
            lines[i] = _error_line(src, exc)
    for kind in ("flight", "expedition"):
        group = [item for item in loaded if item[2].kind == kind]
        if not group:
            continue
        try:
            phys = _physiology(kind, [item[3] for item in group])
        except Exception:  # noqa: BLE001 - one bad plan must not sink its batch: evaluate one by one
            phys = []
            for item in group:
                try:
                    phys.append(_physiology(kind, [item[3]])[0])
                except Exception as exc:  # noqa: BLE001
                    lines[item[0]] = _error_line(item[1], exc)
                    phys.append(None)
        for item, ph in zip(group, phys):
            if ph is None:
                continue
            i, src, plan, tl, rule_sets = item
            try:
                lines[i] = _result_line(src, plan, tl, rule_sets, ph, oxygen, decompression, rules)
            except Exception as exc:  # noqa: BLE001
                lines[i] = _error_line(src, exc)
    return lines


def _result_line(src, plan, tl, rule_sets, phys, oxygen, decompression, rules) -> dict:
    from altox.evaluation.evaluate import guidance_findings
    from altox.physiology.validity import time_limited_text

    sao2, pio2, ok = phys
    valid = bool(np.all(ok))
    dt = tl.duration_h
    # the worst moment: without a steady state (the lowest PIO2 there) before any saturation
    w = int(np.argmin(sao2)) if valid else int(np.flatnonzero(~ok)[np.argmin(pio2[~ok])])
    leg = int(tl.leg[w])
    findings, cabin_hours = guidance_findings(plan, rule_sets)
    rows = _finding_rows(findings)
    levels = sorted(plan.saturation_levels, reverse=True)
    line = {
        "plan": plan.name, "source": src.name, "kind": plan.kind, "status": "ok", "error": None,
        "worst_sao2_pct": round(float(sao2[w]), 2) if valid else None,
        "worst_time_limited": None if valid else time_limited_text(float(pio2[w])),
        "worst_leg": leg + 1, "worst_leg_label": tl.leg_labels[leg],
        "worst_time_h": round(float(tl.time_h[w]), 4),
        "worst_altitude_m": round(float(tl.altitude_m[w]), 1),
        "worst_cabin_pressure_altitude_ft": round(float(tl.cabin_pressure_altitude_ft[w]), 0),
        "model_valid": valid,
        "model_note": None if valid else ("OUTSIDE THE MODEL somewhere along this plan (no resting steady state: "
                                          "acute exposure at 20,000 ft or more, or an inspired PO2 below the "
                                          "lowest published measurement): the numbers there are not a "
                                          "prediction, and no saturation is given for the worst moment."),
        "total_hours": round(float(dt.sum()), 4),
        "hypoxic_dose_kmh": round(float(np.sum(np.maximum(tl.altitude_m - plan.dose_floor_m, 0.0) * dt) / 1000.0), 3),
        "hours_below_pct": {str(round(100 * lvl)): round(float(np.sum(dt[sao2 < 100 * lvl])), 4) for lvl in levels},
        "hours_cabin_above_ft": {str(int(t)): round(float(h), 4) for t, h in cabin_hours.items()},
        "rule_sets": [rs.id for rs in rule_sets],
        "rules_broken": sum(r["broken"] for r in rows),
        "rules": rows,
    }
    if oxygen or decompression:
        from altox.evaluation.evaluate import evaluate_plan
        from altox.evaluation.oxygen_plan import decompression_review, oxygen_review

        if rules:
            update = {"rules": [r for r in rules if not _is_file(r)] or list(plan.rules)}
            files = [r for r in rules if _is_file(r)]
            if files:
                update["rule_file"] = str(Path(files[0]).resolve())
            plan = plan.model_copy(update=update)
        full = evaluate_plan(plan)
        if oxygen:
            line["oxygen"] = _oxygen_line(oxygen_review(plan, full))
        if decompression:
            line["decompression"] = _decompression_line(decompression_review(plan, full))
    return line


def review_sources(sources: Iterable[PlanSource], *, rules: tuple = (), oxygen: bool = False,
                   decompression: bool = False, batch: int = DEFAULT_BATCH) -> Iterator[dict]:
    """Stream result lines for ``sources`` in order, ``batch`` plans at a time."""
    if batch < 1:
        raise AltoxError(f"batch: {batch} is not a batch size; expected 1 or more.", field="batch")
    chunk = []
    for src in sources:
        chunk.append(src)
        if len(chunk) >= batch:
            yield from review_batch(chunk, rules=rules, oxygen=oxygen, decompression=decompression)
            chunk = []
    if chunk:
        yield from review_batch(chunk, rules=rules, oxygen=oxygen, decompression=decompression)


def review_plans(inputs: Iterable[str | os.PathLike], *, rules: tuple = (), oxygen: bool = False,
                 decompression: bool = False, batch: int = DEFAULT_BATCH, stdin=None) -> Iterator[dict]:
    """Review many plans; yields one result line (a dict) per plan, in input order.

    Parameters
    ----------
    inputs : iterable of str or path
        Plan files, JSON Lines files, directories, glob patterns, or ``-`` for ``stdin``
        (see :func:`iter_sources`).
    rules : tuple of str
        Rule-set ids or rule files replacing each plan's own list.
    oxygen, decompression : bool
        Add the oxygen review and the decompression review to each line.
    batch : int
        Plans evaluated together; memory grows with the batch, not with the fleet.
    stdin : file, optional
        Where ``-`` reads from.

    Examples
    --------
    >>> from altox.evaluation.fleet import FleetSummary, review_plans
    >>> summary = FleetSummary()
    >>> for line in review_plans(["profiles/"]):           # doctest: +SKIP
    ...     summary.add(line)
    """
    return review_sources(iter_sources(inputs, stdin=stdin), rules=rules, oxygen=oxygen,
                          decompression=decompression, batch=batch)


# -- output -------------------------------------------------------------------------------------
#: columns of the CSV form of a result line (nested fields flattened; rules as ``set/threshold`` lists)
CSV_COLUMNS = ("source", "plan", "kind", "status", "error", "worst_sao2_pct", "worst_time_limited", "worst_leg",
               "worst_leg_label", "worst_time_h", "worst_altitude_m", "worst_cabin_pressure_altitude_ft", "model_valid",
               "total_hours", "hypoxic_dose_kmh",
               *(f"hours_cabin_above_{t}_ft" for t in CABIN_THRESHOLDS_FT),
               "hours_below_pct", "rules_broken", "rules_broken_ids", "rules_broken_minutes",
               "oxygen_legs_needing", "oxygen_highest_fio2_needed", "oxygen_highest_flow_l_min",
               "oxygen_planned_litres", "decompression_worst_leg", "decompression_tuc_min_s",
               "decompression_oxygen_total_l")


def result_csv_row(line: dict) -> dict:
    """One result line flattened to :data:`CSV_COLUMNS`."""
    row = {k: line.get(k) for k in CSV_COLUMNS if not isinstance(line.get(k), (dict, list))}
    for t in CABIN_THRESHOLDS_FT:
        row[f"hours_cabin_above_{t}_ft"] = (line.get("hours_cabin_above_ft") or {}).get(str(t))
    if line.get("status") == "ok":
        row["hours_below_pct"] = " ".join(f"{k}%:{v:g}h" for k, v in line["hours_below_pct"].items())
        broken = [r for r in line["rules"] if r["broken"]]
        row["rules_broken_ids"] = " ".join(f"{r['rule_set']}/{r['threshold']}" for r in broken)
        row["rules_broken_minutes"] = " ".join("" if r["minutes"] is None else f"{r['minutes']:g}" for r in broken)
    ox = line.get("oxygen") or {}
    row.update(oxygen_legs_needing=" ".join(map(str, ox.get("legs_needing_oxygen", []))) if ox else None,
               oxygen_highest_fio2_needed=ox.get("highest_fio2_needed"),
               oxygen_highest_flow_l_min=ox.get("highest_flow_l_min"), oxygen_planned_litres=ox.get("planned_litres"))
    dc = line.get("decompression") or {}
    row.update(decompression_worst_leg=dc.get("worst_leg"), decompression_tuc_min_s=dc.get("tuc_min_s"),
               decompression_oxygen_total_l=dc.get("oxygen_total_l"))
    return {k: ("" if row.get(k) is None else row.get(k)) for k in CSV_COLUMNS}


class CsvWriter:
    """Writes result lines as CSV rows (header first) to a text stream."""

    def __init__(self, stream):
        self._w = csv.DictWriter(stream, fieldnames=CSV_COLUMNS, lineterminator="\n")
        self._w.writeheader()

    def write(self, line: dict) -> None:
        self._w.writerow(result_csv_row(line))


def to_json_line(line: dict) -> str:
    """One result line as compact JSON (no NaN: non-finite numbers become null)."""
    def clean(v):
        if isinstance(v, float) and not np.isfinite(v):
            return None
        if isinstance(v, dict):
            return {k: clean(x) for k, x in v.items()}
        if isinstance(v, list):
            return [clean(x) for x in v]
        if isinstance(v, np.generic):
            return clean(v.item())
        return v
    return json.dumps(clean(line), ensure_ascii=False, separators=(",", ":"))


# -- summary ------------------------------------------------------------------------------------
class FleetSummary:
    """Summary across the fleet, folded one result line at a time in constant memory.

    Keeps counts and sums per rule and per cabin threshold, and the ``worst`` lowest-SaO2
    plans (a bounded heap); never the lines themselves.
    """

    def __init__(self, worst: int = 10):
        self.worst_n = worst
        self.plans = 0
        self.errors = 0
        self.error_examples: list[str] = []
        self.by_kind: dict[str, int] = {}
        self.outside_model = 0
        self.rules: dict[tuple, dict] = {}
        self.cabin: dict[int, dict] = {t: {"plans": 0, "hours": 0.0} for t in CABIN_THRESHOLDS_FT}
        self.flights = 0
        self._worst: list = []   # heap of (-sao2, order, entry): the largest -sao2 popped first
        self._order = 0

    def add(self, line: dict) -> None:
        self.plans += 1
        if line.get("status") != "ok":
            self.errors += 1
            if len(self.error_examples) < 5:
                self.error_examples.append(line.get("error") or line.get("source"))
            return
        self.by_kind[line["kind"]] = self.by_kind.get(line["kind"], 0) + 1
        if not line["model_valid"]:
            self.outside_model += 1
        for r in line["rules"]:
            key = (r["rule_set"], r["threshold"])
            e = self.rules.setdefault(key, {"citation": r["citation"], "plans_touched": 0, "plans_broken": 0,
                                            "minutes_broken": 0.0})
            e["plans_touched"] += 1
            if r["broken"]:
                e["plans_broken"] += 1
                e["minutes_broken"] += r["minutes"] or 0.0
        if line["kind"] == "flight":
            self.flights += 1
            for t in CABIN_THRESHOLDS_FT:
                h = line["hours_cabin_above_ft"][str(t)]
                if h > 0:
                    self.cabin[t]["plans"] += 1
                    self.cabin[t]["hours"] += h
        # a plan without a steady state ranks before any saturation (key +inf)
        key = float("inf") if line["worst_sao2_pct"] is None else -line["worst_sao2_pct"]
        entry = (key, -self._order, {k: line.get(k) for k in (
            "source", "plan", "worst_sao2_pct", "worst_time_limited", "worst_leg", "worst_leg_label", "rules_broken",
            "model_valid")})
        self._order += 1
        if len(self._worst) < self.worst_n:
            heapq.heappush(self._worst, entry)      # min-heap on -SaO2: the highest SaO2 kept leaves first
        else:
            heapq.heappushpop(self._worst, entry)

    def merge(self, other: "FleetSummary") -> "FleetSummary":
        """Fold another summary (of other plans) into this one; returns self."""
        self.plans += other.plans
        self.errors += other.errors
        self.error_examples = (self.error_examples + other.error_examples)[:5]
        for k, v in other.by_kind.items():
            self.by_kind[k] = self.by_kind.get(k, 0) + v
        self.outside_model += other.outside_model
        for key, e in other.rules.items():
            mine = self.rules.setdefault(key, {**e, "plans_touched": 0, "plans_broken": 0, "minutes_broken": 0.0})
            for f in ("plans_touched", "plans_broken", "minutes_broken"):
                mine[f] += e[f]
        for t in CABIN_THRESHOLDS_FT:
            self.cabin[t]["plans"] += other.cabin[t]["plans"]
            self.cabin[t]["hours"] += other.cabin[t]["hours"]
        self.flights += other.flights
        for item in other._worst:
            heapq.heappush(self._worst, (item[0], item[1] - self._order, item[2]))
            if len(self._worst) > self.worst_n:
                heapq.heappop(self._worst)
        self._order += other._order
        return self

    def as_dict(self) -> dict:
        """The summary as plain data (the ``--summary-json`` form)."""
        ok = self.plans - self.errors
        rules = [{"rule_set": k[0], "threshold": k[1], **v, "minutes_broken": round(v["minutes_broken"], 2),
                  "fraction_broken": v["plans_broken"] / ok if ok else 0.0}
                 for k, v in sorted(self.rules.items(), key=lambda kv: (-kv[1]["plans_broken"], kv[0]))]
        worst = [e[2] for e in sorted(self._worst, key=lambda e: (-e[0], -e[1]))]
        return {"plans": self.plans, "reviewed": ok, "errors": self.errors, "error_examples": self.error_examples,
                "by_kind": dict(self.by_kind), "outside_model": self.outside_model, "rules": rules,
                "flights": self.flights,
                "cabin_above_ft": {str(t): {"plans": c["plans"], "hours": round(c["hours"], 4),
                                            "fraction_of_flights": c["plans"] / self.flights if self.flights else 0.0}
                                   for t, c in self.cabin.items()},
                "worst_plans": worst, "caution": CAUTION}

    def text(self) -> str:
        """The summary as plain text tables, 80 columns wide."""
        d = self.as_dict()
        out = io.StringIO()
        w = out.write
        w(_wrap(f"Fleet review: {d['reviewed']:,} of {d['plans']:,} plans reviewed"
                + (f"; {d['errors']:,} could not be read or evaluated (each named with its problem in "
                   "the result lines)" if d["errors"] else "") + ".", 78) + "\n")
        kinds = ", ".join(f"{v:,} {k}{'s' if v != 1 else ''}" for k, v in sorted(d["by_kind"].items()))
        if kinds:
            w(f"  {kinds}.\n")
        if d["outside_model"]:
            w(f"  {d['outside_model']:,} plan(s) go outside the model somewhere; their numbers there are not a "
              "prediction.\n")
        w("\nGuidance rules broken (reference adult on air; 'minutes' is time in the rule's\n"
          "cabin band on the legs concerned, flights only)\n")
        if d["rules"]:
            w(f"  {'rule set / threshold':<40} {'broken':>8} {'% plans':>8} {'minutes':>10}\n")
            for r in d["rules"]:
                name = f"{r['rule_set']} / {r['threshold']}"[:40]
                minutes = f"{r['minutes_broken']:>10,.0f}" if r["minutes_broken"] else f"{'-':>10}"
                w(f"  {name:<40} {r['plans_broken']:>8,} {100 * r['fraction_broken']:>7.1f}% {minutes}\n")
            w("  Sources:\n")
            for cite in sorted({r["citation"] for r in d["rules"]}):
                w(_wrap(cite, 74, "  - ", "    ") + "\n")
        else:
            w("  none touched\n")
        if d["flights"]:
            w(f"\nCabin pressure altitude above each threshold ({d['flights']:,} flights)\n")
            w(f"  {'above':<12} {'flights':>8} {'% flights':>10} {'hours':>10}\n")
            for t, c in d["cabin_above_ft"].items():
                w(f"  {int(t):>6,} ft   {c['plans']:>8,} {100 * c['fraction_of_flights']:>9.1f}% {c['hours']:>10,.1f}\n")
        if d["worst_plans"]:
            w("\nLowest expected SaO2 (reference adult at rest on air, model estimate)\n")
            w(f"  {'SaO2':>6} {'leg':>4}  {'plan source':<64}\n")
            for e in d["worst_plans"]:
                src = e["source"] if len(e["source"]) <= 64 else "..." + e["source"][-61:]
                flag = "" if e["model_valid"] else " (outside the model)"
                if e["worst_sao2_pct"] is None:   # no steady state: the time-limited state, no saturation
                    w(f"  {'none':>6} {e['worst_leg']:>4}  {src}{flag}\n" + _wrap(e["worst_time_limited"] or "", 70,
                                                                                 " " * 14, " " * 14) + "\n")
                else:
                    w(f"  {e['worst_sao2_pct']:>5.1f}% {e['worst_leg']:>4}  {src}{flag}\n")
        w("\n" + _wrap(CAUTION, 78) + "\n")
        return out.getvalue()


def _wrap(text: str, width: int, first: str = "", rest: str = "") -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width + len(first), initial_indent=first, subsequent_indent=rest))
