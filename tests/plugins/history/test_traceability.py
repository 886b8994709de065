"""Reference traceability and `loopledger impacted`.

Rule checked (common practice of calibration management): a reference
instrument may be relied on from its calibration date up to its due date; a
test after the due date was made with an instrument out of calibration.
"""

from __future__ import annotations

import copy
import datetime as dt

import pytest
from loopledger.cli import main
from loopledger.plugins.history import traceability

from tests.evidence import INSTRUMENTS, batch_and_alone, good_points, result_yaml, write_evidence


def _instruments() -> dict:
    inst = copy.deepcopy(INSTRUMENTS)
    inst["DMM-2"] = copy.deepcopy(inst["DMM-1"])
    inst["DMM-2"].update({"calibrated": "2025-03-01", "due": "2026-03-01"})
    return inst


def _evidence(tmp_path):
    meter2 = {"instruments": {"source": "SRC-1", "meter": "DMM-2"}}
    return write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2026-02-10", as_found=good_points(0.02), **meter2),
        "b.yaml": result_yaml(date="2026-04-20", as_found=good_points(0.04), **meter2),
        "c.yaml": result_yaml(date="2026-05-05", as_found=good_points(0.01)),  # DMM-1
        "d.yaml": result_yaml(date="2025-01-15", as_found=good_points(0.01), **meter2),
    }, instruments=_instruments())


def test_due_date_between_two_tests_flags_exactly_the_later(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    flags = ctx.tests.set_index("source_file")["reference_out_of_cal"].to_dict()
    assert flags == {"results/a.yaml": False, "results/b.yaml": True, "results/c.yaml": False,
                     "results/d.yaml": False}
    issues = ctx.tests.set_index("source_file")["reference_issues"]
    assert "DMM-2 was past its calibration due date 2026-03-01" in issues["results/b.yaml"]
    warnings = [f for f in ctx.findings if f.severity == "warning" and f.code == "reference-past-due"]
    assert [(f.file, f.field) for f in warnings] == [("results/b.yaml", "instruments.meter")]


def test_use_before_the_calibration_on_record_is_noted_not_flagged_out(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    row = ctx.tests.set_index("source_file").loc["results/d.yaml"]
    assert not row["reference_out_of_cal"]
    assert "before its earliest calibration on record (2025-03-01)" in row["reference_issues"]


def test_each_test_page_of_a_batch_lists_its_own_instruments(tmp_path, run_folder):
    pages = batch_and_alone(traceability.page_rows, run_folder(_evidence(tmp_path)), ["a", "b", "c", "d"])
    b, c = pages["b"], pages["c"]
    # b: DMM-2 (due 2026-03-01) used on 2026-04-20; c: DMM-1 (2026-01-01 to 2027-01-01) on 2026-05-05
    # the flat calibrated/due name no certificate
    assert b == [["meter", "DMM-2", "—", "2025-03-01", "2026-03-01", "PAST DUE on the test date"],
                 ["source", "SRC-1", "—", "2026-01-01", "2027-01-01", "within calibration"]]
    assert c[0] == ["meter", "DMM-1", "—", "2026-01-01", "2027-01-01", "within calibration"]
    assert pages["d"][0][5] == "before the earliest calibration on record"  # 2025-01-15, before 2025-03-01


def test_impacted_lists_exactly_the_tests_that_used_it(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    table, since = traceability.impacted(ctx, "DMM-2", None)
    assert since == dt.date(2025, 3, 1)  # default: its calibration on record
    assert list(table["source_file"]) == ["results/a.yaml", "results/b.yaml"]
    assert list(table["role"]) == ["meter", "meter"]
    # closeness to the limit: 0.04 mA of a 0.08 mA acceptance limit (class 0.5, simple rule) = 50 %
    assert table.set_index("source_file").at["results/b.yaml", "worst_pct"] == pytest.approx(50.0)
    everything, _ = traceability.impacted(ctx, "DMM-2", dt.date(2000, 1, 1))
    assert sorted(everything["source_file"]) == ["results/a.yaml", "results/b.yaml", "results/d.yaml"]


def test_cli_impacted(tmp_path, capsys):
    ev = _evidence(tmp_path)
    assert main(["impacted", "DMM-2", "--evidence", str(ev), "--since", "2026-03-01"]) == 0
    out = capsys.readouterr().out
    assert "Tests that used DMM-2 since 2026-03-01: 1" in out
    assert "results/b.yaml" in out and "results/a.yaml" not in out and "results/c.yaml" not in out
    assert "as-found 50 %: 50 %" in out
    assert main(["impacted", "NOPE-9", "--evidence", str(ev)]) == 3


def test_cli_run_flags_the_test_in_tests_csv(tmp_path):
    import pandas as pd

    ev = _evidence(tmp_path)
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 0
    tests = pd.read_csv(tmp_path / "out" / "data" / "tests.csv").set_index("source_file")
    assert bool(tests.at["results/b.yaml", "reference_out_of_cal"])
    assert not bool(tests.at["results/a.yaml", "reference_out_of_cal"])
    page = next((tmp_path / "out" / "handbook" / "tests").glob("b*.html")).read_text(encoding="utf-8")
    assert "PAST DUE on the test date" in page


def test_a_meter_with_no_due_date_is_never_called_within_calibration(tmp_path, run_folder):
    """A calibration date without a due date says nothing of until when the meter could be relied on (the
    rule in this module's docstring needs both ends). The test page, the reference issues and the
    instruments page (traceability.usage) must all say so; they once disagreed, the test page reading
    'within calibration'."""
    inst = _instruments()
    inst["DMM-2"].pop("due")
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2026-02-10", as_found=good_points(0.02),
                              instruments={"source": "SRC-1", "meter": "DMM-2"}),
        "c.yaml": result_yaml(date="2026-05-05", as_found=good_points(0.01)),  # DMM-1, with both dates
    }, instruments=inst)
    ctx = run_folder(ev)
    page = {row[0]: row[-1] for row in traceability.page_rows(ctx, ["a"])["a"]}
    assert page["meter"] == "no calibration due date on record"
    assert page["source"] == "within calibration"
    issues = ctx.tests.set_index("source_file")["reference_issues"]
    assert "meter DMM-2 has no calibration due date" in issues["results/a.yaml"]
    assert issues["results/c.yaml"] == ""
    words = traceability.usage(ctx).set_index(["test", "role"])["status"]
    assert words[("a", "meter")] == "no calibration due date recorded"
    assert words[("c", "meter")].startswith("in calibration until 2027-01-01")
