"""Stage ``ll_analyse``: the loop burden of every test, and of a planned rig (`loopledger loop`).

The loop the output must drive while it is tested is the sum of

- what the rig inserts: the shunt's resistance (method ``shunt``), the meter's burden on its
  milliamp range (method ``direct``; ``burden`` in instruments.yaml, e.g. ``15 mV/mA``), or
  nothing (method ``display``);
- for ``in-loop`` tests, the receiver's input (``receiver_ohm``) and the cable to it: both
  conductors, 2 × ``cable_length_m`` × Ω/km of ``cable_mm2`` (IEC 60228) or ``cable_awg``,
  at the test's ambient temperature (see :mod:`loopledger.plugins.analyse.conductors`).

The output can drive it up to a fixed compliance voltage: ``max_load_ohm`` × the top of the
output range for a self-powered transducer (``power = self``), or ``supply_v`` −
``min_terminal_v`` for a loop-powered transmitter (``power = loop``). The limit at a current I
is that voltage / I: at the top of the range (20 mA) it is ``limit_ohm``; at the NAMUR NE 43
upper measuring limit (20.5 mA for a 4-20 mA output) it is ``upper_limit_ohm``; at the NE 43
high failure current (21 mA, the least a failure signal must reach) it is ``failure_limit_ohm``.
A loop that cannot carry 21 mA would clip a high failure signal (``high_failure_clipped``): a
warning of its own, even where the margin at 20 mA is fine.
``margin_pct`` = (limit − loop) / limit at the top of the range; ``burden_status`` is ``ok``
(≥ 10 %), ``low-margin`` (0-10 %), ``exceeds`` (< 0) or ``unknown`` (data missing).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger import quantities as q
from loopledger.cells import each_value
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, note, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.analyse import conductors
from loopledger.plugins.measure.reading_methods import shunt_ohms

#: below this margin (% of the limit) the burden is ``low-margin``
LOW_MARGIN_PCT = 10.0
#: the NAMUR NE 43 upper limit of the measuring range for a 4-20 mA output, in A
NE43_UPPER_A = 0.0205
#: the NAMUR NE 43 high failure signal (≥ 21 mA), in A: a loop must carry it to signal a high failure
NE43_FAILURE_A = 0.021
#: the shunt offered as the "smaller shunt" fix (10 Ω drops 0.2 V at 20 mA)
SMALL_SHUNT_OHM = 10.0

TEST_COLUMNS = ["loop_ohm", "limit_ohm", "margin_pct", "burden_status", "rig_ohm", "receiver_loop_ohm",
                "cable_ohm", "compliance_v", "upper_limit_ohm", "failure_limit_ohm", "high_failure_clipped"]


def _asset_rows(ctx: RunContext, assets: pd.Series, lines: pd.Series | None = None) -> pd.DataFrame:
    """Each rig's assets.csv row: the row in force on the test's date where ``lines`` (the tests'
    ``asset_row``) names it, else the asset's current row (a planned rig)."""
    rows = ctx.assets.drop(columns=["asset"], errors="ignore").reindex(assets.astype(str).to_numpy()).astype(object)
    rows.index = assets.index
    at = pd.to_numeric(lines, errors="coerce") if lines is not None and "asset_row" in ctx.asset_rows else None
    if at is not None and (have := at.isin(ctx.asset_rows["asset_row"])).any():
        by_line = ctx.asset_rows.set_index("asset_row", drop=False)[list(rows.columns)]
        picked = by_line.reindex(at[have].astype(int).to_numpy()).set_axis(at[have].index).astype(object)
        rows.loc[picked.index, picked.columns] = picked
    return rows


def _amps_per_unit(units: pd.Series) -> pd.Series:
    """Factor from each output unit to A (NaN where the output is not a current)."""
    factors: dict[str, float] = {}
    for unit in pd.unique(units.dropna().astype(str)):
        ab = q.affine(unit, "A")
        factors[unit] = ab[0] if ab is not None and ab[1] == 0.0 else np.nan
    return units.astype(str).map(factors).astype(float)


def meter_burden(ctx: RunContext, meter: str, top_a: float) -> tuple[float, str]:
    """(Ω, description) of ``meter`` on the current range it would use for a top of ``top_a`` amps.

    The range is the smallest current range at least as large as ``top_a``, else the largest one.
    A burden written as a voltage (e.g. ``0.3 V``, the drop at full range) is divided by the range.
    NaN when the meter has no current range with a readable burden.
    """
    ranges = ctx.ranges[ctx.ranges["instrument"] == meter] if not ctx.ranges.empty else ctx.ranges
    found: list[tuple[float, float, str]] = []
    for row in ranges.itertuples():
        try:
            full = q.to_float(row.range, "A")
        except (ValueError, TypeError):
            continue
        if row.burden is None or (isinstance(row.burden, float) and np.isnan(row.burden)):
            continue
        try:
            ohm = q.to_float(row.burden, "ohm")
        except (ValueError, TypeError):
            try:
                ohm = q.to_float(row.burden, "V") / full
            except (ValueError, TypeError, ZeroDivisionError):
                continue
        found.append((full, ohm, f"{meter} on its {row.range} range ({row.burden})"))
    if not found:
        return np.nan, f"{meter} has no current range with a burden in instruments.yaml"
    found.sort()
    fitting = [f for f in found if f[0] >= top_a * (1 - 1e-9)]
    full, ohm, text = fitting[0] if fitting else found[-1]
    return ohm, text


def best_meter(ctx: RunContext, top_a: float) -> tuple[str, float, str]:
    """The registry meter with the lowest milliamp-range burden (id, Ω, description)."""
    best: tuple[str, float, str] = ("", np.nan, "")
    kinds = ctx.instruments.get("kind", pd.Series(dtype=object))
    for ident in kinds.index[kinds == "meter"]:
        ohm, text = meter_burden(ctx, str(ident), top_a)
        if np.isfinite(ohm) and not (np.isfinite(best[1]) and best[1] <= ohm):
            best = (str(ident), ohm, text)
    return best


def fmt(series: pd.Series, spec: str = "{:g}") -> pd.Series:
    """Each number formatted with ``spec``; ``?`` where it is missing."""
    text = each_value(series, lambda v: "?" if pd.isna(v) else spec.format(v))  # once per distinct number
    return pd.Series(text, index=series.index, dtype=object)


def _text(series: pd.Series) -> pd.Series:
    return series.astype(object).where(series.notna(), "").astype(str)


def analyse(ctx: RunContext, rigs: pd.DataFrame) -> pd.DataFrame:
    """The burden terms of each rig (one row per test or planned rig), vectorised.

    ``rigs`` has ``asset``, ``method``, ``connection``, ``ambient_c``, ``meter``, ``shunt`` (an
    instrument id) and optionally ``shunt_ohm`` (a resistance given directly, which wins).
    """
    a = _asset_rows(ctx, rigs["asset"], rigs["asset_row"] if "asset_row" in rigs.columns else None)
    method = _text(rigs["method"])
    in_loop = _text(rigs["connection"]) == "in-loop"
    ambient = pd.to_numeric(rigs["ambient_c"], errors="coerce").astype(float)
    ambient_used = ambient.fillna(20.0)
    per_amp = _amps_per_unit(a["output_unit"])
    top_a = pd.to_numeric(a["output_max"], errors="coerce") * per_amp
    low_a = pd.to_numeric(a["output_min"], errors="coerce") * per_amp
    four_twenty = np.isclose(low_a, 0.004) & np.isclose(top_a, 0.020)
    upper_a = pd.Series(np.where(four_twenty, NE43_UPPER_A, top_a), index=rigs.index)

    # what the rig inserts
    given = pd.to_numeric(rigs["shunt_ohm"], errors="coerce") if "shunt_ohm" in rigs else np.nan
    shunt = pd.Series(given, index=rigs.index, dtype=float).fillna(shunt_ohms(ctx, rigs["shunt"]))
    meter_ohm = pd.Series(np.nan, index=rigs.index)
    meter_desc = pd.Series("", index=rigs.index, dtype=object)
    direct = method == "direct"
    pairs = pd.DataFrame({"m": _text(rigs["meter"]), "t": top_a.fillna(0.020)})[direct]
    for (ident, top), idx in pairs.groupby(["m", "t"]).groups.items():
        ohm, text = meter_burden(ctx, str(ident), float(top)) if ident else (np.nan, "no meter named")
        meter_ohm[idx], meter_desc[idx] = ohm, text
    rig = pd.Series(np.select([method == "shunt", direct, method == "display"], [shunt, meter_ohm, 0.0], np.nan),
                    index=rigs.index)
    rig_desc = pd.Series(np.select(
        [method == "shunt", direct, method == "display"],
        ["shunt " + _text(rigs["shunt"]).where(_text(rigs["shunt"]) != "", "of " + fmt(shunt) + " Ω"),
         "meter " + meter_desc,
         "nothing (the control system's own reading)"], "method '" + method + "'"), index=rigs.index)

    # the receiver and the cable, for in-loop tests only
    receiver_ohm = pd.to_numeric(a["receiver_ohm"], errors="coerce")
    receiver = pd.Series(np.where(in_loop, receiver_ohm, 0.0), index=rigs.index)
    mm2 = pd.to_numeric(a["cable_mm2"], errors="coerce")
    awg = pd.to_numeric(a["cable_awg"], errors="coerce")
    per_km = conductors.mm2_ohm_per_km(mm2).where(mm2.notna(), conductors.awg_ohm_per_km(awg))
    length = pd.to_numeric(a["cable_length_m"], errors="coerce")
    cable = pd.Series(np.where(in_loop, conductors.loop_ohm(per_km, length, ambient_used), 0.0), index=rigs.index)
    size = pd.Series(np.where(mm2.notna(), fmt(mm2) + " mm²", "AWG " + fmt(awg)), index=rigs.index)
    cable_desc = ("2 × " + fmt(length) + " m of " + size + " copper, " + fmt(per_km, "{:.4g}")
                  + " Ω/km at 20 °C, corrected to " + fmt(ambient_used) + " °C"
                  + np.where(ambient.isna(), " (ambient not recorded: 20 °C assumed)", ""))

    loop = rig + receiver + cable
    power = _text(a["power"])
    max_load = pd.to_numeric(a["max_load_ohm"], errors="coerce")
    headroom = pd.to_numeric(a["supply_v"], errors="coerce") - pd.to_numeric(a["min_terminal_v"], errors="coerce")
    self_powered = (power == "self") | ((power == "") & max_load.notna())
    loop_powered = (power == "loop") | ((power == "") & max_load.isna() & headroom.notna())
    compliance = pd.Series(np.select([self_powered, loop_powered], [max_load * top_a, headroom], np.nan),
                           index=rigs.index)
    limit = compliance / top_a
    upper_limit = compliance / upper_a
    failure_limit = (compliance / NE43_FAILURE_A).where(four_twenty)
    margin = (limit - loop) / limit * 100.0
    reasons = [
        (a["output_unit"].isna(), "the asset is not in assets.csv"),
        (per_amp.isna(), "the output is not a current"),
        ((method == "shunt") & shunt.isna(), "the shunt has no readable resistance"),
        (direct & meter_ohm.isna(), "the meter's burden is not known: " + meter_desc),
        (rig.isna(), "reading method '" + method + "' has no known burden"),
        (in_loop & receiver_ohm.isna(), "receiver_ohm is blank in assets.csv"),
        (in_loop & length.isna(), "cable_length_m is blank in assets.csv"),
        (in_loop & mm2.isna() & awg.isna(), "cable_mm2 and cable_awg are blank in assets.csv"),
        (in_loop & per_km.isna(), "the cable size (" + size + ") is not in the conductor table"),
        (self_powered & max_load.isna(), "max_load_ohm is blank in assets.csv"),
        (loop_powered & headroom.isna(), "supply_v or min_terminal_v is blank in assets.csv"),
        (compliance.isna(), "power (self | loop) with max_load_ohm or supply_v/min_terminal_v is missing"),
    ]
    reason = pd.Series(np.select([np.asarray(c, dtype=bool) for c, _ in reasons],
                                 [np.broadcast_to(np.asarray(t, dtype=object), len(rigs)) for _, t in reasons],
                                 ""), index=rigs.index)
    unknown = reason != ""
    status = pd.Series(np.select([unknown, margin < 0, margin < LOW_MARGIN_PCT], ["unknown", "exceeds", "low-margin"],
                                 "ok"), index=rigs.index)
    out = pd.DataFrame({
        "asset": rigs["asset"], "method": method, "meter": _text(rigs["meter"]), "in_loop": in_loop,
        "rig_ohm": rig, "rig_desc": rig_desc,
        "receiver_loop_ohm": receiver, "cable_ohm": cable, "cable_desc": cable_desc, "loop_ohm": loop,
        "top_a": top_a, "upper_a": upper_a, "four_twenty": four_twenty, "compliance_v": compliance,
        "self_powered": self_powered, "limit_ohm": limit, "upper_limit_ohm": upper_limit,
        "failure_limit_ohm": failure_limit, "high_failure_clipped": (loop > failure_limit) & ~unknown,
        "margin_pct": margin, "burden_status": status, "burden_reason": reason,
    }, index=rigs.index)
    for col in ("loop_ohm", "limit_ohm", "upper_limit_ohm", "failure_limit_ohm", "margin_pct", "compliance_v"):
        out.loc[unknown, col] = np.nan
    return _with_fixes(ctx, out)


def _with_fixes(ctx: RunContext, out: pd.DataFrame) -> pd.DataFrame:
    """Loop resistance under each fix: a smaller shunt, a milliamp range, standalone."""
    rest = out["loop_ohm"] - out["rig_ohm"]
    shunt = out["method"] == "shunt"
    out["fix_shunt_loop_ohm"] = (rest + SMALL_SHUNT_OHM).where(shunt & (out["rig_ohm"] > SMALL_SHUNT_OHM))
    out["max_shunt_ohm"] = (out["limit_ohm"] * (1 - LOW_MARGIN_PCT / 100) - rest).where(shunt)
    out["fix_meter"] = ""
    out["fix_meter_loop_ohm"] = np.nan
    keys = pd.DataFrame({"m": out["meter"], "t": out["top_a"].fillna(0.020)})
    for (own, top), idx in keys.groupby(["m", "t"]).groups.items():
        # the rig's own meter if it has a milliamp range, else the registry's lowest-burden meter
        ohm, text = meter_burden(ctx, str(own), float(top)) if own else (np.nan, "")
        if not np.isfinite(ohm):
            _, ohm, text = best_meter(ctx, float(top))
        if np.isfinite(ohm):
            better = out.loc[idx, "rig_ohm"] > ohm
            out.loc[idx, "fix_meter"] = np.where(better, text, "")
            out.loc[idx, "fix_meter_loop_ohm"] = (rest[idx] + ohm).where(better)
    out["fix_standalone_loop_ohm"] = out["rig_ohm"].where(out["in_loop"] & out["loop_ohm"].notna())
    return out


# --- words ----------------------------------------------------------------------------

def _ohm(value: float) -> str:
    return f"{value:.1f} Ω" if np.isfinite(value) else "unknown"


def _ma(amps: float) -> str:
    return f"{amps * 1000:g} mA"


def _margin(loop: float, limit: float) -> str:
    margin = (limit - loop) / limit * 100.0
    return f"margin {margin:+.1f} %"


def fixes(row: Any) -> list[str]:
    """Each fix that lowers the loop, with the loop resistance it would give."""
    out = []
    if np.isfinite(row.fix_shunt_loop_ohm):
        out.append(f"a {SMALL_SHUNT_OHM:g} Ω shunt ({SMALL_SHUNT_OHM * row.top_a:g} V at {_ma(row.top_a)}): loop "
                   f"{_ohm(row.fix_shunt_loop_ohm)}, {_margin(row.fix_shunt_loop_ohm, row.limit_ohm)}"
                   + (f" (any shunt up to {row.max_shunt_ohm:.0f} Ω keeps {LOW_MARGIN_PCT:g} % margin)"
                      if row.max_shunt_ohm > 0 else ""))
    if np.isfinite(row.fix_meter_loop_ohm):
        out.append(f"read on the milliamp range instead, meter {row.fix_meter}: loop {_ohm(row.fix_meter_loop_ohm)}, "
                   f"{_margin(row.fix_meter_loop_ohm, row.limit_ohm)}")
    if np.isfinite(row.fix_standalone_loop_ohm):
        out.append(f"test standalone (receiver and cable out of the loop): loop {_ohm(row.fix_standalone_loop_ohm)}, "
                   f"{_margin(row.fix_standalone_loop_ohm, row.limit_ohm)}")
    return out


def clipped(row: Any) -> str:
    """The words of a loop that cannot carry the NE 43 high failure current."""
    return (f"loop {_ohm(row.loop_ohm)} is above the drive limit of {_ohm(row.failure_limit_ohm)} at "
            f"{_ma(NE43_FAILURE_A)} (NE 43 high failure current): a high failure signal would be clipped at "
            f"{row.compliance_v / row.loop_ohm * 1000:.2f} mA and could be read as a measurement")


def summary(row: Any, with_fixes: bool = True) -> str:
    """One sentence on a rig whose margin is low or exceeded, with the fixes."""
    if row.burden_status == "unknown":
        return f"burden not checked: {row.burden_reason}"
    what = "exceeds" if row.burden_status == "exceeds" else "is close to"
    by = row.loop_ohm - row.limit_ohm
    text = (f"loop {_ohm(row.loop_ohm)} {what} the drive limit of {_ohm(row.limit_ohm)} at {_ma(row.top_a)} "
            f"({'over by' if by > 0 else 'margin'} {abs(by):.1f} Ω, {abs(row.margin_pct):.1f} %)")
    if row.four_twenty:
        text += (f"; {_ohm(row.upper_limit_ohm)} at the NE 43 upper limit {_ma(row.upper_a)}, "
                 f"{_ohm(row.failure_limit_ohm)} at the NE 43 high failure current {_ma(NE43_FAILURE_A)}")
    if row.burden_status == "exceeds":
        text += f"; the output can push at most {row.compliance_v / row.loop_ohm * 1000:.2f} mA through it"
    options = fixes(row) if with_fixes else []
    if options:
        text += ". Would fix: " + "; ".join(options)
    return text


def term_rows(row: Any) -> list[tuple[str, str]]:
    """Label/value rows showing each term of the burden check."""
    rows = [("Rig inserts", f"{_ohm(row.rig_ohm)}: {row.rig_desc}")]
    if row.in_loop:
        rows += [("Receiver input (in-loop)", _ohm(row.receiver_loop_ohm)),
                 ("Cable, both conductors", f"{_ohm(row.cable_ohm)}: {row.cable_desc}")]
    else:
        rows.append(("Receiver and cable", "not in the loop (standalone)"))
    if row.burden_status == "unknown":
        return [*rows, ("Status", f"unknown: {row.burden_reason}")]
    source = ("self-powered: max_load_ohm × top of range" if row.self_powered
              else "loop-powered: supply_v − min_terminal_v")
    rows += [
        ("Loop resistance", f"{_ohm(row.loop_ohm)}: {row.loop_ohm * row.top_a:.2f} V at {_ma(row.top_a)}"
         + (f", {row.loop_ohm * row.upper_a:.2f} V at {_ma(row.upper_a)}" if row.four_twenty else "")),
        ("Drive available", f"{row.compliance_v:.2f} V ({source})"),
        ("Drive limit", f"{_ohm(row.limit_ohm)} at {_ma(row.top_a)}"
         + (f", {_ohm(row.upper_limit_ohm)} at {_ma(row.upper_a)} (NE 43 upper limit)" if row.four_twenty else "")),
        ("Margin", f"{row.margin_pct:.1f} % ({row.burden_status})"),
    ]
    if row.four_twenty:
        rows.append(("Drive limit at the NE 43 high failure current",
                     f"{_ohm(row.failure_limit_ohm)} at {_ma(NE43_FAILURE_A)}: "
                     + (clipped(row) if row.high_failure_clipped else "a high failure signal gets through")))
    if row.burden_status != "ok":
        rows += [("Would fix", option) for option in fixes(row)]
    return rows


# --- the stage ------------------------------------------------------------------------

RIG_COLUMNS = ["asset", "method", "connection", "ambient_c", "meter", "shunt"]


@hookimpl
def ll_analyse(ctx: RunContext) -> list[Finding]:
    tests = ctx.tests
    valid = tests[tests["valid"].astype(bool)]
    rigs = valid.reindex(columns=[*RIG_COLUMNS, "asset_row"])  # judged with the assets.csv row of its date
    terms = analyse(ctx, rigs) if len(rigs) else pd.DataFrame(columns=TEST_COLUMNS)
    for col in TEST_COLUMNS:
        tests[col] = terms[col].reindex(tests.index) if col in terms else np.nan
    tests["burden_status"] = tests["burden_status"].fillna("unknown")
    ctx.tests = tests
    ctx.stash[keys.BURDEN] = terms.set_axis(valid["test"].to_numpy()) if len(terms) else terms
    exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
    exports += [c for c in TEST_COLUMNS if c not in exports]
    lines = ctx.stash.get(keys.HEADER_LINES, {})
    findings: list[Finding] = []
    flagged = terms[terms["burden_status"] != "ok"] if len(terms) else terms
    for idx, row in zip(flagged.index, flagged.itertuples(), strict=True):
        rel = str(tests.at[idx, "source_file"])
        if row.burden_status in ("exceeds", "low-margin"):
            findings.append(warning(f"burden: {summary(row)}", file=rel, field="connection", code="burden",
                                    line=lines.get(rel, {}).get("connection", 0)))
        elif row.burden_status == "unknown":
            findings.append(note(f"burden not checked: {row.burden_reason}", file=rel, code="burden"))
    # a loop that carries the measuring range but not 21 mA: its own warning (an exceeded loop's says it)
    short = terms[terms["high_failure_clipped"].astype(bool) & (terms["burden_status"] != "exceeds")] \
        if len(terms) else terms
    for idx, row in zip(short.index, short.itertuples(), strict=True):
        rel = str(tests.at[idx, "source_file"])
        findings.append(warning(f"burden: {clipped(row)}", file=rel, field="connection", code="burden-ne43",
                                line=lines.get(rel, {}).get("connection", 0)))
    return findings


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    terms = ctx.stash.get(keys.BURDEN)
    if terms is None or not len(terms):
        return {}
    mine = terms[terms.index.isin(tests)]
    mine = mine[~mine.index.duplicated()]
    return {str(test): [Section(title="Loop burden", kind="facts", rows=term_rows(row), order=40,
                                        covers=("burden", "burden-ne43"))]
            for test, row in zip(mine.index, mine.itertuples(), strict=True)}


def plan_rigs(plans: dict[str, dict[str, Any]]) -> pd.DataFrame:
    """A rig frame (one row per asset) from planned rigs (the ``plans`` of ``ll_sheet_sections``)."""
    rows = []
    for asset, plan in plans.items():
        method = plan.get("method") or ("shunt" if plan.get("shunt_ohm") else "direct" if plan.get("meter")
                                        else "display")
        rows.append({"asset": asset, "method": method, "connection": plan.get("connection") or "standalone",
                     "ambient_c": plan.get("ambient_c"), "meter": plan.get("meter"), "shunt": plan.get("shunt"),
                     "shunt_ohm": plan.get("shunt_ohm")})
    return pd.DataFrame(rows, columns=[*RIG_COLUMNS, "shunt_ohm"])


@hookimpl
def ll_sheet_sections(ctx: RunContext, plans: dict[str, dict[str, Any]]) -> dict[str, list[Section]]:
    known = {str(a): p for a, p in plans.items() if a in ctx.assets.index}
    if not known:
        return {}
    out: dict[str, list[Section]] = {}
    for row in analyse(ctx, plan_rigs(known)).itertuples():
        sections = [Section(title="Loop burden of the planned rig", kind="facts", rows=term_rows(row), order=40)]
        if row.burden_status in ("exceeds", "low-margin"):
            sections.append(Section(title="Before you connect", kind="text", text=summary(row), order=41))
        out[str(row.asset)] = sections
    return out
