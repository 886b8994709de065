"""Signal type voltage-transducer (plugins/voltage_transducer.py)."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

#: a 0-150 V transducer onto 4-20 mA, one onto 0-10 V, one onto 1-5 V behind an 11000/110 V VT
ASSETS = [asset("T-VT-MA", "voltage-transducer", (0, 150, "V"), (4, 20, "mA")),
          asset("T-VT-10V", "voltage-transducer", (0, 300, "V"), (0, 10, "V")),
          asset("T-VT-15V", "voltage-transducer", (0, 120, "V"), (1, 5, "V"), vt_ratio="11000/110")]


def _evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        "ma.yaml": result_doc("T-VT-MA", [{"input": "0 V", "reading": "4.003 mA"},
                                          {"input": "75 V", "reading": "12.010 mA"},
                                          {"input": "150 V", "reading": "19.990 mA"}]),
        "v10.yaml": result_doc("T-VT-10V", [{"input": "0 %", "reading": "0.002 V"},
                                            {"input": "150 V", "reading": "5.004 V"},
                                            {"input": "300 V", "reading": "9.995 V"}]),
        "v15.yaml": result_doc("T-VT-15V", [{"input": "0 V", "reading": "1.001 V"},
                                            {"input": "5500 V", "reading": "2.835 V"},
                                            {"input": "11000 V", "reading": "4.664 V"}], injection="primary"),
    }, assets=ASSETS)


def test_expected_outputs_follow_the_linear_range(tmp_path, run_folder):
    # the linear map of input range onto output range (common practice): mid-range is mid-output
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    by = ctx.points.set_index(["asset", "point"])["expected"]
    assert by[("T-VT-MA", 2)] == pytest.approx(12.0)
    assert by[("T-VT-10V", 2)] == pytest.approx(5.0)
    # primary injection: 5500 V through an 11000/110 V VT is 55 V secondary, 45.83 % of 0-120 V
    assert by[("T-VT-15V", 2)] == pytest.approx(1 + 4 * 55 / 120)
    assert by[("T-VT-15V", 3)] == pytest.approx(1 + 4 * 110 / 120)


def test_sensitivity_matches_finite_difference(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    fd = finite_difference(ctx, "voltage-transducer")
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), rel=1e-6)
    # d output / d primary volts for the VT asset: 4 V / 120 V / 100 (the VT ratio)
    vt = fd[ctx.points.loc[fd.index, "asset"] == "T-VT-15V"]
    assert vt["sensitivity"].tolist() == pytest.approx([4 / 120 / 100] * 3)


def test_primary_injection_without_vt_ratio_is_an_error(tmp_path, run_folder):
    rows = [dict(ASSETS[0], asset="T-VT-NORATIO")]
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_doc("T-VT-NORATIO", [{"input": "75 V", "reading":
                                                                                 "12 mA"}], injection="primary")},
                        assets=rows)
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert bad and bad[0].field == "injection" and "vt_ratio" in bad[0].message
    assert list(ctx.tests["verdict"]) == ["invalid"]


def test_bad_vt_ratio_names_the_asset_and_column(tmp_path, run_folder):
    rows = [dict(ASSETS[2], vt_ratio="eleven to one")]
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_doc("T-VT-15V", [{"input": "0 V", "reading":
                                                                             "1 V"}])}, assets=rows)
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].field == "assets.vt_ratio" and "T-VT-15V" in bad[0].message
    assert bad[0].file == "results/a.yaml"


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert set(points["asset"]) == {"T-VT-MA", "T-VT-10V", "T-VT-15V"}
    assert (points["decision"] == "pass").all()
