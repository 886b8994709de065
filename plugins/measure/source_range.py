"""The source's range against what it was asked to inject (issue 20).

A source registered with ``range: 1 A`` and used at 5 A was outside what its certificate covers, and its
uncertainty (a ``%range`` term, say) would be worked out on the wrong range:

- an injected value beyond the source's range (its magnitude above the range, after converting units)
  is an **error** at the point;
- an injected value in another kind of unit than the range (volts from a source registered in amps) is
  a **warning**: the range cannot be checked;
- a source with no range is a **warning** once per test where the decision rule needs the uncertainty
  (``U``): its ``%range`` terms cannot be worked out.

Runs in the measure stage, when the signal types have said what each point injected (``injected`` in
``injected_unit``).
"""

from __future__ import annotations

from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.scaling import where

#: |injected| up to this fraction above the range still counts as within it (floating-point noise only)
ROUNDING = 1e-9


def _ranges(ctx: RunContext) -> dict[str, tuple[float, str] | None]:
    """Each source's range as (value, unit); None where it has none or it cannot be read (the registry
    reports a range that is not a quantity)."""
    out: dict[str, tuple[float, str] | None] = {}
    inst = ctx.instruments
    if inst.empty or "range" not in inst.columns:
        return out
    for ident, kind, text in zip(inst.index, inst["kind"], inst["range"], strict=True):
        if kind != "source":
            continue
        try:
            parsed = q.parse_one(text) if isinstance(text, str) and text.strip() else None
        except ValueError:
            parsed = None
        out[str(ident)] = (abs(parsed.value), parsed.unit) if parsed is not None else None
    return out


def check(ctx: RunContext) -> list[Finding]:
    pts = ctx.points
    if pts.empty or "injected" not in pts.columns or "source" not in pts.columns:
        return []
    ranges = _ranges(ctx)
    used = pts[pts["source"].isin(list(ranges)) & pts["injected"].notna()]
    findings: list[Finding] = []
    for (source, unit), rows in used.groupby(["source", "injected_unit"], sort=False):
        given = ranges[str(source)]
        if given is None:
            continue
        top, range_unit = given
        ab = q.affine(str(unit), range_unit)
        if ab is None:
            first = rows.index[0]
            findings.append(warning(f"source {source} is registered with a range of {top:g} {range_unit}, but this "
                                    f"test injects {unit}: its range cannot be checked (is it the source used?)",
                                    field="instruments.source", code="source-range", **where(pts, first)))
            continue
        value = (rows["injected"].astype(float) * ab[0] + ab[1]).abs()
        for i in rows.index[value > top * (1 + ROUNDING)]:
            findings.append(error(f"input {value[i]:.4g} {range_unit} is beyond source {source}'s range of {top:g} "
                                  f"{range_unit}: its certificate does not cover it (name the source used, or "
                                  "correct its range in instruments.yaml)", field="input", code="source-range",
                                  **where(pts, i)))
    rule = ctx.decision_rules.get(str(ctx.section("decision").get("rule", "simple")))
    if rule is not None and "U" in getattr(rule, "needs", ()):
        bare = pts[pts["source"].isin([s for s, r in ranges.items() if r is None])].drop_duplicates("source_file")
        findings += [warning(f"source {s} has no range in instruments.yaml: rule '{rule.name}' needs its "
                             "uncertainty, and a %range term cannot be worked out without it", file=str(f),
                             field="instruments.source", code="source-range")
                     for s, f in zip(bare["source"], bare["source_file"], strict=True)]
    return findings


@hookimpl
def ll_measured(ctx: RunContext) -> list[Finding]:
    return check(ctx)



