"""What a reference instrument's found error does to the tests that relied on it (``impacted --error``).

When a calibration finds a reference out of tolerance, its certificate states the error found: the
instrument indicated ``error`` more than the true value (``+0.02 %rdg``: 0.02 % of the reading high;
``-0.004 mA``: 0.004 mA low). Each test that used it is judged again with that error taken out:

- a **meter** read r = r_true + ε, so the reading was r − ε, and the measured output moves by
  −(d measured / d reading) · ε (the reading method's own sensitivity, ``reading_sensitivity``);
- a **source** produced i_true = i − ε when it showed i, so the expected output moves by
  −(d expected / d injected) · ε (the signal type's ``sensitivity``);
- a **shunt** of resistance R(1 + e) turned V into V / (R(1 + e)): the measured current is divided by
  1 + e (e from ``%rdg``, or an amount in ohm over the resistance on record).

A ``%rdg`` error ε is e × the value (e = the percentage / 100). The point is decided again by the rule in
force and the test's verdict worked out as the judge stage does.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext

_ERROR = re.compile(r"^\s*(?P<value>[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(?P<unit>\S.*?)\s*$")


def parse_error(text: str) -> tuple[float, str]:
    """(value, unit) of a found error: ``+0.02 %rdg`` → (0.02, '%rdg'); ``-0.004 mA`` → (-0.004, 'mA')."""
    m = _ERROR.match(str(text))
    if not m:
        raise ValueError(f"--error '{text}' is not a signed error such as +0.02 %rdg or -0.004 mA")
    unit = m["unit"].replace(" ", "")
    if unit != "%rdg":
        unit = q.normalise_unit(unit)
        q.unit_check(unit)  # a ValueError names what is wrong
    return float(m["value"]), unit


def _step(values: pd.Series, units: pd.Series, error: tuple[float, str]) -> pd.Series:
    """ε in each row's own unit (NaN where the error's unit cannot be converted to it)."""
    value, unit = error
    if unit == "%rdg":
        return values.astype(float) * value / 100.0
    return q.convert(pd.Series(value, index=values.index), pd.Series(unit, index=values.index), units.astype(str))


def corrected(points: pd.DataFrame, role: str, error: tuple[float, str], ctx: RunContext) -> pd.DataFrame:
    """``points`` (of tests that used the instrument as ``role``) with ``measured``, ``expected`` and
    ``error`` corrected for the found error; ``correctable`` False where the units do not allow it."""
    pts = points.copy()
    if role == "meter":
        eps = _step(pts["reading"], pts["reading_unit"], error)
        pts["measured"] = pts["measured"] - pts.get("reading_sensitivity", np.nan) * eps
    elif role == "source":
        eps = _step(pts["injected"], pts["injected_unit"], error)
        pts["expected"] = pts["expected"] - pts["sensitivity"] * eps
    else:  # shunt
        value, unit = error
        if unit == "%rdg":
            rel = pd.Series(value / 100.0, index=pts.index)
        else:
            ohms = pts["shunt"].map(lambda s: q.to_float(ctx.instruments.at[s, "resistance"], "ohm"))
            rel = q.convert(pd.Series(value, index=pts.index), pd.Series(unit, index=pts.index), "ohm") / ohms
        pts["measured"] = pts["measured"] / (1.0 + rel)
    pts["error"] = pts["measured"] - pts["expected"]
    pts["error_pct_span"] = pts["error"] / pts["span"] * 100.0
    pts["correctable"] = pts["error"].notna()
    return pts


def rejudge(ctx: RunContext, instrument: str, tests: list[str], error: tuple[float, str]) -> tuple[
        pd.DataFrame, pd.DataFrame]:
    """(points whose decision would change, tests whose verdict would change) when ``instrument``'s found
    ``error`` is taken out of the ``tests`` that used it. Points: test, phase, point, input_pct, error
    before and after, decision before and after. Tests: test, verdict before and after."""
    from loopledger.plugins.judge.tolerance import phase_verdicts

    rule = ctx.decision_rules[str(ctx.section("decision").get("rule", "simple"))]
    pts = ctx.points[ctx.points["test"].isin(tests)]
    if pts.empty:
        return pd.DataFrame(), pd.DataFrame()
    parts = []
    for role in ("source", "meter", "shunt"):
        mine = pts[pts[role].astype(str) == instrument] if role in pts.columns else pts.iloc[0:0]
        if len(mine):
            parts.append(corrected(mine, role, error, ctx))
    again = pd.concat(parts) if parts else pts.iloc[0:0]
    again = again[~again.index.duplicated()]
    decided = rule.decide(again, ctx)
    again["decision_after"] = decided["decision"]
    before = pts.loc[again.index]
    changed = again[again["decision_after"] != before["decision"]]
    points = pd.DataFrame({"test": changed["test"], "phase": changed["phase"], "point": changed["point"],
                           "input_pct": changed["input_pct"], "error_before": before.loc[changed.index, "error"],
                           "error_after": changed["error"], "unit": changed["output_unit"],
                           "decision_before": before.loc[changed.index, "decision"],
                           "decision_after": changed["decision_after"]})
    after = phase_verdicts(again.assign(decision=again["decision_after"]))["verdict"]
    was = ctx.tests.set_index("test")["verdict"].reindex(after.index)
    verdicts = pd.DataFrame({"test": after.index, "verdict_before": was.to_numpy(), "verdict_after": after.to_numpy()})
    return points.reset_index(drop=True), verdicts[verdicts["verdict_before"] != verdicts["verdict_after"]]
