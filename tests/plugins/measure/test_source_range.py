"""A source used beyond its registered range (issue 20). The rule is common practice of calibration: a
certificate covers an instrument only over the ranges it was calibrated on. Invented plumbing data."""

from __future__ import annotations

import copy

from tests.evidence import CT_ASSET, INSTRUMENTS, result_yaml, write_evidence

FIVE_AMP = {**CT_ASSET, "input_max": 5}  # 0-5 A → 4-20 mA


def _points(amps):
    return [(f"{a:g} A", f"{4 + 16 * a / 5:.4f} mA") for a in amps]


def _run(tmp_path, run_folder, source, config="as_of = 2026-11-30\n"):
    inst = copy.deepcopy(INSTRUMENTS)
    inst["SRC-1"].update(source)
    for key in [k for k, v in source.items() if v is None]:
        del inst["SRC-1"][key]
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=_points([0, 1, 2.5]))},
                        assets=[FIVE_AMP], instruments=inst, config=config)
    return run_folder(ev)


def test_an_input_beyond_the_source_range_is_an_error_at_its_point(tmp_path, run_folder):
    ctx = _run(tmp_path, run_folder, {"range": "1 A"})
    said = [f for f in ctx.findings if f.code == "source-range"]
    # 0 A and 1 A are within a 1 A range; 2.5 A is not
    assert [(f.severity, f.point) for f in said] == [("error", "as_found #3")]
    assert "2.5 A is beyond source SRC-1's range of 1 A" in said[0].message
    assert ctx.tests.at[0, "verdict"] == "invalid"


def test_a_range_in_other_units_converts_before_the_comparison(tmp_path, run_folder):
    ctx = _run(tmp_path, run_folder, {"range": "3000 mA"})  # 2.5 A = 2500 mA is within 3000 mA
    assert [f for f in ctx.findings if f.code == "source-range"] == []
    assert ctx.tests.at[0, "verdict"] == "pass"


def test_an_input_of_another_kind_than_the_range_is_a_warning(tmp_path, run_folder):
    ctx = _run(tmp_path, run_folder, {"range": "600 V"})
    said = [f for f in ctx.findings if f.code == "source-range"]
    assert [f.severity for f in said] == ["warning"] and "injects A" in said[0].message


def test_a_source_with_no_range_is_a_warning_only_under_a_rule_that_needs_its_uncertainty(tmp_path, run_folder):
    simple = _run(tmp_path / "s", run_folder, {"range": None})
    assert [f for f in simple.findings if f.code == "source-range"] == []
    guarded = _run(tmp_path / "g", run_folder, {"range": None},
                   config='as_of = 2026-11-30\n[decision]\nrule = "guarded"\n')
    said = [f for f in guarded.findings if f.code == "source-range"]
    assert [(f.severity, f.file) for f in said] == [("warning", "results/a.yaml")]
