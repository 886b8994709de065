"""Stage ``ll_analyse``: read the shape of a test's errors and name the likely cause.

Per phase of each test, from the judged points (errors in output units, position on the
output span 0..1, MPE), in this order, first match wins:

1. **reversed** — readings fall as the input rises (least-squares slope of measured on
   expected below −0.5): reversed polarity or wrong terminals;
2. **broken loop / failure signal** — a reading in an NE 43 failure band (signal integrity);
3. **clipping** — top-only shortfall (signal integrity's ``clipped``);
4. only when a point fails:
   - **scaled** — every point is the same multiple of expected measured from the live zero
     ((measured − out_min) / (expected − out_min) constant within 1 %, more than 5 % from 1):
     scaled for another CT ratio or range;
   - **zero**, **span** or **zero and span** — the straight line fitted to error against
     position, when no point lies more than half the MPE off it: its intercept (zero) and its
     rise over the span (span), each significant when larger than half the MPE and the other
     smaller than half of it;
   - **non-linear** — what is left after that line exceeds half the MPE.

Independently, **unsteady** — the spread between repeat readings (max − min, or ±2 standard
deviations) exceeds the MPE at some point: noise, a loose connection or an unsteady source.

``fault_signature`` on ctx.tests is the as-found signature (with the as-left one after it when it
differs); the full sentence goes to a warning finding and the test page.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl, needs
from loopledger.plugins.analyse.burden import fmt
from loopledger.plugins.analyse.signal_integrity import FAILURE_BANDS, NO_CURRENT_MA, output_ma

#: measured falls against expected at least this steeply (a broken loop reads flat, near 0)
REVERSED_SLOPE = -0.5
#: a fixed ratio counts as "scaled" when it is this far from 1 ...
RATIO_AWAY = 0.05
#: ... and the ratios of the points agree within this
RATIO_AGREE = 0.01
#: positions below this fraction of span are left out of the ratio (it is undefined at the live zero)
RATIO_MIN_POSITION = 0.1


def _fit(frame: pd.DataFrame, x: str, y: str, key: list[str]) -> tuple[pd.Series, pd.Series]:
    """Per-group least-squares line y = a + b x (intercept a, slope b), vectorised."""
    g = frame.groupby(key, sort=False)
    mx, my = g[x].transform("mean"), g[y].transform("mean")
    dx = frame[x] - mx
    sxx = (dx * dx).groupby([frame[k] for k in key], sort=False).sum()
    sxy = (dx * (frame[y] - my)).groupby([frame[k] for k in key], sort=False).sum()
    slope = (sxy / sxx.where(sxx > 0)).rename("b")
    intercept = (g[y].mean() - slope * g[x].mean()).rename("a")
    return intercept, slope


def phase_table(pts: pd.DataFrame) -> pd.DataFrame:
    """One row per (test, phase): the numbers the signatures are read from."""
    key = ["test", "phase"]
    frame = pts[key].copy()
    span = pts["span"].astype(float)
    frame["pos"] = (pts["expected"] - pts["output_min"].astype(float)) / span
    frame["error"] = pts["error"].astype(float)
    frame["expected"] = pts["expected"].astype(float)
    frame["measured"] = pts["measured"].astype(float)
    frame["reading"] = pts["reading"].astype(float)
    from_zero = frame["expected"] - pts["output_min"].astype(float)
    frame["ratio"] = ((frame["measured"] - pts["output_min"].astype(float)) / from_zero).where(
        frame["pos"] >= RATIO_MIN_POSITION)
    a, b = _fit(frame, "pos", "error", key)
    _, m = _fit(frame, "expected", "measured", key)
    _, per_reading = _fit(frame, "reading", "measured", key)
    each = pd.MultiIndex.from_frame(frame[key])  # each point's (test, phase), to spread the fits back out
    fitted = a.reindex(each).to_numpy() + b.reindex(each).to_numpy() * frame["pos"].to_numpy()
    frame["residual"] = (frame["error"] - fitted).abs()
    scale = per_reading.abs().reindex(each).to_numpy()
    half = pts["reading_half_spread"].astype(float) if "reading_half_spread" in pts else np.nan
    sd = pts["reading_sd"].astype(float) if "reading_sd" in pts else np.nan
    frame["repeat_spread"] = pd.Series(np.where(pd.notna(half), 2 * half, 4 * sd), index=pts.index) * scale
    frame["spread_over_mpe"] = frame["repeat_spread"] / pts["mpe"].astype(float)
    frame["mpe"] = pts["mpe"].astype(float)
    frame["failing"] = pts["decision"].isin(["fail", "conditional-fail"])
    frame["clipped"] = pts["clipped"] if "clipped" in pts else False
    band = pts["ne43_band"] if "ne43_band" in pts else pd.Series("n/a", index=pts.index)
    ma, _ = output_ma(pts)
    frame["no_current"] = band.eq("failure-low") & (ma.abs() < NO_CURRENT_MA)
    frame["failure"] = band.isin(FAILURE_BANDS)
    g = frame.groupby(key, sort=False)
    table = pd.DataFrame({
        "zero": a, "span_rise": b, "measured_slope": m,
        "residual": g["residual"].max(), "mpe": g["mpe"].mean(), "failing": g["failing"].any(),
        "clipped": g["clipped"].sum(), "no_current": g["no_current"].sum(), "failure": g["failure"].sum(),
        "ratio": g["ratio"].mean(), "ratio_spread": g["ratio"].max() - g["ratio"].min(),
        "spread": g["repeat_spread"].max(), "spread_over_mpe": g["spread_over_mpe"].max(),
        "unit": pts.groupby(key, sort=False)["output_unit"].first(), "n": g["error"].size(),
    })
    return table


def signatures(table: pd.DataFrame) -> pd.DataFrame:
    """(signature, detail) per (test, phase) row of :func:`phase_table`."""
    t = table
    half = t["mpe"] / 2
    zero_sig = t["zero"].abs() > half
    span_sig = t["span_rise"].abs() > half
    zero_only = zero_sig & (t["span_rise"].abs() < half)
    span_only = span_sig & (t["zero"].abs() < half)
    straight = t["residual"] <= half  # the fitted line explains the errors: a zero/span shape, not a bend
    zero_sig &= straight
    span_sig &= straight
    zero_only &= straight
    span_only &= straight
    scaled = ((t["ratio"] - 1).abs() > RATIO_AWAY) & (t["ratio_spread"] <= RATIO_AGREE)

    def num(s: pd.Series, spec: str = "{:+.3g}") -> pd.Series:
        return fmt(s, spec)

    def u(r: pd.DataFrame) -> pd.Series:
        return " " + r["unit"].astype(str)

    # (when, label, the detail's words made from the rows it applies to)
    cases: list[tuple[pd.Series, str, Callable[[pd.DataFrame], Any]]] = [
        (t["measured_slope"] < REVERSED_SLOPE, "reversed", lambda r:
         "readings fall as the input rises: reversed polarity, crossed terminals or a reverse-acting setting"),
        (t["no_current"] > 0, "broken loop", lambda r:
         "no loop current at " + num(r["no_current"], "{:.0f}") + " point(s): a broken loop, blown fuse or unpowered "
         "output — repair the loop before judging calibration"),
        (t["failure"] > 0, "failure signal", lambda r:
         "the output sits in an NE 43 failure band at " + num(r["failure"], "{:.0f}") + " point(s): the device is "
         "signalling a fault"),
        (t["clipped"] > 0, "clipping", lambda r:
         "only the top " + num(r["clipped"], "{:.0f}") + " point(s) fall short: the loop is beyond the output's "
         "drive limit (see the burden check)"),
        (t["failing"] & scaled, "scaled", lambda r:
         "every point reads " + num(r["ratio"], "{:.3f}") + " × expected (from the live zero): the receiver or the "
         "transducer is scaled for another current-transformer ratio or range"),
        (t["failing"] & zero_only, "zero offset", lambda r:
         "a constant offset of about " + num(r["zero"]) + u(r) + " at every point: adjust zero"),
        (t["failing"] & span_only, "span", lambda r:
         "the error grows with the input, " + num(r["span_rise"]) + u(r) + " more at full scale than at zero: "
         "adjust span"),
        (t["failing"] & zero_sig & span_sig, "zero and span", lambda r:
         "an offset of " + num(r["zero"]) + u(r) + " at zero and " + num(r["span_rise"]) + u(r)
         + " more at full scale: adjust zero, then span"),
        (t["failing"] & (t["residual"] > half), "non-linear", lambda r:
         "the error bends: up to " + num(r["residual"], "{:.3g}") + u(r) + " off the best straight line — "
         "adjustment of zero and span will not remove it"),
    ]
    conds = [np.asarray(c.fillna(False), dtype=bool) for c, _, _ in cases]
    chosen = np.select(conds, list(range(len(cases))), -1)  # the first case that holds, per row
    label = pd.Series(np.select(conds, [s for _, s, _ in cases], ""), index=t.index, dtype=object)
    detail = pd.Series("", index=t.index, dtype=object)
    for i, (_, _, words) in enumerate(cases):  # words only for the rows they describe
        rows = chosen == i
        if rows.any():
            said = words(t[rows])
            detail[rows] = said.to_numpy() if isinstance(said, pd.Series) else said
    noisy = (t["spread_over_mpe"] > 1).fillna(False)
    if noisy.any():
        r = t[noisy]
        noise = ("repeat readings spread by up to " + num(r["spread"], "{:.3g}") + u(r) + ", more than the MPE: "
                 "noise, a loose connection or an unsteady source")
        label = label.where(~noisy, (label + "; ").where(label != "", "") + "unsteady")
        detail = detail.where(~noisy, (detail + "; ").where(detail != "", "") + noise.reindex(t.index))
    return pd.DataFrame({"signature": label, "detail": detail})


def test_column(sig: pd.DataFrame) -> pd.Series:
    """The as-found signature per test, followed by the as-left one when that differs."""
    labels = sig["signature"].unstack("phase") if len(sig) else pd.DataFrame()
    found = labels.get("as_found", pd.Series("", index=labels.index)).fillna("")
    left = labels.get("as_left", pd.Series("", index=labels.index)).fillna("")
    extra = ("as-left: " + left).where((left != "") & (left != found), "")
    return (found + np.where((found != "") & (extra != ""), "; ", "") + extra).astype(str)


@hookimpl
@needs("clipped", "ne43_band")
def ll_analyse(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    sig = signatures(phase_table(pts))
    ctx.stash[keys.FAULT_SIGNATURES] = sig
    ctx.tests["fault_signature"] = ctx.tests["test"].map(test_column(sig)).fillna("")
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    if "fault_signature" not in exports:
        exports.append("fault_signature")
    files = pts.groupby("test")["source_file"].first()
    said_elsewhere = {"broken loop", "failure signal", "clipping"}  # signal integrity warns per point/phase
    findings = []
    shown = sig[(sig["signature"] != "") & ~sig["signature"].isin(said_elsewhere)]
    where = shown.index.get_level_values("test").map(files).tolist()
    for (_test, phase), label, detail, file in zip(shown.index, shown["signature"].tolist(),
                                                   shown["detail"].tolist(), where, strict=True):
        findings.append(warning(f"{str(phase).replace('_', '-')} fault signature — {label}: {detail}",
                                file=file, field="readings", code="fault-signature"))
    return findings


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    sig = ctx.stash.get(keys.FAULT_SIGNATURES)
    if sig is None:
        return {}
    mine = sig[sig.index.get_level_values("test").isin(tests)]
    found: dict[str, list[tuple[str, str]]] = {}
    for (test, phase), label, detail in zip(mine.index, mine["signature"].tolist(), mine["detail"].tolist(),
                                            strict=True):
        facts = found.setdefault(str(test), [])
        if label:
            facts.append((str(phase).replace("_", "-"), f"{label}: {detail}"))
    return {test: [Section(title="Fault signature", kind="facts", rows=facts, order=46,
                           covers=("fault-signature",)) if facts else
                   Section(title="Fault signature", kind="text", order=46,
                           text="No fault pattern found (signatures are read only when a point fails, "
                                "except for unsteady repeats).")]
            for test, facts in found.items()}
