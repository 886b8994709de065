"""The current-transducer signal type: expected output from % of range, input amps or primary amps."""

from __future__ import annotations

import pytest

from tests.evidence import PRIMARY_RIG, WITH_PRIMARY, result_yaml, write_evidence


def _expected(tmp_path, run_folder, inputs, injection="secondary"):
    points = [(i, "12 mA") for i in inputs]
    rig = PRIMARY_RIG if injection == "primary" else {}  # a primary injection set for primary amps
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=points, injection=injection, **rig)},
                        instruments=WITH_PRIMARY)
    ctx = run_folder(ev)
    assert not [f for f in ctx.findings if f.severity == "error"], ctx.findings
    return list(ctx.points.sort_values("point")["expected"].round(9))


def test_live_zero_mapping_of_percent_to_milliamps(tmp_path, run_folder):
    # 4-20 mA live zero: 0/25/50/75/100 % <-> 4/8/12/16/20 mA, and 0 mA <-> -25 % (common practice).
    got = _expected(tmp_path, run_folder, ["0 %", "25 %", "50 %", "75 %", "100 %", "-25 %"])
    assert got == [4.0, 8.0, 12.0, 16.0, 20.0, 0.0]


def test_input_in_amps_on_a_0_to_1_A_transducer(tmp_path, run_folder):
    # Linear scaling 0-1 A -> 4-20 mA (common practice): 0.25 A -> 8 mA, 500 mA -> 12 mA.
    assert _expected(tmp_path, run_folder, ["0.25 A", "500 mA", "1 A"]) == [8.0, 12.0, 20.0]


def test_primary_injection_through_a_2000_to_1_ct(tmp_path, run_folder):
    # A 2000/1 A CT feeding a 0-1 A transducer input: 1000 A primary is 0.5 A secondary -> 12 mA
    # (common practice).
    assert _expected(tmp_path, run_folder, ["1000 A", "2000 A", "0 A"], injection="primary") == [12.0, 20.0, 4.0]


def test_primary_injection_without_ct_ratio_is_refused(tmp_path, run_folder):
    from tests.evidence import CT_ASSET

    asset = {**CT_ASSET, "ct_ratio": None}
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=[("1000 A", "12 mA")], injection="primary")},
                        assets=[asset])
    ctx = run_folder(ev)
    errs = [f for f in ctx.findings if f.severity == "error"]
    assert errs and errs[0].file == "results/t.yaml" and errs[0].field == "injection"
    assert "ct_ratio" in errs[0].message
    assert list(ctx.tests["verdict"]) == ["invalid"]


def test_sensitivity_is_output_span_over_input_span(tmp_path, run_folder):
    # d(output)/d(input) of a linear 0-1 A -> 4-20 mA transducer is 16 mA/A; through a 2000/1 CT it is
    # 16/2000 mA per primary amp (chain rule on the linear scaling).
    for injection, slope in (("secondary", 16.0), ("primary", 16.0 / 2000)):
        rig = PRIMARY_RIG if injection == "primary" else {}
        ev = write_evidence(tmp_path / injection, {"t.yaml": result_yaml(as_found=[("50 %", "12 mA")],
                                                                         injection=injection, **rig)},
                            instruments=WITH_PRIMARY)
        ctx = run_folder(ev)
        assert ctx.points["sensitivity"].iloc[0] == pytest.approx(slope)
        assert ctx.points["injected"].iloc[0] == pytest.approx(0.5 if injection == "secondary" else 1000.0)
