"""The first sheet of an .xlsx workbook as a table of text, read within limits.

An .xlsx file is a zip archive, so a small file can unpack to gigabytes (a zip bomb). Before the workbook
is opened, the sizes its parts declare are added up and checked against ``limits.max_unpacked_bytes``
(Python's zipfile never unpacks a part beyond the size it declares). The sheet is then read by openpyxl in
its read-only, streaming mode, one row at a time, and reading stops at the first row past the points a
test may have. Cells are given as pandas' ``read_excel`` gave them (an integral number as an int, an
empty or error cell as empty), so a workbook reads as it did before.
"""

from __future__ import annotations

import datetime as dt
import io
import zipfile
from typing import Any

from loopledger.plugins.read.read_table import BadShape, Table, TooManyRows


def first_sheet(data: bytes, most: int, unpacked: int) -> Table:
    """Column names and rows (with their 1-based line) of the first sheet; blank rows are left out.

    Raises :class:`BadShape` for a workbook over ``unpacked`` bytes unpacked, or one that is not a zip
    archive, and :class:`TooManyRows` past ``most`` rows."""
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            total = sum(part.file_size for part in archive.infolist())
    except zipfile.BadZipFile as exc:
        raise BadShape(f"not an .xlsx workbook (not a zip archive: {exc})", 0) from exc
    if total > unpacked:
        raise BadShape(f"the workbook unpacks to {total:,} bytes, over the limit of {unpacked:,} "
                       "(limits.max_unpacked_bytes in loopledger.toml); it is not opened", 0)
    import openpyxl

    book = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True, keep_links=False)
    try:
        sheet = book.worksheets[0]
        header: list[str] | None = None
        rows: list[tuple[int, list[str]]] = []
        for line, row in enumerate(sheet.iter_rows(), start=1):
            cells = [_cell(c) for c in row]
            while cells and cells[-1] == "":
                cells.pop()
            if header is None:
                header = [c if c else f"Unnamed: {i}" for i, c in enumerate(cells)]
                continue
            if not cells:
                continue
            if len(cells) > len(header):
                raise BadShape(f"row has {len(cells)} cells but the header row has {len(header)}", line)
            rows.append((line, cells + [""] * (len(header) - len(cells))))
            if len(rows) > most:
                raise TooManyRows(most, line)
        return header or [], rows
    finally:
        book.close()


def _cell(cell: Any) -> str:
    """A cell as the text it shows: a number as pandas gave it (an integral value as an int), a date cell
    (a datetime at midnight) as YYYY-MM-DD, as the schema check wants it; an empty or error cell as ''."""
    value = getattr(cell, "value", None)
    if value is None or getattr(cell, "data_type", "") == "e":
        return ""
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else str(value)
    if isinstance(value, dt.datetime) and value.time() == dt.time(0, 0):
        return value.date().isoformat()
    if isinstance(value, dt.date | dt.datetime | dt.time):
        return value.isoformat()
    return str(value)
