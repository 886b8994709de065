"""``sheet ASSET --fill FILE``: a result file to take to site, with the readings left blank.

Written from the sheet (:mod:`.plan`) as ``.xlsx``, ``.csv`` or ``.yaml``. The header holds the asset, the
planned connection, method, injection and instruments by id, with the date, technician and ambient blank;
the as-found points hold their inputs, with the readings blank. The expected reading and the acceptance
window of each point go in the ``sheet_*`` columns (xlsx, csv) or in comments (yaml), which the readers
ignore, so the filled file is read as it stands once it is put in ``results/``. A file whose readings are
all still blank is reported as not filled in (:mod:`loopledger.plugins.read.blank`).

In the xlsx the blank cells are the only unlocked ones (the sheet is protected without a password, to
keep a slip of the hand off the planned values, not to stop a deliberate change); a reading outside its
window turns its cell red and its ``sheet_check`` cell reads ``OUTSIDE`` (a plain conditional-format rule
and an IF formula, so the word carries the meaning too, not the colour alone).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
from typing import Any

from loopledger.plugins.read.read_table import SHEET_COLUMNS

FORMATS = (".xlsx", ".csv", ".yaml", ".yml")
#: the columns of the fill-in table, in order (the readers' header and point fields, then the guidance)
HEADER = ("asset", "date", "technician", "connection", "method", "injection", "ambient_c", "source", "meter", "shunt")
POINT = ("phase", "input", "input_unit", "reading", "reading_unit")
COLUMNS = (*HEADER, *POINT, *SHEET_COLUMNS)
#: cells the technician types: the date, technician and ambient once (first row), every reading
TYPED_ONCE = ("date", "technician", "ambient_c")


def _number(value: Any, digits: int = 6) -> float | None:
    """A value rounded to ``digits`` significant digits (None when missing)."""
    if value is None:
        return None
    return float(f"{float(value):.{digits}g}")


def rows(sheet: dict[str, Any]) -> list[dict[str, Any]]:
    """One dict per planned point with every column of :data:`COLUMNS` (blank where typed on site)."""
    plan, asset = sheet["plan"], sheet["asset"]
    unit = sheet.get("read_unit") or sheet.get("unit") or ""
    read = bool(sheet.get("read_unit"))
    header = {"asset": asset["asset"], "date": None, "technician": None, "connection": plan.get("connection"),
              "method": plan.get("method"), "injection": "secondary", "ambient_c": None,
              "source": plan.get("source"), "meter": plan.get("meter"),
              "shunt": plan.get("shunt") if plan.get("method") == "shunt" else None}
    out = []
    for r in sheet["rows"]:
        expect, low, high = ((r.get("read_expected"), r.get("read_low"), r.get("read_high")) if read
                             else (r["expected"], r["low"], r["high"]))
        out.append({**header, "phase": "as_found", "input": _number(r["input"], 10), "input_unit": r["input_unit"],
                    "reading": None, "reading_unit": unit, "sheet_expected": _number(expect),
                    "sheet_accept_from": _number(low), "sheet_accept_to": _number(high), "sheet_check": None})
    return out


def fill_file(sheet: dict[str, Any], suffix: str, as_of: dt.date) -> bytes:
    """The fill-in file for ``sheet`` in the format of ``suffix``."""
    if not sheet["rows"]:
        raise ValueError("the sheet has no planned points (see its notes), so there is nothing to fill in")
    if suffix == ".xlsx":
        return _xlsx(sheet, as_of)
    if suffix == ".csv":
        return _csv(sheet)
    return _yaml(sheet, as_of).encode("utf-8")


def _csv(sheet: dict[str, Any]) -> bytes:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([c for c in COLUMNS if c != "sheet_check"])
    for row in rows(sheet):
        writer.writerow(["" if row[c] is None else (f"{row[c]:g}" if isinstance(row[c], float) else row[c])
                         for c in COLUMNS if c != "sheet_check"])
    return buffer.getvalue().encode("utf-8")


def _scalar(value: Any) -> str:
    """A YAML scalar: text quoted as JSON (a subset of YAML), so no id is taken for a number or a date."""
    return "" if value is None else json.dumps(str(value), ensure_ascii=False)


def _yaml(sheet: dict[str, Any], as_of: dt.date) -> str:
    table = rows(sheet)
    first = table[0]
    unit = first["reading_unit"]
    lines = [f"# Result file for {sheet['asset']['asset']}, planned by `loopledger sheet --fill` on {as_of}.",
             f"# Type the date (YYYY-MM-DD), your name, the ambient in °C and each reading with its unit "
             f"(e.g. `reading: {first['sheet_expected']:g} {unit}`);",
             "# then put this file in results/. The comments are for you; loopledger does not read them.",
             "# Before you connect anything:", *(f"#   ! {c}" for c in sheet.get("cautions", [])),
             f"asset: {_scalar(first['asset'])}", "date:", "technician:",
             f"connection: {first['connection']}", f"method: {first['method']}", "injection: secondary",
             "ambient_c:"]
    roles = {r: first[r] for r in ("source", "meter", "shunt") if first[r]}
    if roles:
        lines.append("instruments: {" + ", ".join(f"{r}: {_scalar(v)}" for r, v in roles.items()) + "}")
    lines.append("as_found:")
    for row in table:
        lines += [f"  - input: {row['input']:g} {row['input_unit']}",
                  f"    reading:    # expect {row['sheet_expected']:g} {unit}; accepted "
                  f"{row['sheet_accept_from']:g} … {row['sheet_accept_to']:g} {unit}"]
    lines += ["as_left: []", ""]
    return "\n".join(lines)


def _xlsx(sheet: dict[str, Any], as_of: dt.date) -> bytes:
    from openpyxl import Workbook
    from openpyxl.formatting.rule import CellIsRule
    from openpyxl.styles import Alignment, Font, PatternFill, Protection
    from openpyxl.utils import get_column_letter

    table = rows(sheet)
    book = Workbook()
    ws = book.active
    ws.title = "results"
    ws.append(list(COLUMNS))
    for row in table:
        ws.append([row[c] for c in COLUMNS])
    col = {c: get_column_letter(i + 1) for i, c in enumerate(COLUMNS)}
    last = len(table) + 1
    typed = PatternFill("solid", fgColor="FFF7D6")  # a pale ground marks the cells to type in
    for c in COLUMNS:
        ws[f"{col[c]}1"].font = Font(bold=True)
        ws.column_dimensions[col[c]].width = max(9, len(c) + 2)
    for c in TYPED_ONCE:
        cell = ws[f"{col[c]}2"]
        cell.protection = Protection(locked=False)
        cell.fill = typed
    ws[f"{col['date']}2"].number_format = "yyyy-mm-dd"
    ws.column_dimensions[col["date"]].width = 12
    ws.column_dimensions[col["technician"]].width = 16
    reading, low, high = col["reading"], col["sheet_accept_from"], col["sheet_accept_to"]
    for n in range(2, last + 1):
        cell = ws[f"{reading}{n}"]
        cell.protection = Protection(locked=False)
        cell.fill = typed
        ws[f"{col['sheet_check']}{n}"] = (f'=IF({reading}{n}="","",IF(AND({reading}{n}>={low}{n},'
                                          f'{reading}{n}<={high}{n}),"inside","OUTSIDE"))')
        ws[f"{col['sheet_check']}{n}"].alignment = Alignment(horizontal="center")
    ws.conditional_formatting.add(f"{reading}2:{reading}{last}", CellIsRule(
        operator="notBetween", formula=[f"${low}2", f"${high}2"], fill=PatternFill("solid", fgColor="F4A6A6"),
        font=Font(bold=True)))
    ws.freeze_panes = "A2"
    ws.protection.sheet = True  # only the unlocked cells take typing; no password
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 1
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_title_rows = "1:1"
    ws.oddHeader.left.text = f"{sheet['asset']['asset']}: result file to fill in ({as_of})"
    ws.oddHeader.right.text = "Read the sheet 'before you start' first"
    ws.oddFooter.left.text = "Type in the shaded cells only; a reading outside its window reads OUTSIDE."
    _guide(book, sheet)
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def _guide(book: Any, sheet: dict[str, Any]) -> None:
    """A second worksheet (loopledger reads the first only): the cautions and how to fill the file in."""
    from openpyxl.styles import Alignment, Font

    ws = book.create_sheet("before you start")
    ws.column_dimensions["A"].width = 110
    lines = [("Before you connect anything", True), *((f"! {c}", False) for c in sheet.get("cautions", [])),
             ("", False), ("How to fill in the sheet 'results'", True),
             ("Type the date, your name and the ambient (°C) once, in the first row, and each reading as a number "
              "in the unit of its reading_unit cell.", False),
             ("The sheet_* columns show the expected reading and the window accepted under the rule "
              f"'{sheet.get('rule', '')}' with the planned rig; loopledger ignores them.", False),
             ("Save the file and put it in the evidence folder's results/ folder; it is read as it stands.", False)]
    for i, (text, bold) in enumerate(lines, start=1):
        ws[f"A{i}"] = text
        ws[f"A{i}"].font = Font(bold=bold)
        ws[f"A{i}"].alignment = Alignment(wrap_text=True, vertical="top")
    ws.protection.sheet = True
