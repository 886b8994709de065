"""`loopledger plugins` (plugins/plugin_list.py) and the message for an unknown signal type."""

from __future__ import annotations

from loopledger.cli import main
from loopledger.plugins.tools import plugin_list

from tests.evidence import write_evidence
from tests.signal_checks import asset, result_doc

BUILT_IN_SIGNALS = {"current-transducer", "voltage-transducer", "power-transducer", "process-transmitter",
                    "rtd-transmitter", "thermocouple-transmitter"}


def test_describe_lists_each_plugin_with_its_hooks_and_signals(pm):
    entries = {e["name"]: e for e in plugin_list.describe(pm)}
    assert entries["rtd_transmitter"]["hooks"] == ["ll_signal_types"]
    assert [s.name for s in entries["rtd_transmitter"]["signal types"]] == ["rtd-transmitter"]
    assert set(entries["loop_split"]["hooks"]) == {"ll_analyse", "ll_export_tables", "ll_test_sections"}
    assert [m.name for m in entries["counts_reading"]["reading methods"]] == ["counts"]
    signals = {s.name for e in entries.values() for s in e.get("signal types", [])}
    assert signals == BUILT_IN_SIGNALS


def test_cli_lists_signal_types_and_their_asset_columns(capsys):
    assert main(["plugins"]) == 0
    out = capsys.readouterr().out
    for name in BUILT_IN_SIGNALS:
        assert f"signal type {name}:" in out
    assert "assets.csv column r0_ohm" in out and "assets.csv column tc_type" in out
    assert "hooks: ll_analyse, ll_export_tables, ll_test_sections" in out
    assert "command plugins:" in out


def test_unknown_signal_type_names_the_known_ones(tmp_path, run_folder):
    rows = [asset("T-ODD", "frequency-thing", (45, 55, "Hz"), (4, 20, "mA"))]
    ev = write_evidence(tmp_path / "ev", {"odd.yaml": result_doc("T-ODD", [{"input": "50 Hz",
                                                                            "reading": "12 mA"}])}, assets=rows)
    ctx = run_folder(ev)
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert len(bad) == 1 and bad[0].file == "results/odd.yaml" and bad[0].field == "signal"
    assert "'frequency-thing'" in bad[0].message and "loopledger plugins" in bad[0].message
    for name in BUILT_IN_SIGNALS:
        assert name in bad[0].message
    assert list(ctx.tests["verdict"]) == ["invalid"]
