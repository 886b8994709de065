"""The failures table's 'put right' date: for an as-found failure left unadjusted, the date of the asset's
next passing test. Checked against a plain brute-force reading of that definition (a loop over every later
test of the asset, written here independently of the stage), on random invented histories."""

from __future__ import annotations

import random

import numpy as np
import pandas as pd
from loopledger.plugins.history.failures import _put_right


def _brute(valid: pd.DataFrame, events: pd.DataFrame) -> dict[str, object]:
    out: dict[str, object] = {}
    for test, row in events.iterrows():
        later = [d for a, d, v in zip(valid["asset"], valid["date"], valid["verdict"], strict=True)
                 if a == row["asset"] and d > row["date"] and v in ("pass", "adjusted")]
        out[str(test)] = min(later) if later else np.nan
    return out


def test_put_right_is_the_next_passing_date_of_the_same_asset():
    rng = random.Random(7)
    for _ in range(50):
        rows = [{"test": f"t{i}", "asset": f"A{rng.randrange(6)}",
                 "date": f"20{rng.randrange(15, 27)}-{rng.randrange(1, 13):02d}-{rng.randrange(1, 29):02d}",
                 "verdict": rng.choice(["pass", "fail", "adjusted", "conditional-pass"])} for i in range(40)]
        valid = pd.DataFrame(rows)
        events = valid[valid["verdict"] == "fail"].set_index("test")
        got = _put_right(valid, events)
        want = _brute(valid, events)
        assert set(got.index) == set(want)
        for test, date in want.items():
            assert (pd.isna(date) and pd.isna(got[test])) or got[test] == date, (test, got[test], date)


def test_no_open_event_gives_an_empty_series():
    valid = pd.DataFrame({"test": ["t1"], "asset": ["A"], "date": ["2026-01-01"], "verdict": ["pass"]})
    assert _put_right(valid, valid.iloc[0:0].set_index("test")).empty
