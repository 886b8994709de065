"""Signal type thermocouple-transmitter (plugins/thermocouple_transmitter.py), with cold-junction compensation."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

ASSETS = [asset("T-TC-K", "thermocouple-transmitter", (0, 1000, "degC"), (4, 20, "mA"), tc_type="K"),
          asset("T-TC-J", "thermocouple-transmitter", (0, 500, "degC"), (4, 20, "mA"), tc_type="J")]


def _evidence(tmp_path):
    # emfs are IEC 60584-1 table values (domain.md): K 100 °C 4.096, 1000 °C 41.276, 25 °C 1.000 mV;
    # J 100 °C 5.269, 500 °C 27.393, 25 °C 1.277 mV
    return write_evidence(tmp_path / "ev", {
        "k.yaml": result_doc("T-TC-K", [{"input": "3.096 mV", "reading": "5.601 mA"},
                                        {"input": "40.276 mV", "reading": "19.998 mA"},
                                        {"input": "500 °C", "reading": "12.002 mA"}], cjc_c=25.0),
        "j.yaml": result_doc("T-TC-J", [{"input": "5.269 mV", "reading": "7.201 mA"},
                                        {"input": "27.393 mV", "reading": "19.997 mA"}], cjc_c=0.0),
    }, assets=ASSETS)


def test_mv_inputs_with_cold_junction_at_25_c(tmp_path, run_folder):
    # IEC 60584-1 type K (domain.md): with the terminals at 25 °C the transmitter adds E(25 °C) = 1.000 mV,
    # so 3.096 mV reads as E = 4.096 mV = 100 °C → 5.6 mA on 0-1000 °C; 40.276 mV → 41.276 = 1000 °C → 20 mA
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    by = ctx.points.set_index(["asset", "point"])
    assert by.at[("T-TC-K", 1), "expected"] == pytest.approx(5.6, abs=16 * 0.03 / 1000)
    assert by.at[("T-TC-K", 2), "expected"] == pytest.approx(20.0, abs=16 * 0.03 / 1000)
    assert by.at[("T-TC-K", 3), "expected"] == pytest.approx(12.0)   # a temperature input needs no CJC
    assert by.at[("T-TC-K", 1), "injected_unit"] == "mV"


def test_type_j_with_reference_junction_at_0_c(tmp_path, run_folder):
    # IEC 60584-1 type J (domain.md): 5.269 mV = 100 °C → 7.2 mA on 0-500 °C; 27.393 mV = 500 °C → 20 mA
    ctx = run_folder(_evidence(tmp_path))
    by = ctx.points.set_index(["asset", "point"])
    assert by.at[("T-TC-J", 1), "expected"] == pytest.approx(7.2, abs=16 * 0.03 / 500)
    assert by.at[("T-TC-J", 2), "expected"] == pytest.approx(20.0, abs=16 * 0.03 / 500)


def test_sensitivity_matches_finite_difference(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    fd = finite_difference(ctx, "thermocouple-transmitter")
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), rel=1e-5)


def test_mv_input_without_cjc_is_an_error_naming_the_field(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"k.yaml": result_doc("T-TC-K", [{"input": "3.096 mV",
                                                                           "reading": "5.6 mA"}])},
                        assets=ASSETS[:1])
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].field == "cjc_c" and bad[0].file == "results/k.yaml"
    assert list(ctx.tests["verdict"]) == ["invalid"]


def test_missing_tc_type_is_an_error(tmp_path, run_folder):
    rows = [dict(ASSETS[0], tc_type=None)]
    ev = write_evidence(tmp_path / "ev", {"k.yaml": result_doc("T-TC-K", [{"input": "500 °C",
                                                                           "reading": "12 mA"}])}, assets=rows)
    bad = [f for f in run_folder(ev).findings if f.severity == "error"]
    assert bad and bad[0].field == "assets.tc_type" and "T-TC-K" in bad[0].message


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert len(points) == 5 and (points["decision"] == "pass").all()
    tests = pd.read_csv(out / "data" / "tests.csv")
    assert sorted(tests["cjc_c"].tolist()) == [0.0, 25.0]


def test_cjc_c_from_a_csv_result_file(tmp_path, run_folder):
    # IEC 60584-1 type J (domain.md): E(100 °C) 5.269 − E(25 °C) 1.277 = 3.992 mV with the terminals at 25 °C
    csv = ("asset,date,technician,connection,method,injection,cjc_c,source,meter,phase,input,reading\n"
           "T-TC-J,2026-04-14,T. Tester,standalone,direct,secondary,25.0,SRC-1,DMM-1,as_found,3.992 mV,7.201 mA\n")
    ev = write_evidence(tmp_path / "ev", {"j.csv": csv}, assets=ASSETS[1:])
    ctx = run_folder(ev)
    assert [f for f in ctx.findings if f.severity == "error"] == []
    assert ctx.points["expected"].iloc[0] == pytest.approx(7.2, abs=16 * 0.03 / 500)


# --- issue 22: the cold junction in the uncertainty budget ----------------------------------------

import copy  # noqa: E402

import thermocouple_its90 as its90  # noqa: E402

from tests.evidence import INSTRUMENTS  # noqa: E402

CJ_RIG = copy.deepcopy(INSTRUMENTS)
CJ_RIG["MV-1"] = {"kind": "source", "range": "100 mV", "accuracy": "0.02 %rdg + 0.005 %range"}
CJ_RIG["CJ-1"] = {"kind": "probe", "accuracy": "0.5 degC"}
K_100 = [asset("T-TC-K1", "thermocouple-transmitter", (0, 100, "degC"), (4, 20, "mA"), tc_type="K")]


def _seebeck(kind, t, h=1e-3):
    """dE/dt in mV/°C by a central difference of the NIST ITS-90 reference function (thermocouple-its90),
    checked against that library's own seebeck()."""
    tc = its90.get(kind)
    slope = (tc.emf(t + h) - tc.emf(t - h)) / (2 * h)
    assert slope == pytest.approx(tc.seebeck(t), rel=1e-6)
    return slope


def _cj_point(tmp_path, run_folder, **header):
    doc = result_doc("T-TC-K1", [{"input": "0.000 mV", "reading": "8.000 mA"},
                                 {"input": "1.000 mV", "reading": "12.000 mA"}],
                     instruments={"source": "MV-1", "meter": "DMM-1", **header.pop("instruments", {})},
                     cjc_c=25.0, **header)
    return run_folder(write_evidence(tmp_path / "ev", {"k.yaml": doc}, assets=K_100, instruments=CJ_RIG))


def test_cold_junction_term_carried_by_the_emf_slope(tmp_path, run_folder):
    """t = E⁻¹(E_in + E(t_cj)) (IEC 60584-1), so d output / d t_cj = (16 mA / 100 °C) × S(t_cj) / S(t),
    S = dE/dt from the NIST ITS-90 functions (thermocouple-its90). 0 mV at t_cj = 25 °C reads 25 °C, so
    the slope is 0.16 mA/°C: a ±0.5 °C rectangular probe moves the output ±0.08 mA (the issue's figure),
    the whole MPE of class 0.5."""
    ctx = _cj_point(tmp_path, run_folder, cjc_u="0.5 degC rectangular")
    terms = ctx.extras["budget"]
    cj = terms[terms["component"] == "cold junction"].sort_values("point")
    assert len(cj) == 2 and (cj["distribution"] == "rectangular").all()
    assert cj["half_width"].iloc[0] * abs(cj["sensitivity"].iloc[0]) == pytest.approx(0.08, rel=1e-3)
    t2 = its90.get("K").temperature(1.000 + its90.get("K").emf(25.0))
    want = 0.16 * _seebeck("K", 25.0) / _seebeck("K", t2)
    assert cj["sensitivity"].iloc[1] == pytest.approx(want, rel=1e-4)
    assert cj["contribution"].iloc[1] == pytest.approx(want * 0.5 / 3 ** 0.5, rel=1e-4)
    assert not [f for f in ctx.findings if f.code == "no-cjc-u"]


def test_cold_junction_standard_uncertainty_and_probe(tmp_path, run_folder):
    """cjc_u without a distribution is a standard uncertainty (divisor 1, GUM 3.3.5); a probe's accuracy
    is a rectangular half-width (divisor √3, GUM 4.3.7)."""
    ctx = _cj_point(tmp_path / "u", run_folder, cjc_u="0.2 degC")
    cj = ctx.extras["budget"].query("component == 'cold junction'")
    assert (cj["divisor"] == 1.0).all() and cj["half_width"].iloc[0] == pytest.approx(0.2)
    ctx = _cj_point(tmp_path / "p", run_folder, instruments={"cjc_probe": "CJ-1"})
    cj = ctx.extras["budget"].query("component == 'cold junction'")
    assert cj["divisor"].iloc[0] == pytest.approx(3 ** 0.5) and cj["half_width"].iloc[0] == pytest.approx(0.5)


def test_without_cjc_u_the_budget_warns(tmp_path, run_folder):
    ctx = _cj_point(tmp_path, run_folder)
    found = [f for f in ctx.findings if f.code == "no-cjc-u"]
    assert len(found) == 1 and "cold-junction term is missing" in found[0].message and found[0].field == "cjc_u"
    assert "cold junction" not in set(ctx.extras["budget"]["component"])
