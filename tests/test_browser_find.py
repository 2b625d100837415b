"""Finding things in a run's site: search, the map, the overview, in a real browser; and the colours' contrast.

The browser tests use Debian's chromium driven by Playwright, launched as tests/test_browser.py does.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from pilewise.options import RunOptions
from pilewise.output import docmap
from pilewise.output.site import STYLESHEET
from pilewise.pipeline import run_collection
from test_browser import CHROMIUM, _browser

TOPICS = {
    "garden": "soil compost seedling mulch trowel",
    "bikes": "chain saddle pedal spoke derailleur",
    "baking": "oven flour dough whisk proofing",
}
MAP_CAP = 50  # below the fixture's 90 distinct texts, so that the map draws a seeded sample
LAUNCH_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
               "--disable-sync", "--no-first-run"]


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """90 dated rows of three topics over 12 months (baking only in the last three), one marked title."""
    base = tmp_path_factory.mktemp("find")
    table = base / "tickets.csv"
    with table.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "subject", "body", "created"])
        for i in range(90):
            topic = list(TOPICS)[i % 3]
            month = 10 + i % 3 if topic == "baking" else 1 + i % 12
            subject = "Zanzibar question" if i == 4 else f"{topic} note {i}"
            writer.writerow([f"t{i}", subject, f"{TOPICS[topic]} {TOPICS[topic]} item {i} words {i * 7}",
                             f"2025-{month:02d}-{1 + i % 27:02d}"])
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(docmap, "MAP_CAP", MAP_CAP)
        outcome = run_collection(RunOptions(
            source=table, k=3, out=base / "site", quiet=True, seed=5, near_duplicate=1.0,
            text_column="body", title_column="subject", date_column="created"))
    return outcome.run_folder


@pytest.fixture(scope="module")
def browser(run_folder: Path) -> Iterator[Any]:
    sync_api = _browser()
    with sync_api.sync_playwright() as playwright:
        launched = playwright.chromium.launch(executable_path=CHROMIUM, args=LAUNCH_ARGS)
        try:
            yield launched
        finally:
            launched.close()


class Watched:
    """A page whose every request and console message is recorded; requests are routed (and let through)."""

    def __init__(self, browser: Any, *, scripts: bool = True) -> None:
        self.context = browser.new_context(java_script_enabled=scripts)
        self.page = self.context.new_page()
        self.requests: list[str] = []
        self.console: list[str] = []
        self.page.on("console", lambda message: self.console.append(f"{message.type}: {message.text}"))
        self.page.on("pageerror", lambda error: self.console.append(f"pageerror: {error}"))

        def record(route: Any) -> None:
            self.requests.append(route.request.url)
            route.continue_()

        self.page.route("**/*", record)

    def open(self, path: Path) -> Any:
        self.page.goto(path.resolve().as_uri())
        return self.page


@pytest.mark.browser
def test_search_results_link_to_the_right_document_and_cluster(browser: Any, run_folder: Path) -> None:
    watched = Watched(browser)
    page = watched.open(run_folder / "index.html")
    assert page.is_visible("#finder")  # shown by its script
    assert page.get_attribute("#finder-query", "id") == page.get_attribute("label[for=finder-query]", "for")
    page.fill("#finder-query", "zanzibar")
    hits = page.locator("#finder-hits a")
    assert hits.count() == 1 and "1 match" in page.inner_text("#finder-status")
    # keyboard: Down moves from the box to the result, Enter follows it
    page.focus("#finder-query")
    page.keyboard.press("ArrowDown")
    assert page.evaluate("() => document.activeElement.textContent") == "Zanzibar question"
    with page.expect_navigation():
        page.keyboard.press("Enter")
    assert re.search(r"/docs/d\d{7}\.html$", page.url) and page.inner_text("h1") == "Zanzibar question"
    # from a document page (one folder down) a cluster found by its term leads to that cluster's page
    page.fill("#finder-query", "derailleur")
    cluster_hits = page.locator("#finder-hits li", has_text="cluster")
    first = cluster_hits.first.locator("a")
    assert first.get_attribute("href", timeout=2000).startswith("../cluster-")
    with page.expect_navigation():
        first.click()
    assert re.search(r"/cluster-\d\d\.html$", page.url)
    assert "derailleur" in page.inner_text("main")
    watched.context.close()


@pytest.mark.browser
def test_map_draws_min_of_texts_and_cap_with_links(browser: Any, run_folder: Path) -> None:
    watched = Watched(browser)
    page = watched.open(run_folder / "map.html")
    marks = page.locator("svg.docmap circle")
    assert marks.count() == min(90, MAP_CAP)
    links = page.eval_on_selector_all("svg.docmap a", "els => els.map(e => e.getAttribute('href'))")
    assert len(links) == MAP_CAP and all((run_folder / href).is_file() for href in links)
    assert page.locator("svg.docmap circle title").count() == MAP_CAP  # a tooltip on every mark
    assert page.locator("ol.legend li").count() == 3
    watched.context.close()


@pytest.mark.browser
def test_no_console_error_and_no_request_outside_the_run(browser: Any, run_folder: Path) -> None:
    watched = Watched(browser)
    for name in ("index.html", "map.html", "cluster-00.html", "levels.html", "ingest.html"):
        page = watched.open(run_folder / name)
        page.fill("#finder-query", "soil")
        assert page.locator("#finder-hits li").count() > 0, name
        page.keyboard.press("Enter")  # the form's submit must not navigate (form-action 'none')
        assert page.url.endswith(name)
    watched.open(next((run_folder / "docs").glob("*.html")))
    inside = run_folder.resolve().as_uri() + "/"
    assert watched.requests and all(url.startswith(inside) for url in watched.requests), watched.requests
    assert watched.console == []
    watched.context.close()


@pytest.mark.browser
def test_policy_lets_the_runs_own_scripts_run_from_disk_and_no_other(browser: Any, run_folder: Path) -> None:
    # the pages' own policy, on a copy of the index given an inline and a remote script: Chromium treats
    # file:// pages' 'self' as the file:// scheme (the search above runs), while inline and remote stay blocked
    probe = run_folder / "probe.html"
    page_text = (run_folder / "index.html").read_text(encoding="utf-8")
    probe.write_text(page_text.replace("</head>", "<script>window.__inline = 1</script>"
                                       '<script src="http://127.0.0.1:9/x.js"></script></head>'), encoding="utf-8")
    try:
        watched = Watched(browser)
        page = watched.open(probe)
        assert page.evaluate("() => [window.__inline, typeof window.pilewiseSearch]") == [None, "object"]
        assert [url for url in watched.requests if not url.startswith("file:")] == []
        assert any("Content Security Policy" in line for line in watched.console)
        watched.context.close()
    finally:
        probe.unlink()


@pytest.mark.browser
def test_without_scripts_the_index_reads_fully(browser: Any, run_folder: Path) -> None:
    watched = Watched(browser, scripts=False)
    page = watched.open(run_folder / "index.html")
    assert not page.is_visible("#finder")  # no dead search box
    assert page.locator("article.card").count() == 3
    rows = page.locator("table.overview-table tbody tr")
    assert rows.count() == 3
    for i in range(3):  # every overview row leads to its card and to its page
        assert page.locator(f"article#cluster-{rows.nth(i).locator('a').first.inner_text()}").count() == 1
        assert (run_folder / rows.nth(i).locator("a").nth(1).get_attribute("href")).is_file()
    assert page.is_visible("section.over-time svg[role=img]")
    # keyboard focus is visible (WCAG 2.1 §2.4.7): the first link reached by Tab has an outline
    page.keyboard.press("Tab")
    outline = page.evaluate("() => { const s = getComputedStyle(document.activeElement); "
                            "return [document.activeElement.tagName, s.outlineStyle, parseFloat(s.outlineWidth)]; }")
    assert outline[0] == "A" and outline[1] != "none" and outline[2] >= 2
    # the planted late topic (baking, only in the last three months) is listed first, with its evidence
    first = page.locator("ul.first-list li").first.inner_text()
    assert re.match(r"(new|rising) Cluster \d: .*proofing", first) and "adjusted p" in first, first
    watched.context.close()


def _relative_luminance(colour: str) -> float:
    """WCAG 2.1, definition of relative luminance: sRGB channels linearized, weighted 0.2126/0.7152/0.0722."""
    colour = colour.lstrip("#")
    if len(colour) == 3:
        colour = "".join(c * 2 for c in colour)
    channels = [int(colour[i:i + 2], 16) / 255 for i in (0, 2, 4)]
    r, g, b = (c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast(a: str, b: str) -> float:
    """WCAG 2.1, definition of contrast ratio: (L1 + 0.05) / (L2 + 0.05), L1 the lighter."""
    light, dark = sorted((_relative_luminance(a), _relative_luminance(b)), reverse=True)
    return (light + 0.05) / (dark + 0.05)


# rules whose text sits on a background set by an enclosing rule rather than on the page
ENCLOSED_BY = {".masthead nav a": ".masthead", ".contingency .s5 .dim": ".contingency .s5",
               ".masthead nav a:hover": ".masthead"}


def test_contrast_reference_values() -> None:
    # WCAG 2.1 "contrast ratio" definition: black on white is 21:1, a colour on itself 1:1
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast("#777777", "#777777") == pytest.approx(1.0)
    # #767676 on white is the commonly quoted lightest grey passing AA (4.54:1; from memory)
    assert contrast("#767676", "#ffffff") == pytest.approx(4.54, abs=0.01)


def test_every_text_colour_of_the_stylesheet_meets_aa() -> None:
    # WCAG 2.1 §1.4.3 Contrast (Minimum), level AA: 4.5:1 for text (labels and small text included)
    from importlib.resources import files

    css = re.sub(r"/\*.*?\*/", "", files("pilewise.output.site").joinpath("static", STYLESHEET).read_text(), flags=re.S)
    variables = dict(re.findall(r"--([\w-]+):\s*(#[0-9a-fA-F]{3,6})", css))
    rules: dict[str, str] = {}
    for selector, body in re.findall(r"([^{}]+)\{([^{}]*)\}", css):  # a selector may have several rules
        rules[selector.strip()] = rules.get(selector.strip(), "") + ";" + body

    def value(body: str, prop: str) -> str | None:
        found = re.search(rf"(?<![-\w]){prop}:\s*([^;]+)", body)
        if not found:
            return None
        raw = found.group(1).strip()
        var = re.fullmatch(r"var\(--([\w-]+)\)", raw)
        raw = variables[var.group(1)] if var else raw
        return raw if re.fullmatch(r"#[0-9a-fA-F]{3}|#[0-9a-fA-F]{6}", raw) else None

    checked, failing = 0, []
    for selector, body in rules.items():
        ink = value(body, "color")
        if ink is None:
            continue
        own = value(body, "background") or (value(rules[ENCLOSED_BY[selector]], "background")
                                            if selector in ENCLOSED_BY else None)
        for ground in [own] if own else [variables["paper"], variables["panel"]]:
            checked += 1
            if contrast(ink, ground) < 4.5:
                failing.append((selector, ink, ground, round(contrast(ink, ground), 2)))
    assert checked > 20 and failing == []
