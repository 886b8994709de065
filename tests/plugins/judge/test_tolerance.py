"""Error, maximum permissible error and the simple acceptance rule; verdicts per test."""

from __future__ import annotations

import pytest

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence


def test_class_0_5_is_0_08_mA_on_a_16_mA_span(tmp_path, run_folder):
    # IEC 60688 accuracy class index: ±class % of the fiducial value, here the output span
    # (16 mA): 0.5 % × 16 mA = 0.08 mA. (The fiducial-value rule is from memory of IEC 60688.)
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points())})
    ctx = run_folder(ev)
    assert ctx.points["mpe"].tolist() == pytest.approx([0.08] * 5)


@pytest.mark.parametrize(("accuracy", "mpe_at_12mA"), [
    ("0.08 mA", 0.08),            # absolute, in output units
    ("80 uA", 0.08),              # absolute, converted by pint
    ("0.25 %span", 0.04),         # 0.25 % of 16 mA
    ("1 %rdg", 0.12),             # 1 % of the expected 12 mA
    ("0.1 %span + 0.02 mA", 0.036),
])
def test_accuracy_forms(tmp_path, run_folder, accuracy, mpe_at_12mA):
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=[("50 %", "12 mA")])},
                        assets=[{**CT_ASSET, "accuracy": accuracy}])
    ctx = run_folder(ev)
    assert ctx.points["mpe"].iloc[0] == pytest.approx(mpe_at_12mA)


def test_point_exactly_on_the_limit_passes_and_just_beyond_fails(tmp_path, run_folder):
    # ILAC-G8:2019 §4.2.1 simple acceptance: pass when |error| <= MPE (the limit itself passes).
    pts = [("0 %", "4.080 mA"), ("50 %", "11.920 mA"), ("100 %", "20.081 mA")]
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=pts)})
    ctx = run_folder(ev)
    assert ctx.points.sort_values("point")["decision"].tolist() == ["pass", "pass", "fail"]
    assert ctx.tests["verdict"].tolist() == ["fail"]


def test_failed_as_found_then_passing_as_left_is_adjusted(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points(0.2),
                                                                as_left=good_points(0.01))})
    ctx = run_folder(ev)
    row = ctx.tests.iloc[0]
    got = (row["as_found"], row["as_left"], row["verdict"], bool(row["adjusted"]))
    assert got == ("fail", "pass", "adjusted", True)


def test_failing_as_left_fails_the_test(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points(0.2),
                                                                as_left=good_points(0.15))})
    assert run_folder(ev).tests["verdict"].tolist() == ["fail"]


def test_error_in_percent_of_span(tmp_path, run_folder):
    # +0.04 mA on a 16 mA span is +0.25 % of span.
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=[("50 %", "12.04 mA")])})
    ctx = run_folder(ev)
    assert ctx.points["error_pct_span"].iloc[0] == pytest.approx(0.25)
