"""Speed of ``altox fix`` (altox.evaluation.repair): ratios against one evaluation of the same plan, in one run.

Run from the repository root:  python benchmarks/repair.py
Prints a table and writes benchmarks/repair_results.json.  Timing never appears in a test.

Itineraries of N days are made up: a fly-in to 2,800 m, then 600 m a night with no rest day
(too fast: every rule of wms-2024 is broken) up to at most 5,900 m, then down, a day at a time.
"""

from __future__ import annotations

import json
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from run import best_of  # noqa: E402  the same timing rule as the main benchmarks


def itinerary(n_days: int) -> str:
    up = max(2, int(n_days * 0.6))
    sleeps = [2800]
    while len(sleeps) < up:
        sleeps.append(min(sleeps[-1] + 600, 5900))
    while len(sleeps) < n_days:
        sleeps.append(max(sleeps[-1] - 900, 1300))
    lines = ["kind: expedition", f"name: benchmark {n_days} days", "rules: [wms-2024]",
             "start_altitude: 1,300 m", "party:", "  - {name: A, age: 40}", "  - {name: B, age: 60}", "days:"]
    lines += [f'  - {{day: {i}, sleep: "{s:,} m"{", activity: fly-in" if i == 1 else ""}}}'
              for i, s in enumerate(sleeps, start=1)]
    return "\n".join(lines) + "\n"


def main() -> dict:
    from altox.evaluation.evaluate import evaluate_plan
    from altox.plan.profile import load_plan
    from altox.evaluation.repair import repair_plan

    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (5, 10, 20, 40):
            path = Path(tmp) / f"b{n}.yaml"
            path.write_text(itinerary(n), encoding="utf-8")
            plan = load_plan(path)
            evaluate_plan(plan)                      # warm up imports and caches
            base = best_of(lambda: evaluate_plan(plan), repeat=3)
            result = repair_plan(path)
            t = best_of(lambda: repair_plan(path), repeat=3)
            row = {"days": n, "added_days": result.added_days, "states": result.states,
                   "repair_s": t, "evaluate_s": base, "ratio_to_one_evaluation": t / base}
            if n == 20:
                goal = "night SaO2 >= 75 % for every member at the 5th percentile"
                tg = best_of(lambda: repair_plan(path, goal=goal), repeat=1)
                row.update(goal_repair_s=tg, goal_ratio_to_one_evaluation=tg / base)
            rows.append(row)
    print(f"{'days':>5} {'added':>6} {'states':>7} {'repair s':>9} {'x evaluate':>11} {'with goal s':>12}")
    for r in rows:
        print(f"{r['days']:>5} {r['added_days']:>6} {r['states']:>7} {r['repair_s']:>9.3f} "
              f"{r['ratio_to_one_evaluation']:>11.1f} {r.get('goal_repair_s', float('nan')):>12.2f}")
    out = {"rows": rows}
    (ROOT / "benchmarks" / "repair_results.json").write_text(json.dumps(out, indent=2) + "\n", encoding="utf-8")
    return out


if __name__ == "__main__":
    main()
