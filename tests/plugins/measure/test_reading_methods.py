"""Reading methods: direct milliamps, volts across a shunt, and the control-system display."""

from __future__ import annotations

import pytest

from tests.evidence import result_yaml, write_evidence


def _measured(tmp_path, run_folder, method, readings, inputs=None):
    inputs = inputs or ["0 %", "25 %", "50 %", "75 %", "100 %"][: len(readings)]
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(method=method, as_found=list(zip(inputs, readings,
                                                                                             strict=True)))})
    ctx = run_folder(ev)
    return ctx, list(ctx.points.sort_values("point")["measured"])


def test_shunt_of_100_ohm_reads_0_4_V_at_4_mA_and_2_V_at_20_mA(tmp_path, run_folder):
    # Ohm's law, I = V / R, with a 100 ohm shunt: 0.400 V <-> 4 mA, 2.000 V <-> 20 mA.
    ctx, got = _measured(tmp_path, run_folder, "shunt", ["0.400 V", "2.000 V"], ["0 %", "100 %"])
    assert got == pytest.approx([4.0, 20.0], abs=1e-12)
    assert set(ctx.tests["verdict"]) == {"pass"}


def test_shunt_reading_in_millivolts_converts(tmp_path, run_folder):
    # Same Ohm's-law check with the reading written in mV: 1200 mV / 100 ohm = 12 mA.
    _, got = _measured(tmp_path, run_folder, "shunt", ["1200 mV"], ["50 %"])
    assert got == pytest.approx([12.0])


def test_direct_reading_in_amps_converts_to_milliamps(tmp_path, run_folder):
    # 0.008 A is 8 mA (SI prefixes).
    _, got = _measured(tmp_path, run_folder, "direct", ["0.008 A"], ["25 %"])
    assert got == pytest.approx([8.0])


def test_display_in_primary_amps_maps_back_to_output(tmp_path, run_folder):
    # The control system shows 0-2000 A for 4-20 mA: 1000 A displayed is 12 mA (linear scaling,
    # common practice); 50 % of display range likewise.
    _, got = _measured(tmp_path, run_folder, "display", ["1000 A", "50 %"], ["50 %", "50 %"])
    assert got == pytest.approx([12.0, 12.0])


def test_volts_read_on_the_direct_method_are_refused_with_file_line_and_field(tmp_path, run_folder):
    ctx, _ = _measured(tmp_path, run_folder, "direct", ["12 mA", "0.4 V"], ["50 %", "0 %"])
    errs = [f for f in ctx.findings if f.severity == "error"]
    assert len(errs) == 1
    f = errs[0]
    assert (f.file, f.field, f.point) == ("results/t.yaml", "reading", "as_found #2")
    assert f.line > 0 and "not in units of the output" in f.message
    assert list(ctx.tests["verdict"]) == ["invalid"]


def test_amps_read_on_the_shunt_method_are_refused(tmp_path, run_folder):
    ctx, _ = _measured(tmp_path, run_folder, "shunt", ["12 mA"], ["50 %"])
    errs = [f for f in ctx.findings if f.severity == "error"]
    assert errs and errs[0].field == "reading" and "voltage" in errs[0].message
