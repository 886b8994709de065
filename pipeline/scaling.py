"""Range scaling shared by the signal plugins (not a plugin itself).

A transmitter or transducer maps its input range linearly (or through a
square root, for differential-pressure flow) onto its output range.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.findings import Finding, error

PERCENT = q.PERCENT


def ratio(text: pd.Series) -> pd.Series:
    """An instrument-transformer ratio such as ``2000/1`` -> 2000.0; NaN where blank.

    Each distinct text is read once (a fleet's points repeat their asset's ratio).
    """
    codes, distinct = pd.factorize(text.astype("string"), use_na_sentinel=True)
    parts = pd.Series(distinct, dtype="string").str.extract(r"^\s*([\d.]+)\s*/\s*([\d.]+)\s*$")
    each = pd.to_numeric(parts[0], errors="coerce") / pd.to_numeric(parts[1], errors="coerce")
    each = each.where(np.isfinite(each) & (each > 0))  # the schemas refuse 0/1 and 1/0; never infinite here
    return pd.Series(each.array.take(codes, allow_fill=True), index=text.index)


def where(points: pd.DataFrame, idx: object) -> dict[str, object]:
    return {"file": points.at[idx, "source_file"], "line": int(points.at[idx, "line"]),
            "point": f"{points.at[idx, 'phase']} #{points.at[idx, 'point']}"}


def input_in_range_unit(points: pd.DataFrame, scale: pd.Series | float = 1.0, also: str = "",
                        ) -> tuple[pd.Series, pd.Series, list[Finding]]:
    """(input_pct, injected value in the asset's input_unit × scale, findings).

    ``scale`` divides a written quantity before it is placed on the input range
    (a current transformer's ratio for primary injection) and multiplies the
    injected value computed from a percentage. ``also`` names another unit the
    signal type accepts, for the message about an input in neither.
    """
    findings: list[Finding] = []
    lo, hi = points["input_min"].astype(float), points["input_max"].astype(float)
    is_pct = points["input_written_unit"] == PERCENT
    value = points["input_value"].astype(float)
    converted = q.convert(value, points["input_written_unit"], points["input_unit"])
    native = converted / scale
    pct = pd.Series(np.where(is_pct, value, (native - lo) / (hi - lo) * 100.0), index=points.index)
    injected = pd.Series(np.where(is_pct, (lo + value / 100.0 * (hi - lo)) * scale, converted), index=points.index)
    for idx in points.index[~is_pct & converted.isna()]:
        named = list(dict.fromkeys(str(u) for u in (points.at[idx, "input_unit"], also, PERCENT) if u))
        units = ", ".join(named[:-1]) + " or " + named[-1] if len(named) > 1 else named[0]
        findings.append(error(f"input '{points.at[idx, 'input']}' is not in units of {units}", field="input",
                              **where(points, idx)))
    return pct, injected, findings


def characteristic(pct: pd.Series, kind: pd.Series) -> tuple[pd.Series, pd.Series]:
    """(output fraction 0..1, d fraction / d input fraction) for linear or sqrt."""
    frac = pct / 100.0
    is_sqrt = kind.fillna("linear") == "sqrt"
    root = np.sqrt(frac.clip(lower=0.0))
    out = pd.Series(np.where(is_sqrt, root, frac), index=pct.index)
    with np.errstate(divide="ignore"):
        slope = pd.Series(np.where(is_sqrt, 0.5 / np.where(root > 0, root, np.nan), 1.0), index=pct.index)
    return out, slope


def expected_output(points: pd.DataFrame, out_frac: pd.Series) -> pd.Series:
    lo, hi = points["output_min"].astype(float), points["output_max"].astype(float)
    return lo + out_frac * (hi - lo)


def linear_evaluate(points: pd.DataFrame, scale: pd.Series | float = 1.0, also: str = "",
                    ) -> tuple[pd.DataFrame, list[Finding]]:
    """The whole evaluation for a device whose output follows its input range directly."""
    pct, injected, findings = input_in_range_unit(points, scale, also)
    frac, slope = characteristic(pct, points["characteristic"])
    expected = expected_output(points, frac)
    in_span = (points["input_max"].astype(float) - points["input_min"].astype(float)) * scale
    out_span = points["output_max"].astype(float) - points["output_min"].astype(float)
    frame = pd.DataFrame({"input_pct": pct, "expected": expected, "injected": injected,
                          "injected_unit": points["input_unit"], "sensitivity": slope * out_span / in_span},
                         index=points.index)
    return frame, findings


def evaluate_via(points: pd.DataFrame, via: pd.Series, measurand: pd.Series, measurand_unit: str,
                 injected: pd.Series, injected_unit: str, slope: pd.Series,
                 ) -> tuple[pd.DataFrame, list[Finding]]:
    """Like :func:`linear_evaluate`, but rows ``via`` were written as an electrical quantity.

    For those rows the plugin has already converted the injected quantity
    (``injected`` in ``injected_unit``, e.g. ohms from a decade box) into the
    measurand (``measurand`` in ``measurand_unit``, e.g. °C) and gives
    ``slope`` = d measurand / d injected; the rest go through the plain path.
    """
    frame, findings = linear_evaluate(points.loc[~via], also=injected_unit)
    rows = points.loc[via]
    if rows.empty:
        return frame.reindex(points.index), findings
    lo, hi = rows["input_min"].astype(float), rows["input_max"].astype(float)
    native = q.convert(measurand.loc[via], pd.Series(measurand_unit, index=rows.index), rows["input_unit"])
    scale = pd.Series([(q.affine(measurand_unit, str(u)) or (np.nan, 0.0))[0] for u in rows["input_unit"]],
                      index=rows.index, dtype=float)
    pct = (native - lo) / (hi - lo) * 100.0
    frac, dfrac = characteristic(pct, rows["characteristic"])
    out_span = rows["output_max"].astype(float) - rows["output_min"].astype(float)
    extra = pd.DataFrame({"input_pct": pct, "expected": expected_output(rows, frac),
                          "injected": injected.loc[via].astype(float), "injected_unit": injected_unit,
                          "sensitivity": dfrac * out_span / (hi - lo) * scale * slope.loc[via]},
                         index=rows.index)
    parts = [f for f in (frame, extra) if not f.empty]
    return pd.concat(parts).reindex(points.index), findings


def written_as(points: pd.DataFrame, unit: str) -> tuple[pd.Series, pd.Series]:
    """(mask of rows whose input was written in a unit of ``unit``'s dimension, value in ``unit``)."""
    value = q.convert(points["input_value"].astype(float), points["input_written_unit"].astype(str), unit)
    mask = value.notna() & (points["input_written_unit"] != PERCENT)
    return mask, value
