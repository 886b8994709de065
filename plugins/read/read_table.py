"""Reads tidy spreadsheet result files: CSV or the first sheet of an .xlsx, one row per reading.

Columns: the header fields (``asset``, ``date``, ... ``source``, ``meter``,
``shunt``; the same value on every row), ``phase`` (as_found | as_left) and the
point fields (``input``, ``reading``, ``direction``, ``reading_min``,
``reading_max``, ``readings`` as ``;``-separated values). Bare numbers may take
their unit from ``input_unit`` / ``reading_unit`` columns. The ``sheet_*`` columns of a file written by
``loopledger sheet --fill`` are guidance and are not read.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Any

from loopledger.contracts import ResultRead
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.load import HEADER_FIELDS, POINT_FIELDS
from loopledger.plugins.read.blank import not_filled_in
from loopledger.spelling import unknown
from loopledger.textio import decode, other_separator

UNIT_COLUMNS = {"input_unit": ("input",), "reading_unit": ("reading", "reading_min", "reading_max", "readings")}
#: the guidance ``loopledger sheet --fill`` writes beside each point (expected reading, accepted window,
#: inside/OUTSIDE): for the technician, never read as evidence
SHEET_COLUMNS = ("sheet_expected", "sheet_accept_from", "sheet_accept_to", "sheet_check")
KNOWN = {*HEADER_FIELDS, *POINT_FIELDS, "phase", *UNIT_COLUMNS, *SHEET_COLUMNS}


Table = tuple[list[str], list[tuple[int, list[str]]]]  # column names, (line, cells) per row


def _table(path: Path, data: bytes, limits: dict[str, int] | None = None) -> Table:
    """Column names and rows (with their 1-based line) as text; plain Python, no per-file DataFrame.

    A table of more than ``max_points`` rows is refused at the first row past it (:class:`TooManyRows`),
    and a workbook whose parts unpack to more than ``max_unpacked_bytes`` before it is opened."""
    from loopledger.config import DEFAULTS

    limits = {**DEFAULTS["limits"], **(limits or {})}
    most = int(limits["max_points"])
    if path.suffix.lower() == ".xlsx":
        from loopledger.plugins.read.workbook import first_sheet

        return first_sheet(data, most, int(limits["max_unpacked_bytes"]))
    text = decode(data)
    reader = csv.reader(io.StringIO(text), skipinitialspace=True)
    header = next(reader, None)
    if header is None:
        return [], []
    sep = other_separator(header)
    if sep is not None:
        raise BadShape(f"the columns are separated by {sep}, not commas: save the sheet as comma-separated CSV "
                       "with '.' as the decimal mark, or write it as YAML", 1)
    rows: list[tuple[int, list[str]]] = []
    start = 2
    for cells in reader:
        if cells and len(cells) != len(header):
            raise RaggedRow(start, len(cells), len(header))
        if cells:
            rows.append((start, cells))
            if len(rows) > most:
                raise TooManyRows(most, start)
        start = reader.line_num + 1
    return header, rows


class BadShape(ValueError):
    """A table that cannot be split into its cells as written, at ``line``."""

    def __init__(self, message: str, line: int) -> None:
        super().__init__(message)
        self.line = line


class TooManyRows(BadShape):
    """A table of more rows than a test may have points, found at the first row past the limit."""

    def __init__(self, most: int, line: int) -> None:
        super().__init__(f"more than {most:,} rows, over the limit of points per test (limits.max_points in "
                         "loopledger.toml); the file is not read further", line)


class RaggedRow(BadShape):
    """A row longer or shorter than the header (a reader that shifted or dropped cells would invent data)."""

    def __init__(self, line: int, cells: int, header: int) -> None:
        super().__init__(f"row has {cells} cells but the header row has {header}", line)


def parse(table: Table, rel: str) -> ResultRead:
    findings: list[Finding] = []
    columns = [c.strip() for c in table[0]]
    rows = table[1]
    seen: set[str] = set()
    for col in columns:
        if col in seen:
            return ResultRead({}, [], findings=[*findings, error(f"column '{col}' appears twice", file=rel,
                                                                 line=1, field=col)])
        seen.add(col)
        if col not in KNOWN:
            findings.append(error(unknown("column", col, KNOWN), file=rel, line=1, field=col, code="unknown-key"))
    if not rows:
        return ResultRead({}, [], findings=[*findings, error("no rows", file=rel, line=1)])
    at = {c: i for i, c in enumerate(columns)}
    header: dict[str, Any] = {}
    header_lines: dict[str, int] = {}
    for name in HEADER_FIELDS:
        if name not in at:
            continue
        i = at[name]
        filled = [(line, cells[i].strip()) for line, cells in rows if cells[i].strip()]
        if not filled:
            continue
        first_line, first = filled[0]
        other = next(((line, v) for line, v in filled if v != first), None)
        if other is not None:
            findings.append(error(f"'{name}' must be the same on every row of a test (found '{first}' and "
                                  f"'{other[1]}')", file=rel, line=other[0], field=name))
        header[name] = first
        header_lines[name] = first_line
    if "phase" not in at:
        return ResultRead(header, [], header_lines, [*findings, error("missing column 'phase' (as_found | as_left)",
                                                                      file=rel, line=1, field="phase")])
    fields = [(name, at[name], at.get(next((u for u, cols in UNIT_COLUMNS.items() if name in cols), ""), -1))
              for name in POINT_FIELDS if name in at]
    points: list[dict[str, Any]] = []
    counters: dict[str, int] = {}
    phase_at = at["phase"]
    for line, cells in rows:
        phase = cells[phase_at].strip()
        counters[phase] = counters.get(phase, 0) + 1
        point: dict[str, Any] = {"line": line, "phase": phase, "point": counters[phase]}
        for name, i, unit_at in fields:
            value = cells[i].strip()
            if not value:
                continue
            unit = cells[unit_at].strip() if unit_at >= 0 else ""
            if name == "readings":
                parts = [p.strip() for p in value.split(";") if p.strip()]
                point[name] = tuple(f"{p} {unit}".strip() if unit else p for p in parts)
            else:
                point[name] = f"{value} {unit}" if unit else value
        points.append(point)
    return ResultRead(header, points, header_lines, findings)


@hookimpl
def ll_read_result(path: Path, rel: str, data: bytes, limits: dict[str, int] | None = None) -> ResultRead | None:
    if path.suffix.lower() not in (".csv", ".xlsx"):
        return None
    try:
        table = _table(path, data, limits)
    except TooManyRows as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, line=exc.line, code="too-many")])
    except BadShape as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, line=exc.line, code="table")])
    except ValueError as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, code="encoding")])
    except Exception as exc:  # pandas and openpyxl raise many kinds for a damaged file
        return ResultRead({}, [], findings=[error(f"cannot read the table: {exc}", file=rel, code="table")])
    return not_filled_in(parse(table, rel), rel)
