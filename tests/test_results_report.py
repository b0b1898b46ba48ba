"""The standalone HTML report: the demo's planted problems, self-containment, PNG and PDF in chromium."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from labelstudy.results import export_bytes, score_round

ARTIFACTS = Path(__file__).resolve().parent.parent / "artifacts" / "report"
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless=new", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
        "--disable-component-update", "--disable-sync"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from labelstudy.demo import build_demo
    d = build_demo(tmp_path_factory.mktemp("demo") / "orchard")
    store = __import__("labelstudy.project", fromlist=["open_project"]).open_project(d.path).store()
    res = score_round(store, d.round_id)
    return d, store, res, export_bytes(res, "report.html").decode("utf-8")


def test_demo_report_shows_planted_pair_and_item(demo):
    from labelstudy.simulate import ORCHARD_CONFUSABLE, ORCHARD_CROSS_LOADING
    _, _, res, html = demo
    labels = res.tables["labels"].set_index("factor")
    a, b = ORCHARD_CONFUSABLE
    assert labels.loc[a, "verdict"] in (f"overlapping with {b}", "ambiguous")
    assert labels.loc[b, "verdict"] in (f"overlapping with {a}", "ambiguous")
    items = res.tables["items"].set_index("item")
    for item in ORCHARD_CROSS_LOADING:
        assert items.loc[item, "verdict"] == "revise"
    # and the report says so in its tables
    assert re.search(rf">{a}</td>.*?verdict[^>]*>{re.escape(labels.loc[a, 'verdict'])}</td>", html, re.S)
    assert re.search(rf">{ORCHARD_CROSS_LOADING[0]}</td>.*?verdict[^>]*>revise</td>", html, re.S)


def test_report_is_self_contained(demo):
    html = demo[3]
    assert "<style>" in html
    urls = re.findall(r'(?:src|href)="([^"]*)"', html)
    assert urls and all(u.startswith("data:") for u in urls), [u for u in urls if not u.startswith("data:")]
    assert "http://" not in html.replace("http://www.w3.org", "") and "https://" not in html
    assert "@media print" in html
    assert "not proof of validity" in html and "Local ethics rules come first" in html
    assert "Decision rules used" in html and "Ayre &amp; Scally (2014)" in html


@pytest.mark.browser
def test_report_renders_in_chromium_to_png_and_pdf(demo):
    sync_api = pytest.importorskip("playwright.sync_api")
    if not Path(CHROMIUM).exists():
        pytest.skip("chromium is not installed")
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    html = demo[3]
    (ARTIFACTS / "report.html").write_text(html, encoding="utf-8")
    outside: list[str] = []
    with sync_api.sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900})

            def route(r):
                url = r.request.url
                if url.startswith(("data:", "about:")):
                    r.continue_()
                else:
                    outside.append(url)
                    r.abort()

            page.route("**/*", route)
            page.set_content(html, wait_until="load")
            n_img = page.evaluate("Array.from(document.images).filter(i => i.complete && i.naturalWidth > 0)"
                                  ".length")
            assert n_img >= 4                              # every plot decoded from its data: URI
            page.screenshot(path=str(ARTIFACTS / "report.png"), full_page=True)
            page.emulate_media(media="print")
            page.set_viewport_size({"width": 1060, "height": 750})      # about A4 landscape at 96 dpi
            page.screenshot(path=str(ARTIFACTS / "report-print.png"), full_page=True)
            pdf = page.pdf(format="A4", landscape=True, print_background=True)
        finally:
            browser.close()
    (ARTIFACTS / "report.pdf").write_bytes(pdf)
    assert pdf.startswith(b"%PDF") and len(pdf) > 10000
    assert outside == []
