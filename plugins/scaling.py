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


def where(points: pd.DataFrame, idx: object) -> dict[str, object]:
    return {"file": points.at[idx, "source_file"], "line": int(points.at[idx, "line"]),
            "point": f"{points.at[idx, 'phase']} #{points.at[idx, 'point']}"}


def input_in_range_unit(points: pd.DataFrame, scale: pd.Series | float = 1.0,
                        ) -> tuple[pd.Series, pd.Series, list[Finding]]:
    """(input_pct, injected value in the asset's input_unit × scale, findings).

    ``scale`` divides a written quantity before it is placed on the input range
    (a current transformer's ratio for primary injection) and multiplies the
    injected value computed from a percentage.
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
        findings.append(error(f"input '{points.at[idx, 'input']}' is not in units of {points.at[idx, 'input_unit']} "
                              "or %", field="input", **where(points, idx)))
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


def linear_evaluate(points: pd.DataFrame, scale: pd.Series | float = 1.0) -> tuple[pd.DataFrame, list[Finding]]:
    """The whole evaluation for a device whose output follows its input range directly."""
    pct, injected, findings = input_in_range_unit(points, scale)
    frac, slope = characteristic(pct, points["characteristic"])
    expected = expected_output(points, frac)
    in_span = (points["input_max"].astype(float) - points["input_min"].astype(float)) * scale
    out_span = points["output_max"].astype(float) - points["output_min"].astype(float)
    frame = pd.DataFrame({"input_pct": pct, "expected": expected, "injected": injected,
                          "injected_unit": points["input_unit"], "sensitivity": slope * out_span / in_span},
                         index=points.index)
    return frame, findings
