"""Single-test analysis (plugins/linearity.py): ISA-51.1 / IEC 61298-2 terms.

Checks: a terminal line worked by hand; the minimax ("independent", ISA-51.1) line against
scipy.optimize.linprog's Chebyshev fit and against numpy.polyfit's least-squares line (whose
largest deviation can only be larger or equal); hysteresis and non-repeatability by hand.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import yaml
from loopledger.cli import main
from loopledger.plugins.analyse import linearity
from loopledger.plugins.analyse.linearity import analyse, minimax_lines
from scipy.optimize import linprog

from tests.evidence import batch_and_alone, good_points, result_yaml, write_evidence


def table(errors, inputs=(0, 25, 50, 75, 100), directions=None, test="t", phase="as_found"):
    return pd.DataFrame({"test": test, "phase": phase, "input_pct": list(inputs), "error_pct_span": list(errors),
                         "direction": list(directions) if directions else [None] * len(errors)})


def test_zero_span_and_terminal_nonlinearity_by_hand():
    """Errors +0.10, +0.30, +0.20, +0.25, +0.20 % at 0..100 %: zero +0.10, span +0.10; the terminal
    line runs 0.10 → 0.20, so deviations are 0, 0.175, 0.05, 0.075, 0 → 0.175 % (worked by hand)."""
    row = analyse(table([0.10, 0.30, 0.20, 0.25, 0.20])).iloc[0]
    assert row["zero_error_pct"] == pytest.approx(0.10)
    assert row["span_error_pct"] == pytest.approx(0.10)
    assert row["nonlin_terminal_pct"] == pytest.approx(0.175)
    assert np.isnan(row["hysteresis_pct"]) and np.isnan(row["nonrepeatability_pct"])


def test_three_point_minimax_line_by_hand():
    """For three points the minimax line is parallel to the chord of the outer two and levels the
    deviations: half the middle point's distance from the chord (Chebyshev alternation, by hand:
    chord 0 → 0.2, middle 0.3 − 0.1 = 0.2 → 0.1)."""
    a, b, d = minimax_lines(np.array([[0.0, 50.0, 100.0]]), np.array([[0.0, 0.3, 0.2]]))
    assert d[0] == pytest.approx(0.1)
    assert b[0] == pytest.approx(0.002) and a[0] == pytest.approx(0.1)


def chebyshev(x, y):
    """Reference minimax line by linear programme (scipy.optimize.linprog)."""
    n = len(x)
    a_ub = np.vstack([np.column_stack([-np.ones(n), -x, -np.ones(n)]), np.column_stack([np.ones(n), x, -np.ones(n)])])
    res = linprog([0, 0, 1], A_ub=a_ub, b_ub=np.concatenate([-y, y]), bounds=[(None, None)] * 2 + [(0, None)])
    return res.x[2]


def test_minimax_against_linprog_and_polyfit():
    """Random sets (seeded), some with repeated inputs (up and down runs): the levelled-reference
    computation equals scipy's linear programme, and never exceeds numpy.polyfit's least-squares
    line's largest deviation."""
    rng = np.random.default_rng(7)
    for n in (3, 5, 6, 11):
        x = np.sort(rng.choice([0, 10, 25, 40, 50, 60, 75, 90, 100], size=n, replace=n > 9)).astype(float)
        y = rng.normal(0, 0.1, size=(20, n))
        xs = np.tile(x, (20, 1))
        a, b, d = minimax_lines(xs, y)
        for i in range(20):
            assert d[i] == pytest.approx(chebyshev(x, y[i]), abs=1e-9)
            assert np.max(np.abs(y[i] - (a[i] + b[i] * x))) == pytest.approx(d[i], abs=1e-9)
            slope, icpt = np.polyfit(x, y[i], 1)
            assert d[i] <= np.max(np.abs(y[i] - (icpt + slope * x))) + 1e-12


def test_hysteresis_and_cycles():
    """Up 0.10/0.20/0.10, down 0.16/0.24/0.10 → hysteresis max |up − down| = 0.06 %; a repeated
    up point at 50 % (0.20 then 0.26) → non-repeatability 0.06 % (ISA-51.1 definitions, by hand)."""
    frame = table([0.10, 0.20, 0.10, 0.10, 0.24, 0.16, 0.26], inputs=(0, 50, 100, 100, 50, 0, 50),
                  directions=["up", "up", "up", "down", "down", "down", "up"])
    row = analyse(frame).iloc[0]
    assert row["hysteresis_pct"] == pytest.approx(max(abs(0.10 - 0.16), abs(0.23 - 0.24), 0.0))
    assert row["nonrepeatability_pct"] == pytest.approx(0.06)


def test_trim_removes_the_offset_and_slope():
    """A straight-line error e = 0.05 + 0.001·x leaves nothing after the suggested trim: zero trim
    −0.05 %, span trim −0.1 %."""
    x = np.array([0, 25, 50, 75, 100], dtype=float)
    row = analyse(table(0.05 + 0.001 * x)).iloc[0]
    assert row["trim_zero"] == pytest.approx(-0.05)
    assert row["trim_span"] == pytest.approx(-0.1)
    assert row["worst_after_trim_pct"] == pytest.approx(0.0, abs=1e-12)


def test_cli_run_exports_the_analysis(tmp_path):
    """Repeat readings 12.000/12.008 mA at 50 % on a 16 mA span: non-repeatability 0.05 % of span."""
    doc = yaml.safe_load(result_yaml(as_found=[("0 %", "4.000 mA"), ("100 %", "20.000 mA")]))
    doc["as_found"].insert(1, {"input": "50 %", "readings": ["12.000 mA", "12.008 mA"]})
    ev = write_evidence(tmp_path / "ev", {"a.yaml": yaml.safe_dump(doc)})
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    tests = pd.read_csv(out / "data" / "tests.csv")
    assert tests["nonrepeatability_pct"].iloc[0] == pytest.approx(0.05)
    assert tests["nonlin_terminal_pct"].iloc[0] == pytest.approx(0.025)
    assert (out / "data" / "analysis.csv").is_file()
    page = next((out / "handbook" / "tests").glob("*.html")).read_text(encoding="utf-8")
    assert "Non-linearity, terminal-based" in page


def test_each_test_page_of_a_batch_shows_its_own_phases(tmp_path, run_folder):
    """Zero error = error at 0 % input / span × 100 (% of span, common practice): a constant offset of
    +0.016 mA on the 16 mA span is +0.100 %, one of −0.032 mA is −0.200 %, the as-left +0.008 mA +0.050 %."""
    ev = write_evidence(tmp_path / "ev", {
        "a.yaml": result_yaml(date="2025-04-14", as_found=good_points(0.016), as_left=good_points(0.008)),
        "b.yaml": result_yaml(date="2026-04-14", as_found=good_points(-0.032))})
    pages = batch_and_alone(linearity.ll_test_sections, run_folder(ev), ["a", "b", "no-such-test"])
    assert set(pages) == {"a", "b"}
    (a,), (b,) = pages["a"], pages["b"]
    assert a.columns == ["Quantity", "as-found", "as-left"] and b.columns == ["Quantity", "as-found"]
    assert a.rows[0] == ["Zero error", "+0.100 %", "+0.050 %"]
    assert b.rows[0] == ["Zero error", "-0.200 %"]
