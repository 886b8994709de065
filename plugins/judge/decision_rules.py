"""Decision rules that take the measurement uncertainty into account: ``guarded`` and ``risk``.

Both give the non-binary statements of ILAC-G8:2019 §4.2.3 — ``pass``, ``conditional-pass``,
``conditional-fail``, ``fail`` — with MPE the tolerance limit and w the guard band:

- pass if |e| ≤ MPE − w; conditional-pass if MPE − w < |e| ≤ MPE;
  conditional-fail if MPE < |e| ≤ MPE + w; fail if |e| > MPE + w.

``guarded`` takes w = U (the expanded uncertainty, k for 95.45 %). ``risk`` sizes w so that the
specific risk (JCGM 106:2012, with standard uncertainty u: normal, or at finite ν_eff a scaled and
shifted t, JCGM 101:2008 §6.4.9) at the acceptance limit
equals ``[decision] risk_target`` (default 0.02): a point accepted at the limit has that
probability of lying outside ±MPE, and a point rejected at MPE + w has that probability of lying
inside. When U ≥ MPE (or the target cannot be met even at zero error) no point can pass; the
conformity stage says so in a warning.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import DecisionRule
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.plugins.judge.tolerance import ROUNDING

DEFAULT_RISK_TARGET = 0.02


def _cdf(z: Any, nu: Any) -> Any:
    """The CDF of the standard normal (ν infinite) or of Student's t with ν degrees of freedom."""
    from scipy.special import ndtr, stdtr  # scipy.stats costs a second to import

    z, nu = np.broadcast_arrays(np.asarray(z, dtype=float), np.asarray(nu, dtype=float))
    finite = np.isfinite(nu) & (nu > 0)
    out = np.asarray(ndtr(z), dtype=float)
    if finite.any():
        out = np.where(finite, stdtr(np.where(finite, nu, 1.0), z), out)
    return out


def specific_risk(e: Any, u: Any, mpe: Any, nu: Any = np.inf) -> Any:
    """P(true error outside ±MPE | measured error e, standard uncertainty u) (JCGM 106:2012).

    The state of knowledge of the true error is normal, or, where the effective degrees of freedom
    ``nu`` are finite, a t distribution with ``nu`` degrees of freedom scaled by u and shifted to e
    (JCGM 101:2008 §6.4.9): at few degrees of freedom the normal model understates the risk.
    """
    e, u, mpe = (np.asarray(v, dtype=float) for v in (e, u, mpe))
    inside = _cdf((mpe - e) / u, nu) - _cdf((-mpe - e) / u, nu)
    return 1.0 - inside


def _quantile(p: float, nu: np.ndarray) -> np.ndarray:
    """The ``p`` quantile of the standard normal (ν infinite) or of Student's t."""
    from scipy.special import ndtri, stdtrit

    finite = np.isfinite(nu) & (nu > 0)
    return np.where(finite, stdtrit(np.where(finite, nu, 1.0), p), ndtri(p))


def risk_limits(u: Any, mpe: Any, target: float, nu: Any = np.inf) -> tuple[np.ndarray, np.ndarray]:
    """(acceptance limit A, rejection limit R) with specific risk(A) = target and 1 − risk(R) = target.

    The risk is that of :func:`specific_risk` (normal, or scaled and shifted t at ``nu``). It rises
    with |e|, so each limit is bracketed and solved by scipy's vectorised bracketing root finder:
    A in [0, MPE], R in [MPE, MPE + u·q], q the t (or normal) quantile of 1 − target, where
    1 − risk ≤ target. A is NaN where even |e| = 0 carries more than the target risk (no
    acceptance zone).
    """
    from scipy.optimize import elementwise

    u, mpe = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(mpe, dtype=float))
    nu = np.broadcast_to(np.asarray(nu, dtype=float), u.shape)

    def solve(su: np.ndarray, sm: np.ndarray, sn: np.ndarray, low: np.ndarray, high: np.ndarray,
              goal: float) -> np.ndarray:
        def f(x: np.ndarray, su: np.ndarray, sm: np.ndarray, sn: np.ndarray) -> np.ndarray:
            return np.asarray(specific_risk(x, su, sm, sn)) - goal

        found = elementwise.find_root(f, (low, high), args=(su, sm, sn),
                                      tolerances={"xatol": 1e-15, "xrtol": 1e-13})
        return np.asarray(found.x, dtype=float)

    accept = np.full(u.shape, np.nan)
    reject = np.full(u.shape, np.nan)
    ok = np.isfinite(u) & np.isfinite(mpe) & (u > 0) & (mpe > 0)
    if ok.any():
        su, sm, sn = u[ok], mpe[ok], nu[ok]
        reject[ok] = solve(su, sm, sn, sm, sm + su * _quantile(1.0 - target, sn), 1.0 - target)
        possible = ok.copy()
        possible[ok] = np.asarray(specific_risk(0.0, su, sm, sn)) <= target
        if possible.any():
            up, mp, np_ = u[possible], mpe[possible], nu[possible]
            accept[possible] = solve(up, mp, np_, np.zeros_like(mp), mp, target)
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
    description = ("guard band sized so the specific risk (JCGM 106; normal model, or scaled and shifted t at "
                   "finite ν_eff) at the acceptance limit equals [decision] risk_target")
    needs = ("U",)

    def decide(self, points: pd.DataFrame, ctx: RunContext) -> pd.DataFrame:
        target = float(ctx.section("decision").get("risk_target", DEFAULT_RISK_TARGET))
        u = points["u"] if "u" in points else points["U"] / 2.0
        nu = points["nu_eff"].to_numpy(dtype=float) if "nu_eff" in points else np.inf
        accept, reject = risk_limits(u.to_numpy(dtype=float), points["mpe"].to_numpy(dtype=float), target, nu)
        decision = non_binary(points["error"], points["mpe"], accept, reject, points["span"])
        out = pd.DataFrame({"decision": decision, "acceptance_limit": np.where(np.isnan(accept), 0.0, accept)},
                           index=points.index)
        stash = getattr(ctx, "stash", None)
        quantiles = stash.get(keys.MC_QUANTILES) if stash is not None else None
        if isinstance(quantiles, pd.DataFrame) and len(quantiles):
            # points whose U came from Monte Carlo: decided from their own simulated distribution
            from loopledger.plugins.uncertainty import montecarlo

            mine = quantiles[quantiles.index.isin(points.index)]
            if len(mine):
                said, limit = montecarlo.risk_decisions(mine, points["error"], points["mpe"], target)
                out.loc[mine.index, "decision"] = said
                out.loc[mine.index, "acceptance_limit"] = limit
        return out


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
