"""Decision rules that take the measurement uncertainty into account: ``guarded`` and ``risk``.

Both give the non-binary statements of ILAC-G8:2019 §4.2.3 — ``pass``, ``conditional-pass``,
``conditional-fail``, ``fail`` — with MPE the tolerance limit and w the guard band:

- pass if |e| ≤ MPE − w; conditional-pass if MPE − w < |e| ≤ MPE;
  conditional-fail if MPE < |e| ≤ MPE + w; fail if |e| > MPE + w.

``guarded`` takes w = U (the expanded uncertainty, k for 95.45 %). ``risk`` sizes w so that the
specific risk (JCGM 106:2012, normal model with standard uncertainty u) at the acceptance limit
equals ``[decision] risk_target`` (default 0.02): a point accepted at the limit has that
probability of lying outside ±MPE, and a point rejected at MPE + w has that probability of lying
inside. When U ≥ MPE (or the target cannot be met even at zero error) no point can pass; the
conformity stage says so in a warning.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import DecisionRule
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.judge.tolerance import ROUNDING

DEFAULT_RISK_TARGET = 0.02


def specific_risk(e: Any, u: Any, mpe: Any) -> Any:
    """P(true error outside ±MPE | measured error e, standard uncertainty u), normal model (JCGM 106)."""
    from scipy.special import ndtr  # the normal CDF; scipy.stats costs a second to import

    e, u, mpe = (np.asarray(v, dtype=float) for v in (e, u, mpe))
    inside = ndtr((mpe - e) / u) - ndtr((-mpe - e) / u)
    return 1.0 - inside


def _pdf(z: Any) -> Any:
    """The standard normal density."""
    return np.exp(-0.5 * np.square(z)) / np.sqrt(2.0 * np.pi)


def risk_limits(u: Any, mpe: Any, target: float) -> tuple[np.ndarray, np.ndarray]:
    """(acceptance limit A, rejection limit R) with specific risk(A) = target and 1 − risk(R) = target.

    Solved with scipy's Newton iteration (vectorised) from the one-tail guess MPE ∓ u·z. A is NaN
    where even |e| = 0 carries more than the target risk (no acceptance zone).
    """
    from scipy import optimize
    from scipy.special import ndtri

    u, mpe = np.asarray(u, dtype=float), np.asarray(mpe, dtype=float)
    z = -ndtri(target)  # the normal quantile with ``target`` above it

    def solve(su: np.ndarray, sm: np.ndarray, guess: np.ndarray, goal: float) -> np.ndarray:
        def f(x: np.ndarray) -> np.ndarray:
            return np.asarray(specific_risk(x, su, sm)) - goal

        def df(x: np.ndarray) -> np.ndarray:
            return np.asarray((_pdf((sm - x) / su) - _pdf((-sm - x) / su)) / su)

        return np.asarray(optimize.newton(f, guess, fprime=df, tol=1e-12, maxiter=100))

    accept = np.full(u.shape, np.nan)
    reject = np.full(u.shape, np.nan)
    ok = np.isfinite(u) & np.isfinite(mpe) & (u > 0)
    if ok.any():
        reject[ok] = solve(u[ok], mpe[ok], mpe[ok] + u[ok] * z, 1.0 - target)
        possible = ok.copy()
        possible[ok] = np.asarray(specific_risk(0.0, u[ok], mpe[ok])) <= target
        if possible.any():
            up, mp = u[possible], mpe[possible]
            accept[possible] = solve(up, mp, np.maximum(mp - up * z, 0.0), target)
    return accept, reject


def non_binary(error: pd.Series, mpe: pd.Series, accept: Any, reject: Any, span: pd.Series) -> np.ndarray:
    """ILAC-G8:2019 §4.2.3 statements from the acceptance and rejection limits."""
    e = error.abs().to_numpy(dtype=float)
    slack = ROUNDING * span.abs().to_numpy(dtype=float)
    accept = np.asarray(accept, dtype=float)
    reject = np.asarray(reject, dtype=float)
    m = mpe.to_numpy(dtype=float)
    with np.errstate(invalid="ignore"):
        return np.select([e <= accept + slack, e <= m + slack, e <= reject + slack],
                         ["pass", "conditional-pass", "conditional-fail"], "fail")


class Guarded(DecisionRule):
    name = "guarded"
    description = ("guard band w = U (ILAC-G8:2019 §4.2.3): pass ≤ MPE − U < conditional-pass ≤ MPE "
                   "< conditional-fail ≤ MPE + U < fail")
    needs = ("U",)

    def decide(self, points: pd.DataFrame, ctx: RunContext) -> pd.DataFrame:
        mpe, w = points["mpe"].astype(float), points["U"].astype(float)
        accept = mpe - w
        decision = non_binary(points["error"], mpe, accept, mpe + w, points["span"])
        return pd.DataFrame({"decision": decision, "acceptance_limit": accept.clip(lower=0.0)}, index=points.index)


class RiskBased(DecisionRule):
    name = "risk"
    description = ("guard band sized so the specific risk (JCGM 106, normal model) at the acceptance limit "
                   "equals [decision] risk_target")
    needs = ("U",)

    def decide(self, points: pd.DataFrame, ctx: RunContext) -> pd.DataFrame:
        target = float(ctx.section("decision").get("risk_target", DEFAULT_RISK_TARGET))
        u = points["u"] if "u" in points else points["U"] / 2.0
        accept, reject = risk_limits(u.to_numpy(dtype=float), points["mpe"].to_numpy(dtype=float), target)
        decision = non_binary(points["error"], points["mpe"], accept, reject, points["span"])
        return pd.DataFrame({"decision": decision, "acceptance_limit": np.where(np.isnan(accept), 0.0, accept)},
                            index=points.index)


@hookimpl
def ll_decision_rules() -> list[DecisionRule]:
    return [Guarded(), RiskBased()]


@hookimpl
def ll_config_keys() -> dict[str, list[str]]:
    return {"decision": ["risk_target"]}


@hookimpl
def ll_configure(config: dict[str, Any]) -> list[Finding]:
    decision = config.get("decision", {})
    if not isinstance(decision, dict) or "risk_target" not in decision:
        return []
    target = decision["risk_target"]
    if isinstance(target, bool) or not isinstance(target, int | float) or not 0.0 < float(target) < 0.5:
        return [error(f"[decision] risk_target must be a probability between 0 and 0.5 (e.g. 0.02), got {target!r}",
                      file="loopledger.toml", field="decision.risk_target")]
    return []
