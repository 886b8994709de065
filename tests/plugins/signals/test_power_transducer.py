"""Signal type power-transducer (plugins/power_transducer.py), including bidirectional ranges."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

#: import/export feeder transducer −500..+500 kW onto 4-20 mA; a 0-20 mA one behind 400/5 A and 11000/110 V
ASSETS = [asset("T-PT-BI", "power-transducer", (-500, 500, "kW"), (4, 20, "mA")),
          asset("T-PT-PRI", "power-transducer", (0, 1000, "W"), (0, 20, "mA"), ct_ratio="400/5",
                vt_ratio="11000/110")]


def _evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        "bi.yaml": result_doc("T-PT-BI", [{"input": "-500 kW", "reading": "4.004 mA"},
                                          {"input": "-250 kW", "reading": "8.003 mA"},
                                          {"input": "0 kW", "reading": "12.002 mA"},
                                          {"input": "0.25 MW", "reading": "16.001 mA"},
                                          {"input": "100 %", "reading": "19.996 mA"}]),
        "pri.yaml": result_doc("T-PT-PRI", [{"input": "0 MW", "reading": "0.004 mA"},
                                            {"input": "4 MW", "reading": "10.003 mA"}], injection="primary"),
    }, assets=ASSETS)


def test_bidirectional_zero_is_mid_scale(tmp_path, run_folder):
    # a range symmetric about zero maps 0 kW to the middle of 4-20 mA: 12 mA (common practice)
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    bi = ctx.points[ctx.points["asset"] == "T-PT-BI"].set_index("point")
    assert bi.at[3, "expected"] == pytest.approx(12.0)
    assert bi.at[3, "input_pct"] == pytest.approx(50.0)
    assert bi["expected"].tolist() == pytest.approx([4.0, 8.0, 12.0, 16.0, 20.0])
    assert bi.at[1, "injected"] == pytest.approx(-500.0)  # export power stays negative


def test_primary_power_divides_by_both_ratios(tmp_path, run_folder):
    # primary power = secondary power × CT ratio × VT ratio (P = V·I·cos φ; common practice):
    # 4 MW / (80 × 100) = 500 W secondary = 50 % of 0-1000 W → 10 mA on 0-20 mA
    ctx = run_folder(_evidence(tmp_path))
    pri = ctx.points[ctx.points["asset"] == "T-PT-PRI"].set_index("point")
    assert pri.at[2, "expected"] == pytest.approx(10.0)


def test_sensitivity_matches_finite_difference(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    fd = finite_difference(ctx, "power-transducer")
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), rel=1e-6)
    bi = fd[ctx.points.loc[fd.index, "asset"] == "T-PT-BI"]
    assert bi["sensitivity"].tolist() == pytest.approx([16 / 1000] * 5)  # mA per kW


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert len(points) == 7 and (points["decision"] == "pass").all()


def test_a_reactive_power_transducer_ranged_in_kvar(tmp_path, run_folder):
    """−500..+500 kvar onto 4-20 mA: the same linear map as in kW (common practice); the var is the unit of
    reactive power (IEC 60050-131, from memory), 1 Mvar = 1000 kvar."""
    ev = write_evidence(tmp_path / "ev", {"q.yaml": result_doc("T-QT", [
        {"input": "-500 kvar", "reading": "4.004 mA"}, {"input": "-0.25 Mvar", "reading": "8.003 mA"},
        {"input": "0 kvar", "reading": "12.002 mA"}, {"input": "250 kVAr", "reading": "16.001 mA"},
        {"input": "100 %", "reading": "19.996 mA"}])},
        assets=[asset("T-QT", "power-transducer", (-500, 500, "kvar"), (4, 20, "mA"))])
    ctx = run_folder(ev)
    assert [f for f in ctx.findings if f.severity == "error"] == []
    q = ctx.points.set_index("point")
    assert q["expected"].tolist() == pytest.approx([4.0, 8.0, 12.0, 16.0, 20.0])
    assert q.at[2, "injected"] == pytest.approx(-250.0) and q.at[2, "injected_unit"] == "kvar"


def test_an_input_of_another_kind_of_power_is_taken_as_written_with_a_warning(tmp_path, run_folder):
    """Active (W), reactive (var) and apparent (VA) power are distinct quantities sharing one SI unit
    (IEC 80000-6 names each; from memory): 50 kvar written on a kW transducer converts 1:1, as pint does,
    and is flagged; the same numbers in kW are not."""
    ev = write_evidence(tmp_path / "ev", {"p.yaml": result_doc("T-PT-BI", [
        {"input": "-500 kW", "reading": "4.004 mA"}, {"input": "-250 kvar", "reading": "8.003 mA"},
        {"input": "0 kW", "reading": "12.002 mA"}, {"input": "250 kVA", "reading": "16.001 mA"},
        {"input": "100 %", "reading": "19.996 mA"}])}, assets=ASSETS[:1])
    ctx = run_folder(ev)
    assert ctx.points.set_index("point")["expected"].tolist() == pytest.approx([4.0, 8.0, 12.0, 16.0, 20.0])
    kinds = [f for f in ctx.findings if "power but the asset" in f.message]
    assert sorted(f.point for f in kinds) == ["as_found #2", "as_found #4"]
    assert "'-250 kvar' is reactive power but the asset is ranged in kW, active power" in kinds[0].message
    assert all(f.severity == "warning" and f.field == "input" for f in kinds)
    assert ctx.tests["verdict"].tolist() == ["pass"]


@pytest.mark.parametrize(("unit", "kind"), [("W", "active"), ("MW", "active"), ("kilowatt", "active"),
                                             ("kvar", "reactive"), ("Mvar", "reactive"), ("kVAr", "reactive"),
                                             ("VA", "apparent"), ("kVA", "apparent"), ("bar", None), ("%", None)])
def test_power_kind_of_a_unit_name(unit, kind):
    from loopledger.plugins.signals.power_transducer import power_kind

    assert power_kind(unit) == kind
