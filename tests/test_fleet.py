"""Fleet review (`altox review`, :mod:`altox.evaluation.fleet`) on a small invented fleet of demo variants."""

import csv
import io
import itertools
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from altox.evaluation import fleet
from altox.cli.main import app
from altox.evaluation.evaluate import evaluate_plan
from altox.plan.profile import load_plan

ROOT = Path(__file__).resolve().parents[1]
DEMOS = ROOT / "profiles"


def make_fleet(folder: Path) -> dict:
    """Variants of the flight demos (cruise altitude, cabin schedule, oxygen), one trek, bad plans."""
    folder.mkdir(parents=True, exist_ok=True)
    piston = (DEMOS / "piston-ridge-crossing.yaml").read_text()
    jet = (DEMOS / "jet-highcruise.yaml").read_text()
    good = []
    for k, (first, ft) in enumerate((("10,500 ft", "11,500 ft"), ("12,000 ft", "13,000 ft"),
                                     ("15,500 ft", "16,500 ft"))):
        text = (piston.replace('"13,500 ft"', f'"{first}"').replace('"14,500 ft"', f'"{ft}"')
                .replace("name: Vessomar", f"name: V{k} Vessomar"))
        if k == 2:
            text = text.replace(", oxygen: crew", "")
        (folder / f"piston-{k}.yaml").write_text(text)
        good.append(folder / f"piston-{k}.yaml")
    for k, cab in enumerate(("6,000 ft", "10,000 ft")):
        sub = folder / "jets"
        sub.mkdir(exist_ok=True)
        (sub / f"jet-{k}.yaml").write_text(jet.replace("max_cabin_altitude: 8,000 ft", f"max_cabin_altitude: {cab}"))
        good.append(sub / f"jet-{k}.yaml")
    (folder / "trek.yaml").write_text((DEMOS / "trek-teskavor-fast.yaml").read_text())
    good.append(folder / "trek.yaml")
    (folder / "bad-missing.yaml").write_text("kind: flight\nname: nothing else\n")
    (folder / "bad-yaml.yaml").write_text("kind: flight\nlegs: [unclosed\n")
    (folder / "notes.txt").write_text("not a plan, not picked up from a folder\n")
    return {"good": sorted(good), "bad": [folder / "bad-missing.yaml", folder / "bad-yaml.yaml"]}


@pytest.fixture(scope="module")
def fleet_dir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fleet")
    return folder, make_fleet(folder)


@pytest.fixture(scope="module")
def lines(fleet_dir):
    folder, _ = fleet_dir
    return list(fleet.review_plans([folder], batch=4))


def test_folder_in_name_order_with_bad_plans_named_and_skipped(fleet_dir, lines):
    folder, made = fleet_dir
    expected = sorted(str(p) for p in made["good"] + made["bad"])
    assert sorted(line["source"] for line in lines) == expected
    assert len(lines) == len(expected)
    bad = {line["source"]: line for line in lines if line["status"] == "error"}
    assert set(bad) == {str(p) for p in made["bad"]}
    missing = bad[str(folder / "bad-missing.yaml")]["error"]
    assert missing.startswith(str(folder / "bad-missing.yaml")) and "aircraft" in missing
    assert str(folder / "bad-yaml.yaml") in bad[str(folder / "bad-yaml.yaml")]["error"]


def test_lines_match_the_single_plan_evaluation(lines):
    """Batched physiology gives each plan what `altox plan` gives it alone (same model, same knots)."""
    for line in lines:
        if line["status"] != "ok":
            continue
        res = evaluate_plan(load_plan(line["source"]))
        s = res.summary
        assert line["worst_sao2_pct"] == pytest.approx(s["worst_sao2_pct"], abs=0.006)   # rounded to 0.01
        assert line["kind"] == res.kind and line["rule_sets"] == res.rule_sets
        for key, hours in line["hours_below_pct"].items():
            assert hours == pytest.approx(s[f"hours_below_{key}_pct"], abs=1e-3)
        for key, hours in line["hours_cabin_above_ft"].items():
            assert hours == pytest.approx(s[f"hours_cabin_above_{key}_ft"], abs=1e-3)
        assert line["hypoxic_dose_kmh"] == pytest.approx(s["hypoxic_dose_kmh"], abs=1e-3)
        assert line["rules_broken"] == s["rules_broken"]
        assert [(r["rule_set"], r["threshold"], r["status"]) for r in line["rules"]] == \
            [(f.rule_set_id, f.threshold_id, f.status) for f in res.findings]


def test_rule_minutes_and_verdicts_follow_the_profile(lines):
    by_name = {Path(line["source"]).name: line for line in lines}
    low, high = by_name["piston-0.yaml"], by_name["piston-2.yaml"]
    # 11,500 ft: never above 12,500 or 14,000 ft; 16,500 ft without oxygen: crew rule broken with minutes
    assert low["hours_cabin_above_ft"]["14000"] == 0.0 and low["rules_broken"] == 0
    broken = [r for r in high["rules"] if r["broken"]]
    assert broken and all(r["minutes"] > 0 for r in broken)
    crew14 = next(r for r in high["rules"] if r["threshold"] == "crew-above-14000")   # no top to its band
    assert crew14["minutes"] == pytest.approx(60 * high["hours_cabin_above_ft"]["14000"], abs=0.01)
    assert high["hours_cabin_above_ft"]["15000"] > 0
    assert high["worst_sao2_pct"] < low["worst_sao2_pct"]
    assert all(r["minutes"] is None for r in by_name["trek.yaml"]["rules"])
    assert by_name["trek.yaml"]["hours_cabin_above_ft"] == {}


def test_batch_size_does_not_change_results(fleet_dir, lines):
    folder, _ = fleet_dir
    one_by_one = list(fleet.review_plans([folder], batch=1))
    assert [json.dumps(x, sort_keys=True) for x in one_by_one] == [json.dumps(x, sort_keys=True) for x in lines]


def test_streaming_pulls_one_batch_at_a_time(fleet_dir):
    folder, made = fleet_dir
    pulled = []

    def sources():
        for p in itertools.cycle(made["good"]):
            pulled.append(p)
            yield fleet.PlanSource(str(p), path=str(p))

    stream = fleet.review_sources(sources(), batch=3)    # an endless fleet: must still stream
    first = [next(stream) for _ in range(4)]
    assert all(line["status"] == "ok" for line in first)
    assert len(pulled) == 6      # two batches read, nothing more


def test_json_lines_stream_and_globs(fleet_dir, tmp_path):
    import yaml

    folder, made = fleet_dir
    plan = yaml.safe_load((DEMOS / "piston-ridge-crossing.yaml").read_text())
    stream = tmp_path / "plans.jsonl"
    stream.write_text(json.dumps(plan) + "\n\n{not json\n" + json.dumps({**plan, "legs": []}) + "\n")
    out = list(fleet.review_plans([stream, str(folder / "jets" / "*.yaml"), str(tmp_path / "nothing-*.yaml")]))
    assert [line["source"] for line in out[:3]] == [f"{stream}:1", f"{stream}:3", f"{stream}:4"]
    assert [line["status"] for line in out[:3]] == ["ok", "error", "error"]
    assert "JSON" in out[1]["error"] and "legs" in out[2]["error"]
    assert [Path(line["source"]).name for line in out[3:5]] == ["jet-0.yaml", "jet-1.yaml"]
    assert out[5]["status"] == "error" and "nothing-*.yaml" in out[5]["error"]
    ref = [x for x in fleet.review_plans([DEMOS / "piston-ridge-crossing.yaml"])][0]
    assert out[0]["worst_sao2_pct"] == ref["worst_sao2_pct"]


def test_summary_counts_and_merge(lines):
    whole = fleet.FleetSummary(worst=3)
    halves = [fleet.FleetSummary(worst=3), fleet.FleetSummary(worst=3)]
    for k, line in enumerate(lines):
        whole.add(line)
        halves[k % 2].add(line)
    d = whole.as_dict()
    ok = [x for x in lines if x["status"] == "ok"]
    assert d["plans"] == len(lines) and d["errors"] == len(lines) - len(ok)
    for r in d["rules"]:
        n = sum(any(y["broken"] and (y["rule_set"], y["threshold"]) == (r["rule_set"], r["threshold"])
                    for y in x["rules"]) for x in ok)
        assert r["plans_broken"] == n
    lowest = sorted(x["worst_sao2_pct"] for x in ok)[:3]
    assert [w["worst_sao2_pct"] for w in d["worst_plans"]] == lowest
    flights = [x for x in ok if x["kind"] == "flight"]
    for t, c in d["cabin_above_ft"].items():
        assert c["plans"] == sum(x["hours_cabin_above_ft"][t] > 0 for x in flights)
        assert c["hours"] == pytest.approx(sum(x["hours_cabin_above_ft"][t] for x in flights))
    merged = halves[0].merge(halves[1]).as_dict()
    assert merged["rules"] == d["rules"] and merged["cabin_above_ft"] == d["cabin_above_ft"]
    assert [w["worst_sao2_pct"] for w in merged["worst_plans"]] == lowest
    text = whole.text()
    assert "GUIDANCE ONLY" in text and max(len(t) for t in text.splitlines()) <= 80


def test_oxygen_and_decompression_reviews(fleet_dir):
    _, made = fleet_dir
    jet, piston = [p for p in made["good"] if p.name in ("jet-1.yaml", "piston-2.yaml")]
    out = {Path(x["source"]).name: x for x in fleet.review_plans([jet, piston], oxygen=True, decompression=True)}
    assert out["piston-2.yaml"]["oxygen"]["legs_needing_oxygen"]
    assert out["piston-2.yaml"]["oxygen"]["highest_fio2_needed"] > 0.21
    assert out["piston-2.yaml"]["decompression"]["applicable"] is False
    dc = out["jet-1.yaml"]["decompression"]
    assert dc["applicable"] and dc["tuc_min_s"] > 0 and dc["worst_leg"] >= 1


runner = CliRunner()


def test_cli_jsonl_to_stdout_summary_to_stderr_exit_2_on_bad_plans(fleet_dir):
    folder, made = fleet_dir
    res = runner.invoke(app, ["review", str(folder)])
    assert res.exit_code == 2
    rows = [json.loads(t) for t in res.stdout.splitlines() if t.startswith("{")]
    assert len(rows) == len(made["good"]) + len(made["bad"])
    assert "Fleet review:" in res.stderr and "GUIDANCE ONLY" in res.stderr
    good = runner.invoke(app, ["review", *map(str, made["good"][:2])])
    assert good.exit_code == 0, good.stderr


def test_cli_csv_output_file_and_summary_json(fleet_dir, tmp_path):
    folder, made = fleet_dir
    out, summ = tmp_path / "r.csv", tmp_path / "s.json"
    res = runner.invoke(app, ["review", str(folder / "piston-*.yaml"), "--format", "csv", "-o", str(out),
                              "--summary-json", str(summ)])
    assert res.exit_code == 0, res.stderr
    rows = list(csv.DictReader(io.StringIO(out.read_text())))
    assert [Path(r["source"]).name for r in rows] == ["piston-0.yaml", "piston-1.yaml", "piston-2.yaml"]
    assert "us-14cfr-91/" in rows[2]["rules_broken_ids"]
    assert json.loads(summ.read_text())["reviewed"] == 3
    assert "Fleet review: 3 of 3" in res.stdout
    again = runner.invoke(app, ["review", str(folder / "piston-0.yaml"), "-o", str(out)])
    assert again.exit_code == 2 and "already exists" in again.stderr
    inside = runner.invoke(app, ["review", str(folder), "-o", str(folder / "r.jsonl")])
    assert inside.exit_code == 2 and "inside the input folder" in inside.stderr
    assert not (folder / "r.jsonl").exists()


@pytest.mark.parametrize("args, word", [(["--format", "xml"], "--format"), (["--engine", "spark"], "--engine"),
                                        (["--batch", "0"], "--batch"), (["--workers", "2"], "--engine dask")])
def test_cli_bad_options_one_message(args, word):
    res = runner.invoke(app, ["review", str(DEMOS / "jet-highcruise.yaml"), *args])
    assert res.exit_code == 2 and word in res.stderr and "Internal" not in res.stderr


def test_cli_stdin_stream():
    import yaml

    plan = yaml.safe_load((DEMOS / "jet-highcruise.yaml").read_text())
    res = runner.invoke(app, ["review", "-"], input=json.dumps(plan) + "\n")
    assert res.exit_code == 0, res.stderr
    row = json.loads(res.stdout.splitlines()[0])
    assert row["source"] == "<stdin>:1" and row["status"] == "ok"
