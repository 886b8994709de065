"""The planned rig of a test sheet: what the technician reads (its unit, and each window carried into
it) and the expanded uncertainty U the rig would give at each planned point.

Both are worked out with the stages' own functions: the reading method's ``measured`` (run backwards:
the built-in methods and, by the hook's contract, a plugin's are linear in the reading) and the
uncertainty stage's :func:`loopledger.plugins.uncertainty.budget.compute` on the planned points as the
rig would read them, with the expected output as the measured value (one reading, no scatter).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext


def reading_unit(method: str, reg: pd.Series | dict[str, Any]) -> str | None:
    """The unit the technician reads with ``method`` on the asset ``reg``; None for a method of a plugin
    (whose unit only its own documentation knows)."""
    output = str(reg.get("output_unit") or "")
    if method == "direct":
        return output
    if method == "shunt":
        return "V"
    if method == "display":
        shown = reg.get("display_unit")
        return str(shown) if isinstance(shown, str) and shown.strip() else q.PERCENT
    if method == "counts":
        return "counts"
    return None


def shunt_id(ctx: RunContext, ohms: Any) -> str | None:
    """The id of a shunt of ``ohms`` in instruments.yaml (the first registered), or None."""
    from loopledger.plugins.measure.reading_methods import shunt_ohms

    if ohms is None or ctx.instruments.empty or "kind" not in ctx.instruments.columns:
        return None
    table = ctx.instruments[ctx.instruments["kind"] == "shunt"]
    values = shunt_ohms(ctx, pd.Series(table.index, index=table.index, dtype=object))
    match = values[np.isclose(values.astype(float), float(ohms))]
    return str(match.index[0]) if len(match) else None


def to_reading(ctx: RunContext, frame: pd.DataFrame, output: pd.Series) -> pd.Series:
    """Output values (in each row's output unit) as each row's rig would read them, in ``read_unit``.

    ``frame`` has the planned rows with ``method``, ``read_unit``, ``shunt_ohm`` and the registry
    columns. A shunt's volts are I·R; other methods are run at two readings and inverted (they are
    linear in the reading). NaN where the method is unknown or the output cannot be read that way.
    """
    out = pd.Series(np.nan, index=frame.index, dtype=float)
    shunted = frame["method"] == "shunt"
    if shunted.any():
        amps = q.convert(output[shunted], frame.loc[shunted, "output_unit"], "A")
        out[shunted] = amps * frame.loc[shunted, "shunt_ohm"].astype(float)
    rest = frame[~shunted & frame["read_unit"].notna()]
    for method, idx in rest.groupby("method", sort=False).groups.items():
        handler = ctx.methods.get(str(method))
        if handler is None:
            continue
        rows = rest.loc[idx].assign(reading_unit=rest.loc[idx, "read_unit"])
        try:
            at0, _ = handler.measured(rows.assign(reading=0.0), ctx)
            at1, _ = handler.measured(rows.assign(reading=1.0), ctx)
        except Exception:  # a plugin's method that cannot read a planned row: no reading-unit window
            continue
        slope = (at1 - at0).astype(float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out[idx] = ((output[idx] - at0) / slope.where(slope != 0)).astype(float)
    return out


def planned_u(ctx: RunContext, frame: pd.DataFrame) -> tuple[pd.DataFrame, pd.Series]:
    """(u, k, nu_eff, U per planned row; what the budget lacked, per row, or None) for the planned rig.

    ``frame`` holds the evaluated planned rows (``expected``, ``injected``, ``sensitivity``, ...) with the
    rig's ``method``, ``meter``, ``source``, ``shunt`` (id), ``read_unit`` and ``read_expected``.
    """
    from loopledger.plugins.uncertainty import budget

    pts = frame.assign(measured=frame["expected"].astype(float), reading=frame["read_expected"].astype(float),
                       reading_unit=frame["read_unit"].fillna(frame["output_unit"]), n_readings=1,
                       reading_sd=np.nan, reading_half_spread=np.nan, ambient_c=np.nan,
                       reading_text=np.where(frame["method"] == "counts",
                                             frame["read_expected"].round().map("{:.0f} counts".format), ""))
    _, per, problems = budget.compute(ctx, pts)
    # a reading from the control system takes its resolution from the digits written, unknown before the
    # test unless assets.csv gives display_resolution: say so rather than the budget's general words
    given = pd.to_numeric(pts["display_resolution"], errors="coerce") if "display_resolution" in pts.columns \
        else pd.Series(np.nan, index=pts.index)
    unread = problems.notna() & ~pts["method"].isin(budget.METER_METHODS) & given.isna() & \
        (pts["method"] != "counts")
    problems[unread] = ("the display's resolution is known only from the digits written on the day; give "
                        "display_resolution in assets.csv to plan with it")
    return per[["u", "k", "nu_eff", "U"]], problems
