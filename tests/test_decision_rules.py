"""Decision rules ``guarded`` and ``risk`` (plugins/decision_rules.py).

Sources: ILAC-G8:09/2019 §4.2 (non-binary statements with a guard band), JCGM 106:2012
(specific risk, normal model; the check value is the one listed in domain.md), scipy.stats.norm.
"""

from __future__ import annotations

import copy

import numpy as np
import pandas as pd
import pytest
from loopledger.cli import main
from loopledger.plugins.judge.decision_rules import Guarded, RiskBased, risk_limits, specific_risk
from scipy import stats

from tests.evidence import INSTRUMENTS, good_points, result_yaml, write_evidence


def frame(errors, mpe=0.08, U=0.02, u=None):
    n = len(errors)
    return pd.DataFrame({"error": errors, "mpe": [mpe] * n, "U": [U] * n, "u": [u if u else U / 2] * n,
                         "span": [16.0] * n})


def test_guarded_statements_exactly_at_the_limits():
    """ILAC-G8:2019 §4.2.3 with w = U: pass up to and including MPE − U, conditional pass up to
    and including MPE, conditional fail up to and including MPE + U, fail beyond (MPE 0.08 mA,
    U 0.02 mA; values chosen to be exact in binary floating point where possible)."""
    errors = [0.06, -0.06, 0.0601, 0.08, -0.08, 0.0801, 0.10, -0.10, 0.1001]
    got = Guarded().decide(frame(errors), ctx=None)  # type: ignore[arg-type]
    assert list(got["decision"]) == ["pass", "pass", "conditional-pass", "conditional-pass", "conditional-pass",
                                     "conditional-fail", "conditional-fail", "conditional-fail", "fail"]
    assert got["acceptance_limit"].iloc[0] == pytest.approx(0.06)


def test_guarded_with_u_at_least_mpe_has_no_pass():
    """When U ≥ MPE the acceptance zone MPE − U is empty (ILAC-G8:2019 §4.2.3): nothing passes,
    points within MPE are conditional passes."""
    got = Guarded().decide(frame([0.0, 0.05, 0.09, 0.2], U=0.1), ctx=None)  # type: ignore[arg-type]
    assert list(got["decision"]) == ["conditional-pass", "conditional-pass", "conditional-fail", "fail"]
    assert (got["acceptance_limit"] == 0.0).all()


@pytest.mark.parametrize("e,u,mpe", [(0.0, 0.02, 0.08), (0.05, 0.02, 0.08), (-0.07, 0.01, 0.08),
                                     (0.09, 0.03, 0.08), (0.3, 0.1, 0.16)])
def test_specific_risk_against_scipy_norm(e, u, mpe):
    """P(true error outside ±MPE) = sf((MPE − e)/u) + cdf((−MPE − e)/u) (JCGM 106:2012, normal
    model), written with scipy.stats.norm's survival function."""
    want = stats.norm.sf((mpe - e) / u) + stats.norm.cdf((-mpe - e) / u)
    assert float(specific_risk(e, u, mpe)) == pytest.approx(want, rel=1e-9)


def test_jcgm_106_check_value():
    """y = 13.6, u = 1.8, limits [12.5, 16.3] → p_c = 0.6626 (domain.md, from JCGM 106's formula).
    As an error about the limits' centre 14.4 with MPE 1.9: e = −0.8."""
    assert 1.0 - float(specific_risk(-0.8, 1.8, 1.9)) == pytest.approx(0.6626, abs=5e-5)


def test_guard_band_of_u_gives_about_2_28_percent_at_the_acceptance_limit():
    """With w = U = 2u and MPE ≫ u the risk at MPE − U is Φ(−2) = 2.28 % (domain.md, calc;
    scipy.stats.norm.cdf(-2))."""
    u, mpe = 0.01, 1.0
    assert float(specific_risk(mpe - 2 * u, u, mpe)) == pytest.approx(stats.norm.cdf(-2.0), rel=1e-9)


def test_risk_rule_limits_meet_the_target():
    """The acceptance limit A has specific risk = target and the rejection limit R has
    P(conforming) = target; for MPE ≫ u, A → MPE − u·z with z = norm.isf(target) (one tail)."""
    u = np.array([0.005, 0.02, 0.03])
    mpe = np.array([0.08, 0.08, 0.08])
    accept, reject = risk_limits(u, mpe, 0.02)
    assert specific_risk(accept, u, mpe) == pytest.approx([0.02] * 3, abs=1e-9)
    assert 1 - specific_risk(reject, u, mpe) == pytest.approx([0.02] * 3, abs=1e-9)
    assert accept[0] == pytest.approx(0.08 - 0.005 * stats.norm.isf(0.02), rel=1e-9)


def test_risk_rule_with_no_acceptance_zone():
    """If even e = 0 carries more than the target risk, no point can pass (2·Φ(−MPE/u) > target)."""
    accept, _ = risk_limits(np.array([0.1]), np.array([0.08]), 0.02)
    assert np.isnan(accept[0])

    class Ctx:
        def section(self, name):
            return {"risk_target": 0.02}

    got = RiskBased().decide(frame([0.0, 0.05], U=0.2, u=0.1), Ctx())  # type: ignore[arg-type]
    assert list(got["decision"]) == ["conditional-pass", "conditional-pass"]


RIG = copy.deepcopy(INSTRUMENTS)
RIG["CAL-1"] = {"kind": "source", "range": "1 A", "accuracy": "0.01 %rdg"}


def test_cli_run_with_rule_guarded(tmp_path):
    """End to end: `loopledger run --rule guarded`; a point 0.075 mA off on a ±0.08 mA class 0.5
    transducer lies within MPE but inside the guard band → conditional-pass, test passes."""
    points = good_points(0.0)
    points[2] = ("50 %", "12.075 mA")
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=points,
                                                               instruments={"source": "CAL-1", "meter": "DMM-1"})},
                        instruments=RIG)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out), "--rule", "guarded"]) == 0
    pts = pd.read_csv(out / "data" / "points.csv")
    assert set(pts["decision_rule"]) == {"guarded"}
    mid = pts[pts["point"] == 3].iloc[0]
    assert mid["decision"] == "conditional-pass"
    assert mid["acceptance_limit"] == pytest.approx(mid["mpe"] - mid["U"], rel=1e-9)
    tests = pd.read_csv(out / "data" / "tests.csv")
    assert list(tests["decision_rule"]) == ["guarded"] and list(tests["verdict"]) == ["pass"]
    page = next((out / "handbook" / "tests").glob("*.html")).read_text(encoding="utf-8")
    assert "guarded" in page and "Uncertainty budget" in page and "conditional" in page.lower()


def test_cli_run_with_rule_risk_and_a_bad_target(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.0))},
                        config='as_of = 2026-11-30\n[decision]\nrule = "risk"\nrisk_target = 0.7\n')
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 3
    (ev / "loopledger.toml").write_text('as_of = 2026-11-30\n[decision]\nrule = "risk"\nrisk_target = 0.05\n')
    main(["run", str(ev), "--out", str(tmp_path / "out"), "--no-handbook"])
    pts = pd.read_csv(tmp_path / "out" / "data" / "points.csv")
    assert set(pts["decision_rule"]) == {"risk"}
    within = pts[pts["decision"] == "pass"]
    assert (within["risk"] <= 0.05 + 1e-9).all()
