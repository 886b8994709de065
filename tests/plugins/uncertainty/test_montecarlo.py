"""Monte Carlo propagation where the first-order budget fails (plugins/uncertainty/montecarlo.py).

Sources: JCGM 101:2008 (propagation of distributions; the adaptive stopping rule of §7.9, from memory);
JCGM 100:2008 §5.1.2 (first-order law) for the linear cases, where both methods must agree; a closed form
worked here for the square root of a rectangular input; scipy.stats.norm for the normal risk.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from loopledger.plugins.uncertainty import montecarlo
from scipy import stats


def _inputs(x, a, is_sqrt=False, cut=0.0, span=16.0, index=(0,)):
    n = len(index)
    return pd.DataFrame({"x": [x] * n, "a": [a] * n, "is_sqrt": [is_sqrt] * n, "cut": [cut] * n,
                         "span": [span] * n}, index=list(index))


def _keys(index):
    return pd.Series([f"k{i}" for i in index], index=list(index))


def test_square_root_of_a_rectangular_input_closed_form():
    """Worked here: X rectangular on [0, A] (A = 0.02 of the ΔP span: a source whose half-width 0.01 equals
    the input 1 %). Y = √X has P(Y ≤ y) = y²/A on [0, √A], so E[Y] = (2/3)√A and var Y = A/2 − 4A/9 = A/18,
    and the probabilistically symmetric 95.45 % interval is [√(0.02275·A), √(0.97725·A)]. Output = 16 mA × Y;
    the simulated deviation is S = −16·(Y − √0.01). The first-order GUM value, 16 × 0.5/√0.01 × 0.01/√3 =
    0.462 mA, differs from the true 0.533 mA: that is why this point is simulated."""
    A = 0.02
    result, _ = montecarlo.simulate(_inputs(0.01, 0.01, is_sqrt=True), {0: []}, _keys([0]))
    r = result.iloc[0]
    assert r["u"] == pytest.approx(16 * math.sqrt(A / 18), rel=0.01)
    tail = (1 - 0.9545) / 2
    want_low = -16 * (math.sqrt((1 - tail) * A) - 0.1)
    want_high = -16 * (math.sqrt(tail * A) - 0.1)
    assert r["mc_low"] == pytest.approx(want_low, abs=0.01) and r["mc_high"] == pytest.approx(want_high, abs=0.01)
    assert r["U"] == pytest.approx((want_high - want_low) / 2, rel=0.01)
    first_order = 16 * 0.5 / math.sqrt(0.01) * 0.01 / math.sqrt(3)
    assert abs(r["u"] - first_order) / first_order > 0.1


def test_linear_case_agrees_with_the_gum():
    """A linear model (JCGM 100 §5.1.2 is exact for it): u from the simulation equals √Σu_i² to 1 %; with a
    dominant normal term, U agrees with k = 2 × u (95.45 %) to 2 %."""
    others = {0: [("rectangular", 0.003, math.inf), ("normal", 0.01, math.inf)]}
    result, _ = montecarlo.simulate(_inputs(0.5, 0.0002), others, _keys([0]))
    u_gum = math.sqrt((16 * 0.0002 / math.sqrt(3)) ** 2 + (0.003 / math.sqrt(3)) ** 2 + 0.01 ** 2)
    assert result.iloc[0]["u"] == pytest.approx(u_gum, rel=0.01)
    assert result.iloc[0]["U"] == pytest.approx(2 * u_gum, rel=0.02)


def test_risk_from_the_simulated_distribution_matches_the_normal_model_when_normal():
    """One normal term u = 0.02 mA, error 0.05 mA, MPE 0.08 mA: JCGM 106 specific risk with scipy.stats.norm."""
    result, quantiles = montecarlo.simulate(_inputs(0.5, 0.0), {0: [("normal", 0.02, math.inf)]}, _keys([0]))
    got = montecarlo.specific_risk(quantiles, pd.Series([0.05]), pd.Series([0.08]))
    want = stats.norm.sf((0.08 - 0.05) / 0.02) + stats.norm.cdf((-0.08 - 0.05) / 0.02)
    assert got.iloc[0] == pytest.approx(want, abs=0.003)


def test_which_points_are_simulated():
    """The first-order budget is not valid where the source's half-width reaches the non-linearity: the
    root's origin (a ≥ x), a large second-order term (u_x/(2√2·x) > 0.1 for √x), or the cut-off's step
    (a ≥ |x − x_c|, x_c = (cut/100)² for a square root); a linear point far from any is not simulated."""
    pts = pd.DataFrame({"input_min": 0.0, "input_max": 100.0, "injected": [1.0, 4.0, 50.0, 1.05, 50.0],
                        "injected_unit": "kPa", "input_unit": "kPa",
                        "characteristic": ["sqrt", "sqrt", "sqrt", "sqrt", "linear"],
                        "low_flow_cutoff_pct": [0.0, 0.0, 0.0, 10.0, 0.0], "signal": "process-transmitter",
                        "output_min": 4.0, "output_max": 20.0})
    half = [2.0, 3.0, 0.1, 0.1, 0.1]  # kPa
    terms = pd.DataFrame({"row": range(5), "component": "source", "half_width": half})
    flagged = montecarlo.needs_monte_carlo(pts, terms)
    # 0: a ≥ x; 1: u_x = 3/√3 % against x = 4 %: 1.73/(2√2·4) = 0.15 > 0.1; 2: far from 0; 3: x_c = 1 %, the
    # input 1.05 % is within 0.1 % of it; 4: linear
    assert sorted(flagged.index) == [0, 1, 3]


def test_a_point_keeps_its_figures_whatever_else_is_simulated():
    """Each point has its own seeded generator: its U is the same alone or with others (evidence that does not
    move when another file is added), and the same on every run."""
    one, _ = montecarlo.simulate(_inputs(0.01, 0.01, True, index=(5,)), {5: []}, _keys([5]))
    both, _ = montecarlo.simulate(pd.concat([_inputs(0.2, 0.3, True, index=(4,)),
                                             _inputs(0.01, 0.01, True, index=(5,))]), {4: [], 5: []}, _keys([4, 5]))
    assert one.loc[5, "U"] == both.loc[5, "U"]
    again, _ = montecarlo.simulate(_inputs(0.01, 0.01, True, index=(5,)), {5: []}, _keys([5]))
    assert again.loc[5, "U"] == one.loc[5, "U"]
    assert np.isfinite(both["U"]).all()


def test_end_to_end_a_point_straddling_the_cut_off(tmp_path, run_folder):
    """A DP flow transmitter (0-25 kPa, square root, 10 % flow cut-off = 1 % ΔP = 0.25 kPa) tested at 0.25 kPa
    with a source good to ±0.1 kPa: the source's half-width straddles the cut-off's step, where the first-order
    slope (that of the root just above it) says nothing about the 1.6 mA step. The point is simulated, and its
    U covers the step: part of the trials fall below the cut-off and read 4 mA (Q ∝ √ΔP, common practice)."""
    import copy

    from tests.evidence import INSTRUMENTS, write_evidence
    from tests.signal_checks import asset, result_doc

    rig = copy.deepcopy(INSTRUMENTS)
    rig["P-1"] = {"kind": "source", "range": "25 kPa", "accuracy": "0.1 kPa"}
    ft = asset("T-FT", "process-transmitter", (0, 25, "kPa"), (4, 20, "mA"), characteristic="sqrt",
               low_flow_cutoff_pct=10)
    doc = result_doc("T-FT", [{"input": "0.25 kPa", "reading": "5.600 mA"},
                              {"input": "12.5 kPa", "reading": "15.314 mA"}],
                     instruments={"source": "P-1", "meter": "DMM-1"})
    ctx = run_folder(write_evidence(tmp_path / "ev", {"f.yaml": doc}, assets=[ft], instruments=rig))
    pts = ctx.points.set_index("point")
    assert pts.at[1, "u_method"] == montecarlo.METHOD and pts.at[2, "u_method"] == "GUM"
    assert pts.at[1, "U"] > 0.5  # most of the 1.6 mA step, not the root's first-order 0.15 mA
    # a true ΔP below the cut-off means a true output of 4 mA, so the true error is up to 1.6 mA larger
    assert pts.at[1, "mc_high"] > 1.0 and -0.5 < pts.at[1, "mc_low"] < 0.0


def test_risk_rule_on_a_simulated_normal_distribution_agrees_with_the_normal_model():
    """For a simulated point whose only term is normal (u = 0.02 mA, MPE 0.08 mA, target 2 %), the statements
    and the acceptance limit from the simulated distribution match the normal model's (JCGM 106; the limit
    MPE − u·z solved by risk_limits, itself checked against scipy.stats.norm in test_decision_rules)."""
    from loopledger.plugins.judge.decision_rules import risk_limits

    index = list(range(6))
    inputs = _inputs(0.5, 0.0, index=index)
    others = {i: [("normal", 0.02, math.inf)] for i in index}
    _, quantiles = montecarlo.simulate(inputs, others, _keys(index))
    errors = pd.Series([0.0, 0.02, -0.07, 0.075, 0.09, -0.2], index=index)
    said, limit = montecarlo.risk_decisions(quantiles, errors, pd.Series(0.08, index=index), 0.02)
    accept, reject = risk_limits(np.array([0.02]), np.array([0.08]), 0.02)
    assert limit.to_numpy() == pytest.approx([accept[0]] * 6, abs=0.002)
    want = ["pass" if abs(e) <= accept[0] else "conditional-pass" if abs(e) <= 0.08
            else "conditional-fail" if abs(e) <= reject[0] else "fail" for e in errors]
    assert said.tolist() == want
