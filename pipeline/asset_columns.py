"""Check a signal type's extra assets.csv columns (not a plugin itself).

A signal type (or reading method) hands over the rows of the point table it
handles and the pandera model of its columns (``schemas/signals.py``). Each
asset is checked once; a failure becomes one error per result file of that
asset, naming the asset and the column, so those files are marked invalid
and the rest are still judged.
"""

from __future__ import annotations

from typing import Any

import pandas as pd
from loopledger.findings import Finding, error
from loopledger.validation import validate


def check(points: pd.DataFrame, model: Any) -> tuple[pd.DataFrame, list[Finding]]:
    """(the model's columns, coerced, on ``points``' index — NaN where missing or bad; findings)."""
    columns = [c for c in model.to_schema().columns if c != "asset"]
    assets = points.drop_duplicates("asset")[["asset"]].copy()
    for col in columns:
        assets[col] = points.loc[assets.index, col] if col in points.columns else pd.NA
    assets = assets.astype(object).where(assets.notna(), None).reset_index(drop=True)
    checked, problems = validate(assets, model, lambda i: {"point": "" if i is None else
                                                           f"asset {assets.at[i, 'asset']}"})
    findings: list[Finding] = []
    files = points.drop_duplicates(["asset", "source_file"])
    for problem in problems:
        asset = problem.point.removeprefix("asset ")
        for rel in files.loc[files["asset"] == asset, "source_file"] if asset else files["source_file"]:
            findings.append(error(f"asset {asset}: assets.csv column {problem.message}", file=str(rel),
                                  field=f"assets.{problem.field}" if problem.field else "assets.csv"))
    values = checked.set_index("asset")[columns] if len(checked) else pd.DataFrame(columns=columns)
    out = values.reindex(points["asset"]).set_axis(points.index)
    return out, findings
