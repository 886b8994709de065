"""Split a whole loop's error between the transmitter and the input card (analysis stage).

When the same asset has, on the same date, a test read at the transmitter
(method ``direct`` or ``shunt``: the device alone) and a test read at the
control system (method ``display`` or ``counts``: transmitter + cable + input
card), the points at the same phase and input position are paired. Both
errors are in % of output span, so the card's share is the difference:

    card_error_pct = loop_error_pct − device_error_pct

Exported as ``data/loop_split.csv`` (only when such pairs exist). Record the
two tests as two result files with the same ``date``, inputs at the same
positions (e.g. 0/25/50/75/100 %); ideally read both at every point while
the input is held, so the source's drift cancels.
"""

from __future__ import annotations

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl

DEVICE_METHODS = ("direct", "shunt")
LOOP_METHODS = ("display", "counts")
COLUMNS = ["asset", "date", "phase", "input_pct", "device_test", "loop_test", "device_error_pct",
           "loop_error_pct", "card_error_pct"]


def split(points: pd.DataFrame) -> pd.DataFrame:
    """One row per paired (asset, date, phase, input position)."""
    needed = {"method", "error_pct_span", "input_pct", "date"}
    if points.empty or not needed <= set(points.columns):
        return pd.DataFrame(columns=COLUMNS)
    pts = points.assign(position=points["input_pct"].round(3))
    keys = ["asset", "date", "phase", "position"]

    def side(methods: tuple[str, ...], name: str) -> pd.DataFrame:
        rows = pts[pts["method"].isin(methods)]
        return (rows.groupby([*keys, "test"], as_index=False)["error_pct_span"].mean()
                .rename(columns={"test": f"{name}_test", "error_pct_span": f"{name}_error_pct"}))

    paired = side(DEVICE_METHODS, "device").merge(side(LOOP_METHODS, "loop"), on=keys, how="inner")
    paired["card_error_pct"] = paired["loop_error_pct"] - paired["device_error_pct"]
    paired = paired.rename(columns={"position": "input_pct"})
    return paired[COLUMNS].sort_values(["asset", "date", "loop_test", "phase", "input_pct"]).reset_index(drop=True)


@hookimpl
def ll_analyse(ctx: RunContext) -> list[Finding]:
    ctx.stash[keys.LOOP_SPLIT] = split(ctx.points)
    return []


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    table = ctx.stash.get(keys.LOOP_SPLIT)
    return {"loop_split": table} if isinstance(table, pd.DataFrame) and not table.empty else {}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    """On the page of either test of a pair: the split, point by point."""
    table = ctx.stash.get(keys.LOOP_SPLIT)
    if not isinstance(table, pd.DataFrame) or table.empty:
        return {}
    wanted = set(tests)
    mine = table[table["loop_test"].isin(wanted) | table["device_test"].isin(wanted)]
    body: dict[str, list[list[str]]] = {}
    for r in mine.itertuples():
        row = [r.phase.replace("_", "-"), f"{r.input_pct:g}", r.device_test, r.loop_test,
               f"{r.device_error_pct:+.3f}", f"{r.loop_error_pct:+.3f}", f"{r.card_error_pct:+.3f}"]
        for test in {r.device_test, r.loop_test} & wanted:
            body.setdefault(str(test), []).append(list(row))  # each page its own rows
    return {test: [Section("Loop split: transmitter and input card (% of span)", kind="table", order=60,
                           columns=["Phase", "Input %", "Transmitter test", "Loop test", "Transmitter error",
                                    "Loop error", "Card share (loop − transmitter)"], rows=rows)]
            for test, rows in body.items()}
