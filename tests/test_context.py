"""rows_of: the per-page look-up gives exactly what a boolean mask gives (pandas as the reference)."""

from __future__ import annotations

import pandas as pd
from loopledger.context import rows_of


def test_rows_of_matches_a_mask_and_follows_a_replaced_frame():
    frame = pd.DataFrame({"test": ["a", "b", "a", "c"], "v": [1, 2, 3, 4]})
    for key in ("a", "b", "c", "missing"):
        pd.testing.assert_frame_equal(rows_of(frame, "test", key), frame[frame["test"] == key])
    replaced = frame[frame["v"] > 1].reset_index(drop=True)
    pd.testing.assert_frame_equal(rows_of(replaced, "test", "a"), replaced[replaced["test"] == "a"])
    frame["w"] = frame["v"] * 2  # a column added in place is seen; rows are unchanged
    assert rows_of(frame, "test", "a")["w"].tolist() == [2, 6]
