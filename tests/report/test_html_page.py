"""The HTML report (report.html_page): one self-contained page whose numbers are the JSON's.

The page is parsed with the standard library's HTML parser: every section and figure is there,
every figure is inline SVG, nothing is fetched from anywhere (no script, no link, no image or font
by URL), and the figures shown in the checks table equal those of the JSON of the same run. A
browser test renders the demo's page with headless Chromium to PNG and PDF.
"""

from __future__ import annotations

import datetime
import json
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest

from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.report.export import result_to_dict
from stringcheck.studies.check import run_check

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "stringcheck" / "data" / "demo.toml"
FURNACE = ROOT / "examples" / "furnace-rectifier-3x2-parallel.toml"
CREATED = datetime.datetime(2026, 1, 2, 3, 4, tzinfo=datetime.timezone.utc)


class _Page(HTMLParser):
    """The parts of a page the tests look at."""

    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.ids: set[str] = set()
        self.cells: dict[str, list[str]] = {}  # data-key -> texts, in order
        self._key = None
        self.svg_depth = 0
        self.svgs = 0
        self.figures = 0
        self.captions = 0

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        self.tags.append((tag, attributes))
        if "id" in attributes and not self.svg_depth:
            self.ids.add(attributes["id"])
        if tag == "svg":
            if not self.svg_depth:
                self.svgs += 1
            self.svg_depth += 1
        self.figures += tag == "figure"
        self.captions += tag == "figcaption"
        if "data-key" in attributes:
            self._key = attributes["data-key"]
            self.cells.setdefault(self._key, []).append("")

    def handle_endtag(self, tag):
        if tag == "svg":
            self.svg_depth -= 1
        if tag in ("td", "span"):
            self._key = None

    def handle_data(self, data):
        if self._key is not None:
            self.cells[self._key][-1] += data


def _page(result, **options) -> tuple[str, _Page]:
    from stringcheck.report.html_page import check_page

    text = check_page(result, command_line=["stringcheck", "check", "x.toml"], created=CREATED,
                      **options)
    parser = _Page()
    parser.feed(text)
    return text, parser


@pytest.fixture(scope="module")
def demo():
    design = load_design(DEMO)
    return run_check(design, trials=4000, seed=11)


@pytest.fixture(scope="module")
def furnace():
    return run_check(load_design(FURNACE), trials=4000, seed=11, drivers=True)


def test_every_section_and_figure_is_there(demo, furnace):
    for result, checks in ((demo, ("static", "dynamic")),
                           (furnace, ("static", "dynamic", "parallel", "thermal"))):
        _, page = _page(result)
        for section in ("verdict", "checks", "network", "inputs", "cautions", "signoff"):
            assert section in page.ids, section
        for name in checks:
            assert f"section-{name}" in page.ids and f"check-{name}" in page.ids
        # Each figure is inline SVG with a caption.
        assert page.figures == page.svgs == page.captions >= 2 * len(checks)


def test_nothing_is_fetched_from_anywhere(furnace):
    text, page = _page(furnace)
    _no_fetch(text, page)
    assert "@import" not in text
    # The only URLs in the page are XML namespace names, which no browser fetches.
    urls = set(re.findall(r"https?://[^\s\"'<>)]+", text))
    assert urls <= {"http://www.w3.org/2000/svg", "http://www.w3.org/1999/xlink"}, urls


def test_the_numbers_are_those_of_the_json(furnace):
    data = result_to_dict(furnace)
    _, page = _page(furnace)
    shown = [name for name in data["checks"]]
    assert [f"{data['checks'][n]['worst_ratio']:.3f}" for n in shown] == page.cells["worst_ratio"]
    assert [f"{data['checks'][n]['p99_ratio']:.3f}" for n in shown] == page.cells["p99_ratio"]
    uppers = [data["checks"][n]["p_fail_ci"][1] for n in shown]
    assert [f"{u:.3g}" if u else "0" for u in uppers] == page.cells["p_fail_upper"]
    text, _ = _page(furnace)
    assert data["design_sha256"] in text and data["tool_version"] in text
    assert f"{data['trials']:,}" in text
    for line in data["cautions"] + data["assumptions"]:
        assert _escaped(line) in text


def _escaped(line: str) -> str:
    return line.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;") \
        .replace('"', "&#34;").replace("'", "&#39;")


def test_text_from_the_design_file_is_escaped():
    design = load_design(DEMO)
    text = DEMO.read_text(encoding="utf-8").replace(
        f'title = "{design.title}"', 'title = "<script>alert(1)</script> & stack"')
    result = run_check(parse_design_text(text, source="demo.toml"), trials=200, seed=1)
    page, parsed = _page(result)
    assert "<script>" not in page and "&lt;script&gt;alert(1)&lt;/script&gt; &amp; stack" in page
    assert not any(tag == "script" for tag, _ in parsed.tags)


def test_one_result_gives_one_page(demo):
    # No timestamp but the one given, ids salted: the same result, the same bytes.
    assert _page(demo)[0] == _page(demo)[0]


def test_a_plain_check_imports_no_plotting_library():
    code = ("import sys, stringcheck.cli.app as a\n"
            "from stringcheck.studies.check import run_check\n"
            "from stringcheck.design.reading import load_design\n"
            f"run_check(load_design({str(DEMO)!r}), trials=100)\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('matplotlib', 'jinja2')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_the_report_option_writes_the_page(tmp_path):
    target = tmp_path / "review.html"
    run = subprocess.run([sys.executable, "-m", "stringcheck", "demo", "--trials", "300",
                          "--quiet", "--report", str(target), "--json", str(tmp_path / "r.json")],
                         capture_output=True, text=True)
    assert run.returncode in (0, 1), run.stderr
    page = target.read_text(encoding="utf-8")
    data = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))
    assert page.startswith("<!DOCTYPE html>") and data["design_sha256"] in page
    assert "stringcheck demo --trials 300 --quiet --report" in page
    assert not list(tmp_path.glob("*.tmp*"))


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.slow
@pytest.mark.skipif(CHROMIUM is None, reason="needs headless Chromium (Debian package chromium; "
                                             ".ci/run installs it)")
def test_the_demo_report_renders_in_a_real_browser(demo, tmp_path):
    import matplotlib.image

    text, page = _page(demo)
    html = tmp_path / "demo.html"
    html.write_text(text, encoding="utf-8")
    png, pdf = tmp_path / "demo.png", tmp_path / "demo.pdf"
    common = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars"]
    subprocess.run(common + [f"--screenshot={png}", "--window-size=900,3000", html.as_uri()],
                   capture_output=True, timeout=120, check=True)
    subprocess.run(common + ["--no-pdf-header-footer", f"--print-to-pdf={pdf}", html.as_uri()],
                   capture_output=True, timeout=120, check=True)
    pixels = matplotlib.image.imread(png)
    # Not blank: the page has ink, and rows of figures (many distinct grey levels) down its length.
    assert pixels.shape[0] >= 3000 and pixels.std() > 0.05
    dark_rows = (pixels[..., :3].mean(axis=2) < 0.5).any(axis=1)
    assert dark_rows[:1000].any() and dark_rows[1000:2000].any() and dark_rows[2000:].any()
    # The figures have size in print: an A4 page holds at most two of them, so the PDF has at
    # least a page per two figures and a page for the sign-off block.
    pages = len(re.findall(rb"/Type\s*/Page[^s]", pdf.read_bytes()))
    assert pages >= page.figures // 2 + 1, pages
    # A4: 210 mm x 297 mm = 595 x 842 points (1 pt = 1/72 in).
    boxes = re.findall(rb"/MediaBox\s*\[0 0 ([0-9.]+) ([0-9.]+)\]", pdf.read_bytes())
    assert boxes and all(abs(float(w) - 595.3) < 1 and abs(float(h) - 841.9) < 1
                         for w, h in boxes), boxes


def _run_cli(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "stringcheck", *args], capture_output=True,
                          text=True)


def _no_fetch(text: str, page: _Page) -> None:
    for tag, attributes in page.tags:
        assert tag not in ("script", "link", "img", "iframe", "object", "embed"), tag
        for name in ("src", "href", "xlink:href"):
            value = attributes.get(name)
            # In-page references (#id) only: never a file or a URL.
            assert value is None or value.startswith("#"), (tag, name, value)
    # url() only to an element of the page (the figures' clip paths: url(#id)).
    assert not re.search(r"url\((?!#)", text)


def _cli_page(tmp_path, *args) -> tuple[str, dict, _Page]:
    """Run the command line with ``--report`` and ``--json``; the page's text, the JSON, and the
    parsed page."""
    page_path, json_path = tmp_path / "page.html", tmp_path / "result.json"
    run = _run_cli(*args, "--quiet", "--report", str(page_path), "--json", str(json_path))
    assert run.returncode in (0, 1), run.stderr
    text = page_path.read_text(encoding="utf-8")
    page = _Page()
    page.feed(text)
    return text, json.loads(json_path.read_text(encoding="utf-8")), page


def test_the_size_report_shows_the_proposal_and_its_design_curves(tmp_path):
    from stringcheck.units import format_quantity

    example = str(ROOT / "examples" / "precipitator-30kv.toml")
    text, data, page = _cli_page(tmp_path, "size", example, "--trials", "4000", "--no-transient")
    _no_fetch(text, page)
    assert "proposal" in page.ids and "checks" in page.ids and "signoff" in page.ids
    grading = data["grading"]
    # The proposed values as the JSON has them, with the limit that bound each.
    assert format_quantity(grading["resistor"], "ohm") in text
    assert format_quantity(grading["capacitor"], "F") in text
    assert "limited by" in text
    # The design curves of R and C, plus the checks' figures of the sized design.
    assert page.svgs == page.figures >= 2 + 4


def test_the_review_report_shows_each_check_and_the_per_position_change(tmp_path):
    text, data, page = _cli_page(tmp_path, "review",
                                 str(ROOT / "tests" / "designs" / "second_source_11kv.toml"),
                                 "--swap", "7:B", "--trials", "4000")
    _no_fetch(text, page)
    assert data["verdict"].upper() in text
    ran = [c for c in data["changes"]["checks"] if c["baseline_ran"] or c["candidate_ran"]]
    for change in ran:
        assert f"section-{change['check']}" in page.ids
    # Baseline -> candidate worst / limit of each check, as the JSON has them.
    shown = [cell.replace("\u2192", "->").split() for cell in page.cells["worst_ratio"]]
    for change, cell in zip(data["changes"]["checks"], shown):
        if change["baseline_worst_ratio"] is not None:
            assert cell[0] == f"{change['baseline_worst_ratio']:.3f}"
            assert cell[-1] == f"{change['candidate_worst_ratio']:.3f}"
    assert page.figures == len(ran) and page.svgs == page.figures
    assert "Review and sign-off" in text


def test_the_fault_end_of_life_and_failure_rate_studies_get_a_section_each(tmp_path):
    # Issue 22, item 4: each study the run made has its section, with the JSON's figures.
    aged = "[end_of_life]\nresistor_drift = 0.02\ncapacitor_dc_bias = 0.1\n\n[grading]"
    text = (ROOT / "examples" / "precipitator-30kv.toml").read_text(encoding="utf-8").replace(
        "[grading]", aged, 1)
    design = tmp_path / "aged.toml"
    design.write_text(text, encoding="utf-8")
    page_text, data, page = _cli_page(tmp_path, "check", str(design), "--trials", "400",
                                      "--faults", "--failure-rate", "--end-of-life")
    assert {"faults", "end-of-life", "failure-rate"} <= page.ids
    worst = data["faults"]["kinds"]["device_short"]["worst"]
    assert f"{worst['worst_ratio']:.3f}" in page_text
    assert f"{data['failure_rate']['stack_fit_p50']:.4g} FIT" in page_text
    margin = data["end_of_life"]["margins"][0]
    assert f"{margin['initial_worst_ratio']:.3f} &#8594; {margin['end_of_life_worst_ratio']:.3f}" \
        in page_text


@pytest.mark.slow
def test_a_transient_run_shows_the_worst_strings_turn_off(tmp_path):
    example = str(ROOT / "examples" / "precipitator-30kv.toml")
    text, data, _ = _cli_page(tmp_path, "check", example, "--trials", "600", "--transient",
                              "--transient-sample", "40", "--transient-worst", "5")
    trial = data["checks"]["transient"]["worst_trial"]
    # The worst string of the transient check, named by its trial, drawn inline in its section.
    assert f"(trial {trial:,})" in text and f"trial {trial:,}, branch 1" in text
    section = text[text.index('id="section-transient"'):]
    assert section.index("<svg") < section.index("</section>")
