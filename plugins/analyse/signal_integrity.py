"""Stage ``ll_analyse``: NAMUR NE 43 bands of each output current, and clipping at the top.

- ``ne43_band`` per point, for current outputs with a 4-20 mA live zero only (``n/a``
  otherwise): ``measurement`` 3.8-20.5 mA, ``failure-low`` ≤ 3.6 mA, ``failure-high``
  ≥ 21.0 mA, and ``undefined-low`` / ``undefined-high`` between (NAMUR NE 43). A reading
  near 0 mA is reported as a broken loop, one in a failure band as a failure signal, rather
  than as a large calibration error.
- ``clipped`` per point: within one phase of one test, the top points fall short of expected
  (beyond the MPE) while every lower point is within tolerance and the short points still sit
  above them: the output ran out of drive (compliance) voltage. The warning names the burden
  figures of the burden stage (loop, limit and the most current the loop can carry).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger import quantities as q
from loopledger.cells import grouped
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl, needs

#: NAMUR NE 43 limits, mA
MEASURE_LOW, MEASURE_HIGH = 3.8, 20.5
FAILURE_LOW, FAILURE_HIGH = 3.6, 21.0
#: below this a 4-20 mA loop carries no signal at all: open circuit or no power (common practice)
NO_CURRENT_MA = 1.0
#: comparisons at the band edges allow this much floating-point noise (mA)
EDGE = 1e-9
FAILURE_BANDS = ("failure-low", "failure-high")
OUTSIDE = ("failure-low", "undefined-low", "undefined-high", "failure-high")


def output_ma(points: pd.DataFrame, column: str = "measured") -> tuple[pd.Series, pd.Series]:
    """(value of ``column`` in mA, True where the output is a 4-20 mA current)."""
    factor: dict[str, float] = {}
    for unit in pd.unique(points["output_unit"].dropna().astype(str)):
        ab = q.affine(unit, "mA")
        factor[unit] = ab[0] if ab is not None and ab[1] == 0.0 else np.nan
    scale = points["output_unit"].astype(str).map(factor).astype(float)
    low = points["output_min"].astype(float) * scale
    high = points["output_max"].astype(float) * scale
    live_zero = pd.Series(np.isclose(low, 4.0) & np.isclose(high, 20.0), index=points.index)
    return points[column].astype(float) * scale, live_zero


def classify(ma: pd.Series | np.ndarray) -> np.ndarray:
    """The NE 43 band of each current in mA (edges belong to the band whose limit they are)."""
    ma = np.asarray(ma, dtype=float)
    bands = np.select([ma <= FAILURE_LOW + EDGE, ma < MEASURE_LOW - EDGE, ma <= MEASURE_HIGH + EDGE,
                       ma < FAILURE_HIGH - EDGE], ["failure-low", "undefined-low", "measurement", "undefined-high"],
                      "failure-high")
    return np.where(np.isnan(ma), "n/a", bands)


def band_words(ma: float, band: str) -> str:
    if ma <= -NO_CURRENT_MA:
        return (f"{ma:.2f} mA: the current flows the wrong way — reversed polarity or swapped leads, not a "
                "calibration error")
    if band == "failure-low" and ma < NO_CURRENT_MA:
        return (f"{ma:.2f} mA: no loop current — a broken loop (open circuit, blown fuse) or an unpowered "
                "output, not a calibration error")
    if band in FAILURE_BANDS:
        side = "≤ 3.6 mA" if band == "failure-low" else "≥ 21.0 mA"
        return (f"{ma:.2f} mA is an NE 43 failure signal ({side}): the device is reporting a fault (or its "
                "output stage has failed), not measuring")
    side = "3.6-3.8 mA" if band == "undefined-low" else "20.5-21.0 mA"
    return (f"{ma:.2f} mA is in the NE 43 undefined band ({side}): outside the measuring range 3.8-20.5 mA "
            "and not a valid failure signal")


def clipping(points: pd.DataFrame) -> pd.Series:
    """True for points that read short at the top of a phase whose lower points are in tolerance."""
    key = [points["test"], points["phase"]]
    short = points["error"] < -points["mpe"]
    inside = points["error"].abs() <= points["mpe"]
    exp = points["expected"].astype(float)
    lowest_short = exp.where(short).groupby(key).transform("min")
    highest_other = exp.where(~short).groupby(key).transform("max")
    n_inside = inside.astype(int).groupby(key).transform("sum")
    all_others_inside = (~short & ~inside).astype(int).groupby(key).transform("sum") == 0
    ceiling_above = (points["measured"].where(short).groupby(key).transform("min")
                     >= points["measured"].where(inside).groupby(key).transform("max"))
    rising = exp.groupby(key).transform("max") > exp.groupby(key).transform("min")
    return (short & (lowest_short > highest_other) & (n_inside >= 2) & all_others_inside & ceiling_above
            & rising).fillna(False).astype(bool)


def _where(row: Any) -> dict[str, Any]:
    return {"file": row.source_file, "line": int(row.line), "point": f"{row.phase} #{row.point}"}


def burden_link(ctx: RunContext, test: str, ceiling_ma: float) -> str:
    """What the burden stage says about this test's loop, for a clipping warning."""
    terms = ctx.stash.get(keys.BURDEN)
    if terms is None or test not in terms.index:
        return "no burden figures (the burden stage did not run)"
    row = terms.loc[test]
    if row["burden_status"] == "unknown":
        return f"the burden could not be checked ({row['burden_reason']}); fill in the loop data in assets.csv"
    carry = row["compliance_v"] / row["loop_ohm"] * 1000.0
    text = (f"burden: loop {row['loop_ohm']:.1f} Ω against a drive limit of {row['limit_ohm']:.1f} Ω "
            f"({row['burden_status']}, margin {row['margin_pct']:.1f} %); {row['compliance_v']:.2f} V can push at most "
            f"{carry:.2f} mA through this loop")
    if row["burden_status"] == "ok" and carry > ceiling_ma + 0.1:
        text += ("; the burden figures do not explain readings flattening near "
                 f"{ceiling_ma:.2f} mA: check the loop data in assets.csv, the output stage and its supply")
    return text


@hookimpl
@needs("stash.burden")
def ll_analyse(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    ma, live_zero = output_ma(pts)
    pts["ne43_band"] = np.where(live_zero, classify(ma), "n/a")
    is_current = ma.notna() | q.of_dimension(pts["output_unit"], "A")
    pts["clipped"] = clipping(pts) & is_current & ~pts["ne43_band"].isin(OUTSIDE)
    ctx.points = pts
    exports = ctx.stash.setdefault(keys.POINT_EXPORTS, [])
    exports += [c for c in ("ne43_band", "clipped") if c not in exports]
    outside = pts["ne43_band"].isin(OUTSIDE)
    findings = [warning(band_words(m, row.ne43_band), field="reading", code="ne43", **_where(row))
                for row, m in zip(pts.loc[outside, WHERE].itertuples(), ma[outside], strict=True)]
    return findings + clipping_findings(ctx, pts[pts["clipped"]], ma[pts["clipped"]])


#: the point columns a finding's place is taken from
WHERE = ["source_file", "line", "phase", "point", "ne43_band"]


def clipping_findings(ctx: RunContext, clipped: pd.DataFrame, ma: pd.Series) -> list[Finding]:
    """One warning per clipped phase of a test, placed at its lowest clipped point (the first in the table
    among equals) and naming its worst error (likewise) and the highest output reached, in mA."""
    rows = clipped[["test", "phase", "expected", "input_pct", "error", "output_unit", "source_file", "line",
                    "point"]].reset_index(drop=True).assign(ma=ma.to_numpy())
    group = rows.groupby(["test", "phase"], sort=False)
    first = rows.loc[group["expected"].idxmin()].reset_index(drop=True)
    worst = rows.loc[group["error"].idxmin()].reset_index(drop=True)
    ceiling, count = group["ma"].max().to_numpy(), group.size().to_numpy()
    return [warning(
        f"{str(phase).replace('_', '-')}: the top {n} point(s) (from {pct:.0f} % of range) "
        f"read short of expected, worst {err:+.4g} {unit}, while the lower points are "
        f"in tolerance: the output is likely clipping at its drive (compliance) limit — "
        + burden_link(ctx, str(test), float(top)),
        field="reading", code="clipping", file=source, line=int(line), point=f"{phase} #{point}")
        for test, phase, pct, source, line, point, err, unit, top, n in zip(
            first["test"], first["phase"], first["input_pct"], first["source_file"], first["line"], first["point"],
            worst["error"], worst["output_unit"], ceiling, count, strict=True)]


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    if "ne43_band" not in ctx.points:
        return {}
    columns = ["test", "phase", "point", "ne43_band", "clipped", "measured", "output_unit", "output_min", "output_max"]
    pts = ctx.points.loc[ctx.points["test"].isin(tests), columns]  # the columns first: the table is wide
    count = pts["test"].value_counts(sort=False).to_dict()
    banded = pd.unique(pts.loc[pts["ne43_band"] != "n/a", "test"])  # a page for tests with a 4-20 mA output only
    out = {str(test): [Section(title="Signal integrity (NAMUR NE 43)", kind="text", order=45,
                               text=f"All {count[test]} readings lie in the NE 43 measuring range 3.8-20.5 mA; "
                                    "no clipping.")]
           for test in banded}
    bad = pts[(pts["ne43_band"].isin(OUTSIDE) | pts["clipped"]) & pts["test"].isin(banded)]
    if bad.empty:
        return out
    bad = bad.sort_values(["test", "phase", "point"])
    ma, _ = output_ma(bad)
    rows = grouped(bad["test"].tolist(), [
        [str(p.phase).replace("_", "-"), p.point, f"{m:.3f} mA", p.ne43_band,
         "clipped at the top" if p.clipped else band_words(m, p.ne43_band)]
        for p, m in zip(bad.itertuples(), ma.tolist(), strict=True)])
    for test, body in rows.items():
        out[test] = [Section(title="Signal integrity (NAMUR NE 43)", kind="table", order=45,
                             columns=["Phase", "#", "Output", "NE 43 band", "What it means"], rows=body)]
    return out
