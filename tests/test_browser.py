"""The written site in a real headless browser: no script of the documents runs, no request leaves the site.

Uses Debian's chromium (installed by .ci/run) driven by Playwright for Python with `executable_path`;
nothing downloads a browser of its own.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from pilewise.options import RunOptions
from pilewise.pipeline import run_collection

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
HOSTILE = [
    '<script>window.__pwned = "script"</script>',
    '<img src="x" onerror="window.__pwned = \'onerror\'">',
    '<a href="javascript:window.__pwned=\'link\'">click</a>',
    "</script><script>window.__pwned = 'breakout'</script>",
    '<img src="http://127.0.0.1:9/remote.png"><link rel="stylesheet" href="https://example.com/x.css">',
    '<svg onload="window.__pwned = \'svg\'"></svg><iframe src="https://example.com/"></iframe>',
]


def _browser():  # type: ignore[no-untyped-def]
    if not Path(CHROMIUM).exists():
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed; .ci/run installs Debian's chromium for this test")
        pytest.skip("Debian's chromium is not installed (apt-get install chromium)")
    sync_api = pytest.importorskip("playwright.sync_api")
    return sync_api


@pytest.fixture(scope="module")
def hostile_site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = tmp_path_factory.mktemp("browser")
    data = base / "data"
    data.mkdir()
    topics = ["soil compost seedling mulch", "chain saddle pedal spoke", "oven flour dough whisk"]
    for i in range(18):
        payload = HOSTILE[i % len(HOSTILE)]
        body = f"{topics[i % 3]} {topics[i % 3]} note {i}\n{payload}\n"
        (data / f"note-{i:02d}.txt").write_text(f"{payload} title {i}\n{body}", encoding="utf-8")
    # an HTML input whose visible text holds markup-looking text, and a mail with a hostile subject
    (data / "page.html").write_text(
        "<html><head><title>&lt;script&gt;window.__pwned='title'&lt;/script&gt;</title>"
        "<script>window.__pwned='input-script'</script></head><body><p>soil compost seedling mulch "
        "&lt;img src=x onerror=alert(1)&gt;</p></body></html>", encoding="utf-8")
    (data / "mail.eml").write_text(
        "Subject: <script>window.__pwned='subject'</script>\nFrom: a@example.org\n\n"
        "chain saddle pedal spoke <b onmouseover=alert(1)>x</b>\n", encoding="utf-8")
    outcome = run_collection(RunOptions(source=data, k=3, out=base / "site", quiet=True, near_duplicate=1.0))
    # a second run, so that a comparison page is written too
    run_collection(RunOptions(source=data, k=4, out=base / "site", quiet=True, near_duplicate=1.0))
    return outcome.root_index.parent


@pytest.mark.browser
def test_no_document_script_runs_and_no_request_leaves_the_site(hostile_site: Path) -> None:
    sync_api = _browser()
    pages = sorted(hostile_site.rglob("*.html"))
    assert len(pages) > 20
    site_prefix = hostile_site.resolve().as_uri()
    with sync_api.sync_playwright() as playwright:
        browser = playwright.chromium.launch(
            executable_path=CHROMIUM,
            args=["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
                  "--disable-sync", "--no-first-run"],
        )
        try:
            page = browser.new_page()
            requests: list[str] = []
            console: list[str] = []
            page.on("request", lambda request: requests.append(request.url))
            page.on("console", lambda message: console.append(message.text))
            for path in pages:
                page.goto(path.resolve().as_uri())
                # would fire mouse and load handlers, had any survived the escaping
                page.evaluate("() => document.querySelectorAll('*').forEach(e => "
                              "['mouseover', 'click', 'load', 'error'].forEach(t => e.dispatchEvent(new Event(t))))")
                assert page.evaluate("() => window.__pwned === undefined"), path
        finally:
            browser.close()
    outside = [url for url in requests if not url.startswith(site_prefix)]
    assert outside == []
    assert not [m for m in console if "Content Security Policy" in m or "pwned" in m]
