"""What every demo shows its user, in every format: terminal at 80 columns, JSON, CSV, HTML.

Each demo is evaluated once (the same library calls ``altox plan`` makes) and rendered to
each format.  The checks are about the text a medic or a flight physiologist is handed:

* no maintainer notes: "from memory", "was not read", "(read)", where a text was read,
  altox's own data file names, internal setting names;
* web addresses only of publishers and regulators;
* the answer first: the verdict, the worst moment per person and the findings in the first
  25 lines at 80 columns; nothing cut short with an ellipsis at 80 columns.
"""

from __future__ import annotations

import io
import json
import re
from importlib import resources
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))

#: maintainer phrases that must never reach a user
FORBIDDEN = [r"from memory", r"was not read", r"\(read\)", r"\bbasis:", r"not verified", r"\bread at\b",
             r"\bread in\b"]
#: altox's own data files (rule-set ids such as us-14cfr-91 are fine; their file names are not)
DATA_FILES = sorted(p.name for p in resources.files("altox").joinpath("data").iterdir() if p.name.endswith(".yaml"))
#: settings of altox's data files that are names for maintainers, not words for users
SETTINGS = ["plan_defaults", "review_targets", "descent_oxygen", "by_cabin_altitude", "reaction_min",
            "patient_flow", "safety_margin_fraction", "default_oxygen_free_ft", "rapid_decompression"]
#: web addresses allowed in user output: publishers and regulators
ALLOWED_HOSTS = ("ecfr.gov", "faa.gov", "easa.europa.eu", "icao.int", "legislation.gov.uk", "doi.org",
                 "wemjournal.org", "liebertpub.com", "sciencedirect.com", "thorax.bmj.com", "brit-thoracic.org.uk")
_URL = re.compile(r"(?:https?://|www\.)[^\s\"'<>)]+|\b[a-z0-9-]+\.(?:com|net|org|ir|be|fyi|io|info)\b", re.I)


def _json_strings(obj):
    """Every string value of a JSON document (keys are field names, not text for people)."""
    if isinstance(obj, dict):
        for v in obj.values():
            yield from _json_strings(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from _json_strings(v)
    elif isinstance(obj, str):
        yield obj


def _user_text(fmt: str, text: str) -> str:
    if fmt == "json":
        return "\n".join(_json_strings(json.loads(text)))
    if fmt == "html":
        return re.sub(r'\sxmlns(:\w+)?="[^"]*"', "", text)   # XML namespaces are names, not addresses
    return text


@pytest.mark.parametrize("fmt", ["terminal", "json", "csv", "html"])
@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_no_maintainer_notes_in_user_output(demo_outputs, demo, fmt):
    text = _user_text(fmt, demo_outputs[demo][fmt])
    for pattern in FORBIDDEN:
        hit = re.search(f".{{0,50}}{pattern}.{{0,50}}", text, re.I)
        assert hit is None, f"{demo} {fmt}: maintainer note {pattern!r} in {hit.group(0)!r}"
    for name in DATA_FILES:
        assert name not in text, f"{demo} {fmt}: names altox's data file {name}"
    for name in SETTINGS:
        hit = re.search(rf".{{0,40}}\b{name}\b.{{0,40}}", text)
        assert hit is None, f"{demo} {fmt}: internal setting {name!r} in {hit.group(0)!r}"
    for url in _URL.findall(text):
        host = re.sub(r"^(https?://)?(www\.)?", "", url.lower()).split("/")[0]
        assert host.endswith(ALLOWED_HOSTS), f"{demo} {fmt}: web address {url!r} is not a publisher's or regulator's"


def test_the_check_sees_a_maintainer_note():
    """The scan above is not vacuous: a planted note, file name and blog address are caught."""
    text = "dose (basis: from memory; read at learntoflyblog.com) in oxygen_devices.yaml"
    assert any(re.search(p, text, re.I) for p in FORBIDDEN)
    assert any(n in text for n in DATA_FILES)
    assert _URL.findall(text) == ["learntoflyblog.com"]


def _flat(text: str) -> str:
    return " ".join(text.split())


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_the_answer_comes_first(demo_outputs, demo):
    """At 80 columns the first 25 lines hold the verdict, the worst moment per person and every
    finding with what to do; the rest follows in the order of a decision."""
    out = demo_outputs[demo]
    result, text = out["result"], out["terminal"]
    lines = text.splitlines()
    head = _flat("\n".join(lines[:25]))
    assert "Guidance only" in _flat("\n".join(lines[:4]))            # the short caution, before any number
    assert "Verdict" in head and "Worst moment:" in head
    assert f"{result.summary['worst_sao2_pct']:.0f} %" in head
    for m in result.members:
        assert m["name"] in head, m["name"]
    for k, f in enumerate(result.findings):
        assert f"{k + 1}. " in head
        assert _flat(f.message) in head, f.message
    verdict = json.loads(out["json"])["verdict"]
    for f in verdict["findings"]:                       # what to do, whole, within the 25 lines
        assert _flat(f["what_to_do"]) in head, f["what_to_do"]
    for r in result.extras.get("readings") or []:       # readings that call for action come first too
        for a in r.get("actions", []):
            assert f"ACTION (readings) day {r['day']}, {r['member']}" in head
    order = ["Verdict", "Exposure", "Where and when", "Expected physiology", "Assumptions", "Sources",
             "GUIDANCE ONLY"]
    found = [text.index(word) for word in order]
    assert found == sorted(found), list(zip(order, found))
    if result.members:
        assert text.index("Verdict") < text.index("People") < text.index("Where and when")


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_json_sections_follow_the_terminal_order(demo_outputs, demo):
    from altox.present.render import JSON_SECTIONS

    data = json.loads(demo_outputs[demo]["json"])
    keys = [k for k in data if k in JSON_SECTIONS]
    assert keys == [k for k in JSON_SECTIONS if k in data]
    assert keys[:6] == ["plan", "kind", "source", "caution_short", "rule_sets", "verdict"]
    v = data["verdict"]
    patients = [m["name"] for m in data["members"] if m["role"] == "patient"][:1]
    first = patients or ["reference adult"]      # a plan with a patient describes the patient first
    assert [p["name"] for p in v["people"]] == first + [m["name"] for m in data["members"]
                                                        if m["name"] not in patients]
    assert [f["number"] for f in v["findings"]] == list(range(1, len(data["findings"]) + 1))
    assert all(f["what_to_do"] for f in v["findings"])


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_report_opens_with_the_verdict(demo_outputs, demo):
    text = demo_outputs[demo]["html"]
    at = [text.index(x) for x in ('id="caution-top"', "<h2>Verdict</h2>", 'id="chart"', 'id="people"',
                                   'id="legs"', 'id="guidance"', 'id="assumptions"', 'id="caution-end"')]
    assert at == sorted(at)
    verdict = text[at[1]:at[2]]
    for m in demo_outputs[demo]["result"].members:
        assert m["name"] in verdict
    for k, f in enumerate(demo_outputs[demo]["result"].findings):
        assert f"{'met' if f.status == 'required-planned' else 'breaks'} {k + 1}</span>" in verdict


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_nothing_is_cut_short_at_80_columns(demo_outputs, demo):
    text = demo_outputs[demo]["terminal"]
    assert "…" not in text and "..." not in text
    assert max(len(line) for line in text.splitlines()) <= 80
    for m in demo_outputs[demo]["result"].members:       # every name whole somewhere (tables fold, never cut)
        assert m["name"] in _flat(text)


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_one_legend_in_terminal_report_and_docs(demo_outputs, demo):
    import html

    from altox.present.legend import glossary_markdown, terms_for

    out = demo_outputs[demo]
    kind = out["result"].kind
    terminal, report = _flat(out["terminal"]), out["html"]
    for term, definition in terms_for(kind):
        assert _flat(f"{term}: {definition}") in terminal
        assert f"<dt>{html.escape(term)}</dt><dd>{html.escape(definition)}</dd>" in report
    assert (ROOT / "docs" / "glossary.md").read_text() == glossary_markdown(), \
        "docs/glossary.md is stale: python -m altox.present.legend > docs/glossary.md"
    # no code or slug as a flag: the flags are the legend's words
    for leg in json.loads(out["json"])["legs"]:
        for flag in leg["flags"]:
            assert re.fullmatch(r"(breaks|met) \d+", flag), flag
    assert "Night SaO2" not in out["terminal"] or "previous, higher night" in terminal


def test_feet_converts_the_altitudes_and_flights_never_show_negative_altitudes(demo_outputs):
    from rich.console import Console

    from altox.present import render
    from altox.units import label_in_unit, shown_equivalent_altitude

    assert shown_equivalent_altitude(-1447.5, feet=True) == "hyperoxic"
    assert shown_equivalent_altitude(3048.0, feet=True) == "10,000"
    assert label_in_unit("Day 11 climb to 5,720 m", True) == "Day 11 climb to 18,766 ft"
    result = demo_outputs["trek-teskavor"]["result"]
    console = Console(width=80, file=io.StringIO(), record=True, color_system=None)
    for part in render.plan_renderables(result, feet=True):
        console.print(part)
    text = console.export_text()
    assert "Sleep ft" in text and "At ft" in text and "Eq. ft" in text and "18,766 ft" in text
    assert "Sleep m" not in text and "At m " not in text and "Eq. m" not in text
    for demo in ("medevac-transfer", "jet-highcruise", "piston-ridge-crossing"):
        flight = demo_outputs[demo]["terminal"]
        assert "Eq. m" not in flight and not re.search(r"-\d[\d,]* (m|ft)\b", flight)


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_oxygen_on_and_off_is_shown_where_planned(demo_outputs, demo):
    out = demo_outputs[demo]
    planned = (out["result"].extras.get("oxygen") or {}).get("planned")
    head = _flat("\n".join(out["terminal"].splitlines()[:30]))
    if planned:
        assert "Oxygen planned on leg" in head and "if it fails, on air" in head
        assert "O2 %" in out["terminal"] and "Air %" in out["terminal"]
        assert "if it fails, on air" in out["html"]
    else:
        assert "Oxygen planned on leg" not in head


@pytest.mark.parametrize("demo", [p.stem for p in DEMOS])
def test_chart_labels_do_not_overlap(demo_outputs, demo):
    """Every text of the chart (titles, threshold labels, flags, level marks, the peak, axis
    labels, the legend's entries) has its own place: no two bounding boxes overlap."""
    from altox.present.charts import plan_figure

    fig = plan_figure(demo_outputs[demo]["result"])
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    ticks, drawn = set(), set()      # tick labels outside the view limits exist but are not drawn
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                ticks |= {id(tick.label1), id(tick.label2)}
            for tick in axis._update_ticks():
                drawn |= {id(tick.label1), id(tick.label2)}
    texts = [t for t in fig.findobj(lambda a: type(a).__name__ in ("Text", "Annotation"))
             if t.get_visible() and t.get_text().strip() and (id(t) not in ticks or id(t) in drawn)]
    boxes = [(t.get_text(), t.get_window_extent(renderer)) for t in texts]
    assert len(boxes) > 5
    overlaps = []
    for i, (ta, a) in enumerate(boxes):
        for tb, b in boxes[i + 1:]:
            w = min(a.x1, b.x1) - max(a.x0, b.x0)
            h = min(a.y1, b.y1) - max(a.y0, b.y0)
            if w > 0.5 and h > 0.5:        # more than half a pixel each way
                overlaps.append((ta, tb))
    assert not overlaps, overlaps


def test_flight_chart_time_is_hours_and_minutes(demo_outputs):
    from altox.present.charts import _h_min, plan_figure

    assert _h_min(1.5) == "1:30" and _h_min(0.25) == "0:15" and _h_min(3.999) == "4:00"
    fig = plan_figure(demo_outputs["piston-ridge-crossing"]["result"])
    assert "h:min" in fig.axes[1].get_xlabel()
