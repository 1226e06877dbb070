"""Fleet probe for benchmarks/run.py: review N invented variants of the flight demos in this process.

Usage: python benchmarks/fleet_probe.py N [--oxygen] [--decompression] [--batch B] [--jsonl]

Writes N plan files (variants of the three flight demos: other cruise altitudes, cabin
schedules and oxygen; one in a hundred made invalid) to a temporary folder, then times the whole batch path in this process:
reading and validating every file, evaluating it, the rule verdicts and (with the flags) the
oxygen and decompression reviews, with every result line serialised to JSON as the command
does. Peak resident memory is this process's own (VmHWM, see peak_rss_mb). Prints: seconds, plans reviewed,
plans failed, peak MB, CPU seconds. With --jsonl the same plans are read from one JSON Lines
file instead of N YAML files (the YAML parser's share of the cost).
"""
import random
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def peak_rss_mb() -> float:
    """This process's own peak resident memory [MB]: VmHWM of /proc/self/status (reset by exec).

    ``ru_maxrss`` is not used where /proc is available: Linux carries it across exec, so a probe
    started from a large parent would report the parent's peak.
    """
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def write_fleet(folder: Path, n: int, seed: int = 1) -> None:
    piston = (ROOT / "profiles" / "piston-ridge-crossing.yaml").read_text(encoding="utf-8")
    jet = (ROOT / "profiles" / "jet-highcruise.yaml").read_text(encoding="utf-8")
    medevac = (ROOT / "profiles" / "medevac-transfer.yaml").read_text(encoding="utf-8")
    rng = random.Random(seed)
    for i in range(n):
        k = i % 3
        if k == 0:
            a = rng.randrange(8000, 16000, 500)
            text = (piston.replace('"13,500 ft"', "@A@").replace('"14,500 ft"', "@B@")
                    .replace("@A@", f'"{a:,} ft"').replace("@B@", f'"{a + 1000:,} ft"'))
            if rng.random() < 0.5:
                text = text.replace(", oxygen: crew", "")
        elif k == 1:
            text = (jet.replace("max_cabin_altitude: 8,000 ft",
                                f"max_cabin_altitude: {rng.randrange(6000, 10001, 500):,} ft")
                    .replace("FL410", f"FL{rng.randrange(380, 451, 10)}"))
        else:
            text = medevac
        if i % 100 == 99:      # one plan in a hundred is invalid: the error path is part of the cost
            text = text.replace("phase: descent", "phase: descnet", 1)
        (folder / f"plan-{i:05d}.yaml").write_text(text.replace("\nname: ", f"\nname: No. {i} ", 1),
                                                   encoding="utf-8")


def write_stream(folder: Path) -> Path:
    """The same plans as one JSON Lines file (each YAML plan as a JSON object on one line)."""
    import json

    import yaml

    out = folder / "plans.jsonl"
    with out.open("w", encoding="utf-8") as fh:
        for path in sorted(folder.glob("plan-*.yaml")):
            fh.write(json.dumps(yaml.safe_load(path.read_text(encoding="utf-8"))) + "\n")
            path.unlink()
    return out


def main(argv):
    n = int(argv[0])
    oxygen = "--oxygen" in argv
    decompression = "--decompression" in argv
    batch = int(argv[argv.index("--batch") + 1]) if "--batch" in argv else 256
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        write_fleet(folder, n)
        if "--jsonl" in argv:
            write_stream(folder)
        from altox.evaluation.fleet import review_plans, to_json_line, FleetSummary

        summary = FleetSummary()
        cpu0 = time.process_time()
        start = time.perf_counter()
        ok = bad = 0
        for line in review_plans([folder], oxygen=oxygen, decompression=decompression, batch=batch):
            to_json_line(line)
            summary.add(line)
            ok += line["status"] == "ok"
            bad += line["status"] != "ok"
        seconds = time.perf_counter() - start
        cpu = time.process_time() - cpu0
    print(seconds, ok, bad, peak_rss_mb(), cpu)


if __name__ == "__main__":
    main(sys.argv[1:])
