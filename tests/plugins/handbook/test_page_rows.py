"""Page data made per column (page_rows) gives, cell for cell, what the per-cell conversion gives.

The reference is ``values.plain`` applied to each cell as pandas hands it out (the form the pages
were made from before the batch rework); the cells cover pandas' missing values (NaN, NaT, None, NA),
infinities, numpy scalars and nullable dtypes. Plumbing data, invented.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
from loopledger.plugins.handbook import values


def _frame() -> pd.DataFrame:
    return pd.DataFrame({
        "f": [1.5, np.nan, np.inf, -0.0],
        "i": np.array([1, 2, 3, 4], dtype=np.int64),
        "b": [True, False, True, False],
        "when": pd.to_datetime(["2026-03-01", None, "2024-02-29", "2025-12-31"]),
        "text": ["a", None, np.nan, "d"],
        "mixed": [np.float64(2.5), np.int64(7), np.bool_(True), float("-inf")],
        "nullable": pd.array([1, None, 3, None], dtype="Int64"),
        "asset": ["A", "A", "B", "C"],
    })


def test_column_lists_match_the_cell_by_cell_conversion():
    frame = _frame()
    lists = values.column_lists(frame)
    for col in frame.columns:
        assert lists[col] == [values.plain(v) for v in frame[col]], col
        for v in lists[col]:
            assert v is None or type(v) in (str, int, float, bool), (col, v)
    json.dumps(lists, allow_nan=False)  # JSON-able: no NaN or inf survives


def test_grouped_rows_keep_each_group_whole_and_sorted():
    frame = _frame()
    groups = values.grouped(frame, "asset", ["i"], ["i", "f"], ascending=False)
    assert list(groups) == ["A", "B", "C"]
    assert [r["i"] for r in groups["A"]] == [2, 1]  # descending within the group
    assert groups["B"] == [{"i": 3, "f": None}]
    assert values.slices(pd.Series(["x", "x", "y"])) == {"x": (0, 2), "y": (2, 3)}
    assert values.slices(pd.Series([], dtype=object)) == {}
