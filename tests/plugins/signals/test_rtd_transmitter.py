"""Signal type rtd-transmitter (plugins/rtd_transmitter.py): inputs in °C or decade-box ohms."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

ASSETS = [asset("T-TT-PT100", "rtd-transmitter", (0, 200, "degC"), (4, 20, "mA")),
          asset("T-TT-COLD", "rtd-transmitter", (-100, 100, "degC"), (4, 20, "mA")),
          asset("T-TT-PT1000", "rtd-transmitter", (0, 400, "degC"), (4, 20, "mA"), r0_ohm=1000)]


def _evidence(tmp_path):
    # resistances are IEC 60751 Pt100 table values (domain.md): 100 °C 138.5055, 200 °C 175.8560,
    # −100 °C 60.2558, 50 °C 119.3971 ohm; Pt1000 = 10 × Pt100
    return write_evidence(tmp_path / "ev", {
        "pt100.yaml": result_doc("T-TT-PT100", [{"input": "100.0000 ohm", "reading": "4.002 mA"},
                                                {"input": "138.5055 ohm", "reading": "12.003 mA"},
                                                {"input": "175.8560 Ω", "reading": "19.995 mA"},
                                                {"input": "50 °C", "reading": "8.001 mA"}]),
        "cold.yaml": result_doc("T-TT-COLD", [{"input": "60.2558 ohm", "reading": "4.003 mA"},
                                              {"input": "100 ohm", "reading": "12.001 mA"},
                                              {"input": "119.3971 ohm", "reading": "15.999 mA"}]),
        "pt1000.yaml": result_doc("T-TT-PT1000", [{"input": "1385.055 ohm", "reading": "8.004 mA"},
                                                  {"input": "2470.920 ohm", "reading": "20.001 mA"}]),
    }, assets=ASSETS)


def test_decade_box_ohms_become_iec_60751_temperatures(tmp_path, run_folder):
    # source: IEC 60751 Pt100 table values (domain.md) through a 0-200 °C → 4-20 mA linear range
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    by = ctx.points.set_index(["asset", "point"])
    assert by.at[("T-TT-PT100", 2), "expected"] == pytest.approx(12.0, abs=1e-5)   # 100 °C
    assert by.at[("T-TT-PT100", 3), "expected"] == pytest.approx(20.0, abs=1e-5)   # 200 °C
    assert by.at[("T-TT-PT100", 4), "expected"] == pytest.approx(8.0)              # 50 °C written as such
    assert by.at[("T-TT-COLD", 1), "expected"] == pytest.approx(4.0, abs=1e-5)     # −100 °C, below 0 °C
    assert by.at[("T-TT-COLD", 3), "expected"] == pytest.approx(16.0, abs=1e-5)    # 50 °C
    assert by.at[("T-TT-PT1000", 2), "expected"] == pytest.approx(20.0, abs=1e-5)  # 400 °C, R0 = 1000
    assert by.at[("T-TT-PT100", 2), "injected_unit"] == "ohm"
    assert by.at[("T-TT-PT100", 4), "injected_unit"] == "degC"


def test_sensitivity_matches_finite_difference(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    fd = finite_difference(ctx, "rtd-transmitter")
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), rel=1e-6)
    # at 100 °C on a Pt100, dR/dt = 100 (A + 2B·100) = 0.379 ohm/°C (IEC 60751 coefficients), so
    # d mA / d ohm = (16 mA / 200 °C) / 0.379
    at_100 = ctx.points.index[(ctx.points["asset"] == "T-TT-PT100") & (ctx.points["point"] == 2)][0]
    assert fd.at[at_100, "sensitivity"] == pytest.approx(0.08 / (100 * (3.9083e-3 - 2 * 5.775e-7 * 100)))


def test_resistance_outside_the_standard_is_an_error(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_doc("T-TT-PT100", [{"input": "12 ohm",
                                                                               "reading": "4 mA"}])},
                        assets=ASSETS[:1])
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].field == "input" and "IEC 60751" in bad[0].message
    assert bad[0].line > 0 and bad[0].point == "as_found #1"


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert len(points) == 9 and (points["decision"] == "pass").all()


def test_input_in_the_wrong_kind_of_unit_names_both_accepted_units(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_doc("T-TT-PT100", [{"input": "4.1 mV",
                                                                               "reading": "4 mA"}])},
                        assets=ASSETS[:1])
    bad = [f for f in run_folder(ev).findings if f.severity == "error"]
    assert len(bad) == 1 and "degC, ohm or %" in bad[0].message and bad[0].field == "input"
