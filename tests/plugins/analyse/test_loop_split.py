"""Loop split (plugins/loop_split.py): transmitter error vs whole-loop error at the control system."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger import keys
from loopledger.cli import main
from loopledger.plugins.analyse import loop_split

from tests.evidence import batch_and_alone, blocks, write_evidence
from tests.signal_checks import asset, result_doc

ASSETS = [asset("T-LOOP", "process-transmitter", (0, 10, "bar"), (4, 20, "mA"), counts_min=0, counts_max=16000,
                display_min=0, display_max=10, display_unit="bar")]
INPUTS = ["0 %", "50 %", "100 %"]


def _evidence(tmp_path, loop_date="2026-04-14"):
    # invented plumbing fixture: the transmitter reads +0.016 mA (0.1 % of span) high at its terminals;
    # the card reads 16 counts (= 0.016 mA, a further 0.1 %) higher still; the display test, 0.004 bar high
    device = [{"input": i, "reading": f"{4 + 16 * p + 0.016:.3f} mA"} for i, p in zip(INPUTS, (0, .5, 1), strict=True)]
    loop = [{"input": i, "reading": f"{16000 * p + 32:.0f} counts"} for i, p in zip(INPUTS, (0, .5, 1), strict=True)]
    shown = [{"input": i, "reading": f"{10 * p + 0.004:.3f} bar"} for i, p in zip(INPUTS, (0, .5, 1), strict=True)]
    return write_evidence(tmp_path / "ev", {
        "device.yaml": result_doc("T-LOOP", device),
        "loop.yaml": result_doc("T-LOOP", loop, method="counts", date=loop_date),
        "shown.yaml": result_doc("T-LOOP", shown, method="display", date=loop_date),
    }, assets=ASSETS)


def test_card_share_is_loop_minus_device(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    table = ctx.stash[keys.LOOP_SPLIT]
    counts = table[table["loop_test"] == "loop"]
    assert len(counts) == 3 and (counts["device_test"] == "device").all()
    assert counts["device_error_pct"].tolist() == pytest.approx([0.1] * 3)
    assert counts["loop_error_pct"].tolist() == pytest.approx([0.2] * 3)
    assert counts["card_error_pct"].tolist() == pytest.approx([0.1] * 3)
    shown = table[table["loop_test"] == "shown"]
    assert shown["card_error_pct"].tolist() == pytest.approx([-0.06] * 3)


def test_no_pairs_on_different_dates(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path, loop_date="2026-05-02"))
    assert ctx.stash[keys.LOOP_SPLIT].empty


def test_end_to_end_through_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out), "--no-handbook"]) == 0
    split = pd.read_csv(out / "data" / "loop_split.csv")
    assert len(split) == 6
    assert split["card_error_pct"].round(6).isin([0.1, -0.06]).all()


def test_both_test_pages_get_the_split(tmp_path, run_folder, pm):
    ctx = run_folder(_evidence(tmp_path))
    sections = blocks(pm.hook.ll_test_sections(ctx=ctx, tests=["device"]), "device")
    split = [s for s in sections if s.title.startswith("Loop split")]
    assert len(split) == 1 and split[0].kind == "table" and len(split[0].rows) == 6
    assert {row[-1] for row in split[0].rows} == {"+0.100", "-0.060"}


def test_each_test_page_of_a_batch_gets_only_its_own_pairs(tmp_path, run_folder):
    ctx = run_folder(_evidence(tmp_path))
    pages = batch_and_alone(loop_split.ll_test_sections, ctx, ["device", "loop", "shown"])
    assert [len(pages[t][0].rows) for t in ("device", "loop", "shown")] == [6, 3, 3]
    assert {row[3] for row in pages["loop"][0].rows} == {"loop"}
    assert [row[-1] for row in pages["loop"][0].rows] == ["+0.100"] * 3  # 0.2 % − 0.1 % of span
    assert [row[-1] for row in pages["shown"][0].rows] == ["-0.060"] * 3
