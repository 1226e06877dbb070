"""altox benchmarks: each figure is a ratio against a baseline measured in the same run, on the same data.

Run from the repository root:  python benchmarks/run.py  [--quick]
Prints a table and writes benchmarks/results.json. Timing never appears in a test.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def best_of(func, repeat=5):
    """Shortest wall time of ``repeat`` calls (the least disturbed run). [s]"""
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return min(times)


def process_time(args, repeat=7):
    """Median wall time of a whole process. [s]"""
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, cwd=ROOT)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main(argv=None) -> dict:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="10^5 points instead of 10^6")
    opts = parser.parse_args(argv)
    import altox
    from altox.evaluate import evaluate_plan
    from altox.profile import load_plan_text

    n = 10**5 if opts.quick else 10**6
    rng = np.random.default_rng(1)
    altitude_m = rng.uniform(0.0, 8800.0, n)

    def baseline():  # the bare closed-form troposphere formula
        return 101325.0 * (1.0 - 2.25577e-5 * altitude_m) ** 5.25588

    base = best_of(baseline)
    pb = altox.barometric_pressure(altitude_m, "mountain")
    days = rng.uniform(0.0, 20.0, n)
    altox.assess(altitude_m[:1000], pb_mmhg=pb[:1000], days=days[:1000])  # warm caches
    chain = best_of(lambda: altox.assess(altitude_m, pb_mmhg=pb, atmosphere="mountain", days=days), 3)
    assess = best_of(lambda: altox.assess(altitude_m, atmosphere="isa", days=days), 3)

    # scaling: one plan evaluated at 1x, 10x and 100x the samples
    trek = (ROOT / "profiles" / "trek-teskavor.yaml").read_text(encoding="utf-8")
    per_sample = {}
    for factor, every in ((1, "60 min"), (10, "6 min"), (100, "36 s")):
        text = re.sub(r"(?m)^sample_every:.*$", f"sample_every: {every}", trek)
        plan = load_plan_text(text)
        samples = plan.total_duration_h / plan.sample_every_h
        per_sample[factor] = best_of(lambda plan=plan: evaluate_plan(plan), 3) / samples

    floor = process_time([sys.executable, "-c", "import numpy, scipy.optimize, ambiance"])
    plan_start = process_time([sys.executable, "-m", "altox", "plan", "profiles/trek-teskavor.yaml"])
    help_start = process_time([sys.executable, "-m", "altox", "--help"])

    figures = [
        ("chain", f"PB -> O2 content incl. ventilation solve, {n:,} points", chain / base, 20.0, "x baseline"),
        ("assess", f"assess over {n:,} altitudes, ISA included", assess / base, 80.0, "x baseline"),
        ("plan start", "altox plan on the largest demo, whole process", plan_start / floor, 1.3, "x import floor"),
        ("help start", "altox --help, whole process", help_start / floor, 0.4, "x import floor"),
        ("scaling", "per-sample cost at 100x / 1x samples", per_sample[100] / per_sample[1], 1.2, "ratio"),
    ]
    figures.extend(_ensemble_figure(base / n, 50 if opts.quick else 1000))
    rows = [{"figure": f, "what": w, "ratio": round(r, 3), "target": t, "unit": u, "met": bool(r <= t)}
            for f, w, r, t, u in figures]
    result = {
        "date": time.strftime("%Y-%m-%d"),
        "machine": {"python": platform.python_version(), "platform": platform.platform(),
                    "cpus": os.cpu_count(), "numpy": np.__version__},
        "baseline_s": base, "points": n, "import_floor_s": floor, "figures": rows,
    }
    width = max(len(r["figure"]) for r in rows)
    print(f"baseline: {base * 1e3:.2f} ms for {n:,} points; import floor {floor:.3f} s")
    print(f"{'figure':<{width}}  {'ratio':>9}  {'target':>7}  met  what")
    for r in rows:
        print(f"{r['figure']:<{width}}  {r['ratio']:>9.2f}  {r['target']:>7.2f}  {'yes' if r['met'] else 'NO ':<3}  "
              f"{r['what']} ({r['unit']})")
    out = ROOT / "benchmarks" / "results.json"
    tmp = out.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(result, indent=2) + "\n", encoding="utf-8")
    os.replace(tmp, out)
    return result


def _ensemble_figure(base_per_point, members):
    """Expected range of one person, ``members`` simulated people, 30 days at 1-minute samples."""
    out = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "ensemble_probe.py"), str(members)],
                         check=True, capture_output=True, text=True, cwd=ROOT).stdout.split()
    seconds, person_samples, peak_mb = float(out[0]), int(out[1]), float(out[2])
    return [("ensemble", f"{person_samples:,} person-samples, per person-sample",
             seconds / person_samples / base_per_point, 25.0, "x baseline per point"),
            ("ensemble memory", f"peak resident memory {peak_mb:.0f} MB", peak_mb / 600.0, 1.0, "x 600 MB")]


if __name__ == "__main__":
    main()
