"""Ensemble probe for benchmarks/run.py: one person's expected range over a 30-day plan sampled every minute.

Run in its own process so that peak resident memory (VmHWM, the operating system's own
accounting of this process; see fleet_probe.peak_rss_mb) belongs to this work alone. Prints:
seconds, person-samples, peak MB, per-point floor [s per point] (one pow per point over 10^6
points, best of 5 before and after the ensemble, under the same load).
"""
import sys, time
from pathlib import Path
sys.path.insert(0, str(Path(__file__).resolve().parent))
from fleet_probe import peak_rss_mb
from altox.plan.profile import load_plan_text
from altox.evaluation.population import expected_range
days = "\n".join(f"  - {{day: {d}, sleep: '{min(2800 + 300 * (d // 2), 5200)} m'}}" for d in range(1, 31))
text = f"""kind: expedition
name: benchmark month
start_altitude: 1,200 m
sample_every: 1 min
party:
  - {{name: A, age: 35}}
days:
{days}
"""
plan = load_plan_text(text)
n = int(sys.argv[1])


def floor_per_point(points=10**6):
    import numpy as np
    h = np.random.default_rng(1).uniform(0.0, 8800.0, points)
    best = float("inf")
    for _ in range(5):
        t0 = time.perf_counter()
        101325.0 * (1.0 - 2.25577e-5 * h) ** 5.25588
        best = min(best, time.perf_counter() - t0)
    return best / points


before = floor_per_point()
t = time.perf_counter()
r = expected_range(plan, n=n, seed=1)
dt = time.perf_counter() - t
samples = len(r["time_h"])
peak = peak_rss_mb()   # before the second floor, whose 8 MB arrays are not the ensemble's
print(dt, n * samples, peak, min(before, floor_per_point()))
