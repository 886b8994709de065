"""Intervals: next due date, overdue, recommended interval, fleet reliability and global false accept.

- ``next_due`` = last valid test + the asset's ``interval_months``; ``overdue`` when
  ``next_due`` is before ``as_of`` (an asset never tested is overdue, with no due date).
- Recommended interval, the shorter of
  (a) the simple reaction ("staircase") method of ILAC-G24:2022 / OIML D 10:2022:
  after an as-found result within ``extend_within`` × MPE the next interval is
  lengthened (× ``extend_factor``); after one outside the MPE it is shortened
  (× ``shorten_factor``); in between it stays. One step from the interval in
  force, rounded down to whole months, within ``[min_months, max_months]``;
  (b) the months from the last test to the drift stage's predicted date at which
  the worst point reaches the acceptance limit (floored at ``min_months``).
- EOPR (end-of-period reliability): the fraction of as-found results in
  tolerance, per signal type and per description, with the count.
- Where a ``U`` column exists (the uncertainty stage), each test's global
  false-accept probability from the bivariate normal model: true error
  ~ N(0, σ_p) with σ_p set so that P(|e| ≤ MPE) = the prior, measured = true
  + N(0, u), u = U / k; PFA = P(|true| > MPE, |measured| ≤ L), L the limit the verdict
  used (``verdict_limit``: the acceptance limit, or the MPE where conditional passes are accepted);
  the test's value is the largest over the points of the phase that decided it;
  above ``false_accept_limit`` (default 0.02, the ANSI/NCSL Z540.3 §5.3 target)
  it is flagged.
- The prior is the in-tolerance probability of the test's signal type as it
  stood before the test, estimated from the k of n valid as-found results dated
  before the test's date: the mean of the Beta(1 + k, 1 + n − k) posterior,
  i.e. a uniform Beta(1, 1) prior on the in-tolerance rate, (k + 1) / (n + 2),
  with its 95 % credible interval shown beside it. Below ``prior_min_count``
  earlier results (default 5, our choice) there is no prior and no
  probability: one earlier pass (1 of 1) once made a 99.99 % prior. So a
  test's figure is what could have been worked out on its day, and a later
  test never changes an earlier test's evidence. (Our choice:
  the standards ask for the population's in-tolerance probability from its
  history without saying which history; a test entered late, dated before
  others, moves theirs.)

The fleet's current EOPR is on the index page (``ll_fleet_sections``), not on
each asset's page, and is ``fleet_only``, as is the exact probability: a test's
page shows the probability as printed, with its prior (``false_accept_shown``,
``false_accept_prior``, ``false_accept_over``).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl, needs
from loopledger.plugins.history import drift, history

#: the factors are configurable; these defaults are ours (ILAC-G24 gives "e.g. 80 %" as the
#: threshold, from memory, and no factors)
DEFAULTS: dict[str, float] = {"extend_within": 0.8, "extend_factor": 1.25, "shorten_factor": 0.5,
                              "min_months": 3, "max_months": 60, "false_accept_limit": 0.02, "prior_min_count": 5}
MONTH_DAYS = 365.25 / 12
#: EOPR is clipped into this range before it sets σ_p (0 and 1 make σ_p infinite or zero)
EOPR_CLIP = (0.01, 0.9999)
SUMMARY_COLUMNS = ["asset", "description", "signal", "n_tests", "last_test", "verdict", "interval_months", "next_due",
                   "overdue", "drift_pct_span_per_year", "drift_stderr", "drift_input_pct", "drift_status",
                   "predicted_out_of_tolerance", "predicted_acceptance_limit", "predicted_before_due",
                   "last_as_found_ratio", "staircase_months", "drift_months", "recommended_interval_months",
                   "interval_basis"]


def settings(ctx: RunContext) -> dict[str, float]:
    return {**DEFAULTS, **ctx.section("intervals")}


def staircase(current_months: Any, as_found_ratio: Any, cfg: dict[str, float]) -> np.ndarray:
    """Next interval after a test whose worst as-found |error| / MPE is ``as_found_ratio``.

    Lengthen when the ratio ≤ extend_within, shorten when > 1 (out of tolerance),
    otherwise keep; NaN ratio (no as-found result) keeps the interval.
    """
    current = np.asarray(current_months, dtype=float)
    ratio = np.asarray(as_found_ratio, dtype=float)
    factor = np.where(ratio <= cfg["extend_within"], cfg["extend_factor"],
                      np.where(ratio > 1.0, cfg["shorten_factor"], 1.0))
    months = np.floor(current * factor + 1e-9)
    return np.clip(months, cfg["min_months"], cfg["max_months"])


def add_months(dates: pd.Series, months: pd.Series) -> pd.Series:
    """Calendar-month addition (31 Jan + 1 month = 28/29 Feb), NaT where either is missing."""
    out = pd.Series(pd.NaT, index=dates.index, dtype="datetime64[ns]")
    for m in pd.unique(months.dropna()):
        mask = (months == m) & dates.notna()
        out[mask] = dates[mask] + pd.DateOffset(months=int(m))
    return out


def _counted(tests: pd.DataFrame) -> pd.Series:
    """The tests whose as-found result counts towards reliability: valid, and found in or out of tolerance."""
    return tests["valid"].fillna(False).astype(bool) & tests["as_found"].isin(["pass", "fail"])


def eopr(tests: pd.DataFrame, assets: pd.DataFrame) -> pd.DataFrame:
    """In-tolerance fraction of as-found results per signal type and per description."""
    tests = tests.reindex(columns=list(dict.fromkeys([*tests.columns, "valid", "as_found", "asset"])))
    t = tests[_counted(tests)]
    t = t.assign(in_tol=(t["as_found"] == "pass").astype(int))
    frames = []
    for by in ("signal", "description"):
        group = t["asset"].map(assets[by]) if by in assets.columns else pd.Series(dtype=object)
        agg = t.groupby(group.fillna("(none)"))["in_tol"].agg(n="count", in_tolerance="sum")
        agg = agg.reset_index(names="group")
        agg.insert(0, "group_by", by)
        frames.append(agg)
    out = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    if out.empty:
        return pd.DataFrame(columns=["group_by", "group", "n", "in_tolerance", "eopr"])
    out["eopr"] = out["in_tolerance"] / out["n"]
    return out


def bivariate_cdf(h: np.ndarray, k: np.ndarray, rho: np.ndarray) -> np.ndarray:
    """P(X ≤ h, Y ≤ k) for standard normals with correlation rho (h, k ≠ 0), via Owen's T function.

    Owen (1956): Φ2 = ½Φ(h) + ½Φ(k) − T(h, a_h) − T(k, a_k) − β, β = ½ when hk < 0.
    """
    from scipy.special import ndtr, owens_t

    root = np.sqrt(1.0 - rho * rho)
    a_h = (k - rho * h) / (h * root)
    a_k = (h - rho * k) / (k * root)
    beta = np.where(h * k < 0, 0.5, 0.0)
    return np.asarray(0.5 * ndtr(h) + 0.5 * ndtr(k) - owens_t(h, a_h) - owens_t(k, a_k) - beta)


def global_false_accept(mpe: Any, acceptance: Any, u: Any, p_in: Any) -> np.ndarray:
    """PFA = P(|true| > mpe and |measured| ≤ acceptance), true ~ N(0, σ_p), measured = true + N(0, u)."""
    from scipy.special import ndtr, ndtri

    mpe, acceptance, u = (np.asarray(v, dtype=float) for v in (mpe, acceptance, u))
    p = np.clip(np.asarray(p_in, dtype=float), *EOPR_CLIP)
    sigma_p = mpe / ndtri((1.0 + p) / 2.0)
    sigma_y = np.sqrt(sigma_p ** 2 + u ** 2)
    rho = sigma_p / sigma_y
    h = mpe / sigma_p
    a = acceptance / sigma_y
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = bivariate_cdf(h, a, rho) - bivariate_cdf(h, -a, rho)
        pfa = 2.0 * ((ndtr(a) - ndtr(-a)) - inside)
    ok = (u > 0) & (mpe > 0) & (acceptance > 0)
    return np.where(ok, np.clip(pfa, 0.0, 1.0), np.where(acceptance == 0, 0.0, np.nan))


def prior_reliability(tests: pd.DataFrame, assets: pd.DataFrame) -> pd.DataFrame:
    """Each test's prior: ``n`` valid as-found results (pass or fail) of its signal type dated before the
    test's date, ``in_tolerance`` of them passing, ``eopr`` their ratio (NaN when ``n`` is 0)."""
    t = tests.reindex(columns=list(dict.fromkeys([*tests.columns, "valid", "as_found", "asset", "date"])))
    signal = t["asset"].map(assets["signal"]) if "signal" in assets.columns else pd.Series(np.nan, index=t.index)
    date = pd.to_datetime(t["date"].astype(str), format="%Y-%m-%d", errors="coerce")  # invalid tests: any value
    counted = (_counted(t) & date.notna()).to_numpy()
    n = np.zeros(len(t), dtype=np.int64)
    k = np.zeros(len(t), dtype=np.int64)
    when = date.to_numpy(dtype="datetime64[ns]")
    passed = (t["as_found"] == "pass").to_numpy(dtype=bool)
    codes = pd.factorize(signal)[0]  # -1: no signal type, so no prior
    for code in range(codes.max() + 1 if len(codes) else 0):
        mine = np.flatnonzero(codes == code)
        hist = mine[counted[mine]]
        order = np.argsort(when[hist], kind="stable")
        dates, ok = when[hist][order], passed[hist][order]
        before = np.searchsorted(dates, when[mine], side="left")  # NaT sorts last: no earlier result
        before[np.isnat(when[mine])] = 0
        n[mine] = before
        k[mine] = np.concatenate([[0], np.cumsum(ok)])[before]
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(n > 0, k / np.maximum(n, 1), np.nan)
    return pd.DataFrame({"n": n, "in_tolerance": k, "eopr": ratio}, index=tests.index)


def bayes_prior(n: Any, k: Any, min_count: float) -> pd.DataFrame:
    """The in-tolerance probability from k of n results: posterior mean and 95 % credible interval of
    Beta(1 + k, 1 + n − k) (a uniform Beta(1, 1) prior); NaN where n < ``min_count``."""
    from scipy.special import betaincinv

    n, k = np.asarray(n, dtype=float), np.asarray(k, dtype=float)
    a, b = 1.0 + k, 1.0 + n - k
    enough = n >= max(min_count, 1)
    mean = np.where(enough, a / (a + b), np.nan)
    low = np.where(enough, betaincinv(a, b, 0.025), np.nan)
    high = np.where(enough, betaincinv(a, b, 0.975), np.nan)
    return pd.DataFrame({"mean": mean, "low": low, "high": high})


def prior_text(n: int, k: int, mean: float, low: float, high: float, min_count: float) -> str:
    """What a test's page says of its prior."""
    if n == 0:
        return "none (no earlier as-found result of its signal type)"
    if not mean == mean:
        return f"none (only {n} earlier as-found result(s) of its signal type; at least {min_count:g} are needed)"
    return (f"{mean:.1%} (Beta(1, 1) prior updated with {k} of {n} as-found results before the test; "
            f"95 % interval {low:.1%} to {high:.1%})")


def false_accept(ctx: RunContext, prior: pd.DataFrame, limit: float) -> tuple[pd.Series, list[Finding]]:
    """Each test's global false-accept probability (NaN without a ``U`` column or without a prior)."""
    tests = ctx.tests
    out = pd.Series(np.nan, index=tests.index, dtype=float)
    pts = ctx.points
    if pts.empty or "U" not in pts.columns:
        return out, []
    adjusted = pts["test"].map(tests.set_index("test")["adjusted"]).fillna(False).astype(bool)
    deciding = pts[np.where(adjusted, pts["phase"] == "as_left", pts["phase"] == "as_found")]
    k = deciding["k"].astype(float) if "k" in deciding.columns else pd.Series(2.0, index=deciding.index)
    u = deciding["U"].astype(float) / k.fillna(2.0)
    # the prior's in-tolerance probability: ``p_in`` (Bayesian) where given, else the raw ratio
    p_in = prior["p_in"] if "p_in" in prior.columns else prior["eopr"]
    prior = deciding["test"].map(dict(zip(tests["test"].tolist(), p_in.tolist(), strict=True)))
    # the limit the verdicts actually used (the MPE when conditional passes are accepted), never a
    # narrower guard-banded limit the verdict did not apply
    limit_used = deciding["verdict_limit"] if "verdict_limit" in deciding.columns else deciding["acceptance_limit"]
    pfa = pd.Series(global_false_accept(deciding["mpe"], limit_used, u, prior),
                    index=deciding.index)
    per_test = pfa.groupby(deciding["test"]).max()
    out = tests["test"].map(per_test).astype(float)
    over = per_test[per_test > limit]
    files = dict(zip(tests["test"].tolist(), tests["source_file"].tolist(), strict=True))
    findings = [warning(f"global false-accept probability {value:.2%} exceeds {limit:.0%} (bivariate normal "
                        "model; prior: the signal type's as-found reliability before the test)",
                        file=str(files.get(test, "")), field="U", code="false-accept")
                for test, value in zip(over.index.tolist(), over.tolist(), strict=True)]
    return out, findings


def summary(ctx: RunContext) -> pd.DataFrame:
    """One row per registered asset (untested ones too)."""
    cfg = settings(ctx)
    assets = ctx.assets
    tests = ctx.tests.reindex(columns=list(dict.fromkeys([*ctx.tests.columns, "asset", "date", "test", "valid",
                                                                "verdict"])))
    valid = tests[tests["valid"].fillna(False).astype(bool) & tests["date"].notna()]
    out = pd.DataFrame(index=assets.index.copy())
    out["asset"] = assets["asset"]
    out["description"] = assets.get("description")
    out["signal"] = assets.get("signal")
    counts = valid.groupby("asset").size() if not valid.empty else pd.Series(dtype=int)
    out["n_tests"] = counts.reindex(out.index).fillna(0).astype(int)
    last = (valid.sort_values(["date", "test"], kind="stable").groupby("asset").tail(1).set_index("asset")
            if not valid.empty else pd.DataFrame(columns=["date", "verdict", "test"]))
    out["last_test"] = last["date"].reindex(out.index)
    out["verdict"] = last["verdict"].reindex(out.index).fillna("untested")
    out["interval_months"] = pd.to_numeric(assets.get("interval_months"), errors="coerce")
    last_dates = pd.to_datetime(out["last_test"], format="%Y-%m-%d")
    due = add_months(last_dates, out["interval_months"])
    as_of = pd.Timestamp(ctx.as_of)
    out["next_due"] = due.dt.strftime("%Y-%m-%d")
    out["overdue"] = ((due < as_of) | out["last_test"].isna()).astype(bool)
    d = drift.compute(ctx)
    for col in ("drift_pct_span_per_year", "drift_stderr", "drift_input_pct", "drift_status",
                "predicted_out_of_tolerance", "predicted_acceptance_limit"):
        out[col] = d[col].reindex(out.index) if col in d.columns else np.nan
    out["drift_status"] = out["drift_status"].fillna("too few tests")
    predicted = pd.to_datetime(out["predicted_out_of_tolerance"], format="%Y-%m-%d")
    out["predicted_before_due"] = (predicted < due).astype(bool)
    hist = history.assemble(ctx)
    ratio = hist.groupby("test")["as_found_ratio"].max() if not hist.empty else pd.Series(dtype=float)
    out["last_as_found_ratio"] = last["test"].map(ratio).reindex(out.index) if "test" in last else np.nan
    stair = pd.Series(staircase(out["interval_months"], out["last_as_found_ratio"], cfg), index=out.index)
    out["staircase_months"] = stair.where(out["interval_months"].notna())
    until = (pd.to_datetime(out["predicted_acceptance_limit"], format="%Y-%m-%d") - last_dates).dt.days / MONTH_DAYS
    out["drift_months"] = np.floor(until).clip(lower=cfg["min_months"])
    both = pd.concat([out["staircase_months"], out["drift_months"]], axis=1)
    out["recommended_interval_months"] = both.min(axis=1, skipna=True)
    out["interval_basis"] = np.where(out["drift_months"] < out["staircase_months"].fillna(np.inf), "drift",
                                     np.where(out["staircase_months"].notna(), "staircase", ""))
    return out[SUMMARY_COLUMNS]


def _text(value: Any, fmt: str = "") -> str:
    if value is None or (not isinstance(value, str) and pd.isna(value)):
        return "—"
    return format(value, fmt) if fmt else str(value)


def _months(value: Any) -> str:
    return "—" if pd.isna(value) else f"{value:g} months"


def _when(row: Any, ctx: RunContext) -> str:
    predicted = row.predicted_out_of_tolerance
    if not isinstance(predicted, str) or not predicted:
        return ""
    if predicted <= ctx.as_of.isoformat():
        return f" — already passed on {ctx.as_of.isoformat()}: test it now"
    return " — before the next due date" if row.predicted_before_due else ""


@hookimpl
@needs("stash.history", "stash.drift_assets")
def ll_history(ctx: RunContext) -> list[Finding]:
    cfg = settings(ctx)
    reliability = eopr(ctx.tests, ctx.assets)
    ctx.stash[keys.EOPR] = reliability
    ctx.fleet_only.add(keys.EOPR.name)
    ctx.stash[keys.ASSETS_SUMMARY] = summary(ctx)
    findings: list[Finding] = []
    if not ctx.tests.empty and "U" in ctx.points.columns:
        limit = float(cfg["false_accept_limit"])
        prior = prior_reliability(ctx.tests, ctx.assets)
        bayes = bayes_prior(prior["n"], prior["in_tolerance"], float(cfg["prior_min_count"])).set_axis(prior.index)
        prior["p_in"] = bayes["mean"]
        pfa, findings = false_accept(ctx, prior, limit)
        ctx.tests["global_false_accept"] = pfa
        ctx.fleet_only.add("tests.global_false_accept")
        ctx.tests["false_accept_shown"], ctx.tests["false_accept_over"] = shown(pfa, limit)
        ctx.tests["false_accept_prior"] = [
            prior_text(n, k, m, lo, hi, float(cfg["prior_min_count"]))
            for n, k, m, lo, hi in zip(prior["n"].tolist(), prior["in_tolerance"].tolist(), bayes["mean"].tolist(),
                                       bayes["low"].tolist(), bayes["high"].tolist(), strict=True)]
        # the prior's counts go out with the probability, so it can be worked again from tests.csv
        ctx.tests["prior_n"], ctx.tests["prior_in_tolerance"] = prior["n"], prior["in_tolerance"]
        ctx.tests["prior_p_in"] = bayes["mean"]
        exports = ctx.stash.setdefault(keys.TEST_EXPORTS, [])
        exports += ["global_false_accept", "prior_n", "prior_in_tolerance", "prior_p_in"]
    return findings


def shown(pfa: pd.Series, limit: float) -> tuple[pd.Series, pd.Series]:
    """What a test's page shows of its false-accept probability: the percentage to two decimals ('' when
    there is none) and whether it is over ``limit``."""
    values = pfa.astype(float)
    text = [f"{v:.2%}" if v == v else "" for v in values.tolist()]
    return pd.Series(text, index=pfa.index, dtype=object), (values > limit).astype(bool)


@hookimpl
def ll_config_keys() -> dict[str, list[str]]:
    return {"intervals": list(DEFAULTS)}


@hookimpl
def ll_configure(config: dict[str, Any]) -> list[Finding]:
    section = config.get("intervals", {})
    if not isinstance(section, dict):
        return [error("[intervals] must be a table", file="loopledger.toml", field="intervals")]
    found = []
    merged = {**DEFAULTS, **section}
    for key, value in section.items():
        if key not in DEFAULTS:
            found.append(error(f"[intervals] has no setting '{key}' (known: {', '.join(DEFAULTS)})",
                               file="loopledger.toml", field=f"intervals.{key}"))
        elif isinstance(value, bool) or not isinstance(value, int | float) or value <= 0:
            found.append(error(f"[intervals] {key} must be a positive number", file="loopledger.toml",
                               field=f"intervals.{key}"))
    if not found:
        rules = [(merged["extend_factor"] >= 1, "extend_factor must be ≥ 1"),
                 (merged["shorten_factor"] <= 1, "shorten_factor must be ≤ 1"),
                 (merged["extend_within"] <= 1, "extend_within must be ≤ 1 (a fraction of the MPE)"),
                 (merged["min_months"] <= merged["max_months"], "min_months must be ≤ max_months"),
                 (merged["false_accept_limit"] < 1, "false_accept_limit must be a probability below 1"),
                 (float(merged["prior_min_count"]) % 1 == 0, "prior_min_count must be a whole number")]
        found += [error(f"[intervals] {text}", file="loopledger.toml", field="intervals") for ok, text in rules
                  if not ok]
    return found


@hookimpl
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame]:
    out: dict[str, pd.DataFrame] = {}
    if keys.ASSETS_SUMMARY in ctx.stash:
        out["assets"] = ctx.stash[keys.ASSETS_SUMMARY].sort_values("asset")
    if keys.EOPR in ctx.stash:
        out["eopr"] = ctx.stash[keys.EOPR]
    return out


@hookimpl
def ll_asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    table = ctx.stash.get(keys.ASSETS_SUMMARY)
    if table is None:
        return {}
    overdue_on = "Overdue on " + ctx.as_of.isoformat()
    fleet = "by signal type on the handbook's index page"
    return {str(r.Index): [Section(title="Due date, drift and interval", kind="facts", order=20, rows=[
        ("Last test", _text(r.last_test)), ("Latest verdict", _text(r.verdict)),
        ("Interval in force", _months(r.interval_months)),
        ("Next due", _text(r.next_due)),
        (overdue_on, "yes" if r.overdue else "no"),
        ("Drift rate", "—" if pd.isna(r.drift_pct_span_per_year) else
         f"{r.drift_pct_span_per_year:+.4f} ± {_text(r.drift_stderr, '.4f')} % of span per year "
         f"(worst point {r.drift_input_pct:g} %)"),
        ("Trend", _text(r.drift_status)),
        ("Predicted to reach the acceptance limit", _text(r.predicted_acceptance_limit)),
        ("Predicted to reach the MPE", _text(r.predicted_out_of_tolerance) + _when(r, ctx)),
        ("Staircase interval (ILAC-G24 / OIML D 10)", _months(r.staircase_months)),
        ("Interval allowed by drift", _months(r.drift_months)),
        ("Recommended interval", f"{_months(r.recommended_interval_months)} ({r.interval_basis or 'no basis'})"),
        ("Fleet reliability (as found)", fleet),
    ])] for r in table[table.index.isin(assets)].itertuples()}


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    if "false_accept_shown" not in ctx.tests.columns:
        return {}
    mine = ctx.tests[ctx.tests["test"].isin(tests)].drop_duplicates("test", keep="last")
    limit = float(settings(ctx)["false_accept_limit"])
    met = {False: f"≤ {limit:.0%} — met", True: f"≤ {limit:.0%} — exceeded"}
    return {str(test): [Section(title="Global false-accept probability", kind="facts", order=60,
                                        covers=("false-accept",), rows=[
        ("Probability (bivariate normal model)", text or "— (not worked out)"),
        ("Prior: the signal type's in-tolerance probability", prior),
        ("Target", met[bool(over)] if text else "—")])]
        for test, text, prior, over in zip(mine["test"], mine["false_accept_shown"], mine["false_accept_prior"],
                                           mine["false_accept_over"], strict=True)}


@hookimpl
def ll_fleet_sections(ctx: RunContext) -> list[Section]:
    reliability = ctx.stash.get(keys.EOPR)
    if not isinstance(reliability, pd.DataFrame) or reliability.empty:
        return []
    by_signal = reliability[reliability["group_by"] == "signal"].drop_duplicates("group")
    rows = [(g, f"{e:.0%}", f"{int(k)} of {int(n)}") for g, e, k, n in
            zip(by_signal["group"], by_signal["eopr"], by_signal["in_tolerance"], by_signal["n"], strict=True)]
    return [Section(title="As-found reliability by signal type (EOPR)", kind="table", order=20,
                    columns=["Signal type", "In tolerance as found", "Tests"], rows=rows),
            Section(title="EOPR as a prior", kind="text", order=21,
                    text="Each test's global false-accept probability takes as its prior its signal type's "
                         "in-tolerance probability as it stood before the test: a uniform Beta(1, 1) prior "
                         "updated with the as-found results dated earlier, once there are at least "
                         f"{settings(ctx)['prior_min_count']:g} of them, shown on the test's page with its count and "
                         "95 % interval; the figures above count every test to date. data/eopr.csv also "
                         "gives them per description.")]
