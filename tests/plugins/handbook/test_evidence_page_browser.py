"""The one-page evidence sheet and the test sheet in a real browser (issue 23, items 1 and 3).

Headless Chromium (Debian's ``chromium``, driven by tests/cdp.py) lays the pages out: at 1280 × 720 px
the verdict and every point's decision are on the first screen, without scrolling either way; printed
(Chromium's own print-to-PDF, on US Letter and on ISO A4: 8.5 × 11 in and 210 × 297 mm) a normal
five-point test takes one or two pages and the test sheet one. The PDF's page objects are counted in its
bytes (``/Type /Page``, ISO 32000-1 §7.7.3.3). The paper sizes are those of ANSI/ASME Y14.1 (Letter) and
ISO 216 (A4). The pages printed are the fixture's and the fullest five-point pages of the demo's own
evidence folder (sample_results/, invented: a layout check, not a reference for any figure).
"""

from __future__ import annotations

import base64
import re
from pathlib import Path

import openpyxl
import pytest
from loopledger.cli import main

from tests.evidence import good_points, result_yaml, write_evidence

PAPERS = {"Letter": (8.5, 11.0), "A4": (210 / 25.4, 297 / 25.4)}


def print_pdf(browser, width: float, height: float) -> bytes:
    """The page printed on paper of ``width`` × ``height`` inches, with the page's own @page margins."""
    found = browser.call("Page.printToPDF", paperWidth=width, paperHeight=height, preferCSSPageSize=True)
    return base64.b64decode(found["data"])


def pages(pdf: bytes) -> int:
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))


DEMO = Path(__file__).resolve().parents[3] / "sample_results"

#: the right and bottom edges of the verdict badge and of each point's decision badge, on the screen
FIRST_SCREEN = ("(function(){var r=[];var v=document.querySelector('.verdict-line .verdict')"
                ".getBoundingClientRect();r.push([v.right,v.bottom]);"
                "document.querySelectorAll('table.points tbody tr').forEach(function(tr){"
                "var b=tr.querySelector('.verdict').getBoundingClientRect();r.push([b.right,b.bottom]);});"
                "return r;}())")


@pytest.mark.slow
def test_verdict_on_the_first_screen_and_the_printed_page_counts(tmp_path):
    from tests import cdp

    exe = cdp.chromium_or_skip()
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points(0.01), remarks="Routine.")})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 0
    site = tmp_path / "out" / "handbook"
    test_page = next((site / "tests").glob("*.html"))
    sheet_page = site / "sheets" / "T-CT1.html"
    fill = tmp_path / "fill.xlsx"
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--fill", str(fill)]) == 0
    ws = openpyxl.load_workbook(fill)["results"]
    col = {c.value: c.column_letter for c in ws[1]}
    unlocked = {c.coordinate for row in ws.iter_rows() for c in row if not c.protection.locked}
    assert ws.protection.sheet and {f"{col['reading']}{n}" for n in range(2, 7)} <= unlocked
    assert unlocked - {f"{col['reading']}{n}" for n in range(2, 7)} == {f"{col[c]}2" for c in
                                                                         ("date", "technician", "ambient_c")}
    browser = cdp.Browser(exe, tmp_path / "profile")
    try:
        browser.call("Emulation.setDeviceMetricsOverride", width=1280, height=720, deviceScaleFactor=1, mobile=False)
        browser.goto(test_page.resolve().as_uri())
        boxes = browser.evaluate(FIRST_SCREEN)
        assert len(boxes) == 1 + 5
        assert all(right <= 1280 and bottom <= 720 for right, bottom in boxes), boxes
        order = browser.evaluate("[document.querySelector('.page-cautions').getBoundingClientRect().top,"
                                 "document.querySelector('table.points').getBoundingClientRect().top]")
        assert order[0] < order[1]  # the cautions near the top, before the points
        assert browser.evaluate("document.documentElement.scrollWidth") <= 1280  # no sideways scrolling
        for paper, (width, height) in PAPERS.items():
            pdf = print_pdf(browser, width, height)
            assert 1 <= pages(pdf) <= 2, paper
        browser.goto(sheet_page.resolve().as_uri())
        for paper, (width, height) in PAPERS.items():
            pdf = print_pdf(browser, width, height)
            assert pages(pdf) == 1, paper
        assert browser.problems() == []
    finally:
        browser.close()


@pytest.mark.slow
def test_the_demos_fullest_five_point_pages_print_on_two_pages(tmp_path):
    """The three five-point test pages of the demo that are longest in print (as built today: the pressure
    transmitter's two tests of one day, with the register row's history, the loop split and two findings,
    and the power transducer's, with five cautions) print on one or two pages of A4 and of Letter, with the
    verdict and each decision on the first screen at 1280 × 720 px."""
    from tests import cdp

    exe = cdp.chromium_or_skip()
    assert main(["run", str(DEMO), "--out", str(tmp_path / "out"), "--no-cache"]) == 1  # the demo has failures
    test_pages = sorted((tmp_path / "out" / "handbook" / "tests").glob("*.html"))
    browser = cdp.Browser(exe, tmp_path / "profile")
    try:
        # each five-point page's height laid out for print at Letter's printable width (8.5 in less the
        # page's 10 mm side margins, in CSS px of 1/96 in)
        browser.call("Emulation.setDeviceMetricsOverride", width=int((8.5 - 20 / 25.4) * 96), height=900,
                     deviceScaleFactor=1, mobile=False)
        browser.call("Emulation.setEmulatedMedia", media="print")
        heights = []
        for page in test_pages:
            browser.goto(page.resolve().as_uri())
            if browser.evaluate("document.querySelectorAll('table.points tbody tr').length") == 5:
                heights.append((browser.evaluate("document.documentElement.scrollHeight"), page))
        assert len(heights) >= 40  # the demo's five-point tests, not a handful
        fullest = [page for _, page in sorted(heights, key=lambda hp: hp[0])[-3:]]
        browser.call("Emulation.setEmulatedMedia", media="")
        browser.call("Emulation.setDeviceMetricsOverride", width=1280, height=720, deviceScaleFactor=1, mobile=False)
        for page in fullest:
            browser.goto(page.resolve().as_uri())
            boxes = browser.evaluate(FIRST_SCREEN)
            assert len(boxes) == 1 + 5 and all(right <= 1280 and bottom <= 720 for right, bottom in boxes), page.name
            for paper, (width, height) in PAPERS.items():
                assert 1 <= pages(print_pdf(browser, width, height)) <= 2, (page.name, paper)
        assert browser.problems() == []
    finally:
        browser.close()
