"""Sortable tables in a real headless browser (Debian's chromium through Playwright): click and keyboard
sort the rows, nothing is logged to the console, no request leaves the site, and without scripts the
pages read the same, in their written order."""

from __future__ import annotations

import os
import shutil
from pathlib import Path
from typing import Any

import pytest

from helpers import write_topic_folder
from pilewise.options import RunOptions
from pilewise.pipeline import run_collection

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]


def _sync_api() -> Any:
    if not Path(CHROMIUM).exists():
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed; .ci/run installs Debian's chromium for this test")
        pytest.skip("Debian's chromium is not installed (apt-get install chromium)")
    return pytest.importorskip("playwright.sync_api")


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = tmp_path_factory.mktemp("sort")
    write_topic_folder(base / "notes", per_topic=12)
    return run_collection(RunOptions(source=base / "notes", k=3, out=base / "site", quiet=True)).run_folder


def _column(page: Any, table: str, column: int) -> list[str]:
    return list(page.eval_on_selector_all(
        f"{table} tbody tr", f"rows => rows.map(r => r.cells[{column}].getAttribute('data-sort') ?? r.cells[{column}]"
        ".textContent.trim())"))


@pytest.mark.browser
def test_headers_sort_by_click_and_keyboard(run_folder: Path) -> None:
    sync_api = _sync_api()
    site = run_folder.parent.parent.resolve().as_uri()
    with sync_api.sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page()
            console: list[str] = []
            requests: list[str] = []
            page.on("console", lambda message: console.append(message.text))
            page.on("pageerror", lambda error: console.append(str(error)))
            page.on("request", lambda request: requests.append(request.url))
            page.goto((run_folder / "cluster-00.html").resolve().as_uri())
            table = "table.members"
            written = _column(page, table, 3)
            header = page.locator(f"{table} thead th").nth(3)
            header.locator("button").click()
            # numbers compare as numbers (Python's float order is the reference), ascending first
            assert [float(v) for v in _column(page, table, 3)] == sorted(float(v) for v in written)
            assert header.get_attribute("aria-sort") == "ascending"
            header.locator("button").click()
            assert [float(v) for v in _column(page, table, 3)] == sorted((float(v) for v in written), reverse=True)
            assert header.get_attribute("aria-sort") == "descending"
            # keyboard: the header is a real button, so Enter and Space activate it (HTML, button activation)
            title = page.locator(f"{table} thead th").nth(1)
            title.locator("button").focus()
            page.keyboard.press("Enter")
            assert title.get_attribute("aria-sort") == "ascending" and header.get_attribute("aria-sort") is None
            titles = _column(page, table, 1)
            # text compares by the browser's own collation (ECMA-402 localeCompare), numbers inside by value
            assert titles == page.evaluate(
                "ts => ts.slice().sort((a, b) => a.localeCompare(b, undefined, {numeric: true, sensitivity: 'base'}))",
                titles)
            page.keyboard.press("Space")
            assert title.get_attribute("aria-sort") == "descending"
            # the chi-square table sorts its counts as numbers too, ties keeping their earlier order
            terms = "table.terms >> nth=0"
            rows_js = ("() => Array.from(document.querySelector('table.terms').tBodies[0].rows, "
                                 "r => [r.cells[0].textContent, Number(r.cells[2].getAttribute('data-sort'))])")
            before = page.evaluate(rows_js)
            page.locator(terms).locator("thead th").nth(2).locator("button").click()
            after = page.evaluate(rows_js)
            assert len({row[1] for row in before}) < len(before)  # there are ties to keep
            assert after == sorted(before, key=lambda row: row[1])  # Python's sort is stable: the reference
        finally:
            browser.close()
    assert console == []
    assert [url for url in requests if not url.startswith(site)] == []


@pytest.mark.browser
def test_pages_read_the_same_without_scripts(run_folder: Path) -> None:
    sync_api = _sync_api()
    with sync_api.sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            context = browser.new_context(java_script_enabled=False)
            page = context.new_page()
            page.goto((run_folder / "cluster-00.html").resolve().as_uri())
            assert page.locator("table.members thead button").count() == 0  # plain headers, nothing to press
            ranks = [int(v) for v in _column(page, "table.members", 0)]
            assert ranks == list(range(1, len(ranks) + 1)) and ranks  # the written order, nearest first
            assert page.locator("h1").inner_text()
            assert page.locator("a[rel=next]").count() >= 1
        finally:
            browser.close()
