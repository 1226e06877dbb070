"""One leg numbering (1-based) in every output of a plan: sentence, table, JSON, CSV, report."""

import csv
import io
import json
import re
from pathlib import Path

from typer.testing import CliRunner

from altox.cli.main import app

ROOT = Path(__file__).resolve().parents[1]
PISTON = str(ROOT / "profiles" / "piston-ridge-crossing.yaml")


def _flat_html(text):
    return " ".join(text.replace("&#x27;", "'").replace("&quot;", '"').split())


def _invoke(*args):
    res = CliRunner().invoke(app, list(args), env={"COLUMNS": "80", "NO_COLOR": "1"})
    assert res.exit_code == 0, res.output
    return res.output


def test_piston_demo_names_the_same_legs_everywhere(tmp_path):
    data = json.loads(_invoke("plan", PISTON, "--json", "--members", "0"))
    broken = [f for f in data["findings"] if f["status"] == "required-not-planned"]
    assert broken
    for k, f in enumerate(data["findings"]):
        sentence_legs = re.search(r"on legs? ([\d, andto]+)\.$", f["message"]).group(1)
        named = sorted({n for a, b in re.findall(r"(\d+)(?: to (\d+))?", sentence_legs)
                        for n in range(int(a), int(b or a) + 1)})
        assert named == f["legs"], (f["message"], f["legs"])
        flagged = sorted(leg["leg"] for leg in data["legs"] if any(fl.endswith(str(k + 1)) for fl in leg["flags"]))
        assert flagged == f["legs"]
        # every number is a leg that exists, with the table's 1-based numbering
        assert set(f["legs"]) <= {leg["leg"] for leg in data["legs"]}
    rows = list(csv.DictReader(io.StringIO(_invoke("plan", PISTON, "--csv", "--members", "0"))))
    csv_flagged = sorted(int(r["leg"]) for r in rows if "breaks 1" in r["flags"])
    assert csv_flagged == broken[0]["legs"]
    # the terminal table flags the same legs as the sentence below it
    out = _invoke("plan", PISTON, "--members", "0")
    table_legs = sorted(int(m.group(1)) for m in re.finditer(r"^\S\s+(\d+) .*breaks 1\b", out, re.M))
    assert table_legs == broken[0]["legs"]
    report = tmp_path / "r.html"
    _invoke("plan", PISTON, "--members", "0", "--report", str(report))
    html = report.read_text()
    assert _flat_html(broken[0]["message"]) in _flat_html(html)
