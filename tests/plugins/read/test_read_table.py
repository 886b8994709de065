"""Spreadsheet result files (CSV and .xlsx) give the same judged points as the YAML form."""

from __future__ import annotations

import pandas as pd
import pytest

from tests.evidence import good_points, result_yaml, write_evidence

HEADER = "asset,date,technician,connection,method,injection,ambient_c,source,meter,shunt,phase,input,reading"


def _csv_rows(points, phase="as_found", method="direct"):
    shunt = "SH-100" if method == "shunt" else ""
    return [f"T-CT1,2026-04-14,T. Tester,standalone,{method},secondary,23.0,SRC-1,DMM-1,{shunt},{phase},{i},{r}"
            for i, r in points]


def _judged(ctx):
    return ctx.points.sort_values(["phase", "point"])[["phase", "point", "input_pct", "measured", "decision"]]


def test_csv_matches_yaml(tmp_path, run_folder):
    pts = good_points(0.02, shunt=True)
    yaml_ctx = run_folder(write_evidence(tmp_path / "y", {"t.yaml": result_yaml(method="shunt", as_found=pts)}))
    csv_text = "\n".join([HEADER, *_csv_rows(pts, method="shunt")]) + "\n"
    csv_ctx = run_folder(write_evidence(tmp_path / "c", {"t.csv": csv_text}))
    assert csv_ctx.findings == []
    pd.testing.assert_frame_equal(_judged(yaml_ctx).reset_index(drop=True), _judged(csv_ctx).reset_index(drop=True))


def test_csv_with_bom_and_windows_line_endings_is_accepted(tmp_path, run_folder):
    text = "\ufeff" + "\r\n".join([HEADER, *_csv_rows(good_points())]) + "\r\n"
    ev = write_evidence(tmp_path / "ev", {})
    (ev / "results").mkdir()
    (ev / "results" / "t.csv").write_bytes(text.encode("utf-8"))
    ctx = run_folder(ev)
    assert ctx.findings == [] and ctx.tests["verdict"].tolist() == ["pass"]


def test_csv_unit_columns_supply_units_for_bare_numbers(tmp_path, run_folder):
    head = "asset,date,technician,connection,method,source,meter,phase,input,input_unit,reading,reading_unit"
    rows = ["T-CT1,2026-04-14,T. Tester,standalone,direct,SRC-1,DMM-1,as_found,0.5,A,12.004,mA"]
    ctx = run_folder(write_evidence(tmp_path / "ev", {"t.csv": "\n".join([head, *rows]) + "\n"}))
    assert ctx.points["input_pct"].iloc[0] == pytest.approx(50.0)
    assert ctx.points["measured"].iloc[0] == pytest.approx(12.004)


def test_header_field_that_changes_between_rows_is_refused(tmp_path, run_folder):
    rows = _csv_rows(good_points())
    rows[2] = rows[2].replace("2026-04-14", "2026-04-15")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"t.csv": "\n".join([HEADER, *rows]) + "\n"}))
    errs = [f for f in ctx.findings if f.severity == "error"]
    assert errs[0].field == "date" and errs[0].line == 4 and "same on every row" in errs[0].message


def test_xlsx_first_sheet_is_read(tmp_path, run_folder):
    rows = [r.split(",") for r in _csv_rows(good_points(0.01))]
    frame = pd.DataFrame(rows, columns=HEADER.split(","))
    ev = write_evidence(tmp_path / "ev", {})
    (ev / "results").mkdir()
    frame.to_excel(ev / "results" / "t.xlsx", index=False, engine="openpyxl")
    ctx = run_folder(ev)
    assert ctx.findings == []
    assert ctx.points.sort_values("point")["error"].round(6).tolist() == [0.01] * 5


def test_xlsx_date_cells_are_read_as_dates(tmp_path, run_folder):
    """A spreadsheet's date column holds date cells, not text; such a cell is read as YYYY-MM-DD (the
    schema check takes exactly that), and the test is judged as its text twin is."""
    import datetime as dt

    rows = [r.split(",") for r in _csv_rows(good_points(0.01))]
    frame = pd.DataFrame(rows, columns=HEADER.split(","))
    frame["date"] = [dt.datetime.strptime(d, "%Y-%m-%d") for d in frame["date"]]
    ev = write_evidence(tmp_path / "ev", {})
    (ev / "results").mkdir()
    frame.to_excel(ev / "results" / "t.xlsx", index=False, engine="openpyxl")
    ctx = run_folder(ev)
    assert ctx.findings == []
    assert ctx.tests["date"].tolist() == ["2026-04-14"] and ctx.tests["verdict"].tolist() == ["pass"]
