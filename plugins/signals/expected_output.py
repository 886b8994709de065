"""Stage 2, expected output: hand each signal type the points of its assets."""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import SignalType
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.scaling import where

#: inputs this far outside the asset's range are flagged (bounds of our own: over-range points to 120 %
#: are common practice; beyond these the expected output is an extrapolation the output stage may not follow)
OUTSIDE_PCT = (-5.0, 125.0)


@hookimpl
def ll_expected(ctx: RunContext) -> list[Finding]:
    """Evaluate every point of every signal type (the engine's expected-output stage)."""
    return evaluate_all(ctx)


def evaluate_all(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    findings: list[Finding] = []
    for col in ("input_pct", "expected", "injected", "sensitivity"):
        pts[col] = np.nan
    pts["injected_unit"] = ""
    known = ", ".join(sorted(ctx.signal_types))
    for signal, idx in pts.groupby("signal", sort=False).groups.items():
        handler = ctx.signal_types.get(str(signal))
        if handler is None:
            first = pts.loc[idx].drop_duplicates("source_file")
            findings += [error(f"asset {r.asset} has signal '{signal}', which no loaded plugin handles "
                               f"(known: {known}); check the spelling in assets.csv, or install the site "
                               "plugin that provides it (`loopledger plugins` lists what is loaded)",
                               file=r.source_file, field="signal") for r in first.itertuples()]
            continue
        idx, refused = _of_its_kind(pts.loc[idx], handler)
        findings += refused
        if idx.empty:
            continue
        frame, more = handler.evaluate(pts.loc[idx], ctx)
        findings += more
        for col in frame.columns:
            pts.loc[idx, col] = frame[col]
    ctx.points = pts
    low, high = OUTSIDE_PCT
    outside = pts.index[(pts["input_pct"] < low) | (pts["input_pct"] > high)]
    hints = _input_hints(pts)
    findings += [warning(f"input at {pts.at[i, 'input_pct']:.0f} % of the asset's input range: outside it the "
                         "expected output is extrapolated, and a 4-20 mA output stops near 3.8 and 20.5 mA "
                         "(NE 43); check the input written" + hints.get(i, ""), field="input", **where(pts, i))
                 for i in outside]
    return findings


def _input_hints(pts: pd.DataFrame) -> dict[object, str]:
    """What an input outside the range probably meant, per point: primary values without
    ``injection: primary`` (the asset has ct_ratio/vt_ratio and the input divided by them is in range), or a
    negative % on a range that straddles zero (% counts from the range's minimum, not from zero)."""
    from loopledger.scaling import ratio

    hints: dict[object, str] = {}
    cols = [c for c in ("ct_ratio", "vt_ratio") if c in pts.columns]
    lo, hi = pts["input_min"].astype(float), pts["input_max"].astype(float)
    value = lo + pts["input_pct"] / 100.0 * (hi - lo)  # the input in the asset's input unit
    if cols and "injection" in pts.columns:
        factors = [ratio(pts[c]) for c in cols]
        both = factors[0].fillna(1.0) * (factors[1].fillna(1.0) if len(factors) > 1 else 1.0)
        given = factors[0].notna() | (factors[1].notna() if len(factors) > 1 else False)
        as_primary = (value / both - lo) / (hi - lo) * 100.0
        secondary = pts["injection"].fillna("secondary").astype(str) != "primary"
        looks = given & secondary & (pts["input_pct"] > OUTSIDE_PCT[1]) & as_primary.between(*OUTSIDE_PCT)
        for i in pts.index[looks]:
            names = " and ".join(f"{c} {pts.at[i, c]}" for c in cols if isinstance(pts.at[i, c], str))
            hints[i] = (f"; it looks like a primary value: through {names} it is {as_primary[i]:.0f} % of the "
                        "range, so if it was injected on the primary write 'injection: primary' in the file's "
                        "header")
    pct = pts["input_written_unit"].astype(str) == q.PERCENT
    negative = pct & (pts["input_value"].astype(float) < 0) & (lo < 0) & (hi > 0)
    for i in pts.index[negative]:
        unit = pts.at[i, "input_unit"]
        hints[i] = (f"; % is of the whole range from its minimum: here 0 % is {lo[i]:g} {unit} and 100 % is "
                    f"{hi[i]:g} {unit}, so {pts.at[i, 'input_value']:g} % is {value[i]:g} {unit}. For the "
                    f"range's minimum (full export on an import/export range) write '0 %' or '{lo[i]:g} {unit}'")
    return hints


def wrong_kind(points: pd.DataFrame, handler: SignalType) -> dict[str, str]:
    """The assets among ``points`` whose input_unit is not of a kind ``handler`` takes, with that unit.
    A current transducer ranged in metres would otherwise be judged on inputs written in %."""
    declared = getattr(handler, "input_units", ())  # a duck-typed signal type may not carry it
    if not declared:
        return {}
    kinds = {q.unit_check(u) for u in declared}
    wrong: dict[str, str] = {}
    for asset, unit in points.drop_duplicates("asset")[["asset", "input_unit"]].itertuples(index=False):
        try:
            if q.unit_check(q.normalise_unit(str(unit))) in kinds:
                continue
        except ValueError:  # not a unit at all (the registry refuses those before any stage runs)
            pass
        wrong[str(asset)] = str(unit)
    return wrong


def kind_message(asset: str, unit: str, handler: SignalType) -> str:
    return (f"asset {asset}: assets.csv input_unit '{unit}' is not of the kind signal '{handler.name}' takes as "
            f"input (a unit like {' or '.join(handler.input_units)})")


def _of_its_kind(points: pd.DataFrame, handler: SignalType) -> tuple[pd.Index, list[Finding]]:
    """(the rows ``handler`` may evaluate; an error per result file of each asset it may not)."""
    wrong = wrong_kind(points, handler)
    if not wrong:
        return points.index, []
    refused = points["asset"].astype(str).isin(wrong)
    files = points.loc[refused].drop_duplicates("source_file")
    findings = [error(kind_message(str(r.asset), wrong[str(r.asset)], handler), file=str(r.source_file),
                      field="assets.input_unit") for r in files.itertuples()]
    return points.index[~refused], findings
