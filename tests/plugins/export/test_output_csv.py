"""The exported tables' CSV text is the text pandas' own writer gives (pandas is the reference), for every
kind of column a stage leaves: floats with NaN, ±inf and -0.0, integers, booleans, text with commas,
quotes and line breaks, mixed object columns, dates with and without NaT, nullable integers and
categories. Invented plumbing values."""

from __future__ import annotations

import csv
import gc
import io

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from loopledger import output
from loopledger.output import FLOAT_FORMAT, csv_text


def _pandas(frame: pd.DataFrame) -> str:
    return frame.to_csv(index=False, lineterminator="\n", float_format=FLOAT_FORMAT)


def test_every_kind_of_column_matches_pandas(monkeypatch):
    frame = pd.DataFrame({
        "f": [1.5, np.nan, np.inf, -0.0, 1e-12, 123456789.123456],
        "i": np.array([1, -2, 3, 0, 5, 6], dtype=np.int64),
        "b": [True, False, True, True, False, False],
        "text": ["a,b", 'say "hi"', "two\nlines", None, np.nan, "  "],
        "mixed": [np.float64(2.5), 7, True, None, "x", 0.1 + 0.2],
        "when": pd.to_datetime(["2026-03-01", None, "2024-02-29", "2025-12-31", "2026-01-01", "2026-02-02"]),
        "stamp": pd.to_datetime(["2026-03-01 10:30", None, "2024-02-29 00:00", "2025-12-31 00:00", "2026-01-01 00:00",
                                "2026-02-02 00:00"]),
        "nullable": pd.array([1, None, 3, None, 5, 6], dtype="Int64"),
        "kind": pd.Categorical(["p", "q", None, "p", "q,r", "\r"]),
        # repeated values are formatted once per distinct bit pattern: 0.0 and -0.0 must stay apart
        "repeat": [0.0, -0.0, 0.08, -0.0, np.float64(np.nan), 0.08],
        "single": np.array([0.1, 0.1, -0.0, 0.0, 3.4e38, np.nan], dtype=np.float32),
    })
    assert csv_text(frame) == _pandas(frame)
    monkeypatch.setattr(output, "CSV_CHUNK", 4)  # a table longer than one chunk of rows
    assert csv_text(frame) == _pandas(frame)
    assert csv_text(frame.iloc[0:0]) == _pandas(frame.iloc[0:0])
    assert csv_text(pd.DataFrame(index=range(3))) == _pandas(pd.DataFrame(index=range(3)))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                                    st.sampled_from([0.0, -0.0, 0.1, 1e-300, -2.5])),  # repeats, signed zeros
                          st.integers(-10**12, 10**12),
                          st.one_of(st.none(), st.text(max_size=8))), max_size=20))
def test_random_rows_match_pandas(rows):
    frame = pd.DataFrame(rows, columns=["value", "count", "note"])
    if frame.empty:
        frame = frame.astype({"value": float, "count": np.int64})
    assert csv_text(frame) == _pandas(frame)
    assert [r for r in csv.reader(io.StringIO(csv_text(frame), newline=""))][0] == ["value", "count", "note"]


def test_tables_written_by_workers_match_pandas(tmp_path, monkeypatch):
    """Large exports are shared out to forked workers; each file is still pandas' text for its table, every
    table is written once, and a table that cannot be written stops the export with its error."""
    monkeypatch.setattr(output, "PARALLEL_CELLS", 1)  # small tables, parallel path
    rng = np.random.default_rng(7)
    frames = {f"t{i}": pd.DataFrame({"x": rng.normal(size=50 * (i + 1)), "n": np.arange(50 * (i + 1)),
                                     "tag": ["a,b" if j % 3 else None for j in range(50 * (i + 1))]})
              for i in range(5)}
    output.write_csvs([(tmp_path / f"{name}.csv", frame) for name, frame in frames.items()], workers=2)
    assert gc.get_freeze_count() == 0, "the heap is handed back to the garbage collector after the pool"
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(f"{name}.csv" for name in frames)
    for name, frame in frames.items():
        assert (tmp_path / f"{name}.csv").read_text(encoding="utf-8") == _pandas(frame)
    blocked = tmp_path / "not-a-folder"
    blocked.write_text("a file where a folder should be", encoding="utf-8")
    with pytest.raises(OSError):
        output.write_csvs([(tmp_path / "ok.csv", frames["t0"]), (blocked / "t.csv", frames["t1"])], workers=2)
