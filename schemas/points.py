"""The tables loopledger writes under OUT/data/ (and passes between stages).

``points.csv`` — one row per judged point; ``tests.csv`` — one row per result
file, invalid files included. Plugins add columns; these are the guaranteed ones.
"""

from __future__ import annotations

import pandera.pandas as pa
from pandera.typing import Series

DECISIONS = ["pass", "fail", "conditional-pass", "conditional-fail"]
VERDICTS = ["pass", "fail", "adjusted", "invalid"]


class PointsOut(pa.DataFrameModel):
    asset: Series[str]
    test: Series[str]
    date: Series[str]
    phase: Series[str] = pa.Field(isin=["as_found", "as_left"])
    point: Series[int] = pa.Field(ge=1)
    input_pct: Series[float]
    expected: Series[float]
    measured: Series[float]
    output_unit: Series[str]
    error: Series[float]
    error_pct_span: Series[float]
    mpe: Series[float] = pa.Field(ge=0)
    decision: Series[str] = pa.Field(isin=DECISIONS)

    class Config:
        strict = False


class TestsOut(pa.DataFrameModel):
    asset: Series[str] = pa.Field(nullable=True)
    test: Series[str]
    date: Series[str] = pa.Field(nullable=True)
    source_file: Series[str]
    sha256: Series[str] = pa.Field(nullable=True)
    as_found: Series[str] = pa.Field(nullable=True)
    as_left: Series[str] = pa.Field(nullable=True)
    verdict: Series[str] = pa.Field(isin=VERDICTS)
    warnings: Series[str] = pa.Field(nullable=True)

    class Config:
        strict = False


#: the free-text columns of every table under OUT/data/: ids, names and messages, which a result file or a
#: register writes (or quotes). A value in one of them that a spreadsheet would read as a formula is written
#: with a leading apostrophe (pipeline/output.py); numbers and quantities with their units are not free text
#: and are written as they are.
FREE_TEXT_COLUMNS = frozenset({
    "asset", "test", "source_file", "description", "site", "area", "technician", "remarks", "warnings", "errors",
    "device_test", "loop_test", "group", "shunt", "meter", "source", "instrument", "reference_issues",
    "certificates", "changed_because",
})

POINT_COLUMNS = list(PointsOut.to_schema().columns)
TEST_COLUMNS = list(TestsOut.to_schema().columns)
