"""``loopledger sheet ASSET --fill FILE`` (issue 23, item 1): plan -> fill -> judge, in xlsx, csv and yaml.

The windows are worked by hand: the fixture's current transducer maps 0..1 A onto 4..20 mA (the linear
4-20 mA scaling, common practice), so 0.25 A gives 8 mA; its accuracy class 0.5 is ±0.5 % of the 16 mA
span, ±0.08 mA (class index as % of output span, IEC 60770-1 style, common practice). Under the simple
acceptance rule (ILAC-G8:2019 §4.2.1, no guard band) a reading is accepted within expected ± 0.08 mA, and
under the guarded rule with w = U within expected ± (0.08 mA − U) (ILAC-G8:2019 §4.2.2).
"""

from __future__ import annotations

import csv
import io
import re
import shutil

import openpyxl
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence

EXPECTED = [4.0, 8.0, 12.0, 16.0, 20.0]  # mA at 0, 25, 50, 75, 100 % (hand-worked, see above)
#: the readings typed on site: the third is 0.09 mA high, outside ±0.08 mA; the rest are inside
TYPED = [4.01, 8.07, 12.09, 15.95, 20.0]
PREDICTED = ["pass", "pass", "fail", "pass", "pass"]


def plan(tmp_path, suffix, *extra):
    ev = write_evidence(tmp_path / "ev", {})
    (ev / "results").mkdir(exist_ok=True)
    target = tmp_path / f"T-CT1{suffix}"
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--meter", "DMM-1", "--source", "SRC-1",
                 "--fill", str(target), *extra]) == 0
    return ev, target


def fill_xlsx(path, out):
    book = openpyxl.load_workbook(path)
    ws = book["results"]
    col = {c.value: c.column for c in ws[1]}
    ws.cell(2, col["date"]).value = "2026-11-20"
    ws.cell(2, col["technician"]).value = "T. Tester"
    ws.cell(2, col["ambient_c"]).value = 22.5
    for i, value in enumerate(TYPED):
        ws.cell(i + 2, col["reading"]).value = value
    book.save(out)


def fill_csv(path, out):
    rows = list(csv.DictReader(io.StringIO(path.read_text(encoding="utf-8"))))
    rows[0].update(date="2026-11-20", technician="T. Tester", ambient_c="22.5")
    for row, value in zip(rows, TYPED, strict=True):
        row["reading"] = f"{value}"
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(rows[0]))
    writer.writeheader()
    writer.writerows(rows)
    out.write_text(buffer.getvalue(), encoding="utf-8")


def fill_yaml(path, out):
    text = path.read_text(encoding="utf-8")
    text = text.replace("\ndate:\n", "\ndate: 2026-11-20\n").replace("\ntechnician:\n", "\ntechnician: T. Tester\n")
    readings = iter(TYPED)
    text = re.sub(r"reading: +#", lambda m: f"reading: {next(readings)} mA  #", text)
    out.write_text(text, encoding="utf-8")


FILLERS = {".xlsx": fill_xlsx, ".csv": fill_csv, ".yaml": fill_yaml}


def windows(path):
    """(expected, from, to) of each planned point as the fill-in file shows them."""
    if path.suffix == ".yaml":
        found = re.findall(r"expect ([\d.]+) mA; accepted ([\d.]+) … ([\d.]+) mA", path.read_text(encoding="utf-8"))
        return [tuple(float(v) for v in f) for f in found]
    if path.suffix == ".csv":
        rows = csv.DictReader(io.StringIO(path.read_text(encoding="utf-8")))
        return [(float(r["sheet_expected"]), float(r["sheet_accept_from"]), float(r["sheet_accept_to"])) for r in rows]
    ws = openpyxl.load_workbook(path)["results"]
    col = {c.value: c.column - 1 for c in ws[1]}
    return [(r[col["sheet_expected"]], r[col["sheet_accept_from"]], r[col["sheet_accept_to"]])
            for r in ws.iter_rows(min_row=2, values_only=True)]


@pytest.mark.parametrize("suffix", [".xlsx", ".csv", ".yaml"])
def test_plan_fill_judge_gives_the_decisions_the_sheet_predicted(tmp_path, run_folder, suffix):
    ev, blank = plan(tmp_path, suffix)
    for (expect, low, high), hand in zip(windows(blank), EXPECTED, strict=True):
        assert (expect, low, high) == pytest.approx((hand, hand - 0.08, hand + 0.08))
    predicted = ["pass" if low <= typed <= high else "fail"
                 for (_, low, high), typed in zip(windows(blank), TYPED, strict=True)]
    assert predicted == PREDICTED
    FILLERS[suffix](blank, ev / "results" / f"T-CT1_2026-11-20{suffix}")
    ctx = run_folder(ev)
    assert not [f for f in ctx.findings if f.severity == "error" and "fail:" not in f.message]
    points = ctx.points.sort_values("point")
    assert list(points["decision"]) == PREDICTED
    assert list(points["reading"]) == pytest.approx(TYPED)


@pytest.mark.parametrize("suffix", [".xlsx", ".csv", ".yaml"])
def test_a_file_still_blank_is_reported_as_not_filled_in(tmp_path, run_folder, suffix):
    ev, blank = plan(tmp_path, suffix)
    shutil.copy(blank, ev / "results" / blank.name)
    ctx = run_folder(ev)
    errors = [f for f in ctx.findings if f.severity == "error"]
    assert len(errors) == 1 and errors[0].message.startswith("not filled in")
    assert errors[0].file == f"results/{blank.name}"


def test_the_xlsx_unlocks_only_the_cells_to_type_and_flags_a_reading_outside_its_window(tmp_path):
    _, path = plan(tmp_path, ".xlsx")
    ws = openpyxl.load_workbook(path)["results"]
    col = {c.value: c.column_letter for c in ws[1]}
    assert ws.protection.sheet
    unlocked = {c.coordinate for row in ws.iter_rows() for c in row if not c.protection.locked}
    readings = {f"{col['reading']}{n}" for n in range(2, 7)}
    assert unlocked == readings | {f"{col[c]}2" for c in ("date", "technician", "ambient_c")}
    assert all(ws[c].value is None for c in unlocked)
    assert all(ws[f"{col['reading_unit']}{n}"].value == "mA" for n in range(2, 7))  # the unit in its own column
    rules = [r for rng in ws.conditional_formatting for r in rng.rules]
    assert [(r.type, r.operator) for r in rules] == [("cellIs", "notBetween")]
    assert ws.page_setup.fitToHeight == 1 and ws.page_setup.fitToWidth == 1
    assert ws.sheet_properties.pageSetUpPr.fitToPage


def test_guarded_windows_are_the_mpe_less_the_planned_rigs_u(tmp_path):
    """ILAC-G8:2019 §4.2.2 with w = U: the sheet's window is MPE − U of the planned rig at each point."""
    from loopledger import runner
    from loopledger.host import get_plugin_manager
    from loopledger.plugins.sheet.plan import sheet_data

    ev = write_evidence(tmp_path / "ev", {})
    ctx = runner.run(runner.RunOptions(ev, overrides={"decision": {"rule": "guarded"}}), get_plugin_manager())
    rows = sheet_data(ctx.page_view(), "T-CT1", {"method": "direct", "meter": "DMM-1", "source": "SRC-1",
                                                 "connection": "standalone"})["rows"]
    assert len(rows) == 5
    for r in rows:
        assert r["U"] > 0 and r["accept"] == pytest.approx(0.08 - r["U"])
        assert (r["low"], r["high"]) == pytest.approx((r["expected"] - r["accept"], r["expected"] + r["accept"]))


def test_display_read_windows_are_in_display_units(tmp_path, run_folder):
    """Read on the control system's display (0..2000 A over 4..20 mA): 25 % is 500 A, and ±0.08 mA of
    the 16 mA span is ±10 A of the 2000 A display (0.08 / 16 × 2000, worked by hand)."""
    from loopledger.plugins.sheet.plan import sheet_data

    ctx = run_folder(write_evidence(tmp_path / "ev", {}))
    sheet = sheet_data(ctx, "T-CT1", {"method": "display", "source": "SRC-1", "connection": "in-loop"})
    assert sheet["read_unit"] == "A"
    row = next(r for r in sheet["rows"] if r["input_pct"] == 25.0)
    assert (row["read_expected"], row["read_low"], row["read_high"]) == pytest.approx((500.0, 490.0, 510.0))


def test_shunt_windows_are_volts_across_it(tmp_path, run_folder):
    """Across the registered 100 Ω shunt, 8 mA ± 0.08 mA reads 0.8 V ± 8 mV (Ohm's law)."""
    from loopledger.plugins.sheet.plan import sheet_data

    ctx = run_folder(write_evidence(tmp_path / "ev", {}))
    sheet = sheet_data(ctx, "T-CT1", {"method": "shunt", "shunt_ohm": 100.0, "meter": "DMM-1", "source": "SRC-1",
                                      "connection": "standalone"})
    row = next(r for r in sheet["rows"] if r["input_pct"] == 25.0)
    assert (row["read_expected"], row["read_low"], row["read_high"]) == pytest.approx((0.8, 0.792, 0.808))
    assert row["U"] is not None and row["tur"] == pytest.approx(0.08 / row["U"])


def test_the_sheet_command_plans_a_display_reading(tmp_path, capsys):
    """``--method display``: the windows in the display's amps (500 ± 10 A at 25 %, worked above), and why
    U is not known before the day (the display's digits)."""
    ev = write_evidence(tmp_path / "ev", {})
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--method", "display", "--source", "SRC-1"]) == 0
    out = capsys.readouterr().out
    assert "(read in A)" in out and re.search(r"500\.0000\s+490\.0000\s+510\.0000", out)
    assert "display_resolution" in out
    assert main(["sheet", "T-CT1", "--evidence", str(ev), "--method", "nope"]) == 3
