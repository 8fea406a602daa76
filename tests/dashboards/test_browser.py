"""Real headless Chromium (Debian `chromium`) opens every page from disk with the network off.

Nothing is mocked: the pages, plotly.min.js and the browser are the real ones. A missing
browser FAILS the test with instructions (never a skip).
"""

from __future__ import annotations

import io
import time

import pytest
from PIL import Image

from dashboards.pages import PAGES

from .browser import BrowserMissingError, Chromium, find_chromium

PAGE_FILES = [f for f, _, _ in PAGES]


@pytest.fixture(scope="module")
def browser():
    try:
        find_chromium()
    except BrowserMissingError as exc:
        pytest.fail(str(exc), pytrace=False)
    with Chromium(width=1280, height=900) as chromium:
        yield chromium


def _colour_stats(png: bytes) -> tuple[int, float]:
    """(distinct colours, share of pixels unlike the top-left pixel) of a screenshot."""
    image = Image.open(io.BytesIO(png)).convert("RGB")
    small = image.resize((max(1, image.width // 2), max(1, image.height // 2)))
    raw = small.tobytes()
    pixels = [raw[i:i + 3] for i in range(0, len(raw), 3)]
    background = pixels[0]
    return len(set(pixels)), sum(p != background for p in pixels) / len(pixels)


@pytest.fixture(scope="module")
def reports(browser, site):
    out = {}
    for name in PAGE_FILES:
        report = browser.open(site / name)
        shots = {"viewport": browser.screenshot()}
        if report.plots:
            shots["plot"] = browser.screenshot_element(report.plots[0]["id"])
        out[name] = (report, shots)
    return out


@pytest.mark.parametrize("name", PAGE_FILES)
def test_page_opens_offline_without_errors(reports, name):
    report, _ = reports[name]
    assert report.console_errors == []
    assert report.exceptions == []
    assert report.external_requests == []
    assert report.failed_requests == []


@pytest.mark.parametrize("name", PAGE_FILES)
def test_every_plot_div_rendered_an_svg_with_data(reports, site, name):
    report, _ = reports[name]
    html = (site / name).read_text(encoding="utf-8")
    expected = html.count('class="plotly-graph-div"')
    assert len(report.plots) == expected
    if expected:
        assert report.plotly == "object"          # the local plotly.min.js loaded
    for plot in report.plots:
        assert plot["svgs"] >= 1, plot["id"]
        assert plot["traces"] >= 1 and plot["marks"] >= 1, plot["id"]
        assert plot["width"] > 300 and plot["height"] > 200, plot["id"]


def test_pages_with_plots_exist(reports):
    assert sum(len(r.plots) for r, _ in reports.values()) > 20
    assert [n for n, (r, _) in reports.items() if not r.plots] == ["index.html"]


@pytest.mark.parametrize("name", PAGE_FILES)
def test_screenshot_is_not_blank(reports, name):
    report, shots = reports[name]
    colours, drawn = _colour_stats(shots["viewport"])
    assert colours > 50 and drawn > 0.2, (colours, drawn)
    if report.plots:
        colours, drawn = _colour_stats(shots["plot"])
        assert colours > 20 and drawn > 0.02, (report.plots[0]["id"], colours, drawn)


def test_the_harness_sees_and_blocks_an_external_request(browser, tmp_path):
    """Guards the guard: a page that asks the network is reported, and the request fails."""
    page = tmp_path / "external.html"
    page.write_text('<!DOCTYPE html><html><body><p>x</p>'
                    '<img src="https://dashboards.invalid/pixel.png"></body></html>', encoding="utf-8")
    report = browser.open(page)
    assert report.external_requests == ["https://dashboards.invalid/pixel.png"]
    assert report.failed_requests != []


def test_the_harness_reports_console_errors(browser, tmp_path):
    page = tmp_path / "broken.html"
    page.write_text('<!DOCTYPE html><html><body><script>console.error("seen");'
                    'undefinedFunction();</script></body></html>', encoding="utf-8")
    report = browser.open(page)
    assert report.console_errors == ["seen"]
    assert len(report.exceptions) == 1 and "undefinedFunction" in report.exceptions[0]


def test_alerts_print_without_scroll_boxes_and_every_column(browser, site, tmp_path):
    """Print media: the alert table prints whole (no scroll box cuts its dose columns); the PDF
    Chromium makes is read back with poppler's pdftotext."""
    import base64
    import re
    import subprocess

    from tests.helpers import require_tool

    browser.open(site / "alerts.html")
    browser.call("Emulation.setEmulatedMedia", media="print")
    try:
        overflow = browser.evaluate(
            "Array.from(document.querySelectorAll('.scroll')).map(e => getComputedStyle(e).overflowX + "
            "'/' + getComputedStyle(e).maxHeight)")
        assert overflow and set(overflow) == {"visible/none"}
        pdf = tmp_path / "alerts.pdf"
        pdf.write_bytes(base64.b64decode(browser.call("Page.printToPDF", landscape=True,
                                                      printBackground=False)["data"]))
    finally:
        browser.call("Emulation.setEmulatedMedia", media="")
    boxes = subprocess.run([require_tool("pdftotext"), "-bbox", str(pdf), "-"], check=True,
                           capture_output=True, text=True).stdout
    for page in re.finditer(r'<page width="([\d.]+)".*?</page>', boxes, re.S):
        assert all(float(x) <= float(page.group(1)) for x in re.findall(r'xMax="([\d.]+)"', page.group(0)))
    text = " ".join(re.findall(r">([^<]+)</word>", boxes))
    from dashboards.pages import ALERT_COLUMNS
    words = set(text.split())
    for column in ALERT_COLUMNS:
        assert set(column.label.split()) <= words, column.label
    # the scenario's PCI: NCRP 168 substantial radiation dose level 5 Gy (from memory), Ka,r 6.2 Gy
    assert "6200 mGy" in text and "min:s" in text


KEY_TABLES = (("index.html", "table-overview-top-alerts"), ("index.html", "table-overview-above-reference"),
              ("alerts.html", "table-alerts"), ("reference-levels.html", "table-reference-room-medians"),
              ("reference-levels.html", "table-reference-network"), ("sites.html", "table-sites-ranked"),
              ("trends.html", "table-drift-flags"))


@pytest.fixture(scope="module")
def wide(site):
    with Chromium(width=1400, height=900) as chromium:
        yield chromium


def test_key_tables_need_no_horizontal_scrolling_at_1400_px(wide, site):
    """Every column of the key tables (dose columns included) is visible at 1400 px: the
    scroll box is no wider than its content (a JS measurement in Chromium)."""
    for page, table in KEY_TABLES:
        wide.open(site / page)
        scroll, client, rows = wide.evaluate(
            f"(() => {{const e = document.querySelector('#{table} .scroll');"
            f" return [e.scrollWidth, e.clientWidth, e.querySelectorAll('tbody tr').length];}})()")
        assert rows >= 1 and scroll <= client + 1, (page, table, scroll, client)


def test_reference_plots_give_the_data_area_most_of_the_width(wide, site):
    """Row labels are short and the legend sits above: the plotting area of every
    reference-level plot is at least 60 % of the figure's width at 1400 px."""
    wide.open(site / "reference-levels.html")
    shares = wide.evaluate(
        "Array.from(document.querySelectorAll('.plotly-graph-div')).map(d => "
        "[d.id, d._fullLayout._size.w / d._fullLayout.width])")
    assert len(shares) > 5
    assert all(share >= 0.6 for _, share in shares), shares


def test_dates_never_wrap(wide, site):
    wide.open(site / "alerts.html")
    styles = wide.evaluate("Array.from(document.querySelectorAll('td.date')).map(e => "
                           "[getComputedStyle(e).whiteSpace, e.getClientRects().length, "
                           "e.getBoundingClientRect().height])")
    assert len(styles) > 10
    assert {s for s, _, _ in styles} == {"nowrap"}


def test_print_media_keeps_study_details_and_reference_table_whole(browser, site):
    """Print media: no scroll box on the reference-levels table or the study details, and the
    date cells still never wrap."""
    for page in ("reference-levels.html", "alerts.html"):
        browser.open(site / page)
        browser.call("Emulation.setEmulatedMedia", media="print")
        try:
            overflow = browser.evaluate(
                "Array.from(document.querySelectorAll('.scroll')).map(e => getComputedStyle(e).overflowX)")
            dates = browser.evaluate(
                "Array.from(document.querySelectorAll('td.date')).map(e => getComputedStyle(e).whiteSpace)")
        finally:
            browser.call("Emulation.setEmulatedMedia", media="")
        assert overflow and set(overflow) == {"visible"}, page
        assert set(dates) <= {"nowrap"}, page


def test_a_figure_out_of_view_waits_until_it_is_scrolled_to_or_printed(browser, site):
    """The drawing script of the pages (templates/plots.html, as a page carries it): a figure
    registered after the load event, far below the window, is not drawn until it is scrolled
    near or the page is about to print; each is drawn once. Recorders stand in for plotly."""
    browser.open(site / "sites.html")
    register = ("(() => {{ window.drawnIds = window.drawnIds || [];"
                " const d = document.createElement('div'); d.id = '{0}';"
                " d.style.cssText = 'position:absolute;left:0;top:{1}px;width:400px;height:300px';"
                " document.body.appendChild(d);"
                " kermaPlot('{0}', () => window.drawnIds.push('{0}')); }})()")
    browser.evaluate(register.format("far-scroll", 60000))
    browser.evaluate(register.format("far-print", 120000))
    time.sleep(0.5)
    assert browser.evaluate("window.drawnIds") == []
    browser.evaluate("window.scrollTo(0, 59800)")
    deadline = time.monotonic() + 10
    while not browser.evaluate("window.drawnIds.length") and time.monotonic() < deadline:
        time.sleep(0.05)
    time.sleep(0.3)
    assert browser.evaluate("window.drawnIds") == ["far-scroll"]
    browser.evaluate("window.scrollTo(0, 0); window.dispatchEvent(new Event('beforeprint'))")
    browser.evaluate("window.dispatchEvent(new Event('beforeprint'))")
    assert browser.evaluate("window.drawnIds") == ["far-scroll", "far-print"]
