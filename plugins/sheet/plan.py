"""The plan of a test sheet: the points to inject, each one's expected output and pass window under the
rule in force, for the planned rig. Worked out with the stages' own functions (the signal type's
``evaluate``, :func:`loopledger.plugins.judge.tolerance.mpe`, the decision rule's ``decide``) for all the
sheets at once; the handbook's ``sheets/`` pages and the ``sheet`` command both use it.
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.plugins.handbook import cautions
from loopledger.plugins.handbook.values import plain, sheet_sections
from loopledger.plugins.history.traceability import cal_status
from loopledger.plugins.sheet import rig
from loopledger.plugins.signals.expected_output import kind_message, wrong_kind

#: the points a sheet plans when the asset has no earlier test (common practice: 0, 25, 50, 75, 100 %)
DEFAULT_POINTS = (0.0, 25.0, 50.0, 75.0, 100.0)


def default_plan(ctx: RunContext, asset: str, tests: pd.DataFrame) -> dict[str, Any]:
    """The rig of the asset's latest valid test (a sensible default for its next test)."""
    return default_plans(ctx, [asset], tests)[asset]


def default_plans(ctx: RunContext, assets: list[Any], tests: pd.DataFrame) -> dict[str, dict[str, Any]]:
    """Per asset, the rig of its latest valid test in ``tests`` (direct reading when it has none)."""
    plans: dict[str, dict[str, Any]] = {str(a): {"method": "direct", "shunt_ohm": None, "meter": None,
                                                 "source": None, "shunt": None, "connection": "standalone"}
                                        for a in assets}
    if not len(tests):
        return plans
    valid = tests[tests["asset"].isin(assets) & tests["valid"].astype(bool)]
    last = valid.sort_values(["date", "test"], kind="stable").groupby("asset", sort=False).tail(1)
    cols = {c: (last[c] if c in last.columns else pd.Series(None, index=last.index, dtype=object)).map(plain)
            for c in ("method", "meter", "source", "connection", "shunt")}
    for i, asset in enumerate(last["asset"]):
        plan = plans[str(asset)]
        plan["method"] = cols["method"].iloc[i] or "direct"
        plan["meter"] = cols["meter"].iloc[i]
        plan["source"] = cols["source"].iloc[i]
        plan["connection"] = cols["connection"].iloc[i] or "standalone"
        shunt = cols["shunt"].iloc[i]
        if shunt and shunt in ctx.instruments.index:
            plan["shunt_ohm"] = _ohms(ctx.instruments.loc[shunt].get("resistance"))
            plan["shunt"] = shunt
        if plan["method"] == "shunt" and plan["shunt_ohm"] is None:
            plan["method"] = "direct"
    return plans


def _ratio(text: Any) -> float | None:
    """``2000/1`` -> 2000.0 (a current transformer's ratio), None when blank or not a ratio."""
    match = re.fullmatch(r"\s*([\d.]+)\s*/\s*([\d.]+)\s*", str(text)) if isinstance(text, str) else None
    if not match or not float(match.group(2)):
        return None
    return float(match.group(1)) / float(match.group(2))


def _ohms(text: Any) -> float | None:
    if text is None or (not isinstance(text, str) and pd.isna(text)):
        return None
    try:
        return float(q.to_float(text, "ohm"))
    except (ValueError, TypeError):
        return None


def planned_points(ctx: RunContext, assets: list[str], points: pd.DataFrame | None = None) -> dict[str, list[float]]:
    """Per asset, the input points (% of input range) of its latest valid test, or 0/25/50/75/100 %."""
    pts = ctx.points if points is None else points
    out = {a: list(DEFAULT_POINTS) for a in assets}
    if len(pts) and "asset" in pts.columns:
        found = pts[(pts["phase"] == "as_found") & pts["asset"].isin(assets)]
        if len(found):
            last = found.sort_values(["date", "test"], kind="stable").groupby("asset", sort=False)["test"].last()
            mine = found[found["test"].to_numpy() == found["asset"].map(last).to_numpy()]
            pcts = mine["input_pct"].astype(float).round(6).dropna()
            for asset, values in pcts.groupby(mine.loc[pcts.index, "asset"], sort=False):
                if len(values):
                    out[str(asset)] = sorted(set(values.tolist()))
    return out


def _planned_frame(ctx: RunContext, plans: dict[str, dict[str, Any]], pcts: dict[str, list[float]]) -> pd.DataFrame:
    """One row per planned point of every sheet: the registry columns and an injected-input row."""
    names = [a for a in plans for _ in pcts[a]]
    values = [p for a in plans for p in pcts[a]]
    numbers = [i + 1 for a in plans for i in range(len(pcts[a]))]
    frame = ctx.assets.loc[names].reset_index(drop=True)
    frame["asset"] = names
    method = [plans[a].get("method") or "direct" for a in names]
    connection = [plans[a].get("connection") or "standalone" for a in names]
    rig = {c: [plans[a].get(c) for a in names] for c in ("meter", "source", "shunt", "shunt_ohm")}
    return frame.assign(test="sheet", source_file="(planned)", line=0, phase="as_found", point=numbers,
                        input=[f"{p:g} %" for p in values], input_value=values, input_written_unit=q.PERCENT,
                        injection="secondary", method=method, connection=connection, direction=None, **rig,
                        reading=np.nan, reading_unit="", reading_text="", n_readings=0, date=ctx.as_of.isoformat())


def _evaluate_planned(ctx: RunContext, frame: pd.DataFrame) -> tuple[pd.DataFrame, dict[str, str]]:
    """Expected output of the planned rows, one signal type at a time; a note per asset that could not be."""
    notes: dict[str, str] = {}
    parts = []
    for signal, rows in frame.groupby(frame["signal"].astype(str), sort=False):
        handler = ctx.signal_types.get(signal)
        if handler is None:
            notes.update({a: f"no plugin handles signal '{signal}', so no expected values can be given"
                          for a in rows["asset"].unique()})
            continue
        wrong = wrong_kind(rows, handler)
        notes.update({a: kind_message(a, unit, handler) for a, unit in wrong.items()})
        rows = rows[~rows["asset"].astype(str).isin(wrong)]
        if rows.empty:
            continue
        try:  # a signal type from a site plugin may not expect planned points: the rest of the site must still build
            evaluated, _ = handler.evaluate(rows, ctx)
            parts.append(rows.assign(**{c: evaluated[c].to_numpy() for c in evaluated.columns}))
            continue
        except Exception:
            pass
        for _, one in rows.groupby("asset", sort=False):  # the batch failed: find which assets, one at a time
            try:
                evaluated, _ = handler.evaluate(one, ctx)
                parts.append(one.assign(**{c: evaluated[c].to_numpy() for c in evaluated.columns}))
            except Exception as exc:
                notes[str(one["asset"].iloc[0])] = (
                    f"the signal type '{signal}' could not work out the planned points "
                    f"({type(exc).__name__}: {exc}); plan them by hand")
    return (pd.concat(parts) if parts else frame.iloc[0:0]), notes


def sheet_data(ctx: RunContext, asset: str, plan: dict[str, Any], points: pd.DataFrame | None = None,
               sections: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """One asset's sheet (see :func:`sheets`)."""
    return sheets(ctx, {asset: plan}, points, None if sections is None else {asset: sections})[asset]


def sheets(ctx: RunContext, plans: dict[str, dict[str, Any]], points: pd.DataFrame | None = None,
           sections: dict[str, list[dict[str, Any]]] | None = None) -> dict[str, dict[str, Any]]:
    """Per asset in ``plans``: the planned points with expected output and the acceptance window of each,
    for the rule in force; ``sections`` are the plugins' blocks for each sheet (asked for here when not
    given). Worked out for all the sheets at once."""
    from loopledger.plugins.judge import tolerance

    sections = sheet_sections(ctx, plans) if sections is None else sections
    frame = _planned_frame(ctx, plans, planned_points(ctx, list(plans), points))
    frame, failed = _evaluate_planned(ctx, frame)
    notes: dict[str, list[str]] = {a: [] for a in plans}
    rule_name = str(ctx.section("decision").get("rule", "simple"))
    if len(frame):
        frame["span"] = frame["output_max"].astype(float) - frame["output_min"].astype(float)
        frame["mpe"], _ = tolerance.mpe(frame)
        frame["error"] = 0.0
        frame["accept"] = frame["mpe"]
        _rig_columns(ctx, frame, plans)
        _decide(ctx, frame, rule_name, notes)
    cols = ("input_value", "injected", "injected_unit", "expected", "accept", "mpe", "U", "read_unit",
            "read_expected", "read_low", "read_high", "u_problem")
    lists = [frame[c].tolist() if c in frame.columns else [None] * len(frame) for c in cols]
    where = frame.groupby("asset", sort=False).indices if len(frame) else {}
    return {a: _sheet(ctx, a, plan, [dict(zip(cols, (col[i] for col in lists), strict=True)) for i in where[a]]
                      if a in where else None, failed.get(a), notes[a], rule_name, sections.get(a, []))
            for a, plan in plans.items()}


def _rig_columns(ctx: RunContext, frame: pd.DataFrame, plans: dict[str, dict[str, Any]]) -> None:
    """The planned rig on each row: the shunt's id (a registered shunt of the planned Ω), the unit read,
    the expected reading and the planned U (with what its budget lacked)."""
    ohms = frame["shunt_ohm"].where(frame["method"] == "shunt")
    ids = {o: rig.shunt_id(ctx, o) for o in pd.unique(ohms.dropna())}
    named = frame["shunt"].where(frame["shunt"].notna() & (frame["method"] == "shunt"))
    frame["shunt"] = named.where(named.notna(), ohms.map(ids))
    units = {a: rig.reading_unit(str(plans[a].get("method") or "direct"), ctx.assets.loc[a]) for a in plans}
    frame["read_unit"] = frame["asset"].map(units)
    frame["read_expected"] = rig.to_reading(ctx, frame, frame["expected"].astype(float))
    per, problems = rig.planned_u(ctx, frame)
    for c in per.columns:
        frame[c] = per[c].to_numpy()
    frame["u_problem"] = problems.to_numpy()
    frame["tur"] = frame["mpe"] / frame["U"]


def _decide(ctx: RunContext, frame: pd.DataFrame, rule_name: str, notes: dict[str, list[str]]) -> None:
    """The acceptance limit of the rule in force at each planned point, for the planned rig's U (issue
    22, item 9); the MPE, with a note, where the rule cannot say before the test. Then every window in
    the unit read."""
    rule = ctx.decision_rules.get(rule_name)
    if rule is not None:
        missing = [c for c in rule.needs if c not in frame.columns]
        if missing:
            for a in frame["asset"].unique():
                notes[a].append(f"The rule '{rule_name}' needs {', '.join(missing)}, known only after the "
                                "readings are taken; the window below is the MPE and a reading near its edge "
                                "must be judged after the run.")
        else:
            try:
                limit = pd.Series(rule.decide(frame, ctx)["acceptance_limit"].to_numpy(dtype=float),
                                  index=frame.index)
                unknown = limit.isna()
                frame["accept"] = limit.where(~unknown, frame["mpe"])
                for a, rows in frame[unknown].groupby("asset", sort=False):
                    why = rows["u_problem"].dropna()
                    notes[a].append(f"The rule '{rule_name}' needs the planned rig's U, which is not known"
                                    + (f" ({why.iloc[0]})" if len(why) else "") + f" at {len(rows)} point(s); "
                                    "their window is the MPE, and a reading near its edge must be judged after "
                                    "the run.")
            except (KeyError, ValueError, TypeError) as exc:  # a rule that cannot judge a planned point
                for a in frame["asset"].unique():
                    notes[a].append(f"The rule '{rule_name}' could not give a window before the test ({exc}); "
                                    "the window shown is the MPE.")
    expected = frame["expected"].astype(float)
    frame["read_low"] = rig.to_reading(ctx, frame, expected - frame["accept"])
    frame["read_high"] = rig.to_reading(ctx, frame, expected + frame["accept"])
    swapped = frame["read_low"] > frame["read_high"]  # a reversed display or counts scale
    frame.loc[swapped, ["read_low", "read_high"]] = frame.loc[swapped, ["read_high", "read_low"]].to_numpy()


def _sheet(ctx: RunContext, asset: str, plan: dict[str, Any], points: list[dict[str, Any]] | None,
           failed: str | None, notes: list[str], rule_name: str, sections: list[dict[str, Any]]) -> dict[str, Any]:
    """One sheet from its planned ``points`` (the columns of :func:`sheets` by name)."""
    reg = ctx.assets.loc[asset]
    source = _instrument(ctx, plan.get("source"))
    if points is None or failed:
        return {"asset": {k: plain(v) for k, v in reg.items()}, "plan": plain(plan), "rows": [], "rule": rule_name,
                "unit": str(reg.get("output_unit") or ""), "ct_ratio": None, "sections": [], "source": source,
                "read_unit": None, "cautions": cautions.for_asset(reg, plan.get("connection")),
                "notes": [failed or f"no plugin handles signal '{reg.get('signal')}', so no expected values can "
                                    "be given"]}
    notes = list(notes)
    for role in ("meter", "source"):
        ident = plan.get(role)
        if ident and ident in ctx.instruments.index:
            status = cal_status(ctx.instruments.at[ident, "calibrated"] if "calibrated" in ctx.instruments else None,
                                ctx.instruments.at[ident, "due"] if "due" in ctx.instruments else None, ctx.as_of)
            if status.startswith("OUT OF"):
                notes.append(f"The planned {role} {ident} is {status} on {ctx.as_of.isoformat()}: use an instrument "
                             "in calibration, or the readings cannot be relied on.")
    unit = str(reg["output_unit"])
    read_unit = points[0]["read_unit"] if points else None
    if plan.get("method") == "shunt" and q.affine(unit, "A") is None:
        notes.append(f"The output unit {unit} is not a current, so no volts across the shunt are given.")
    if read_unit is None:
        notes.append(f"The reading method '{plan.get('method')}' comes from a plugin: the windows are in the "
                     f"output's unit ({unit}); carry them into the unit you read by the plugin's documentation.")
    ratio = _primary_ratio(reg)
    rows = []
    for p in points:
        expected, accept = float(p["expected"]), float(p["accept"])
        row = {"input_pct": plain(p["input_value"]), "input": plain(p["injected"]),
               "input_unit": plain(p["injected_unit"]), "expected": plain(expected),
               "low": plain(expected - accept), "high": plain(expected + accept), "accept": plain(accept),
               "mpe": plain(p["mpe"]), "U": plain(p["U"]), "u_problem": plain(p["u_problem"]),
               "tur": plain(float(p["mpe"]) / float(p["U"])) if plain(p["U"]) else None}
        if ratio is not None and row["input"] is not None:
            row["primary"], row["primary_unit"] = _primary(row["input"] * ratio, str(row["input_unit"]), reg)
        if read_unit is not None and read_unit != unit:
            row.update(read_expected=plain(p["read_expected"]), read_low=plain(p["read_low"]),
                       read_high=plain(p["read_high"]))
        rows.append(row)
    ct = plain(reg.get("ct_ratio"))
    return {"asset": {k: plain(v) for k, v in reg.items()}, "plan": plain(plan), "rows": rows, "notes": notes,
            "rule": rule_name, "ct_ratio": ct, "unit": unit, "sections": sections, "source": source,
            "cautions": cautions.for_asset(reg, plan.get("connection")),
            "read_unit": read_unit if read_unit != unit else None}


def _primary_ratio(reg: pd.Series) -> float | None:
    """The factor from the secondary input to the primary: the CT ratio, the VT ratio or (for power) both."""
    ratios = [r for r in (_ratio(reg.get("ct_ratio")), _ratio(reg.get("vt_ratio"))) if r is not None]
    return float(np.prod(ratios)) if ratios else None


def _primary(value: float, unit: str, reg: pd.Series) -> tuple[float, str]:
    """A primary value in the display's unit when it is of the same kind (300000 W as 300 kW), else as is."""
    shown = reg.get("display_unit")
    ab = q.affine(unit, str(shown)) if isinstance(shown, str) and shown.strip() else None
    return (float(ab[0] * value + ab[1]), str(shown)) if ab is not None else (float(value), unit)


def _instrument(ctx: RunContext, ident: Any) -> dict[str, Any] | None:
    """A registered instrument's id, description and range (None when not named or not registered)."""
    if not ident or ident not in ctx.instruments.index:
        return {"id": str(ident), "description": "(not in instruments.yaml)", "range": None} if ident else None
    row = ctx.instruments.loc[ident]
    return {"id": str(ident), "description": plain(row.get("description")), "range": plain(row.get("range"))}
