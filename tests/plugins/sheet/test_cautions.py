"""Cautions chosen by signal type, registry row and connection (issue 23, item 2). The cautions themselves are
common practice (/work/shared/domain.md, safety section): a CT secondary is never opened under load, a VT
secondary never shorted, process lines are isolated and vented, intrinsically safe loops take certified
equipment under a permit, and the control room is told and trips inhibited before a live loop is driven."""

from __future__ import annotations

import pytest
from loopledger.plugins.handbook import cautions

from tests.evidence import CT_ASSET, write_evidence

PT = {**CT_ASSET, "asset": "T-PT", "signal": "process-transmitter", "input_min": 0, "input_max": 10,
      "input_unit": "bar", "ct_ratio": None, "display_min": None, "display_max": None, "display_unit": None}
RTD = {**PT, "asset": "T-TT", "signal": "rtd-transmitter", "input_max": 150, "input_unit": "degC"}
POWER = {**CT_ASSET, "signal": "power-transducer", "vt_ratio": "11000/110"}


@pytest.mark.parametrize("reg, connection, present, absent", [
    (CT_ASSET, "standalone", [cautions.CT], [cautions.PROCESS, cautions.IN_LOOP, cautions.VT]),
    (POWER, "standalone", [cautions.CT, cautions.VT], [cautions.PROCESS]),
    (PT, "in-loop", [cautions.PROCESS, cautions.IN_LOOP], [cautions.CT, cautions.VT]),
    (RTD, "standalone", [], [cautions.CT, cautions.PROCESS, cautions.IN_LOOP]),
])
def test_cautions_follow_the_signal_and_the_connection(reg, connection, present, absent):
    chosen = cautions.for_asset(reg, connection)
    assert all(c in chosen for c in present) and not any(c in chosen for c in absent)
    assert chosen[-1] == cautions.DEFER and "Local codes" in chosen[-1]  # every list defers, last
    assert all(c in chosen for c in cautions.GENERAL)


@pytest.mark.parametrize("mark, shown", [("zone 1", True), ("yes", True), ("no", False), (None, False), ("", False)])
def test_the_hazardous_area_caution_when_assets_csv_marks_the_loop(mark, shown):
    chosen = cautions.for_asset({**PT, "hazardous_area": mark}, "standalone")
    assert any("intrinsically safe" in c for c in chosen) == shown
    if mark == "zone 1":
        assert "zone 1" in chosen[0]  # the hazard first, in the site's own words


def test_the_sheet_and_its_page_show_the_cautions_first(tmp_path, run_folder):
    from loopledger.plugins.sheet import plan, sheet_text

    ev = write_evidence(tmp_path / "ev", {}, assets=[{**PT, "hazardous_area": "zone 2"}])
    ctx = run_folder(ev)
    sheet = plan.sheet_data(ctx, "T-PT", {"method": "direct", "meter": "DMM-1", "connection": "in-loop"})
    text = sheet_text(sheet)
    assert text.index("zone 2") < text.index("inject") and "impulse lines" in text and "control room" in text
    assert "current transformer" not in text
