"""Reading method counts (plugins/counts_reading.py): whole-loop readings in raw input-card counts."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main

from tests.evidence import write_evidence
from tests.signal_checks import asset, result_doc

#: a 4-20 mA transmitter into a 12-bit card scaled 0..4095 over 4-20 mA, and into a card reading
#: 0-20 mA as 0..4095 (so 4 mA is 819 counts)
ASSETS = [asset("T-LOOP-12", "process-transmitter", (0, 10, "bar"), (4, 20, "mA"), counts_min=0, counts_max=4095),
          asset("T-LOOP-020", "process-transmitter", (0, 10, "bar"), (4, 20, "mA"), counts_min=819,
                counts_max=4095)]


def _evidence(tmp_path, assets=ASSETS):
    return write_evidence(tmp_path / "ev", {
        "a.yaml": result_doc("T-LOOP-12", [{"input": "0 bar", "reading": "1 count"},
                                           {"input": "5 bar", "reading": "2048 counts"},
                                           {"input": "10 bar", "reading": "4093 counts"}], method="counts"),
        "b.yaml": result_doc("T-LOOP-020", [{"input": "5 bar", "reading": "2457 counts"}], method="counts"),
    }, assets=assets)


def test_counts_map_back_onto_the_output_range(tmp_path, run_folder):
    # linear scaling of an analogue input card (common practice): 12 mA is half of 0..4095
    ctx = run_folder(_evidence(tmp_path))
    assert [f for f in ctx.findings if f.severity == "error"] == []
    by = ctx.points.set_index(["asset", "point"])["measured"]
    assert by[("T-LOOP-12", 2)] == pytest.approx(4 + 16 * 2048 / 4095)
    assert by[("T-LOOP-12", 1)] == pytest.approx(4 + 16 * 1 / 4095)
    # a 0-20 mA card: counts = 4095 × I / 20 mA, so 12 mA is 2457 counts
    assert by[("T-LOOP-020", 1)] == pytest.approx(20 * 2457 / 4095)


def test_missing_count_range_names_the_asset(tmp_path, run_folder):
    rows = [dict(ASSETS[0], counts_max=None), ASSETS[1]]
    ctx = run_folder(_evidence(tmp_path, rows))
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].file == "results/a.yaml" and bad[0].field == "assets.counts_max"
    assert ctx.tests.set_index("source_file")["verdict"].to_dict() == {"results/a.yaml": "invalid",
                                                                       "results/b.yaml": "pass"}


def test_reading_in_the_wrong_unit_is_reported(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_doc("T-LOOP-12", [{"input": "5 bar", "reading":
                                                                              "12 mA"}], method="counts")},
                        assets=ASSETS)
    bad = [f for f in run_folder(ev).findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].field == "reading" and "counts" in bad[0].message


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    points = pd.read_csv(out / "data" / "points.csv")
    assert len(points) == 4 and (points["decision"] == "pass").all()
