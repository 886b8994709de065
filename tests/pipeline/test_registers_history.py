"""Registers with history (issue 20): assets.csv rows with ``valid_from``, instruments.yaml certificate
histories, a reference found out of tolerance and its re-judgement.

The expected outputs rest on the linear 4-20 mA scaling (common practice: output = 4 mA + 16 mA × input /
input span) and the class index as ± that % of the 16 mA output span (IEC 60688's fiducial rule, from
memory: class 0.5 → ±0.08 mA). The evidence itself is invented plumbing, never a reference.
"""

from __future__ import annotations

import copy

import pandas as pd
import pytest
from loopledger.cli import main
from loopledger.plugins.history import traceability
from loopledger.plugins.history.reference_error import parse_error, rejudge

from tests.evidence import CT_ASSET, INSTRUMENTS, result_yaml, write_evidence


def _scaled(span_a: float, amps: list[float]) -> list[tuple[str, str]]:
    """Points at ``amps`` read exactly on a 0-``span_a`` A → 4-20 mA transducer (4 + 16 × I / span)."""
    return [(f"{a:g} A", f"{4 + 16 * a / span_a:.4f} mA") for a in amps]


def _reranged(tmp_path, rows=None, results=None):
    old = {**CT_ASSET, "input_max": 5, "valid_from": ""}
    new = {**CT_ASSET, "input_max": 1, "valid_from": "2026-03-01"}
    return write_evidence(tmp_path / "ev", results if results is not None else {
        "before.yaml": result_yaml(date="2025-06-10", as_found=_scaled(5, [0, 1.25, 2.5, 3.75, 5])),
        "after.yaml": result_yaml(date="2026-06-10", as_found=_scaled(1, [0, 0.25, 0.5, 0.75, 1])),
    }, assets=rows if rows is not None else [old, new])


def test_a_reranged_asset_is_judged_by_the_row_in_force_on_each_date(tmp_path, run_folder):
    ctx = run_folder(_reranged(tmp_path))
    verdicts = ctx.tests.set_index("source_file")["verdict"].to_dict()
    # 2.5 A on the 0-5 A row is 4 + 16 × 0.5 = 12 mA, read 12.0000 mA: error 0. Under the 0-1 A row the same
    # 2.5 A would be 4 + 16 × 2.5 = 44 mA expected and fail; so a pass shows the old row was used.
    assert verdicts == {"results/before.yaml": "pass", "results/after.yaml": "pass"}
    pts = ctx.points.set_index(["source_file", "point"])
    assert pts.at[("results/before.yaml", 3), "expected"] == pytest.approx(12.0)
    assert pts.at[("results/after.yaml", 3), "expected"] == pytest.approx(12.0)  # 0.5 A of 1 A
    # the row used: assets.csv line 2 (the 0-5 A row, from the beginning), line 3 from 2026-03-01
    rows = ctx.points.groupby("source_file")[["asset_row", "valid_from"]].first()
    assert int(rows.at["results/before.yaml", "asset_row"]) == 2 and pd.isna(rows.at["results/before.yaml",
                                                                                       "valid_from"])
    assert int(rows.at["results/after.yaml", "asset_row"]) == 3
    assert rows.at["results/after.yaml", "valid_from"] == "2026-03-01"
    # the asset's current row (sheet, due dates) is the latest one
    assert float(ctx.assets.at["T-CT1", "input_max"]) == 1.0


def test_the_day_a_row_comes_into_force_uses_it(tmp_path, run_folder):
    ev = _reranged(tmp_path, results={"on.yaml": result_yaml(date="2026-03-01", as_found=_scaled(1, [0.5]))})
    ctx = run_folder(ev)
    assert ctx.tests.at[0, "verdict"] == "pass"
    assert int(ctx.points.at[0, "asset_row"]) == 3


def test_points_csv_names_the_row_and_certificates(tmp_path):
    ev = _reranged(tmp_path)
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--no-handbook"]) == 0
    pts = pd.read_csv(tmp_path / "out" / "data" / "points.csv").groupby("source_file").first()
    assert pts.at["results/before.yaml", "asset_row"] == 2
    # the fixture's instruments have flat calibrated/due: no certificate number to name
    assert pd.isna(pts.at["results/before.yaml", "certificates"])


def test_two_rows_of_one_asset_from_the_same_date_are_an_error(tmp_path, run_folder):
    rows = [{**CT_ASSET, "valid_from": "2026-03-01"}, {**CT_ASSET, "input_max": 5, "valid_from": "2026-03-01"}]
    ctx = run_folder(_reranged(tmp_path, rows=rows))
    said = [(f.line, f.field) for f in ctx.findings if f.file == "assets.csv" and f.severity == "error"]
    assert said == [(2, "asset"), (3, "asset")]
    assert not ctx.tests["valid"].any()  # neither row can be trusted for this asset's tests


def test_a_test_before_the_first_row_is_an_error_naming_both_dates(tmp_path, run_folder):
    rows = [{**CT_ASSET, "valid_from": "2026-01-01"}]
    ev = _reranged(tmp_path, rows=rows, results={"early.yaml": result_yaml(date="2025-12-31",
                                                                           as_found=_scaled(1, [0.5]))})
    ctx = run_folder(ev)
    errors = [f for f in ctx.findings if f.file == "results/early.yaml" and f.severity == "error"]
    assert len(errors) == 1 and "2025-12-31" in errors[0].message and "2026-01-01" in errors[0].message
    assert errors[0].line == 2 and errors[0].field == "date"
    assert ctx.tests.at[0, "verdict"] == "invalid"


# --- instruments.yaml: certificate histories ------------------------------------------------------------

def _history() -> dict:
    inst = copy.deepcopy(INSTRUMENTS)
    meter = inst["DMM-1"]
    del meter["calibrated"], meter["due"]
    meter["calibrations"] = [
        {"date": "2024-01-10", "due": "2025-01-10", "certificate": "C-24"},
        # a gap: nothing from 2025-01-10 to 2025-03-01
        {"date": "2025-03-01", "due": "2026-03-01", "certificate": "C-25"},
        {"date": "2026-03-02", "due": "2027-03-02", "certificate": "C-26", "as_found": "fail",
         "remarks": "20 mA range read 0.004 mA low"}]
    return inst


def _history_evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2023-06-01", as_found=_scaled(1, [0, 1])),  # before the first certificate
        "b.yaml": result_yaml(date="2024-06-01", as_found=_scaled(1, [0, 1])),  # C-24
        "c.yaml": result_yaml(date="2025-02-01", as_found=_scaled(1, [0, 1])),  # in the gap: C-24 past due
        "d.yaml": result_yaml(date="2025-06-01", as_found=[("0 A", "4.0000 mA"), ("1 A", "20.0780 mA")]),  # C-25
        "e.yaml": result_yaml(date="2026-06-01", as_found=_scaled(1, [0, 1])),  # C-26
    }, instruments=_history())


def test_each_test_is_judged_against_the_certificate_in_force(tmp_path, run_folder):
    ctx = run_folder(_history_evidence(tmp_path))
    used = traceability.usage(ctx)
    meter = used[used["role"] == "meter"].set_index("test")
    assert meter["certificate"].to_dict() == {"a": "", "b": "C-24", "c": "C-24", "d": "C-25", "e": "C-26"}
    assert meter.at["a", "status"].startswith("before the earliest calibration on file (2024-01-10)")
    assert "not recorded" in meter.at["a", "status"]
    # only the test before the history begins says a certificate is not recorded; the gap is a lapse
    assert [t for t, s in meter["status"].items() if "not recorded" in s] == ["a"]
    assert meter.at["c", "status"] == "OUT OF CALIBRATION: due 2025-01-10 (certificate C-24)"
    assert meter.at["d", "status"] == "in calibration until 2026-03-01 (certificate C-25)"
    flags = ctx.tests.set_index("test")["reference_out_of_cal"].to_dict()
    assert flags == {"a": False, "b": False, "c": True, "d": False, "e": False}
    certs = ctx.tests.set_index("test")["certificates"]
    assert certs["d"] == "DMM-1:C-25"  # SRC-1 has the flat form: no certificate number
    # the instrument's current dates are its latest certificate's
    assert str(ctx.instruments.at["DMM-1", "due"])[:10] == "2027-03-02"


def test_a_reference_found_out_lists_the_tests_since_its_previous_good_calibration(tmp_path, run_folder, capsys):
    ctx = run_folder(_history_evidence(tmp_path))
    table, since = traceability.impacted(ctx, "DMM-1", None)
    # C-26 (2026-03-02) found it out: the tests from C-25 (2025-03-01) up to then
    assert str(since) == "2025-03-01" and list(table["test"]) == ["d"]
    found = ctx.stash.get(traceability.keys.REFERENCES_FOUND_OUT)
    assert found.to_dict("records") == [{"instrument": "DMM-1", "date": "2026-03-02", "certificate": "C-26",
                                         "remarks": "20 mA range read 0.004 mA low", "since": "2025-03-01",
                                         "n_tests": 1}]
    assert "found out of tolerance at its next calibration, 2026-03-02" in \
        ctx.tests.set_index("test").at["d", "reference_issues"]


def test_rejudging_with_the_found_error_worked_by_hand(tmp_path, run_folder):
    ctx = run_folder(_history_evidence(tmp_path))
    # by hand: test d read 20.0780 mA at 1 A (expected 4 + 16 × 1/1 = 20 mA): error +0.0780 mA, within the
    # class 0.5 limit ±0.08 mA (0.5 % × 16 mA): pass. The meter read 0.004 mA low, so the true current was
    # 20.0780 + 0.004 = 20.0820 mA: error +0.0820 mA > 0.08 mA: fail, and the test's verdict pass → fail.
    points, verdicts = rejudge(ctx, "DMM-1", ["d"], parse_error("-0.004 mA"))
    assert len(points) == 1
    p = points.iloc[0]
    assert (p["phase"], p["input_pct"]) == ("as_found", 100.0)
    assert p["error_before"] == pytest.approx(0.078) and p["error_after"] == pytest.approx(0.082)
    assert (p["decision_before"], p["decision_after"]) == ("pass", "fail")
    assert verdicts.to_dict("records") == [{"test": "d", "verdict_before": "pass", "verdict_after": "fail"}]
    # by hand, a % of reading error: +0.02 %rdg high means 20.0780 / 1.0002 ≈ 20.0740 mA, error +0.0740: the
    # decision stays pass (the reading method 'direct' has d measured / d reading = 1)
    points, verdicts = rejudge(ctx, "DMM-1", ["d"], parse_error("+0.02 %rdg"))
    assert points.empty and verdicts.empty


def test_cli_impacted_with_an_error(tmp_path, capsys):
    ev = _history_evidence(tmp_path)
    assert main(["impacted", "DMM-1", "--evidence", str(ev), "--error", "-0.004 mA"]) == 0
    out = capsys.readouterr().out
    assert "found out of tolerance at its calibration of 2026-03-02 (certificate C-26)" in out
    assert "Tests that used DMM-1 since 2025-03-01 up to 2026-03-02: 1" in out
    assert "1 point decision(s) and 1 verdict(s) would change" in out
    assert "d: verdict pass → fail" in out
    assert main(["impacted", "DMM-1", "--evidence", str(ev), "--error", "a lot"]) == 3


def test_the_index_names_the_reference_found_out(tmp_path):
    ev = _history_evidence(tmp_path)
    main(["run", str(ev), "--out", str(tmp_path / "out")])
    index = (tmp_path / "out" / "handbook" / "index.html").read_text(encoding="utf-8")
    assert "References found out of tolerance at calibration (1)" in index
    assert "loopledger impacted DMM-1" in index
    page = next((tmp_path / "out" / "handbook" / "tests").glob("d*.html")).read_text(encoding="utf-8")
    assert "C-25" in page and "Register row used" in page
    listed = (tmp_path / "out" / "handbook" / "instruments.html").read_text(encoding="utf-8")
    history = listed[listed.index('id="i-DMM-1"'):listed.index('id="i-SH-100"')]
    assert history.index("C-24") < history.index("C-25") < history.index("C-26")  # oldest first
    assert "out of tolerance" in history and "20 mA range read 0.004 mA low" in history


def test_the_burden_check_uses_the_row_in_force_too(tmp_path, run_folder):
    # a self-powered output drives up to max_load_ohm (the datasheet value, common practice): 750 Ω on the old
    # row, 500 Ω on the new one
    old = {**CT_ASSET, "input_max": 5, "max_load_ohm": 750, "valid_from": ""}
    new = {**CT_ASSET, "input_max": 1, "max_load_ohm": 500, "valid_from": "2026-03-01"}
    ctx = run_folder(_reranged(tmp_path, rows=[old, new]))
    limits = ctx.tests.set_index("source_file")["limit_ohm"]
    assert limits["results/before.yaml"] == pytest.approx(750.0)
    assert limits["results/after.yaml"] == pytest.approx(500.0)
