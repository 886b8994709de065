"""Reads tidy spreadsheet result files: CSV or the first sheet of an .xlsx, one row per reading.

Columns: the header fields (``asset``, ``date``, ... ``source``, ``meter``,
``shunt``; the same value on every row), ``phase`` (as_found | as_left) and the
point fields (``input``, ``reading``, ``direction``, ``reading_min``,
``reading_max``, ``readings`` as ``;``-separated values). Bare numbers may take
their unit from ``input_unit`` / ``reading_unit`` columns.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

import pandas as pd
from loopledger.contracts import ResultRead
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.load import HEADER_FIELDS, POINT_FIELDS
from loopledger.plugins._text import decode

UNIT_COLUMNS = {"input_unit": ("input",), "reading_unit": ("reading", "reading_min", "reading_max", "readings")}
KNOWN = {*HEADER_FIELDS, *POINT_FIELDS, "phase", *UNIT_COLUMNS}


def _frame(path: Path, data: bytes) -> pd.DataFrame:
    if path.suffix.lower() == ".xlsx":
        frame = pd.read_excel(io.BytesIO(data), dtype=str, engine="openpyxl")
        return frame.fillna("")
    text = decode(data)
    _check_ragged(text)
    return pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False, skipinitialspace=True)


class RaggedRow(ValueError):
    def __init__(self, line: int, cells: int, header: int) -> None:
        super().__init__(f"row has {cells} cells but the header row has {header}")
        self.line = line


def _check_ragged(text: str) -> None:
    """Refuse rows longer or shorter than the header (pandas would shift or drop cells silently)."""
    import csv

    rows = csv.reader(io.StringIO(text))
    header = next(rows, None)
    if header is None:
        return
    for number, row in enumerate(rows, start=2):
        if row and len(row) != len(header):
            raise RaggedRow(number, len(row), len(header))


def parse(frame: pd.DataFrame, rel: str) -> ResultRead:
    findings: list[Finding] = []
    frame.columns = [str(c).strip() for c in frame.columns]
    for col in frame.columns:
        if col not in KNOWN:
            findings.append(warning(f"unknown column '{col}' ignored", file=rel, line=1, field=col))
    if frame.empty:
        return ResultRead({}, [], findings=[*findings, error("no rows", file=rel, line=1)])
    header: dict[str, Any] = {}
    header_lines: dict[str, int] = {}
    for name in HEADER_FIELDS:
        if name not in frame.columns:
            continue
        values = frame[name].astype(str).str.strip()
        filled = values[values != ""]
        if filled.nunique() > 1:
            row = int(filled.index[(filled != filled.iloc[0]).to_numpy()][0])
            findings.append(error(f"'{name}' must be the same on every row of a test (found "
                                  f"'{filled.iloc[0]}' and '{filled[row]}')", file=rel, line=row + 2, field=name))
        if not filled.empty:
            header[name] = filled.iloc[0]
            header_lines[name] = int(filled.index[0]) + 2
    if "phase" not in frame.columns:
        return ResultRead(header, [], header_lines, [*findings, error("missing column 'phase' (as_found | as_left)",
                                                                      file=rel, line=1, field="phase")])
    points: list[dict[str, Any]] = []
    counters: dict[str, int] = {}
    for idx, row in frame.iterrows():
        line = int(str(idx)) + 2
        phase = str(row["phase"]).strip()
        counters[phase] = counters.get(phase, 0) + 1
        point: dict[str, Any] = {"line": line, "phase": phase, "point": counters[phase]}
        for name in POINT_FIELDS:
            if name not in frame.columns:
                continue
            value = str(row[name]).strip()
            if not value:
                continue
            unit_col = next((u for u, cols in UNIT_COLUMNS.items() if name in cols), None)
            unit = str(row[unit_col]).strip() if unit_col and unit_col in frame.columns else ""
            if name == "readings":
                parts = [p.strip() for p in value.split(";") if p.strip()]
                point[name] = tuple(f"{p} {unit}".strip() if unit else p for p in parts)
            else:
                point[name] = f"{value} {unit}" if unit else value
        points.append(point)
    return ResultRead(header, points, header_lines, findings)


@hookimpl
def ll_read_result(path: Path, rel: str, data: bytes) -> ResultRead | None:
    if path.suffix.lower() not in (".csv", ".xlsx"):
        return None
    try:
        frame = _frame(path, data)
    except RaggedRow as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, line=exc.line, code="table")])
    except ValueError as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, code="encoding")])
    except Exception as exc:  # pandas and openpyxl raise many kinds for a damaged file
        return ResultRead({}, [], findings=[error(f"cannot read the table: {exc}", file=rel, code="table")])
    return parse(frame, rel)
