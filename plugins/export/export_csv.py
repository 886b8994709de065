"""Export: the point and test tables that OUT/data/points.csv and tests.csv are written from.

Plugins add columns to the exports by appending their names to
``ctx.stash[keys.POINT_EXPORTS]`` / ``ctx.stash[keys.TEST_EXPORTS]``.
"""

from __future__ import annotations

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import by_file
from loopledger.hookspecs import hookimpl
from loopledger.schemas.points import POINT_COLUMNS, TEST_COLUMNS


def _messages(ctx: RunContext, severity: str) -> dict[str, str]:
    texts = {rel: [f"line {f.line}: {f.message}" if f.line else f.message for f in found if f.severity == severity]
             for rel, found in by_file(ctx.findings).items()}
    return {rel: "; ".join(t) for rel, t in texts.items() if t}


def points_table(ctx: RunContext) -> pd.DataFrame:
    extra = [c for c in ctx.stash.get(keys.POINT_EXPORTS, []) if c in ctx.points.columns]
    cols = [*POINT_COLUMNS, "acceptance_limit", "decision_rule", "source_file", "line", "asset_row",
            "valid_from", "certificates", *extra]
    pts = ctx.points.reindex(columns=list(dict.fromkeys(cols)))
    return pts.sort_values(["asset", "date", "test", "phase", "point"], kind="stable")


def tests_table(ctx: RunContext) -> pd.DataFrame:
    extra = [c for c in ctx.stash.get(keys.TEST_EXPORTS, []) if c in ctx.tests.columns]
    tests = ctx.tests.copy()
    warnings, errors = _messages(ctx, "warning"), _messages(ctx, "error")
    tests["warnings"] = [warnings.get(f, "") for f in tests["source_file"]]
    tests["errors"] = [errors.get(f, "") for f in tests["source_file"]]
    cols = [*TEST_COLUMNS, "errors", "adjusted", "technician", "method", "connection", "decision_rule", *extra]
    return tests.reindex(columns=list(dict.fromkeys(cols))).sort_values(["source_file"], kind="stable")


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    return {"points": points_table(ctx), "tests": tests_table(ctx)}
