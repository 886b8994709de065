"""The handbook: page data, sanitising, reproducible and incremental builds, the sheet, a real browser."""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import html
import os
import re
import signal
import subprocess
import sys
import time
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import pandas as pd
import pytest
from loopledger import keys, runner
from loopledger.cli import main
from loopledger.plugins import sheet as sheet_command
from loopledger.plugins.handbook import asset_pages, build, fleet_pages, render, values
from loopledger.plugins.history import traceability
from loopledger.plugins.sheet import plan as sheet_plan

from tests.evidence import CT_ASSET, INSTRUMENTS, good_points, result_yaml, write_evidence

AS_OF = dt.date(2026, 11, 30)  # the fixtures' as_of (tests/evidence.py)


def _asset(name: str, **extra: object) -> dict[str, object]:
    return {**CT_ASSET, "asset": name, **extra}


def _fleet(root: Path, **results: str) -> Path:
    """Three current transducers: one passing but overdue, one failing, one never tested."""
    files = {"a/one.yaml": result_yaml(asset="T-CT1", date="2025-01-10", as_found=good_points(0.01)),
             "b/two.yaml": result_yaml(asset="T-CT2", date="2026-06-01", as_found=good_points(0.2),
                                       remarks="Span drifted; *replace* at next outage.")}
    files.update(results)
    assets = [_asset("T-CT1"), _asset("T-CT2", area="Panel 2"), _asset("T-CT3", site="Other site")]
    return write_evidence(root, files, assets=assets)


def _tree(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


# --- page data --------------------------------------------------------------------------------

def test_fleet_counts_overdue_and_untested(tmp_path, run_folder):
    ctx = run_folder(_fleet(tmp_path / "ev"))
    tests = fleet_pages.test_table(ctx)
    assets = fleet_pages.asset_table(ctx, tests)
    # T-CT1 is past its due date; T-CT3 was never tested, which the intervals stage counts as overdue
    assert fleet_pages.counts(assets) == {"pass": 1, "fail": 1, "adjusted": 0, "untested": 1, "overdue": 2, "total": 3}
    one = assets.loc["T-CT1"]
    # next due = last test + 12 months (calendar months, common practice); days counted with Python's datetime
    assert one["next_due"] == "2026-01-10"
    assert one["overdue"] and int(one["days_overdue"]) == (AS_OF - dt.date(2026, 1, 10)).days
    assert not assets.loc["T-CT2", "overdue"]
    index = fleet_pages.index_data(ctx, assets, tests)
    assert [a["asset"] for a in index["action"]["failed"]] == ["T-CT2"]
    assert [a["asset"] for a in index["action"]["overdue"]] == ["T-CT1", "T-CT3"]
    # grouped by site, then area
    assert [(g["site"], g["area"]) for g in index["groups"]] == [
        ("Other site", "Panel 1"), ("Test site", "Panel 1"), ("Test site", "Panel 2")]
    # the handbook shows the intervals stage's due dates and works none out itself: without that stage's
    # summary an asset has no due date on the pages, and is not counted overdue
    ctx.extras.pop("assets_summary")
    bare = fleet_pages.asset_table(ctx, tests)
    assert bare["next_due"].isna().all() and not bare["overdue"].any()


def test_reference_out_of_calibration_on_the_test_date(tmp_path, run_folder):
    instruments = {**INSTRUMENTS, "DMM-1": {**INSTRUMENTS["DMM-1"], "due": "2026-03-01"}}
    ev = write_evidence(tmp_path / "ev", {
        "early.yaml": result_yaml(date="2026-02-15", as_found=good_points()),
        "late.yaml": result_yaml(date="2026-06-01", as_found=good_points())}, instruments=instruments)
    ctx = run_folder(ev)
    used = traceability.usage(ctx)
    # the vectorised statuses say the same as the one-at-a-time function
    for r in used.itertuples():
        info = ctx.instruments.loc[r.instrument]
        assert r.status == traceability.cal_status(info["calibrated"], info["due"], r.date)
    tests = fleet_pages.test_table(ctx).set_index("test")
    late = tests[tests["date"] == "2026-06-01"].iloc[0]
    early = tests[tests["date"] == "2026-02-15"].iloc[0]
    assert late["reference_out_of_cal"] and "DMM-1" in late["reference_issues"]
    assert not early["reference_out_of_cal"]
    data = fleet_pages.instruments_data(ctx, used, fleet_pages.test_table(ctx))
    dmm = next(i for i in data["instruments"] if i["id"] == "DMM-1")
    assert dmm["n_out"] == 1 and dmm["status_now"].startswith("OUT OF CALIBRATION")


def test_sheet_windows_volts_and_primary(tmp_path, run_folder):
    ctx = run_folder(_fleet(tmp_path / "ev"))
    plan = {"method": "shunt", "shunt_ohm": 250.0, "meter": "DMM-1", "connection": "standalone"}
    sheet = sheet_plan.sheet_data(ctx, "T-CT3", plan)
    rows = {r["input_pct"]: r for r in sheet["rows"]}
    assert sorted(rows) == [0.0, 25.0, 50.0, 75.0, 100.0]  # common practice: five points up the range
    mid = rows[50.0]
    # class 0.5 as a fiducial error on the 16 mA output span (IEC 60688): MPE = 0.005 x 16 mA = 0.08 mA
    assert mid["expected"] == pytest.approx(12.0) and mid["accept"] == pytest.approx(0.08)
    assert (mid["low"], mid["high"]) == (pytest.approx(11.92), pytest.approx(12.08))
    # Ohm's law across the planned shunt: 11.92 mA x 250 ohm = 2.98 V, 12.08 mA x 250 ohm = 3.02 V
    assert (mid["read_low"], mid["read_high"]) == (pytest.approx(2.98), pytest.approx(3.02))
    # 0.5 A secondary behind a 2000/1 A current transformer is 1000 A primary
    assert mid["input"] == pytest.approx(0.5) and mid["primary"] == pytest.approx(1000.0)
    text = sheet_command.sheet_text(sheet)
    assert "2.9800" in text and "3.0200" in text and "open-circuit" in text


def test_columns_of_other_stages_are_shown_when_present(tmp_path, run_folder):
    ctx = run_folder(_fleet(tmp_path / "ev"))
    real_extras = dict(ctx.extras)
    span = 16.0
    ctx.points["U"] = 0.016  # 0.1 % of the 16 mA span
    ctx.tests["burden_status"] = "low-margin"
    ctx.tests["loop_ohm"] = 612.5
    ctx.stash[keys.ASSETS_SUMMARY] = pd.DataFrame({
        "asset": ["T-CT1", "T-CT2", "T-CT3"], "next_due": ["2027-01-10", "2027-06-01", None],
        "overdue": [False, False, False], "predicted_out_of_tolerance": [True, False, "2030-01-01"]})
    ctx.stash[keys.DRIFT_FITS] = pd.DataFrame({
        "asset": ["T-CT2"], "input_pct": [50.0], "n": [2], "slope_pct_per_year": [0.4], "stderr": [0.1],
        "intercept_pct": [0.0], "ref_date": ["2025-01-01"]})
    tests = fleet_pages.test_table(ctx)
    assets = fleet_pages.asset_table(ctx, tests)
    assert fleet_pages.counts(assets)["overdue"] == 0  # the history stage's overdue wins over the fallback
    index = fleet_pages.index_data(ctx, assets, tests)
    # a flag counts as soon; a date more than a year after as_of does not (but shows on the asset page)
    assert [a["asset"] for a in index["action"]["predicted"]] == ["T-CT1"]
    assert assets.loc["T-CT3", "predicted"] == "2030-01-01" and not assets.loc["T-CT3", "predicted_soon"]
    sh = build.prepare(ctx)
    pages = asset_pages.test_pages(ctx, sh.tests, sh.points, sh.used, sh.registry, sh.instruments, {})
    chart = next(p["chart"] for p in pages.values() if p["test"]["asset"] == "T-CT2")
    assert chart["points"][0]["U_pct"] == pytest.approx(0.016 / span * 100)
    # one test is no history: no drift chart, whatever fits a stage left (test_charts checks a fitted line)
    assert asset_pages.drift_charts(ctx, assets.loc[["T-CT2"]], ctx.points) == {}
    ctx.extras = real_extras  # the other stages' own page blocks read their own extras
    out = tmp_path / "site"
    build.build(ctx, out)
    page = (out / "tests" / "b_two.html").read_text(encoding="utf-8")
    assert "U (mA)" in page and "0.0160" in page
    # each section once: the burden stage's own block, not a second one made from its columns
    assert page.count("<h2>Loop burden</h2>") == 1 and "Burden and loop" not in page
    assert "Predicted to drift" in (out / "index.html").read_text(encoding="utf-8")
    if "assets_summary" in real_extras:
        assert "the history stage did not run" not in (out / "index.html").read_text(encoding="utf-8")


FOUNDATION = {"read_yaml", "read_table", "schema_check", "expected_output", "current_transducer", "measured_output",
              "reading_methods", "tolerance", "export_csv", "handbook"}


def test_pages_degrade_without_optional_columns(tmp_path, pm):
    for name, _plugin in list(pm.list_name_plugin()):
        if name not in FOUNDATION:
            pm.unregister(name=name)
    ctx = runner.run(runner.RunOptions(_fleet(tmp_path / "ev")), pm)
    assert keys.ASSETS_SUMMARY not in ctx.stash and "U" not in ctx.points.columns
    out = tmp_path / "site"
    build.build(ctx, out)
    index = (out / "index.html").read_text(encoding="utf-8")
    assert "the history stage did not run" in index
    test_page = (out / "tests" / "a_one.html").read_text(encoding="utf-8")
    assert "U (" not in test_page and "Burden and loop" not in test_page
    assert (out / "assets" / "T-CT3.html").is_file() and (out / "sheets" / "T-CT3.html").is_file()


# --- safety of what comes from input files --------------------------------------------------

class _Audit(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.scripts: list[str] = []
        self.handlers: list[str] = []
        self.external: list[str] = []
        self.downloads: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "script":
            self.scripts.append(dict(attrs).get("src") or "inline")
        for name, value in attrs:
            if name.startswith("on"):
                self.handlers.append(f"{tag} {name}")
            if tag == "a" and name == "href" and "download" in dict(attrs) and value and \
                    re.fullmatch(r"data:application/octet-stream;base64,[A-Za-z0-9+/=]*", value):
                self.downloads.append(value)  # bytes held in the page, saved as a file, never shown or run
            elif name in ("src", "href", "action", "srcset", "poster", "data") and value and (
                    ":" in value.split("/")[0] or value.startswith("//")):
                self.external.append(value)

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _audit(text: str) -> _Audit:
    audit = _Audit()
    audit.feed(text)
    return audit


def test_hostile_remark_renders_as_harmless_text(tmp_path):
    remark = ('Note <script>alert("x")</script> and <img src=x onerror=alert(1)> '
              'and ![logo](https://example.invalid/t.png) and [site](javascript:alert(2))')
    ev = write_evidence(tmp_path / "ev", {"r.yaml": result_yaml(as_found=good_points(), remarks=remark)})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 0
    page = (tmp_path / "out" / "handbook" / "tests" / "r.html").read_text(encoding="utf-8")
    audit = _audit(page)
    assert audit.scripts == [] and audit.handlers == [] and audit.external == [] and len(audit.downloads) == 1
    shown = "".join(audit.text)
    # the remark is shown as the text that was written, tags, image and link syntax included
    assert '<script>alert("x")</script>' in shown and "<img src=x onerror=alert(1)>" in shown
    assert "![logo](https://example.invalid/t.png)" in shown and "[site](javascript:alert(2))" in shown


def test_site_refers_to_nothing_outside_itself(tmp_path):
    ev = _fleet(tmp_path / "ev")
    main(["run", str(ev), "--out", str(tmp_path / "out")])
    site = tmp_path / "out" / "handbook"
    pages = sorted(site.rglob("*.html"))
    assert len(pages) >= 4 + 3 * 2 + 2
    for page in pages:
        audit = _audit(page.read_text(encoding="utf-8"))
        assert audit.external == [], page
        assert len(audit.downloads) == (1 if page.parent.name == "tests" else 0), page
        assert audit.scripts in ([], ["filter.js"]), page
        for target in _links(page):
            assert (page.parent / target).resolve().is_file(), f"{page}: broken link {target}"
    charts = [svg for page in pages for svg in re.findall(r"<svg.*?</svg>", page.read_text(encoding="utf-8"), re.S)]
    assert charts, "no chart drawn into any page"
    for svg in charts:
        assert 'href="http' not in svg and "<script" not in svg


def _links(page: Path) -> list[str]:
    class Links(HTMLParser):
        found: list[str] = []

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            for name, value in attrs:
                if name in ("href", "src") and value and not value.startswith("data:"):
                    self.found.append(value.split("#")[0])

    parser = Links()
    parser.found = []
    parser.feed(page.read_text(encoding="utf-8"))
    return [f for f in parser.found if f]


# --- reproducible, incremental and atomic builds ------------------------------------------------

def test_two_builds_are_byte_identical_and_incremental_equals_cold(tmp_path, pm):
    ev = _fleet(tmp_path / "ev")

    def publish(out: Path) -> build.BuildStats:
        ctx = runner.run(runner.RunOptions(ev), pm)
        runner.publish(ctx, out)
        stats = ctx.stash[keys.HANDBOOK_BUILD]
        assert isinstance(stats, build.BuildStats)
        return stats

    first = publish(tmp_path / "one")
    second = publish(tmp_path / "two")
    assert second.rendered == second.pages
    assert first.rendered == first.pages and first.reused == 0
    assert _tree(tmp_path / "one" / "handbook") == _tree(tmp_path / "two" / "handbook")
    again = publish(tmp_path / "one")  # same folder, same as_of: every page reused, bytes unchanged
    assert again.reused == again.pages and again.rendered == 0
    assert _tree(tmp_path / "one" / "handbook") == _tree(tmp_path / "two" / "handbook")

    # change one result file: only the pages that show it are made again, and the site equals a cold build
    (ev / "results" / "a" / "one.yaml").write_text(
        result_yaml(asset="T-CT1", date="2025-01-10", as_found=good_points(0.02)), encoding="utf-8")
    warm = publish(tmp_path / "one")
    cold = publish(tmp_path / "three")
    assert 0 < warm.rendered < warm.pages and warm.reused > 0
    assert cold.rendered == cold.pages
    assert _tree(tmp_path / "one" / "handbook") == _tree(tmp_path / "three" / "handbook")


KILL_SCRIPT = """
import sys, time
from loopledger.plugins.handbook import build
real = build.render_job
def slow(job):
    time.sleep(0.25)
    return real(job)
build.render_job = slow
from loopledger.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_a_build_killed_half_way_leaves_the_previous_site(tmp_path):
    ev = _fleet(tmp_path / "ev")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 1  # a test failed: exit code 1
    before = _tree(out / "handbook")
    proc = subprocess.Popen([sys.executable, "-c", KILL_SCRIPT, "run", str(ev), "--out", str(out),
                             "--as-of", "2026-12-01"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        staged: list[Path] = []
        deadline = time.monotonic() + 300
        while not any((s / "assets").is_dir() for s in staged) and time.monotonic() < deadline:
            assert proc.poll() is None, "the slowed build finished before it could be killed"
            staged = list(out.glob(".handbook.new-*"))
            time.sleep(0.05)
        assert staged, "the build never started writing its staging folder"
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
    assert _tree(out / "handbook") == before  # the live site is whole and unchanged
    assert main(["run", str(ev), "--out", str(out), "--as-of", "2026-12-01"]) == 1
    assert "2026-12-01" in (out / "handbook" / "index.html").read_text(encoding="utf-8")
    assert list(out.glob(".handbook.new-*")) == []  # the next build cleared the killed one's leftovers


def test_an_error_during_a_build_leaves_the_previous_site(tmp_path, pm, monkeypatch):
    ev = _fleet(tmp_path / "ev")
    out = tmp_path / "out"
    ctx = runner.run(runner.RunOptions(ev), pm)
    runner.publish(ctx, out)
    before = _tree(out / "handbook")
    calls = {"n": 0}
    real = render.render_job

    def failing(job: render.Job) -> bytes:
        calls["n"] += 1
        if calls["n"] == 3:
            raise OSError("disk full (simulated)")
        return real(job)

    monkeypatch.setattr(build, "render_job", failing)
    ctx = runner.run(runner.RunOptions(ev, overrides={"as_of": "2026-12-01"}), pm)
    with pytest.raises(OSError):
        runner.publish(ctx, out)
    assert _tree(out / "handbook") == before


# --- the sheet command, end to end --------------------------------------------------------------

def test_sheet_command(tmp_path, capsys):
    ev = _fleet(tmp_path / "ev")
    html = tmp_path / "sheet.html"
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--shunt", "250", "--html", str(html)]) == 0
    out = capsys.readouterr().out
    # class 0.5 on 16 mA is 0.08 mA (IEC 60688); 12.08 mA x 250 ohm = 3.02 V (Ohm's law)
    assert "2.9800" in out and "3.0200" in out and "Before you connect anything" in out
    page = html.read_text(encoding="utf-8")
    assert "Accept from (V)" in page and "3.0200" in page and _audit(page).external == []
    assert _links(html) == []  # a page on its own: the style sheet is inside it, no links to a site
    assert main(["sheet", "NOPE", "--evidence", str(ev)]) == 3
    assert "NOPE" in capsys.readouterr().err
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--meter", "NOPE"]) == 3


def test_sheet_of_an_asset_ranged_in_a_unit_of_the_wrong_kind(tmp_path, capsys):
    """pint's dimensionalities: a metre is a [length], a current transducer's input a [current]. The sheet
    gives no expected values for such an asset, says why, and still names the rule in force."""
    ev = write_evidence(tmp_path / "ev", {}, assets=[_asset("T-M", input_unit="m")])
    assert main(["sheet", "T-M", "--evidence", str(ev)]) == 0
    out = capsys.readouterr().out
    assert "input_unit 'm' is not of the kind signal 'current-transducer' takes as input" in out
    assert "rule 'simple'" in out and "12.0800" not in out


# --- a real browser ------------------------------------------------------------------------------

@pytest.mark.slow
def test_in_headless_chromium(tmp_path):
    from tests import cdp

    exe = cdp.chromium_or_skip()
    ev = _fleet(tmp_path / "ev")
    main(["run", str(ev), "--out", str(tmp_path / "out")])
    site = (tmp_path / "out" / "handbook").resolve()
    browser = cdp.Browser(exe, tmp_path / "profile")
    try:
        browser.goto(site.joinpath("index.html").as_uri())
        assert browser.evaluate("document.querySelector('h1').textContent").startswith("Fleet status on 2026-11-30")
        # the optional filter script narrows the asset tables
        shown = browser.evaluate("(function(){var b=document.getElementById('filter'); b.value='T-CT2';"
                                 "b.dispatchEvent(new Event('input'));"
                                 "return document.querySelectorAll('[data-row]:not([hidden])').length;}())")
        assert shown == 1
        browser.screenshot(tmp_path / "index.png")
        asset_url = browser.click("table.assets tr:not([hidden]) a[href^='assets/']")
        assert asset_url.endswith(".html") and "/assets/" in asset_url
        assert browser.evaluate("document.querySelector('figure.chart svg').getBoundingClientRect().width") > 100
        browser.screenshot(tmp_path / "asset.png")
        test_url = browser.click("a[href^='../tests/']")
        assert "/tests/" in test_url
        assert "Test evidence" in browser.evaluate("document.querySelector('h1').textContent")
        shot = browser.screenshot(tmp_path / "test.png")
        assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert browser.problems() == []
        outside = [u for u in browser.requests()
                   if not (u.startswith("file://") and Path(unquote(urlsplit(u).path)).resolve().is_relative_to(site))
                   and not u.startswith("data:")]
        assert outside == []
    finally:
        browser.close()


def test_parallel_rendering_gives_the_same_bytes(tmp_path, run_folder, monkeypatch):
    ctx = run_folder(_fleet(tmp_path / "ev"))
    serial = build.build(ctx, tmp_path / "serial", workers=1)
    monkeypatch.setattr(build, "PARALLEL_MIN", 1)
    parallel = build.build(ctx, tmp_path / "parallel", workers=2)
    assert serial.rendered == parallel.rendered == serial.pages
    assert _tree(tmp_path / "serial") == _tree(tmp_path / "parallel")


def test_batches_share_out_every_asset_and_test_once(tmp_path, run_folder):
    """Each asset goes to one batch with all its tests; a test of an asset missing from the registry too."""
    stray = result_yaml(asset="T-NOT-LISTED", date="2026-02-01", as_found=good_points())
    ctx = run_folder(_fleet(tmp_path / "ev", **{"c/stray.yaml": stray}))
    sh = build.prepare(ctx)
    for n in (1, 2, 3, 8):
        found = build.batches(sh, n)
        assert 1 <= len(found) <= n
        assets = [a for batch in found for a in batch[0]]
        tests = [t for batch in found for t in batch[1]]
        assert sorted(assets) == sorted(sh.assets.index) and sorted(tests) == sorted(sh.tests["test"])
        for batch_assets, batch_tests in found:
            mine = set(sh.tests.loc[sh.tests["asset"].isin(batch_assets), "test"])
            assert mine <= set(batch_tests)  # an asset's page and its tests' pages are made together


# --- accessibility ---------------------------------------------------------------------------------

def _luminance(hex_colour: str) -> float:
    """Relative luminance, WCAG 2.1 §1.4.3 definition (sRGB linearisation)."""
    rgb = [int(hex_colour.lstrip("#")[i:i + 2], 16) / 255 for i in (0, 2, 4)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def _contrast(a: str, b: str) -> float:
    hi, lo = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_text_colours_pass_wcag_aa():
    import importlib.resources
    import re

    css = importlib.resources.files("loopledger.site").joinpath("static/style.css").read_text(encoding="utf-8")
    colours = dict(re.findall(r"--([a-z-]+):\s*(#[0-9a-fA-F]{6})", css))
    # WCAG 2.1 reference values: black on white is 21:1
    assert _contrast("#000000", "#ffffff") == pytest.approx(21.0)
    backgrounds = [colours["paper"], colours["panel"], colours["flag-bg"], "#ffffff", "#fbeeee"]
    for text in ("ink", "muted", "link", "pass", "fail", "warn", "accent"):
        for bg in backgrounds:
            assert _contrast(colours[text], bg) >= 4.5, (text, bg)  # AA for normal-size text


def test_verdicts_are_words_not_only_colour(tmp_path, run_folder):
    ctx = run_folder(_fleet(tmp_path / "ev"))
    build.build(ctx, tmp_path / "site")
    index = (tmp_path / "site" / "index.html").read_text(encoding="utf-8")
    for word in ("Pass", "Fail", "No valid test", "Overdue"):
        assert f"{word}</span>" in index
    test_page = (tmp_path / "site" / "tests" / "b_two.html").read_text(encoding="utf-8")
    assert '<th scope="col">Decision</th>' in test_page and '<desc>Chart of error against input.' in test_page


def test_invalid_files_get_an_evidence_page_with_their_findings(tmp_path):
    ev = _fleet(tmp_path / "ev", **{"c/bad.yaml": result_yaml(asset="T-CT3", as_found=[("50 %", "twelve mA")])})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    site = tmp_path / "out" / "handbook"
    page = (site / "tests" / "c_bad.html").read_text(encoding="utf-8")
    assert "Invalid file" in page and "twelve mA" in page and "line 12" in page
    assert "could not be judged (1)" in (site / "index.html").read_text(encoding="utf-8")
    assert "c_bad.html" in (site / "failures.html").read_text(encoding="utf-8")
    assert _embedded(page) == (ev / "results/c/bad.yaml").read_bytes()


def _embedded(page: str) -> bytes:
    """The bytes a test page offers for download (its data: link)."""
    found = re.search(r'href="data:application/octet-stream;base64,([A-Za-z0-9+/=]*)"', page)
    assert found, "the page has no download link for its file"
    return base64.b64decode(found.group(1), validate=True)


def test_every_test_page_carries_its_file_exactly_as_read(tmp_path):
    """Reference: hashlib's SHA-256 and base64 decoding of the evidence files themselves. Each page's
    download link holds the file's bytes, the page shows their SHA-256, and a UTF-8 file is shown as text
    (escaped); a file that is not UTF-8 is offered for download only."""
    latin = result_yaml(asset="T-CT3", as_found=[("50 %", "12.01 mA")])
    latin = latin.replace("technician: ", "technician: Jos\u00e9 ")
    ev = _fleet(tmp_path / "ev", **{"c/latin.yaml": "", "c/binary.yaml": ""})
    (ev / "results/c/latin.yaml").write_bytes(latin.encode("latin-1"))
    (ev / "results/c/binary.yaml").write_bytes(b"\x00\x01\x02 not text \xff")
    main(["run", str(ev), "--out", str(tmp_path / "out")])
    site = tmp_path / "out" / "handbook"
    pages = sorted((site / "tests").glob("*.html"))
    assert len(pages) == len(list((ev / "results").rglob("*.*")))
    for page_path in pages:
        page = page_path.read_text(encoding="utf-8")
        source = re.search(r"<dt>File</dt><dd>([^<]*)</dd>", page).group(1)
        raw = (ev / html.unescape(source)).read_bytes()
        assert _embedded(page) == raw, source
        assert hashlib.sha256(raw).hexdigest() in page, source
        shown = re.search(r"<pre>(.*?)</pre>", page, re.S)
        if page_path.stem in ("c_latin", "c_binary"):
            assert shown is None, "a file that is not UTF-8 is not shown as text"
        else:
            assert html.unescape(shown.group(1)) == raw.decode("utf-8"), source
    assert not (site / "files").exists(), "no separate copies"


def test_files_whose_names_clash_each_keep_their_own_page(tmp_path, capsys):
    """Evidence is never hidden: two result files named alike but for their extension (``x.yaml`` and
    ``x.yml``) are two tests, and ids that make the same safe file name (``a b`` and ``a_b``) get two
    pages. Each page carries its own file (the bytes in its download link, checked with base64 and the
    files themselves); each clash of names gets a warning; the run is not stopped."""
    ev = write_evidence(tmp_path / "ev", {
        "x/T-CT1_a.yaml": result_yaml(date="2026-01-10", as_found=good_points(0.01)),
        "x/T-CT1_a.yml": result_yaml(date="2026-02-10", as_found=good_points(0.02)),
        "x/a b.yaml": result_yaml(date="2026-03-10", as_found=good_points(0.03)),
        "x/a_b.yaml": result_yaml(date="2026-04-10", as_found=good_points(0.04))})
    code = main(["run", str(ev), "--out", str(tmp_path / "out")])
    text = capsys.readouterr().out.replace("\n  ", " ")
    assert code == 0, text
    pages = sorted((tmp_path / "out" / "handbook" / "tests").glob("*.html"))
    carried = sorted(_embedded(p.read_text(encoding="utf-8")) for p in pages)
    assert carried == sorted(p.read_bytes() for p in (ev / "results").rglob("*.y*ml"))
    for rel, other in (("x/T-CT1_a.yaml", "x/T-CT1_a.yml"), ("x/T-CT1_a.yml", "x/T-CT1_a.yaml")):
        assert f"results/{rel}: warning: results/{other} has the same name but for its extension" in text
    tests = pd.read_csv(tmp_path / "out" / "data" / "tests.csv")
    assert tests["test"].is_unique and len(tests) == 4


def test_page_names_are_unique_and_stable():
    """Safe names that coincide get a hash of their own id; names that do not coincide are left alone,
    and an id's name does not depend on what else is listed."""
    names = values.page_names(["a b", "a_b", "a/b", "plain", "x" * 200, "x" * 199 + "y"])
    assert len(set(names)) == 6
    assert names[3] == "plain"
    assert all(n.startswith("a_b-") for n in names[:3])
    assert values.page_names(["a b", "a_b"]) == names[:2]
    assert values.page_names(["a b"]) == ["a_b"]
    # on a file system that ignores case (Windows and macOS by default: common knowledge) TX-1a.html and
    # TX-1A.html are one file, so the second page copied there would replace the first
    folded = values.page_names(["TX-1a", "TX-1A", "TX-2"])
    assert len({n.casefold() for n in folded}) == 3 and folded[2] == "TX-2"
    assert [n[:5] for n in folded[:2]] == ["TX-1a", "TX-1A"]


def test_register_problems_are_shown_on_the_index(tmp_path):
    """A row of assets.csv left out for an error is said on the index page, so a reader of the handbook alone
    learns why that asset is missing from it (it was shown on the terminal only)."""
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points())},
                        assets=[CT_ASSET, {**CT_ASSET, "asset": "T-BAD", "accuracy": "-1"}])
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    page = html.unescape((tmp_path / "out" / "handbook" / "index.html").read_text(encoding="utf-8"))
    assert "Problems in the registers (1)" in page
    assert "assets.csv:3: error: accuracy '-1': accuracy term '-1' must be a non-negative number" in page
    assert "T-BAD" not in page.split("Assets by site and area")[1]  # left out of the register's table


def test_a_never_tested_asset_reads_never_tested_not_none(tmp_path):
    """An asset in the register with no valid test is overdue; its 'was due' once read 'None' on the index
    and the overdue page. No page shows the words None or nan for a missing value."""
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points())},
                        assets=[CT_ASSET, {**CT_ASSET, "asset": "T-NEW"}])
    main(["run", str(ev), "--out", str(tmp_path / "out")])
    site = tmp_path / "out" / "handbook"
    overdue = (site / "overdue.html").read_text(encoding="utf-8")
    assert "T-NEW" in overdue and "<td>never tested</td>" in overdue
    assert "— never tested</li>" in (site / "index.html").read_text(encoding="utf-8")
    for page in site.rglob("*.html"):
        text = re.sub(r"<[^>]+>", " ", page.read_text(encoding="utf-8"))
        assert not re.search(r"\b(None(?!\.)|nan|NaT)\b", text), page  # "None." is the pages' word for an empty list


def test_an_asset_whose_only_files_are_invalid_reads_no_valid_test(tmp_path):
    """Tested, but no file could be judged: not "never tested", which would misstate the evidence. The asset
    page, the overdue page and the index each say how many of its files could not be judged."""
    bad = result_yaml(asset="T-BAD", date="2099-01-01", as_found=good_points())  # in the future: invalid
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points()), "bad.yaml": bad},
                        assets=[CT_ASSET, {**CT_ASSET, "asset": "T-BAD"}, {**CT_ASSET, "asset": "T-NEW"}])
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    site = tmp_path / "out" / "handbook"
    said = "no valid test (1 result file could not be judged)"
    asset = html.unescape((site / "assets" / "T-BAD.html").read_text(encoding="utf-8"))
    assert "No valid test</span> — 1 result file could not be judged: each test's page below says why" in asset
    overdue = html.unescape((site / "overdue.html").read_text(encoding="utf-8"))
    assert f"<td>{said}</td>" in overdue and "<td>never tested</td>" in overdue  # T-NEW has no file at all
    index = html.unescape((site / "index.html").read_text(encoding="utf-8"))
    assert f"— {said}</li>" in index
    # the index names each file that could not be judged with its first error, as the terminal does
    line = index.split("results/bad.yaml</a>")[1].split("</li>")[0]
    assert "in the future" in line and "field 'date'" in line
    new = html.unescape((site / "assets" / "T-NEW.html").read_text(encoding="utf-8"))
    assert "could not be judged" not in new and "No valid test</span> — never tested" in new
