"""NAMUR NE 43 bands and clipping detection (plugins/signal_integrity.py)."""

from __future__ import annotations

import numpy as np
import pytest
from loopledger.cli import main
from loopledger.plugins.analyse import signal_integrity
from loopledger.plugins.analyse.signal_integrity import classify

from tests.evidence import CT_ASSET, batch_and_alone, good_points, result_yaml, write_evidence


@pytest.mark.parametrize(("ma", "band"), [
    # NAMUR NE 43: measuring range 3.8-20.5 mA; failure signal ≤ 3.6 mA or ≥ 21.0 mA; undefined between
    (3.8, "measurement"), (20.5, "measurement"), (12.0, "measurement"),
    (3.6, "failure-low"), (21.0, "failure-high"), (0.0, "failure-low"), (3.5, "failure-low"), (22.0, "failure-high"),
    (3.7, "undefined-low"), (3.6001, "undefined-low"), (3.7999, "undefined-low"),
    (20.5001, "undefined-high"), (20.9999, "undefined-high"),
])
def test_ne43_band_edges(ma, band):
    assert classify(np.array([ma]))[0] == band


def test_an_edge_reached_through_a_shunt_conversion_stays_on_its_band():
    # 0.38 V across 100 Ω is 3.8 mA even though 0.38 / 100 is not exact in binary floating point
    assert classify(np.array([0.38 / 100 * 1000]))[0] == "measurement"
    assert classify(np.array([2.05 / 100 * 1000]))[0] == "measurement"


def test_zero_and_failure_currents_are_named_not_just_large_errors(tmp_path, run_folder):
    points = good_points()
    points[2] = ("50 %", "0.000 mA")  # the loop opened mid-test
    points[4] = ("100 %", "3.500 mA")  # the transmitter drove its low failure signal
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=points)})
    ctx = run_folder(ev)
    bands = list(ctx.points.sort_values("point")["ne43_band"])
    assert bands == ["measurement", "measurement", "failure-low", "measurement", "failure-low"]
    words = {f.point: f.message for f in ctx.findings if f.code == "ne43"}
    assert "broken loop" in words["as_found #3"]
    assert "failure signal" in words["as_found #5"]
    assert ctx.tests.iloc[0]["fault_signature"] == "broken loop"


def test_each_test_page_of_a_batch_names_its_own_readings(tmp_path, run_folder):
    """NE 43: 0 mA is no loop current, 3.5 mA a low failure signal; a 0-10 V output has no NE 43 page."""
    points = good_points()
    points[2] = ("50 %", "0.000 mA")
    points[4] = ("100 %", "3.500 mA")
    volts = {**CT_ASSET, "asset": "T-V1", "output_min": 0, "output_max": 10, "output_unit": "V"}
    ev = write_evidence(tmp_path / "ev", {
        "good.yaml": result_yaml(as_found=good_points(0.01)), "bad.yaml": result_yaml(as_found=points),
        "volts.yaml": result_yaml(asset="T-V1", as_found=[(f"{p} %", f"{p / 10:.3f} V") for p in (0, 50, 100)])},
        assets=[CT_ASSET, volts])
    pages = batch_and_alone(signal_integrity.ll_test_sections, run_folder(ev), ["bad", "good", "volts"])
    assert set(pages) == {"bad", "good"}
    (good,), (bad,) = pages["good"], pages["bad"]
    assert good.kind == "text" and good.text.startswith("All 5 readings lie in the NE 43 measuring range")
    assert [row[:4] for row in bad.rows] == [["as-found", 3, "0.000 mA", "failure-low"],
                                             ["as-found", 5, "3.500 mA", "failure-low"]]
    assert "broken loop" in bad.rows[0][4] and "failure signal" in bad.rows[1][4]


def test_voltage_outputs_have_no_ne43_band(tmp_path, run_folder):
    asset = {**CT_ASSET, "output_min": 0, "output_max": 10, "output_unit": "V"}
    points = [(f"{p} %", f"{p / 10:.3f} V") for p in (0, 50, 100)]
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=points)}, assets=[asset]))
    assert set(ctx.points["ne43_band"]) == {"n/a"}
    assert ctx.tests.iloc[0]["burden_status"] == "unknown"  # a voltage output has no loop burden


# A realistic loop that clips: a self-powered transducer rated for 600 Ω (within the typical 500-750 Ω,
# common practice) drives a high-impedance 500 Ω control-system input over 500 m of 0.5 mm² cable
# (IEC 60228: 36.0 Ω/km, so 2 × 0.5 km × 36.0 = 36 Ω at 20 °C), and the technician puts a 100 Ω
# shunt in series. The output has 600 Ω × 20 mA = 12 V to drive with, so it can push at most
# 12 V / 636 Ω = 18.87 mA: readings above that flatten (Ohm's law; the readings are built that way).
ASSET = {**CT_ASSET, "max_load_ohm": 600, "receiver_ohm": 500, "cable_mm2": 0.5, "cable_length_m": 500}
PCTS = (0, 25, 50, 75, 95, 100)


def _run(loop_ohm: float, method: str) -> str:
    top = 12.0 / loop_ohm * 1000  # mA
    rows = []
    for pct in PCTS:
        ma = min(4 + 16 * pct / 100, top)
        rows.append((f"{pct} %", f"{ma / 10:.5f} V" if method == "shunt" else f"{ma:.4f} mA"))
    return result_yaml(method=method, connection="in-loop", ambient_c=20.0, as_found=rows)


def test_a_clipped_in_loop_shunt_run_is_flagged_with_the_burden(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": _run(636.0, "shunt")}, assets=[ASSET])
    ctx = run_folder(ev)
    pts = ctx.points.sort_values("point")
    assert list(pts["clipped"]) == [False, False, False, False, True, True]
    t = ctx.tests.iloc[0]
    assert t["burden_status"] == "exceeds"
    assert t["loop_ohm"] == pytest.approx(636.0)
    assert t["fault_signature"] == "clipping"
    [found] = [f for f in ctx.findings if f.code == "clipping"]
    assert "top 2 point(s)" in found.message
    assert "loop 636.0 Ω" in found.message and "at most 18.87 mA" in found.message


def test_the_same_run_on_a_milliamp_range_does_not_clip(tmp_path, run_folder):
    # DMM-1's 20 mA range drops 1.8 mV/mA: 1.8 + 500 + 36 = 537.8 Ω, 12 V / 537.8 Ω = 22.3 mA > 20 mA
    ev = write_evidence(tmp_path / "ev", {"a.yaml": _run(537.8, "direct")}, assets=[ASSET])
    ctx = run_folder(ev)
    assert not ctx.points["clipped"].any()
    assert ctx.tests.iloc[0]["burden_status"] == "ok"
    assert ctx.tests.iloc[0]["verdict"] == "pass"
    assert not [f for f in ctx.findings if f.code in ("clipping", "burden")]


def test_cli_check_reports_clipping_and_ne43(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": _run(636.0, "shunt")}, assets=[ASSET])
    assert main(["check", "--strict", str(ev / "results" / "a.yaml")]) == 1  # a failure blocks with --strict
    out = capsys.readouterr().out
    assert "warning: as-found: the top 2 point(s)" in out and "clipping" in out
    assert "warning: burden: loop 636.0 Ω exceeds the drive limit of 600.0 Ω" in out
