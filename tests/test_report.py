"""The HTML report (altox.present.report): its content, safe writing, and how it looks in a real browser.

The browser tests open each demo plan's report in headless Chromium (Debian's ``chromium``,
installed by ``.ci/run`` because ``.ci/needs-chromium`` exists) as a person would:

* a screenshot of the first screen (1280 x 900) must not be blank, and must show the caution
  block's own colours, i.e. the caution is painted on the first screen;
* a probe copy of the report (the only difference: its Content-Security-Policy line removed
  and a script appended that measures the page) is opened 680 px wide, about the printable
  width of A4 and US Letter; from its DOM we read that the caution is shown, above the fold,
  readable, with the whole text; that the chart is there with a real size; and that nothing
  is wider than the page;
* no request leaves the page: Chromium writes its network log (``--log-net-log``) for both
  runs and every URL request made on behalf of the page (the ``file://`` document) is a
  failure; ``--host-resolver-rules`` maps every host to "not found" so that nothing could
  leave the machine anyway.  Chromium's own background requests (update checks and the like)
  are not made on behalf of the page and are told apart by their network isolation key.  A
  control page with an external image and a CSS ``url()`` proves that the detector sees
  requests.  A static check of the HTML (no ``src``/``href``/``url()`` pointing anywhere but
  inside the document, no scripts, links, images or frames) backs this up.

Under CI (``CI=true``) a missing browser fails these tests; elsewhere they are skipped with
the reason shown.
"""

import html
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import pytest
from clirun import run_cli as _run_in_process

from altox.evaluation.evaluate import evaluate_plan
from altox.plan.profile import load_plan, load_plan_text
from altox.present.render import CAUTION
from altox.present.report import CSP, build_report, check_output, write_atomic

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "profiles").glob("*.yaml"))
ENV = {**os.environ, "COLUMNS": "80", "NO_COLOR": "1"}
PRINT_WIDTH_PX = 680          # A4 (210 mm) less 2 x 12 mm margins is 703 CSS px; Letter is wider
FIRST_SCREEN = (1280, 900)
CAUTION_BG = (0xFF, 0xF6, 0xE5)   # .caution background in altox/present/report.py
CAUTION_EDGE = (0x7A, 0x4A, 0x00)


def run_cli(*args, cwd=None):
    return _run_in_process(*args, env={"COLUMNS": "80"}, cwd=cwd or ROOT)


# -- static checks -------------------------------------------------------------------------------
class _Scan(HTMLParser):
    """Collects tags, attribute values, CSS text and visible text of an HTML document."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.attrs, self.css, self.text = [], [], [], []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            self.attrs.append((tag, name, value or ""))
            if name == "style":
                self.css.append(value or "")
        self._in_style = tag == "style"

    def handle_endtag(self, tag):
        self._in_style = False

    def handle_data(self, data):
        (self.css if self._in_style else self.text).append(data)


# media elements fetch through src/poster/srcset, which URL_ATTRS below refuses wherever they appear
FETCHING_TAGS = {"script", "link", "img", "iframe", "frame", "object", "embed", "source",
                 "track", "base", "form", "input", "image", "feimage", "use_external"}
URL_ATTRS = {"src", "href", "xlink:href", "action", "formaction", "poster", "data", "srcset", "background",
             "manifest", "ping", "cite", "longdesc"}


def external_references(text: str) -> list[str]:
    """Everything in an HTML document that could make the browser fetch something."""
    scan = _Scan()
    scan.feed(text)
    bad = [f"<{t}>" for t in scan.tags if t in FETCHING_TAGS]
    for tag, name, value in scan.attrs:
        if name.startswith("xmlns"):
            continue                                   # namespace names, never fetched
        if name.lower() in URL_ATTRS and not value.strip().startswith("#"):
            bad.append(f"{tag} {name}={value!r}")
        elif "://" in value and not (tag == "meta" and name == "content"):
            bad.append(f"{tag} {name}={value!r}")
        elif name.lower().startswith("on"):
            bad.append(f"{tag} {name} (event handler)")
    css = "\n".join(scan.css)
    bad += [m.group(0) for m in re.finditer(r"url\(\s*['\"]?\s*(?!#)[^)]*\)", css)]
    bad += [m.group(0) for m in re.finditer(r"@import|@font-face|image-set\(|src\s*:", css)]
    return bad


@pytest.fixture(scope="module")
def reports(demo_outputs):
    # each demo as `altox plan --report` writes it (tests/conftest.py builds them once per run)
    return {stem: (out["result"], out["html"]) for stem, out in demo_outputs.items()}


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_report_content_and_order(reports, demo):
    result, text = reports[demo]
    caution = html.escape(CAUTION, quote=True)
    assert text.count(caution) == 2                                 # first screen and the very end
    first = text.index(caution)
    for later in ('id="summary"', "<svg", "<table", 'id="legs"', 'id="guidance"'):
        assert first < text.index(later), later
    header = text[text.index("<body>"):first]                      # only the plan's name and file
    assert "<table" not in header and "SaO2" not in header and "%" not in header
    assert text.rstrip().endswith("</html>") and text.rindex(caution) > text.index('id="assumptions"')
    for section in ("summary", "chart", "people", "legs", "guidance", "assumptions"):
        assert f'id="{section}"' in text
    # the oxygen and decompression sections where the plan has them (altox.evaluation.oxygen_plan)
    from altox.evaluation.oxygen_plan import decompression_review, oxygen_review

    plan = load_plan(ROOT / "profiles" / f"{demo}.yaml")
    ox, dec = oxygen_review(plan, result), decompression_review(plan, result)
    has_oxygen = bool(ox["planned"] or ox["would_need"] or any(leg["oxygen_planned"] for leg in result.legs))
    assert ('id="oxygen"' in text) == has_oxygen
    assert ("Packing list" in text) == (ox["cylinders"] is not None)
    if ox["cylinders"] is not None:
        assert html.escape(ox["cylinders"]["label"], quote=True) in text
    assert ('id="decompression"' in text) == (dec["applicable"] or demo == "jet-highcruise")
    assert ("After a rapid decompression" in text) == dec["applicable"]
    assert ("Failure limits in the rule sets applied" in text) == (demo == "jet-highcruise")   # us-14cfr-25
    assert "docs/methods.md" in text
    for note in result.notes:
        assert html.escape(note, quote=True) in text
    for rid in result.rule_sets:
        assert f'id="rules-{rid}"' in text
    for k, f in enumerate(result.findings):
        assert html.escape(f.citation.rstrip("."), quote=True) in text
        assert f">{'met' if f.status == 'required-planned' else 'breaks'} {k + 1}</span>" in text
    for m in result.members:
        assert html.escape(m["name"], quote=True) in text
    assert "@page" in text and "@media print" in text


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_report_is_self_contained(reports, demo):
    _, text = reports[demo]
    assert external_references(text) == []
    assert f'<meta http-equiv="Content-Security-Policy" content="{CSP}">' in text
    assert "default-src 'none'" in CSP and "script-src" not in CSP
    assert text.count("<svg") == 1


def test_static_check_catches_references():
    page = ('<html><head><style>div{background:url(https://x.invalid/a.png)}</style></head><body>'
            '<img src="http://x.invalid/i.png"><a href="https://x.invalid/">x</a>'
            '<svg xmlns="http://www.w3.org/2000/svg"><use xlink:href="#ok"/></svg></body></html>')
    found = external_references(page)
    assert len(found) == 4 and not any("#ok" in f or "xmlns" in f for f in found)


def test_report_escapes_the_plan(tmp_path):
    text = ("kind: expedition\nname: 'Camp <script>alert(1)</script> & \"co\" $5'\nstart_altitude: 800 m\n"
            "days:\n  - {day: 1, sleep: 2000 m}\n")
    result = evaluate_plan(load_plan_text(text))
    page = build_report(result)
    assert "<script" not in page and "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert external_references(page) == []
    assert "lists no people" in page
    assert "they are not in this report" in page                  # no plan at hand: no oxygen review


def test_readme_chart_and_report_commands(tmp_path):
    """The README's example commands make a chart and a report of the demo trek and the jet."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    commands = re.findall(r"`altox (plan profiles/\S+\.yaml --chart \S+ --report \S+)`", readme)
    assert {c.split()[1] for c in commands} >= {"profiles/trek-teskavor.yaml", "profiles/jet-highcruise.yaml"}
    for command in commands:
        args = command.split()
        args[1] = str(ROOT / args[1])
        proc = run_cli(*args, cwd=tmp_path)
        assert proc.returncode == 0, proc.stderr
        chart, report = tmp_path / args[3], tmp_path / args[5]
        assert chart.stat().st_size > 10_000 and b"<svg" in report.read_bytes()


def test_cli_report_follows_the_rules_option(tmp_path):
    out = tmp_path / "r.html"
    proc = run_cli("plan", str(ROOT / "profiles" / "piston-ridge-crossing.yaml"), "--rules", "eu-nco",
                   "--report", str(out))
    assert proc.returncode == 0, proc.stderr
    page = out.read_text(encoding="utf-8")
    assert 'id="rules-eu-nco"' in page and 'id="rules-us-14cfr-91"' not in page


# -- writing -------------------------------------------------------------------------------------
def test_write_atomic_keeps_the_old_file_on_failure(tmp_path, monkeypatch):
    out = tmp_path / "r.html"
    out.write_text("old")

    def boom(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError):
        write_atomic(out, b"new")
    assert out.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]
    monkeypatch.undo()
    write_atomic(out, b"new")
    assert out.read_bytes() == b"new" and [p.name for p in tmp_path.iterdir()] == ["r.html"]
    umask = os.umask(0)
    os.umask(umask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~umask


def test_check_output_refusals(tmp_path):
    from altox.errors import AltoxError

    plan = tmp_path / "plan.yaml"
    plan.write_text("x")
    link = tmp_path / "out.html"
    link.symlink_to(plan)
    with pytest.raises(AltoxError, match="input plan"):
        check_output(link, option="--report", suffixes=(".html",), force=True, inputs=[plan])
    with pytest.raises(AltoxError, match="must end in"):
        check_output(tmp_path / "r.txt", option="--report", suffixes=(".html",))
    with pytest.raises(AltoxError, match="does not exist"):
        check_output(tmp_path / "no" / "r.html", option="--report", suffixes=(".html",))
    (tmp_path / "r.html").write_text("x")
    with pytest.raises(AltoxError, match="already exists; use --force"):
        check_output(tmp_path / "r.html", option="--report", suffixes=(".html",))
    assert check_output(tmp_path / "r.html", option="--report", suffixes=(".html",), force=True)


def test_cli_report_force_and_the_plan_untouched(tmp_path):
    plan = tmp_path / "trek.yaml"
    shutil.copyfile(ROOT / "profiles" / "trek-teskavor.yaml", plan)
    before = (plan.read_bytes(), plan.stat().st_mtime_ns)
    out = tmp_path / "trek.html"

    proc = run_cli("plan", str(plan), "--report", str(out), "--chart", str(tmp_path / "trek.svg"), cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "GUIDANCE ONLY" in proc.stdout                          # the tables still print
    first = out.read_bytes()
    assert first.startswith(b"<!DOCTYPE html>") and b"<svg" in first
    assert sorted(p.name for p in tmp_path.iterdir()) == ["trek.html", "trek.svg", "trek.yaml"]

    out.write_text("mine")
    again = run_cli("plan", str(plan), "--report", str(out), cwd=tmp_path)
    assert again.returncode == 2
    assert again.stderr.count("\n") == 1 and "trek.html" in again.stderr and "--force" in again.stderr
    assert out.read_text() == "mine"

    forced = run_cli("plan", str(plan), "--report", str(out), "--force", cwd=tmp_path)
    assert forced.returncode == 0, forced.stderr
    assert out.read_bytes() == first                              # same plan, same report
    assert (plan.read_bytes(), plan.stat().st_mtime_ns) == before


def test_cli_refuses_to_write_over_the_plan(tmp_path):
    plan = tmp_path / "plan.html"
    shutil.copyfile(ROOT / "profiles" / "piston-ridge-crossing.yaml", plan)
    before = plan.read_bytes()
    proc = run_cli("plan", str(plan), "--report", str(plan), "--force")
    assert proc.returncode == 2 and "input plan" in proc.stderr and len(proc.stderr.splitlines()) == 1
    link = tmp_path / "link.html"
    link.symlink_to(plan)
    proc = run_cli("plan", str(plan), "--report", str(link), "--force")
    assert proc.returncode == 2 and "input plan" in proc.stderr
    assert plan.read_bytes() == before and link.is_symlink()


@pytest.mark.parametrize("args, needle", [
    (["--report", "{tmp}/r.txt"], "must end in .html"),
    (["--report", "{tmp}/missing/r.html"], "does not exist"),
    (["--chart", "{tmp}/c.gif"], "must end in .png"),
])
def test_cli_bad_outputs(tmp_path, args, needle):
    proc = run_cli("plan", str(DEMOS[0]), *[a.format(tmp=tmp_path) for a in args])
    assert proc.returncode == 2 and needle in proc.stderr and len(proc.stderr.splitlines()) == 1
    assert list(tmp_path.iterdir()) == []


def test_cli_one_plan_per_report(tmp_path):
    proc = run_cli("plan", str(DEMOS[0]), str(DEMOS[1]), "--report", str(tmp_path / "r.html"))
    assert proc.returncode == 2 and "one plan" in proc.stderr and not (tmp_path / "r.html").exists()


# -- in a real browser ---------------------------------------------------------------------------
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-dev-shm-usage",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--hide-scrollbars", "--host-resolver-rules=MAP * ~NOTFOUND"]
PROBE = """<script>
(function () {
  var c = document.getElementById('caution-top'), r = c.getBoundingClientRect(), st = getComputedStyle(c);
  var p = c.querySelector('p'), svg = document.querySelector('#chart svg');
  var s = svg ? svg.getBoundingClientRect() : null;
  var out = {viewport: [innerWidth, innerHeight], rect: [r.left, r.top, r.right, r.bottom],
             display: st.display, visibility: st.visibility, opacity: st.opacity,
             font_px: parseFloat(getComputedStyle(p).fontSize), text: c.innerText,
             svg: s ? [s.width, s.height] : null,
             scroll_width: document.documentElement.scrollWidth,
             widest: Math.max.apply(null, Array.prototype.map.call(document.querySelectorAll('body *'),
                                    function (e) { return e.getBoundingClientRect().right; }))};
  var pre = document.createElement('pre');
  pre.id = 'altox-probe';
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
})();
</script>"""


@pytest.fixture(scope="module")
def chromium():
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe:
        return exe
    if os.environ.get("CI", "").lower() == "true":
        pytest.fail("chromium is not installed: under CI the report must be checked in a browser "
                    "(.ci/run installs Debian's chromium when .ci/needs-chromium exists)")
    pytest.skip("chromium is not installed (apt-get install chromium); under CI=true this test fails instead")


def browse(exe, page: Path, tmp: Path, *extra) -> tuple[subprocess.CompletedProcess, list[str]]:
    """Open ``page`` in headless Chromium; return the run and the URLs requested on its behalf."""
    netlog = tmp / f"{page.stem}-{len(list(tmp.iterdir()))}.netlog.json"
    with tempfile.TemporaryDirectory(dir=tmp) as profile:
        proc = subprocess.run([exe, *CHROMIUM_FLAGS, f"--user-data-dir={profile}", f"--log-net-log={netlog}",
                               "--net-log-capture-mode=Default", *extra, page.resolve().as_uri()],
                              capture_output=True, text=True, timeout=90)
    assert proc.returncode == 0, proc.stderr[-2000:]
    return proc, page_requests(netlog)


def page_requests(netlog: Path) -> list[str]:
    """URLs of the requests Chromium's network log shows being made for a file:// page."""
    raw = netlog.read_text(encoding="utf-8", errors="replace").rstrip()
    try:
        log = json.loads(raw)
    except json.JSONDecodeError:                   # a log cut short is still readable up to the cut
        log = json.loads(raw.rstrip(",") + ("]}" if not raw.endswith("]}") else ""))
    names = {v: k for k, v in log["constants"]["logEventTypes"].items()}
    assert "URL_REQUEST_START_JOB" in names.values()
    urls = []
    for event in log["events"]:
        params = event.get("params") or {}
        if names.get(event["type"]) != "URL_REQUEST_START_JOB" or "url" not in params:
            continue
        scheme = params["url"].split(":", 1)[0].lower()
        if scheme in ("file", "data", "about", "blob", "chrome"):
            continue
        for_page = "file://" in params.get("network_isolation_key", "") + params.get("site_for_cookies", "") \
            or params.get("initiator") in ("null",) or params.get("initiator", "").startswith("file:")
        if for_page:
            urls.append(params["url"])
    return urls


def image_pixels(png: Path):
    from matplotlib.image import imread

    img = imread(png)                                   # floats 0-1, RGB or RGBA
    return (img[..., :3] * 255.0).round().astype(int)


def test_request_detector_sees_requests(chromium, tmp_path):
    page = tmp_path / "control.html"
    page.write_text('<!doctype html><body><img src="http://example.invalid/x.png">'
                    '<div style="background:url(https://example.invalid/b.png)">x</div></body>')
    _, urls = browse(chromium, page, tmp_path, "--window-size=400,300", f"--screenshot={tmp_path / 'c.png'}")
    assert sorted(urls) == ["http://example.invalid/x.png", "https://example.invalid/b.png"]


@pytest.mark.parametrize("demo", [d.stem for d in DEMOS])
def test_report_in_chromium(chromium, reports, tmp_path, demo):
    import numpy as np

    result, text = reports[demo]
    page = tmp_path / f"{demo}.html"
    page.write_text(text, encoding="utf-8")

    # 1. the report as shipped: first screen, screenshot, no request
    shot = tmp_path / f"{demo}.png"
    _, urls = browse(chromium, page, tmp_path, f"--window-size={FIRST_SCREEN[0]},{FIRST_SCREEN[1]}",
                     f"--screenshot={shot}")
    assert urls == [], urls
    px = image_pixels(shot)
    assert px.shape[:2] == (FIRST_SCREEN[1], FIRST_SCREEN[0])
    ink = np.any(px < 235, axis=-1)
    assert ink.mean() > 0.03, "the first screen is (nearly) blank"
    assert len(np.unique(px.reshape(-1, 3)[::7], axis=0)) > 20
    for colour, least in ((CAUTION_BG, 20000), (CAUTION_EDGE, 2000)):
        near = np.all(np.abs(px - np.array(colour)) <= 3, axis=-1)
        assert near.sum() > least, f"the caution block's colour {colour} is not on the first screen"

    # 2. a probe copy, print width: measure the caution, the chart and the page width
    probe = tmp_path / f"{demo}-probe.html"
    probe.write_text(re.sub(r'<meta http-equiv="Content-Security-Policy"[^>]*>', "", text)
                     .replace("</body>", PROBE + "\n</body>"), encoding="utf-8")
    proc, urls = browse(chromium, probe, tmp_path, f"--window-size={PRINT_WIDTH_PX},{FIRST_SCREEN[1]}",
                        "--dump-dom")
    assert urls == [], urls                            # the markup itself asks for nothing, even without CSP
    dom = proc.stdout
    m = re.search(r'<pre id="altox-probe">(.*?)</pre>', dom, re.S)
    assert m, "the probe did not run"
    got = json.loads(html.unescape(m.group(1)))
    width, height = got["viewport"]
    assert width == PRINT_WIDTH_PX
    left, top, right, bottom = got["rect"]
    assert got["display"] != "none" and got["visibility"] == "visible" and float(got["opacity"]) == 1.0
    assert 0 <= top and bottom <= height, f"caution not within the first screen: {got['rect']}"
    assert right - left > 0.8 * width and got["font_px"] >= 12
    assert " ".join(got["text"].split()).endswith(CAUTION)
    assert CAUTION in " ".join(html.unescape(re.sub(r"<[^>]+>", " ", dom)).split())
    assert got["svg"] and got["svg"][0] > 0.8 * width - 40 and got["svg"][1] > 200, got["svg"]
    assert got["scroll_width"] <= width and got["widest"] <= width + 0.5, "the page is wider than print width"
    assert result.name in html.unescape(dom)
