"""Fault signatures read from the shape of a test's errors (plugins/fault_signatures.py).

Each run is constructed with one fault; the MPE is class 0.5 on a 16 mA span, ±0.08 mA (the
fiducial rule of IEC 60688, from memory). The signatures themselves are common practice of the trade.
"""

from __future__ import annotations

import yaml
from loopledger.cli import main
from loopledger.plugins.analyse import fault_signatures

from tests.evidence import CT_ASSET, batch_and_alone, good_points, result_yaml, write_evidence

PCTS = (0, 25, 50, 75, 100)


def _ma(values):
    return [(f"{p} %", f"{v:.4f} mA") for p, v in zip(PCTS, values, strict=True)]


def _signature(tmp_path, run_folder, text, assets=None):
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": text}, assets=assets))
    return ctx, ctx.tests.iloc[0]["fault_signature"]


def test_constant_offset_is_zero(tmp_path, run_folder):
    ctx, sig = _signature(tmp_path, run_folder, result_yaml(as_found=good_points(0.2)))
    assert sig == "zero offset"
    [f] = [f for f in ctx.findings if f.code == "fault-signature"]
    assert f.severity == "warning" and "+0.2 mA" in f.message and "adjust zero" in f.message


def test_error_growing_with_input_is_span(tmp_path, run_folder):
    # 2 % of reading above the live zero: 0 at 4 mA, +0.32 mA at 20 mA
    values = [4 + 16 * p / 100 * 1.02 for p in PCTS]
    _, sig = _signature(tmp_path, run_folder, result_yaml(as_found=_ma(values)))
    assert sig == "span"


def test_fixed_ratio_is_scaled_for_another_ct_ratio(tmp_path, run_folder):
    # the control system is set up for a 1600/1 A current transformer where 2000/1 is fitted:
    # it shows 1600 A at full output, so every displayed primary current is 0.8 × true (arithmetic)
    points = [(f"{p} %", f"{0.8 * 2000 * p / 100:.1f} A") for p in PCTS]
    ctx, sig = _signature(tmp_path, run_folder, result_yaml(method="display", connection="in-loop",
                                                            as_found=points))
    assert sig == "scaled"
    [f] = [f for f in ctx.findings if f.code == "fault-signature"]
    assert "0.800 × expected" in f.message and "current-transformer ratio" in f.message


def test_one_point_off_the_line_is_non_linear_not_span(tmp_path, run_folder):
    # a single +0.3 mA reading at 75 % fits no straight line of the errors
    _, sig = _signature(tmp_path, run_folder, result_yaml(as_found=_ma([4, 8, 12, 16.3, 20])))
    assert sig == "non-linear"


def test_readings_falling_as_input_rises_are_reversed(tmp_path, run_folder):
    _, sig = _signature(tmp_path, run_folder, result_yaml(as_found=_ma([20, 16, 12, 8, 4])))
    assert sig == "reversed"


def test_negative_readings_are_reversed_leads_not_a_broken_loop(tmp_path, run_folder):
    ctx, sig = _signature(tmp_path, run_folder, result_yaml(as_found=_ma([-4, -8, -12, -16, -20])))
    assert sig == "reversed"
    assert all("wrong way" in f.message for f in ctx.findings if f.code == "ne43")


def test_large_spread_between_repeats_is_unsteady(tmp_path, run_folder):
    doc = yaml.safe_load(result_yaml(as_found=good_points()))
    for p in doc["as_found"]:
        mid = float(p.pop("reading").split()[0])
        p["readings"] = [f"{mid - 0.1:.4f} mA", f"{mid:.4f} mA", f"{mid + 0.1:.4f} mA"]  # mean exact, sd 0.1 mA
    ctx, sig = _signature(tmp_path, run_folder, yaml.safe_dump(doc, sort_keys=False))
    assert ctx.tests.iloc[0]["verdict"] == "pass"
    assert sig == "unsteady"


def test_a_wide_min_max_on_an_unsteady_display_is_unsteady(tmp_path, run_folder):
    doc = yaml.safe_load(result_yaml(as_found=good_points()))
    for p in doc["as_found"]:
        mid = float(p.pop("reading").split()[0])
        p["reading_min"], p["reading_max"] = f"{mid - 0.06:.4f} mA", f"{mid + 0.06:.4f} mA"  # 0.12 mA > MPE
    ctx, sig = _signature(tmp_path, run_folder, yaml.safe_dump(doc, sort_keys=False))
    assert sig == "unsteady"
    [f] = [f for f in ctx.findings if f.code == "fault-signature"]
    assert "spread by up to 0.12 mA" in f.message


def test_top_only_shortfall_is_clipping(tmp_path, run_folder):
    _, sig = _signature(tmp_path, run_folder, result_yaml(as_found=_ma([4, 8, 12, 15.5, 15.6])))
    assert sig == "clipping"


def test_a_good_run_has_no_signature(tmp_path, run_folder):
    _, sig = _signature(tmp_path, run_folder, result_yaml(as_found=good_points(0.01)))
    assert sig == ""


def test_as_left_signature_follows_as_found(tmp_path, run_folder):
    text = result_yaml(as_found=good_points(0.2), as_left=_ma([4 + 16 * p / 100 * 1.02 for p in PCTS]))
    _, sig = _signature(tmp_path, run_folder, text, assets=[CT_ASSET])
    assert sig == "zero offset; as-left: span"


def test_each_test_page_of_a_batch_shows_its_own_signature(tmp_path, run_folder):
    """+0.2 mA everywhere is beyond the ±0.08 mA MPE: a zero offset; +0.01 mA passes and shows no pattern."""
    ev = write_evidence(tmp_path / "ev", {
        "offset.yaml": result_yaml(date="2025-04-14", as_found=good_points(0.2), as_left=good_points(0.01)),
        "fine.yaml": result_yaml(date="2026-04-14", as_found=good_points(0.01))})
    pages = batch_and_alone(fault_signatures.ll_test_sections, run_folder(ev), ["fine", "offset"])
    (offset,), (fine,) = pages["offset"], pages["fine"]
    assert offset.kind == "facts" and [phase for phase, _ in offset.rows] == ["as-found"]
    assert offset.rows[0][1].startswith("zero offset: a constant offset of about +0.2 mA")
    assert fine.kind == "text" and fine.text.startswith("No fault pattern found")


def test_cli_run_shows_signature_and_burden_on_the_test_page(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.2))})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 1
    [page] = (tmp_path / "out" / "handbook" / "tests").glob("*.html")
    html = page.read_text(encoding="utf-8")
    assert "Fault signature" in html and "zero offset" in html
    assert "Loop burden" in html and "Drive limit" in html
    assert "Signal integrity (NAMUR NE 43)" in html
