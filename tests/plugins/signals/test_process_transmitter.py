"""Signal type process-transmitter (plugins/process_transmitter.py): linear, square root, low-flow cut-off."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

ASSETS = [asset("T-FT-DP", "process-transmitter", (0, 25, "kPa"), (4, 20, "mA"), characteristic="sqrt",
                low_flow_cutoff_pct=5),
          asset("T-PT-LIN", "process-transmitter", (0, 10, "bar"), (4, 20, "mA")),
          asset("T-LT-LVL", "process-transmitter", (0, 4, "m"), (4, 20, "mA"))]

FLOW_POINTS = [{"input": "0 kPa", "reading": "4.001 mA"},
               {"input": "0.25 kPa", "reading": "5.602 mA"},
               {"input": "6.25 kPa", "reading": "12.004 mA"},
               {"input": "14.0625 kPa", "reading": "16.003 mA"},
               {"input": "25 kPa", "reading": "19.995 mA"},
               {"input": "0.1 kPa", "reading": "5.013 mA"}]


def _evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        "ft.yaml": result_doc("T-FT-DP", FLOW_POINTS),
        "pt.yaml": result_doc("T-PT-LIN", [{"input": "0 bar", "reading": "4.002 mA"},
                                           {"input": "250 kPa", "reading": "8.001 mA"},
                                           {"input": "10 bar", "reading": "19.990 mA"}]),
        "lt.yaml": result_doc("T-LT-LVL", [{"input": "0 m", "reading": "4.010 mA"},
                                           {"input": "2000 mm", "reading": "12.003 mA"}]),
    }, assets=ASSETS)


def test_square_root_quarter_dp_is_half_flow_is_12_ma(tmp_path, run_folder):
    # flow equation Q ∝ √ΔP (common practice): 25 % of ΔP → 50 % of flow → 12 mA on 4-20 mA;
    # 56.25 % ΔP → 75 % flow → 16 mA; 1 % ΔP → 10 % flow → 5.6 mA
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    ft = ctx.points[ctx.points["asset"] == "T-FT-DP"].set_index("point")
    assert ft.at[3, "input_pct"] == pytest.approx(25.0)
    assert ft.at[3, "expected"] == pytest.approx(12.0)
    assert ft.at[4, "expected"] == pytest.approx(16.0)
    assert ft.at[2, "expected"] == pytest.approx(5.6)


def test_low_flow_cut_off_holds_zero_flow(tmp_path, run_folder):
    # 0.1 kPa is 0.4 % of ΔP, √0.004 = 6.3 % of flow: above a 5 % cut-off, so it follows the root;
    # 0 kPa is 0 % of flow, below the cut-off: held at zero flow, 4 mA, insensitive to the input
    ctx = run_folder(_evidence(tmp_path))
    ft = ctx.points[ctx.points["asset"] == "T-FT-DP"].set_index("point")
    assert ft.at[6, "expected"] == pytest.approx(4 + 16 * np.sqrt(0.004))
    assert ft.at[1, "expected"] == pytest.approx(4.0)
    assert ft.at[1, "sensitivity"] == 0.0


def test_cut_off_applies_below_its_flow(tmp_path, run_folder):
    # with an 8 % cut-off, 0.4 % ΔP (6.3 % flow) is held at zero flow while 1 % ΔP (10 % flow) is not cut
    rows = [dict(ASSETS[0], low_flow_cutoff_pct=8)]
    ev = write_evidence(tmp_path / "ev", {"ft.yaml": result_doc("T-FT-DP", FLOW_POINTS)}, assets=rows)
    ft = run_folder(ev).points.set_index("point")
    assert ft.at[6, "expected"] == pytest.approx(4.0)
    assert ft.at[2, "expected"] == pytest.approx(5.6)


def test_linear_pressure_and_level(tmp_path, run_folder):
    # unit conversion by pint: 250 kPa = 2.5 bar = 25 % of 0-10 bar; 2000 mm = 50 % of 0-4 m
    ctx = run_folder(_evidence(tmp_path))
    by = ctx.points.set_index(["asset", "point"])["expected"]
    assert by[("T-PT-LIN", 2)] == pytest.approx(8.0)
    assert by[("T-LT-LVL", 2)] == pytest.approx(12.0)


def test_sensitivity_matches_finite_difference(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    fd = finite_difference(ctx, "process-transmitter")
    # the root's slope is unbounded at 0 % ΔP, but that point is below the cut-off: both are 0 there
    assert fd.notna().all().all() and len(fd) == 11
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), rel=1e-5)


def test_cut_off_out_of_range_is_reported(tmp_path, run_folder):
    rows = [dict(ASSETS[0], low_flow_cutoff_pct=150)]
    ev = write_evidence(tmp_path / "ev", {"ft.yaml": result_doc("T-FT-DP", FLOW_POINTS)}, assets=rows)
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert bad and bad[0].field == "assets.low_flow_cutoff_pct"
    assert list(ctx.tests["verdict"]) == ["invalid"]


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert len(points) == 11 and (points["decision"] == "pass").all()


def test_square_root_at_zero_without_cut_off_gets_a_note(tmp_path, run_folder):
    # d√x/dx = 1/(2√x) is unbounded at x = 0 (calculus): no finite sensitivity exists there
    rows = [dict(ASSETS[0], low_flow_cutoff_pct=None)]
    ev = write_evidence(tmp_path / "ev", {"ft.yaml": result_doc("T-FT-DP", FLOW_POINTS)}, assets=rows)
    ctx = run_folder(ev)
    notes = [f for f in ctx.findings if f.severity == "note" and "square root" in f.message]
    assert len(notes) == 1 and notes[0].point == "as_found #1"
    assert list(ctx.tests["verdict"]) == ["pass"]
    assert ctx.points.set_index("point").at[1, "expected"] == pytest.approx(4.0)


def test_a_point_exactly_at_the_cut_off_is_not_held(tmp_path, run_folder):
    """README: the output is held at zero flow *below* the cut-off. With a 10 % cut-off, 1 % ΔP is exactly
    10 % flow (Q ∝ √ΔP, common practice), so it follows the root: 4 + 16 × 0.1 = 5.6 mA. Before issue 22
    rounding (√0.01 → 9.999999999999996 %) held it at 4 mA."""
    rows = [dict(ASSETS[0], low_flow_cutoff_pct=10)]
    ev = write_evidence(tmp_path / "ev", {"ft.yaml": result_doc("T-FT-DP", FLOW_POINTS)}, assets=rows)
    ft = run_folder(ev).points.set_index("point")
    assert ft.at[2, "expected"] == pytest.approx(5.6)
    assert ft.at[2, "sensitivity"] > 0
