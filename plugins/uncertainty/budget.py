"""The uncertainty budget of a table of points (JCGM 100:2008, GUM), shared by the uncertainty
stage and the method comparison (not a plugin itself).

Every component is a row of a long table: the point it belongs to (the point table's index),
its name, distribution, half-width (in ``unit``), divisor, sensitivity coefficient (output unit
per ``unit``), contribution u_i = |c_i| · half-width / divisor (output units) and degrees of
freedom (infinite for type B). Components:

- ``meter accuracy``: ``a %rdg × |reading| + n digits × resolution`` (and any %range term) on the
  smallest range of the meter, of the reading's dimension, that holds the reading; rectangular;
- ``meter resolution``: half a digit, rectangular (EA-4/02 keeps it as its own term);
- ``shunt tolerance`` and ``shunt tempco`` (tempco × |ambient − reference temperature|): as ohms,
  rectangular, carried by ∂I/∂R = −I/R;
- ``source``: the source's specification at the injected value, rectangular, carried by the
  characteristic's d output / d input (the ``sensitivity`` column of the point table);
- ``repeatability``: type A, s/√n with n − 1 degrees of freedom;
- ``unsteady reading``: half the min/max spread, rectangular;
- ``cold junction``: for a thermocouple transmitter fed in mV, how well the reference-junction
  temperature ``cjc_c`` is known (``cjc_u`` in the result file, or the accuracy of its
  ``cjc_probe``), carried by d output / d t_cj = sensitivity × dE/dt at t_cj (the
  ``cjc_sensitivity`` column the signal type gives);
- ``CT ratio error`` / ``VT ratio error``: under primary injection, the ratio-error limit of the
  transformer's accuracy class at the injected value (``ct_error_pct`` / ``vt_error_pct`` from the
  signal type, % of the injected value), rectangular, carried like the source; for a power
  transducer the component says that phase displacement is left out;
- ``display resolution`` (the last digit written, or ``display_resolution``) for a reading taken
  from the control system (``display``, or a plugin's method used without a meter) and
  ``display accuracy`` for the ``display`` method.

Combined u = √Σu_i²; ν_eff by Welch–Satterthwaite (GUM G.2b); k from Student's t for 95.45 %
(k = 2 when every term is type B); U = k·u.
"""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np
import pandas as pd
from loopledger import quantities as q
from loopledger.context import RunContext

#: the coverage probability the expanded uncertainty is stated for (GUM Table G.2's 95.45 %)
COVERAGE = 0.9545
SQRT3 = math.sqrt(3.0)
TERM_COLUMNS = ["row", "component", "distribution", "half_width", "unit", "divisor", "sensitivity",
                "contribution", "dof"]
#: a term whose linear propagation fails (infinite slope at the zero of a square-root device):
#: not a fault of the evidence, so only ever a warning
UNEVALUATED = ("a budget term could not be evaluated (infinite slope, e.g. at the zero of a square-root "
               "device, where the GUM's linear propagation does not apply)")
#: how far past its nominal value a range is taken to read (a 2 V range showing 2.0016 V); beyond
#: this a finer-digit range is not believed (an assumption, not a published figure)
OVER_RANGE = 0.10
#: a reading beyond the meter's largest range of its kind by more than :data:`OVER_RANGE`: the
#: meter's specification does not cover it, so the point gets no U (a warning, as the issue asks)
BEYOND_RANGE = ("the reading is beyond the meter's largest range of its kind by more than the over-range "
                f"allowance ({OVER_RANGE:.0%}): its specification does not cover the reading")
#: budget problems that are warnings under every rule (not a fault of the evidence's bookkeeping)
WARN_ONLY = (UNEVALUATED, BEYOND_RANGE)
#: methods whose reading comes from a control system, not from the test meter
NO_METER = ("display",)
#: methods that need the test meter; any other method uses it only when the test names a meter
METER_METHODS = ("direct", "shunt")


def coverage_factor(nu_eff: Any) -> np.ndarray:
    """k for 95.45 % from Student's t at ``nu_eff`` degrees of freedom (2 where infinite)."""
    from scipy.special import stdtrit  # Student t quantile; scipy.stats costs a second to import

    nu = np.atleast_1d(np.asarray(nu_eff, dtype=float))
    k = np.full(nu.shape, 2.0)
    finite = np.isfinite(nu) & (nu > 0)
    k[finite] = stdtrit(nu[finite], (1.0 + COVERAGE) / 2.0)
    return k


def ws_terms(u_i: Any, dof: Any) -> Any:
    """u_i⁴/ν_i for each component, 0 where ν_i is infinite (the terms of JCGM 100:2008 G.2b)."""
    u_i, dof = np.asarray(u_i, dtype=float), np.asarray(dof, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(np.isfinite(dof), u_i ** 4 / dof, 0.0)


def nu_eff(u_c: Any, ws_sum: Any) -> Any:
    """ν_eff = u_c⁴ / Σ(u_i⁴/ν_i) (JCGM 100:2008 G.2b); infinite when every ν_i is (the sum is 0)."""
    u_c, ws_sum = np.asarray(u_c, dtype=float), np.asarray(ws_sum, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(ws_sum > 0, u_c ** 4 / ws_sum, np.inf)


def welch_satterthwaite(u_c: Any, u_i: Any, dof: Any) -> float:
    """ν_eff of one point from its components (the same formula :func:`combine` applies per point)."""
    return float(nu_eff(u_c, float(np.sum(ws_terms(u_i, dof)))))


def _term(idx: pd.Index, name: str, distribution: str, half_width: Any, unit: Any, divisor: float,
          sensitivity: Any, dof: Any = math.inf) -> pd.DataFrame:
    if isinstance(unit, pd.Series):
        unit = unit.to_numpy(dtype=object)
    frame = pd.DataFrame({"row": idx, "component": name, "distribution": distribution,
                          "half_width": np.asarray(half_width, dtype=float), "unit": unit,
                          "divisor": divisor, "sensitivity": np.asarray(sensitivity, dtype=float),
                          "dof": dof}, index=range(len(idx)))
    frame["contribution"] = frame["sensitivity"].abs() * frame["half_width"] / divisor
    return frame


def reading_sensitivity(ctx: RunContext, pts: pd.DataFrame) -> pd.Series:
    """d measured / d reading (output unit per reading unit), by asking each reading method.

    The methods are linear in the reading, so a finite difference is exact to rounding; asking
    the method keeps this right for methods a plugin adds.
    """
    out = pd.Series(np.nan, index=pts.index, dtype=float)
    for method, idx in pts.groupby("method", sort=False).groups.items():
        handler = ctx.methods.get(str(method))
        if handler is None:
            continue
        rows = pts.loc[idx]
        step = np.maximum(rows["reading"].abs().fillna(0.0), 1.0) * 1e-3
        shifted = rows.assign(reading=rows["reading"] + step)
        low, _ = handler.measured(rows, ctx)
        high, _ = handler.measured(shifted, ctx)
        out[idx] = (high - low) / step
    return out


def _instrument(ctx: RunContext, ids: pd.Series, column: str) -> pd.Series:
    table = ctx.instruments
    if table.empty or column not in table.columns:
        return pd.Series(None, index=ids.index, dtype=object)
    values = table[column].where(table[column].notna(), None).to_dict()
    known = {i: values.get(i) if isinstance(i, str) else None for i in pd.unique(ids)}
    return ids.map(lambda i: known.get(i))  # NaN (never a key twice) is not an id: None, as for any non-text


def _relative(text: Any, ohms: float) -> float:
    """A shunt tolerance as a fraction: ``0.01 %``, ``100 ppm`` or ``0.01 ohm``."""
    parsed = q.parse_one(text)
    if parsed.unit == q.PERCENT:
        return parsed.value / 100.0
    ab = q.affine(parsed.unit, "dimensionless")
    if ab is not None:
        return parsed.value * ab[0]
    return q.to_float(text, "ohm") / ohms


def _per_kelvin(text: Any) -> float:
    """A temperature coefficient as a fraction per kelvin: ``5 ppm/K``, ``0.0005 %/K``."""
    return q.to_float(str(text).replace("%", "percent"), "1/K")


def _shunt_spec(ctx: RunContext, ident: str) -> tuple[float, float, float]:
    """(tolerance as a fraction, tempco per kelvin, reference °C) of one shunt; NaN where unreadable."""
    from loopledger.plugins.measure.reading_methods import shunt_ohms

    row = ctx.instruments.loc[ident] if ident in ctx.instruments.index else pd.Series(dtype=object)
    ohms = float(shunt_ohms(ctx, pd.Series([ident], dtype=object)).iloc[0])
    values = []
    for column, read in (("tolerance", lambda t: _relative(t, ohms)), ("tempco", _per_kelvin),
                         ("reference_temperature", lambda t: q.to_float(t, "degC"))):
        try:
            values.append(float(read(row.get(column))))
        except (ValueError, TypeError):
            values.append(float("nan"))
    return values[0], values[1], values[2]


def pick_ranges(ctx: RunContext, pts: pd.DataFrame) -> pd.DataFrame:
    """Each point's meter range: the smallest of the reading's dimension that holds the reading.

    The digits written say which range the meter was on: a range whose resolution is coarser than
    the last digit written cannot have shown the reading, so ``2.0016 V`` on a meter with 2 V
    (0.1 mV) and 20 V (1 mV) ranges was read on the 2 V range, over its nominal value (meters
    read a little beyond it); digits finer than any range shows count as the finest range's. In
    order of preference: the smallest range that holds the reading
    and could show its digits; the largest range below it, by at most :data:`OVER_RANGE`, that could show them; the
    smallest that holds it; the largest. Columns ``range`` (as written), ``range_value``,
    ``accuracy`` and ``resolution`` (values in the reading's unit); NaN where the meter has no
    range of the reading's dimension.
    """
    cols = ["range", "range_value", "accuracy", "resolution"]
    empty = pd.DataFrame({"range": None, "range_value": np.nan, "accuracy": None, "resolution": np.nan},
                         index=pts.index, columns=cols)
    ranges = ctx.ranges
    if ranges.empty or pts.empty:
        return empty
    r = ranges.reset_index(drop=True)
    parsed = q.parse_column(r["range"].fillna(""))
    res = q.parse_column(r["resolution"].fillna(""))
    r = r.assign(r_value=parsed["value"], r_unit=parsed["unit"], res_value=res["value"], res_unit=res["unit"])
    text = pts["reading_text"] if "reading_text" in pts.columns else pd.Series("", index=pts.index)
    left = pts[["meter", "reading", "reading_unit"]].assign(written=written_resolution(text))
    both = left.rename_axis("row").reset_index().merge(r, left_on="meter", right_on="instrument", how="inner")
    if both.empty:
        return empty
    both["range_value"] = q.convert(both["r_value"], both["r_unit"], both["reading_unit"])
    both["resolution"] = q.convert(both["res_value"], both["res_unit"], both["reading_unit"])
    both = both[both["range_value"].notna()]
    if both.empty:
        return empty
    holds = (both["range_value"] >= both["reading"].abs() * (1 - 1e-12)).to_numpy()
    # digits finer than every range can show say nothing about the range: read them as the finest
    finest = both.groupby("row")["resolution"].transform("min")
    written = np.fmax(both["written"], finest)
    shows = ~(both["resolution"] > written * (1 + 1e-9)).to_numpy()
    near = (both["range_value"] * (1 + OVER_RANGE) >= both["reading"].abs()).to_numpy()
    tier = np.select([holds & shows, ~holds & near & shows, holds], [0, 1, 2], 3)
    both = both.assign(tier=tier, order=np.where(holds, both["range_value"], -both["range_value"]))
    best = both.sort_values(["row", "tier", "order"]).drop_duplicates("row").set_index("row")
    out = empty.copy()
    for col in cols:
        out.loc[best.index, col] = best[col]
    out["range_value"] = out["range_value"].astype(float)
    out["resolution"] = out["resolution"].astype(float)
    return out


_DECIMALS = re.compile(r"[+-]?\d+(?:\.(\d*))?")


def written_resolution(text: pd.Series) -> pd.Series:
    """The last digit written (``1234.5 A`` → 0.1; NaN where no number is written)."""
    codes, distinct = pd.factorize(text.fillna("").astype(str))  # each distinct text looked at once
    parts = pd.Series(distinct, dtype=object).str.extract(rf"^\s*({_DECIMALS.pattern})")
    places = parts[1].fillna("").str.len().astype(float).to_numpy()
    step = np.where(parts[0].notna().to_numpy(), 10.0 ** (-places), np.nan)
    return pd.Series(step[codes] if len(step) else np.full(len(text), np.nan), index=text.index)


#: the point columns :func:`compute` reads once the reading methods have given their sensitivity
BUDGET_COLUMNS = ["method", "meter", "source", "shunt", "reading", "reading_unit", "reading_text", "measured",
                  "ambient_c", "injected", "injected_unit", "sensitivity", "n_readings", "reading_sd",
                  "reading_half_spread", "display_resolution", "display_accuracy", "display_min", "display_max",
                  "cjc_sensitivity", "cjc_u", "cjc_probe", "ct_error_pct", "vt_error_pct", "signal"]
#: the divisor of each distribution a ``cjc_u`` may name (GUM 4.3.7, 4.3.9); none named: a standard uncertainty
CJC_DIVISORS = {"rectangular": SQRT3, "triangular": math.sqrt(6.0), "normal": 1.0}


def cjc_spec(text: Any) -> tuple[float, float, str]:
    """(half-width in °C, divisor, distribution) of a ``cjc_u``: ``0.2 degC`` (or a bare number of °C) is a
    standard uncertainty; ``0.5 degC rectangular`` / ``triangular`` a half-width. ValueError if unreadable."""
    words = str(text).strip().split()
    shape = words[-1].lower() if words and words[-1].lower() in CJC_DIVISORS else ""
    body = " ".join(words[:-1] if shape else words)
    try:
        value, scale = float(body), 1.0
    except ValueError:
        parsed = q.parse_one(body)
        ab = q.affine(parsed.unit, "degC")
        if ab is None:
            raise ValueError(f"'{text}' is not a temperature difference") from None
        value, scale = parsed.value, ab[0]
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"'{text}' is not a non-negative uncertainty")
    return value * scale, CJC_DIVISORS.get(shape, 1.0), shape or "normal"



def compute(ctx: RunContext, pts: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame, pd.Series]:
    """(terms, per-point u/k/nu_eff/U/c_reading, problems) for the points ``pts``.

    ``problems`` names, per point, what a complete budget lacked (None when complete); those
    points get NaN u and U rather than a budget that leaves a main term out.
    """
    problems = pd.Series(None, index=pts.index, dtype=object)

    def lack(mask: pd.Series, text: str) -> None:
        mask = mask & problems.isna()
        problems[mask[mask].index] = text

    c_reading = reading_sensitivity(ctx, pts)
    pts = pts[[c for c in BUDGET_COLUMNS if c in pts.columns]]  # no copies of the whole wide table below
    terms: list[pd.DataFrame] = []
    uses_meter = pts["method"].isin(METER_METHODS) | (pts["meter"].notna() & ~pts["method"].isin(NO_METER))

    # --- meter: accuracy on the range the reading falls in, and half a digit of resolution
    metered = pts[uses_meter]
    lack(pts["method"].isin(METER_METHODS) & pts["meter"].isna(), "no meter named (instruments.meter)")
    picked = pick_ranges(ctx, metered)
    lack(uses_meter & pts["meter"].notna() & picked["range_value"].reindex(pts.index).isna(),
         "the meter has no range in instruments.yaml for the reading's unit")
    reach = (picked["range_value"] * (1.0 + OVER_RANGE)).fillna(np.inf)  # no range: another problem's
    beyond = metered["reading"].abs().fillna(0.0) > reach
    lack(pts.index.isin(beyond.index[beyond]), BEYOND_RANGE)
    ok = picked["range_value"].notna() & picked["accuracy"].notna()
    for (spec_text, unit), idx in picked[ok].assign(unit=metered["reading_unit"]).groupby(
            ["accuracy", "unit"], sort=False).groups.items():
        rows = metered.loc[idx]
        try:
            spec = q.parse_spec(str(spec_text))
            if spec.digits and picked.loc[idx, "resolution"].isna().any():
                raise ValueError("digits without a resolution")
            half = spec.half_width(rows["reading"].abs(), range_=picked.loc[idx, "range_value"],
                                   resolution=picked.loc[idx, "resolution"].fillna(0.0), unit=str(unit))
        except ValueError:
            lack(pts.index.isin(idx) & uses_meter,
                 f"meter accuracy '{spec_text}' cannot be applied (unreadable, or digits without a resolution)")
            continue
        terms.append(_term(idx, "meter accuracy", "rectangular", half, unit, SQRT3, c_reading[idx]))
    lack(uses_meter & pts.index.isin(picked.index[picked["range_value"].notna() & picked["accuracy"].isna()]),
         "the meter range has no accuracy in instruments.yaml")
    has_res = picked["resolution"].notna()
    idx = picked.index[has_res]
    terms.append(_term(idx, "meter resolution", "rectangular", picked.loc[idx, "resolution"] / 2.0,
                       metered.loc[idx, "reading_unit"], SQRT3, c_reading[idx]))

    # --- shunt: tolerance and temperature coefficient, as ohms
    is_shunt = pts["method"] == "shunt"
    if is_shunt.any():
        from loopledger.plugins.measure.reading_methods import shunt_ohms

        rows = pts[is_shunt]
        ohms = shunt_ohms(ctx, rows["shunt"])
        slope = -rows["measured"] / ohms
        specs = {ident: _shunt_spec(ctx, str(ident)) for ident in pd.unique(rows["shunt"].dropna())}
        spec = pd.DataFrame([specs.get(i, (np.nan, np.nan, np.nan)) for i in rows["shunt"]],
                            index=rows.index, columns=["rel", "per_k", "ref"])
        rel = spec["rel"]
        ambient = pd.to_numeric(rows["ambient_c"], errors="coerce")
        drift = spec["per_k"] * (ambient - spec["ref"]).abs()
        lack(is_shunt & pts.index.isin(rows.index[rel.isna()]), "the shunt has no readable tolerance")
        good = rel.notna()
        terms.append(_term(rows.index[good], "shunt tolerance", "rectangular", (ohms * rel)[good], "ohm",
                           SQRT3, slope[good]))
        good = drift.notna()
        terms.append(_term(rows.index[good], "shunt tempco", "rectangular", (ohms * drift)[good], "ohm",
                           SQRT3, slope[good]))

    # --- the source, carried to the output by the characteristic's slope
    src_acc = _instrument(ctx, pts["source"], "accuracy")
    src_range = _instrument(ctx, pts["source"], "range")
    lack(pts["source"].isna(), "no source named (instruments.source)")
    lack(pts["source"].notna() & src_acc.isna(), "the source has no accuracy in instruments.yaml")
    frame = pd.DataFrame({"acc": src_acc, "rng": src_range, "unit": pts["injected_unit"]})
    for (acc, rng, unit), idx in frame.dropna(subset=["acc"]).fillna({"rng": ""}).groupby(
            ["acc", "rng", "unit"], sort=False).groups.items():
        rows = pts.loc[idx]
        try:
            spec = q.parse_spec(str(acc))
            span = q.to_float(rng, str(unit)) if rng else np.nan
            if spec.pct_range and not np.isfinite(span):
                raise ValueError("no range")
            half = spec.half_width(rows["injected"].abs(), range_=span if np.isfinite(span) else 0.0,
                                   unit=str(unit))
        except ValueError:
            lack(pts.index.isin(idx), f"source accuracy '{acc}' (range '{rng}') cannot be applied in {unit}")
            continue
        terms.append(_term(idx, "source", "rectangular", half, unit, SQRT3, rows["sensitivity"]))

    # --- the instrument transformers under primary injection (IEC 61869-2 / -3 ratio-error limits)
    for column, name in (("ct_error_pct", "CT ratio error"), ("vt_error_pct", "VT ratio error")):
        if column not in pts.columns:
            continue
        limit = pd.to_numeric(pts[column], errors="coerce")
        is_power = pts["signal"].eq("power-transducer") if "signal" in pts.columns else \
            pd.Series(False, index=pts.index)
        for power, idx in is_power[limit.notna()].groupby(is_power[limit.notna()]).groups.items():
            rows = pts.loc[idx]
            label = name + (" (phase displacement left out)" if power else "")
            terms.append(_term(idx, label, "rectangular", limit[idx] / 100.0 * rows["injected"].abs(),
                               rows["injected_unit"], SQRT3, rows["sensitivity"]))

    # --- the cold junction of a thermocouple transmitter fed in mV
    if "cjc_sensitivity" in pts.columns:
        _cold_junction(ctx, pts, terms, lack)

    # --- what the readings themselves show
    rep = pts["n_readings"].astype(int).gt(1) & pts["reading_sd"].notna()
    idx = pts.index[rep]
    n = pts.loc[idx, "n_readings"].astype(float)
    terms.append(_term(idx, "repeatability", "normal (type A)", pts.loc[idx, "reading_sd"] / np.sqrt(n),
                       pts.loc[idx, "reading_unit"], 1.0, c_reading[idx], dof=(n - 1).to_numpy()))
    idx = pts.index[pts["reading_half_spread"].notna()]
    terms.append(_term(idx, "unsteady reading", "rectangular", pts.loc[idx, "reading_half_spread"],
                       pts.loc[idx, "reading_unit"], SQRT3, c_reading[idx]))

    # --- a reading taken from the control system (display, counts ...): its last digit
    shown = pts[~uses_meter]
    if len(shown):
        res = written_resolution(shown["reading_text"])
        if "display_resolution" in shown.columns:
            given = pd.to_numeric(shown["display_resolution"], errors="coerce")
            res = given.where(given.notna(), res)
        terms.append(_term(shown.index, "display resolution", "rectangular", res / 2.0, shown["reading_unit"],
                           SQRT3, c_reading[shown.index]))
        if "display_accuracy" in shown.columns:
            shown = shown[shown["method"] == "display"]
            for spec_text, idx in shown.dropna(subset=["display_accuracy"]).groupby("display_accuracy").groups.items():
                rows = shown.loc[idx]
                pct = rows["reading_unit"] == q.PERCENT
                span = np.where(pct, 100.0, rows["display_max"].astype(float) - rows["display_min"].astype(float))
                try:
                    half = q.parse_spec(str(spec_text)).half_width(rows["reading"].abs(), span=span)
                except ValueError:
                    lack(pts.index.isin(idx), f"display_accuracy '{spec_text}' cannot be read")
                    continue
                terms.append(_term(idx, "display accuracy", "rectangular", half, rows["reading_unit"], SQRT3,
                                   c_reading[idx]))

    table = pd.concat([t for t in terms if len(t)], ignore_index=True) if any(len(t) for t in terms) else \
        pd.DataFrame(columns=TERM_COLUMNS)
    lack(pts.index.isin(table.loc[table["contribution"].isna(), "row"]),
         UNEVALUATED)
    per = combine(table, pts.index)
    per["c_reading"] = c_reading
    bad = problems.notna()
    per.loc[bad, ["u", "U", "k", "nu_eff"]] = np.nan
    return table[TERM_COLUMNS], per, problems


def _cold_junction(ctx: RunContext, pts: pd.DataFrame, terms: list[pd.DataFrame], lack: Any) -> None:
    """The ``cold junction`` term: ``cjc_u`` where given, else the ``cjc_probe``'s accuracy (rectangular)."""
    slope = pd.to_numeric(pts["cjc_sensitivity"], errors="coerce")
    given = pts["cjc_u"] if "cjc_u" in pts.columns else pd.Series(None, index=pts.index, dtype=object)
    probe = pts["cjc_probe"] if "cjc_probe" in pts.columns else pd.Series(None, index=pts.index, dtype=object)
    texts = given.where(given.notna(), _instrument(ctx, probe, "accuracy"))
    shape = pd.Series(np.where(given.notna(), "", " rectangular"), index=pts.index)
    lack(slope.notna() & given.isna() & probe.notna() & texts.isna(),
         "the cjc_probe has no accuracy in instruments.yaml")
    wanted = slope.notna() & texts.notna()
    for (text, extra), idx in pd.DataFrame({"t": texts.astype(str), "x": shape})[wanted].groupby(
            ["t", "x"], sort=False).groups.items():
        try:
            half, divisor, distribution = cjc_spec(str(text) + str(extra) if extra and
                                                   str(text).split()[-1] not in CJC_DIVISORS else str(text))
        except ValueError:
            lack(pts.index.isin(idx), f"the cold-junction uncertainty '{text}' cannot be read (e.g. 0.2 degC, or "
                                      "0.5 degC rectangular)")
            continue
        terms.append(_term(idx, "cold junction", distribution, np.full(len(idx), half), "degC", divisor,
                           slope[idx]))


def combine(table: pd.DataFrame, index: pd.Index) -> pd.DataFrame:
    """Per point: u = √Σu_i², ν_eff (Welch–Satterthwaite), k (Student t, 95.45 %), U = k·u."""
    c = table["contribution"].astype(float)
    dof = table["dof"].astype(float)
    grouped = pd.DataFrame({"row": table["row"], "sq": c ** 2, "ws": ws_terms(c, dof)}).groupby("row")
    sums = grouped[["sq", "ws"]].sum().reindex(index)
    u = np.sqrt(sums["sq"])
    nu = nu_eff(u, sums["ws"])
    k = coverage_factor(nu)
    return pd.DataFrame({"u": u, "k": k, "nu_eff": nu, "U": k * u}, index=index)
