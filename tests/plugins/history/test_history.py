"""History: every asset's tests in date order, as-found / as-left matched by input % of range.

The checks are arithmetic on invented plumbing data: error in % of span =
error / span × 100 (the fiducial convention, common practice), with the
fixture's 4-20 mA output (span 16 mA).
"""

from __future__ import annotations

import numpy as np
import pytest
from loopledger import keys
from loopledger.cli import main
from loopledger.plugins.history import history

from tests.evidence import CT_ASSET, batch_and_alone, good_points, result_yaml, write_evidence


def test_points_written_in_amps_and_percent_are_one_test_point(tmp_path, run_folder):
    in_amps = [(f"{pct / 100:g} A", f"{4 + 16 * pct / 100 + 0.016:.4f} mA") for pct in (0, 25, 50, 75, 100)]
    ev = write_evidence(tmp_path / "ev", {
        "b.yaml": result_yaml(date="2025-05-01", as_found=in_amps),
        "a.yaml": result_yaml(date="2024-05-01", as_found=good_points(0.096), as_left=good_points(0.008)),
    })
    ctx = run_folder(ev)
    hist = ctx.stash[keys.HISTORY]
    assert list(hist["date"].unique()) == ["2024-05-01", "2025-05-01"]  # date order, not file order
    assert sorted(hist["input_pct"].unique()) == [0, 25, 50, 75, 100]
    at50 = hist[hist["input_pct"] == 50].set_index("date")
    assert at50.at["2024-05-01", "as_found_pct"] == pytest.approx(0.096 / 16 * 100)
    assert at50.at["2024-05-01", "as_left_pct"] == pytest.approx(0.008 / 16 * 100)
    assert np.isnan(at50.at["2025-05-01", "as_left_pct"])
    assert at50.at["2025-05-01", "as_found_pct"] == pytest.approx(0.016 / 16 * 100)
    assert at50.at["2024-05-01", "verdict"] == "adjusted"
    assert at50.at["2024-05-01", "as_found_ratio"] == pytest.approx(0.096 / 0.08)  # class 0.5: MPE 0.08 mA


def test_up_and_down_readings_at_one_input_average(tmp_path, run_folder):
    import yaml

    doc = yaml.safe_load(result_yaml(as_found=[("0 %", "4.010 mA")]))
    doc["as_found"] = [{"input": i, "reading": r, "direction": d} for i, r, d in (
        ("0 %", "4.010 mA", "up"), ("50 %", "12.020 mA", "up"), ("100 %", "20.000 mA", "up"),
        ("50 %", "12.060 mA", "down"), ("0 %", "4.010 mA", "down"))]
    ev = write_evidence(tmp_path / "ev", {"a.yaml": yaml.safe_dump(doc)})
    hist = run_folder(ev).extras["history"].set_index("input_pct")
    assert hist.at[50.0, "as_found_pct"] == pytest.approx(0.040 / 16 * 100)
    assert hist.at[50.0, "as_found_ratio"] == pytest.approx(0.060 / 0.08)  # the worst reading still shows


def test_cli_asset_page_shows_the_history(tmp_path):
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2024-05-01", as_found=good_points(0.096), as_left=good_points(0.008)),
        "b.yaml": result_yaml(date="2025-05-01", as_found=good_points(0.016))})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 0
    page = (tmp_path / "out" / "handbook" / "assets" / "T-CT1.html").read_text(encoding="utf-8")
    assert "Test history" in page
    assert "+0.600 / +0.050" in page  # 2024 at every point: found 0.096 mA, left 0.008 mA of 16 mA
    assert page.index("2025-05-01") < page.index("2024-05-01")  # newest first


def test_set_points_a_little_off_nominal_are_one_test_point(tmp_path, run_folder):
    """0.248 A on a 0-1 A input is 24.8 % of range: matched with 25 % (nearest 0.5 %)."""
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2024-05-01", as_found=[("0.248 A", f"{4 + 16 * 0.248 + 0.01:.4f} mA")]),
        "b.yaml": result_yaml(date="2025-05-01", as_found=[("25 %", "8.0200 mA")])})
    hist = run_folder(ev).extras["history"]
    assert list(hist["input_pct"]) == [25.0, 25.0]
    assert list(hist["as_found_pct"].round(6)) == [round(0.01 / 16 * 100, 6), round(0.02 / 16 * 100, 6)]


def test_each_asset_page_of_a_batch_shows_its_own_tests_and_points(tmp_path, run_folder):
    """Error in % of span = error / 16 mA × 100: +0.096 mA is +0.600 %, +0.008 mA +0.050 %, +0.016 mA +0.100 %."""
    other = {**CT_ASSET, "asset": "T-CT2"}
    three = [(f"{pct} %", f"{4 + 16 * pct / 100 + 0.016:.4f} mA") for pct in (0, 50, 100)]
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2024-05-01", as_found=good_points(0.096), as_left=good_points(0.008)),
        "b.yaml": result_yaml(date="2025-05-01", as_found=good_points(0.016)),
        "c.yaml": result_yaml(asset="T-CT2", date="2025-02-01", as_found=three)},
        assets=[CT_ASSET, other])
    pages = batch_and_alone(history.ll_asset_sections, run_folder(ev), ["T-CT1", "T-CT2"], arg="assets")
    (one,), (two,) = pages["T-CT1"], pages["T-CT2"]
    assert one.columns[4:] == [f"{p} %: found / left" for p in (0, 25, 50, 75, 100)]
    assert [row[0] for row in one.rows] == ["2025-05-01", "2024-05-01"]  # newest first
    assert one.rows[1][4:] == ["+0.600 / +0.050"] * 5
    assert one.rows[0][4:] == ["+0.100 / —"] * 5  # no as-left in 2025
    assert two.columns[4:] == ["0 %: found / left", "50 %: found / left", "100 %: found / left"]
    assert two.rows == [["2025-02-01", "pass", "T. Tester", "direct, SRC-1, DMM-1", *["+0.100 / —"] * 3]]
