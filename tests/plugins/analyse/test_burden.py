"""The burden stage: loop resistance of the rig against the output's drive limit (plugins/burden.py)."""

from __future__ import annotations

import pandas as pd
import pytest
from loopledger.cli import main
from loopledger.plugins.analyse import burden

from tests.evidence import CT_ASSET, INSTRUMENTS, blocks, good_points, result_yaml, write_evidence


def _rig(**kw):
    row = {"asset": "T-CT1", "method": "shunt", "connection": "standalone", "ambient_c": 20.0, "meter": None,
           "shunt": "SH-100"}
    row.update(kw)
    return pd.DataFrame([row])


def _ctx(tmp_path, run_folder, assets=None, instruments=None, results=None):
    ev = write_evidence(tmp_path / "ev", results or {"a.yaml": result_yaml(as_found=good_points())},
                        assets=assets, instruments=instruments)
    return run_folder(ev)


def test_a_100_ohm_shunt_drops_2_volts_at_20_ma(tmp_path, run_folder):
    # common practice: a 100 Ω shunt reads 0.4 V at 4 mA and 2.0 V at 20 mA
    ctx = _ctx(tmp_path, run_folder)
    row = burden.analyse(ctx, _rig()).iloc[0]
    assert row["loop_ohm"] == pytest.approx(100.0)
    assert row["loop_ohm"] * row["top_a"] == pytest.approx(2.0)


@pytest.mark.parametrize("max_load", [500, 750])
def test_self_powered_limit_is_the_drive_limit_at_20_ma(tmp_path, run_folder, max_load):
    # common practice: a transducer drives 500-750 Ω; with the 100 Ω shunt standalone there is room to spare
    ctx = _ctx(tmp_path, run_folder, assets=[{**CT_ASSET, "max_load_ohm": max_load}])
    row = burden.analyse(ctx, _rig()).iloc[0]
    assert row["limit_ohm"] == pytest.approx(max_load)
    # the same drive voltage spread over 20.5 mA (NE 43 upper measuring limit)
    assert row["upper_limit_ohm"] == pytest.approx(max_load * 20 / 20.5)
    assert row["margin_pct"] == pytest.approx((max_load - 100) / max_load * 100)
    assert row["burden_status"] == "ok"


def test_loop_powered_transmitter_load_line(tmp_path, run_folder):
    # common practice (load line): R_max = (24 V − 12 V) / 20 mA = 600 Ω; at 20.5 mA 12 / 0.0205 = 585.4 Ω
    asset = {**CT_ASSET, "power": "loop", "max_load_ohm": None, "supply_v": 24, "min_terminal_v": 12}
    ctx = _ctx(tmp_path, run_folder, assets=[asset])
    row = burden.analyse(ctx, _rig()).iloc[0]
    assert row["limit_ohm"] == pytest.approx(600.0)
    assert row["upper_limit_ohm"] == pytest.approx(585.366, abs=1e-3)


def test_in_loop_adds_receiver_and_cable_at_ambient(tmp_path, run_folder):
    # 100 Ω shunt + 250 Ω receiver + 2 × 50 m of 1.5 mm² (IEC 60228: 12.1 Ω/km) at 30 °C (α = 0.00393 /K)
    ctx = _ctx(tmp_path, run_folder)
    row = burden.analyse(ctx, _rig(connection="in-loop", ambient_c=30.0)).iloc[0]
    cable = 2 * 0.05 * 12.1 * (1 + 0.00393 * 10)
    assert row["cable_ohm"] == pytest.approx(cable)
    assert row["loop_ohm"] == pytest.approx(100 + 250 + cable)


def test_meter_burden_from_its_milliamp_range_spec(tmp_path, run_folder):
    # "15 mV/mA" is 15 Ω by Ohm's law; a spec given as the drop at full range, 0.3 V on 20 mA, is the same
    instruments = {**INSTRUMENTS, "DMM-2": {"kind": "meter", "ranges": [
        {"range": "200 mA", "burden": "1 mV/mA"}, {"range": "20 mA", "burden": "0.3 V"}]}}
    ctx = _ctx(tmp_path, run_folder, instruments=instruments)
    assert burden.analyse(ctx, _rig(method="direct", meter="DMM-2")).iloc[0]["rig_ohm"] == pytest.approx(15.0)
    assert burden.analyse(ctx, _rig(method="display")).iloc[0]["rig_ohm"] == 0.0


def test_status_bands_and_unknown(tmp_path, run_folder):
    ctx = _ctx(tmp_path, run_folder, assets=[{**CT_ASSET, "max_load_ohm": 600}, {
        **CT_ASSET, "asset": "T-CT2", "max_load_ohm": None, "power": None}])
    rows = burden.analyse(ctx, pd.concat([
        _rig(shunt=None, shunt_ohm=530.0),  # margin 11.7 %
        _rig(shunt=None, shunt_ohm=560.0),  # margin 6.7 %
        _rig(shunt=None, shunt_ohm=610.0),  # over by 10 Ω
        _rig(asset="T-CT2"),                # no drive limit in the registry
        _rig(connection="in-loop", asset="T-CT1", ambient_c=None),
    ], ignore_index=True))
    assert list(rows["burden_status"]) == ["ok", "low-margin", "exceeds", "unknown", "ok"]
    assert "max_load_ohm" in rows.iloc[3]["burden_reason"] or "power" in rows.iloc[3]["burden_reason"]
    assert "20 °C assumed" in rows.iloc[4]["cable_desc"]


def test_exceeding_test_warns_with_each_fix_and_its_loop(tmp_path, run_folder):
    # a 250 Ω shunt in series with a 250 Ω receiver and 2 × 50 m of 1.5 mm² (1.21 Ω) against 500 Ω
    instruments = {**INSTRUMENTS, "SH-250": {"kind": "shunt", "resistance": "250 ohm"}}
    shunted = [(i, r.replace(" V", "")) for i, r in good_points(shunt=True)]
    text = result_yaml(method="shunt", connection="in-loop", ambient_c=20.0,
                       as_found=[(i, f"{float(r) * 2.5:.5f} V") for i, r in shunted])
    text = text.replace("shunt: SH-100", "shunt: SH-250")
    ctx = _ctx(tmp_path, run_folder, assets=[{**CT_ASSET, "max_load_ohm": 500}], instruments=instruments,
               results={"a.yaml": text})
    t = ctx.tests.iloc[0]
    assert t["burden_status"] == "exceeds"
    assert t["loop_ohm"] == pytest.approx(501.21)
    [found] = [f for f in ctx.findings if f.code == "burden"]
    assert found.severity == "warning"
    assert "over by 1.2 Ω" in found.message
    assert "10 Ω shunt (0.2 V at 20 mA): loop 261.2 Ω" in found.message      # 10 + 250 + 1.21
    assert "DMM-1 on its 20 mA range (1.8 mV/mA): loop 253.0 Ω" in found.message  # 1.8 + 250 + 1.21
    assert "test standalone (receiver and cable out of the loop): loop 250.0 Ω" in found.message


def test_test_page_and_site_sheet_show_each_term(tmp_path, run_folder, pm):
    ctx = _ctx(tmp_path, run_folder)
    test = ctx.tests.iloc[0]["test"]
    [section] = [s for s in blocks(pm.hook.ll_test_sections(ctx=ctx, tests=[test]), test)
                 if s.title == "Loop burden"]
    labels = [label for label, _ in section.rows]
    assert labels[:2] == ["Rig inserts", "Receiver and cable"]
    assert "Drive limit" in labels and "Margin" in labels
    plan = {"method": "shunt", "shunt_ohm": 100.0, "meter": None, "connection": "in-loop"}
    sheet = blocks(pm.hook.ll_sheet_sections(ctx=ctx, plans={"T-CT1": plan}), "T-CT1")
    rows = dict(sheet[0].rows)
    assert rows["Receiver input (in-loop)"] == "250.0 Ω"
    assert rows["Loop resistance"].startswith("351.2 Ω")  # 100 + 250 + 2 × 0.05 km × 12.1 Ω/km at 20 °C


def test_cli_run_exports_the_burden_columns(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--no-handbook"]) == 0
    tests = pd.read_csv(tmp_path / "out" / "data" / "tests.csv")
    for col in ("loop_ohm", "limit_ohm", "margin_pct", "burden_status", "fault_signature"):
        assert col in tests.columns
    # direct on DMM-1's 20 mA range: 1.8 mV/mA = 1.8 Ω against 750 Ω
    assert tests.loc[0, "loop_ohm"] == pytest.approx(1.8)
    assert tests.loc[0, "burden_status"] == "ok"


def test_cli_loop_checks_a_planned_rig(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {}, assets=[{**CT_ASSET, "max_load_ohm": 300}])
    assert main(["loop", "T-CT1", "--shunt", "100", "--evidence", str(ev)]) == 0
    out = capsys.readouterr().out
    assert "2.00 V at 20 mA" in out and "ok" in out
    # in-loop: 100 + 250 + 1.21 = 351.2 Ω > 300 Ω: exit 1 and the fixes
    assert main(["loop", "T-CT1", "--shunt", "SH-100", "--in-loop", "--evidence", str(ev)]) == 1
    out = capsys.readouterr().out
    assert "exceeds" in out and "351.2 Ω" in out and "loop 261.2 Ω" in out
    assert main(["loop", "T-CT1", "--meter", "DMM-1", "--in-loop", "--evidence", str(ev)]) == 0
    assert main(["loop", "NOPE", "--evidence", str(ev)]) == 3
    assert main(["loop", "T-CT1", "--shunt", "banana", "--evidence", str(ev)]) == 3


def test_a_batch_gives_each_test_and_sheet_the_sections_it_gets_alone(tmp_path, run_folder, pm):
    """Pages asked for together get what each gets alone: each its own rig and its own drive limit."""
    assets = [{**CT_ASSET, "max_load_ohm": 500}, {**CT_ASSET, "asset": "T-CT2", "max_load_ohm": 750},
              {**CT_ASSET, "asset": "T-CT3", "max_load_ohm": None, "power": None}]
    results = {"a.yaml": result_yaml(as_found=good_points()),
               "b.yaml": result_yaml(asset="T-CT2", method="shunt", as_found=good_points(shunt=True)),
               "c.yaml": result_yaml(asset="T-CT2", date="2026-05-01", connection="in-loop",
                                     as_found=good_points())}
    ctx = _ctx(tmp_path, run_folder, assets=assets, results=results)
    tests = list(ctx.tests["test"])
    together = pm.hook.ll_test_sections(ctx=ctx, tests=tests)
    loops = {}
    for test in tests:
        [mine] = [s for s in blocks(together, test) if s.title == "Loop burden"]
        assert [mine] == [s for s in blocks(pm.hook.ll_test_sections(ctx=ctx, tests=[test]), test)
                          if s.title == "Loop burden"]
        loops[str(ctx.tests.set_index("test").at[test, "method"]), str(ctx.tests.set_index("test").at[
            test, "connection"])] = dict(mine.rows)["Loop resistance"]
    # direct on DMM-1 (1.8 mV/mA = 1.8 Ω); across SH-100; in-loop adds 250 Ω and 2 × 50 m of 1.5 mm² (1.21 Ω)
    assert loops["direct", "standalone"].startswith("1.8 Ω")
    assert loops["shunt", "standalone"].startswith("100.0 Ω")
    assert loops["direct", "in-loop"].startswith("253.0 Ω")
    plans = {"T-CT1": {"method": "shunt", "shunt_ohm": 610.0, "connection": "standalone"},  # over 500 Ω
             "T-CT2": {"method": "shunt", "shunt_ohm": 100.0, "connection": "in-loop"},
             "T-CT3": {"method": "direct", "meter": "DMM-1", "connection": "standalone"},
             "NOT-IN-REGISTRY": {"method": "direct"}}
    titles = ("Loop burden of the planned rig", "Before you connect")

    def sheet(found, asset):
        return [s for s in blocks(found, asset) if s.title in titles]

    together = pm.hook.ll_sheet_sections(ctx=ctx, plans=plans)
    for asset, plan in plans.items():
        assert sheet(together, asset) == sheet(pm.hook.ll_sheet_sections(ctx=ctx, plans={asset: plan}), asset)
    assert not sheet(together, "NOT-IN-REGISTRY")
    first = sheet(together, "T-CT1")
    assert dict(first[0].rows)["Margin"].endswith("(exceeds)") and [s.title for s in first] == list(titles)
    assert dict(sheet(together, "T-CT2")[0].rows)["Loop resistance"].startswith("351.2 Ω")  # 100 + 250 + 1.21
    assert [s.title for s in sheet(together, "T-CT2")] == [titles[0]]
    assert dict(sheet(together, "T-CT3")[0].rows)["Status"].startswith("unknown")  # no drive limit known


def test_figures_are_formatted_value_by_value_as_python_does():
    """burden.fmt works each distinct value out once, yet gives what Python's own format() gives each
    value (reference: str.format): -0.0 keeps its sign, 1 and True are not merged, missing is '?'."""
    import math

    from loopledger.plugins.analyse.burden import fmt

    values = [0.0, -0.0, 2.5, float("nan"), 2.5, 1e-7]
    assert fmt(pd.Series(values)).tolist() == ["?" if math.isnan(v) else f"{v:g}" for v in values]
    mixed = [1, True, 1.0, None, -0.0, 0.0]
    assert fmt(pd.Series(mixed, dtype=object), "{}").tolist() == ["?" if v is None else f"{v}" for v in mixed]


def test_drive_limit_at_the_ne43_high_failure_current(tmp_path, run_folder):
    """NAMUR NE 43: a failure signal is ≥ 21.0 mA, so the loop must carry 21 mA; R_max = (V_supply −
    V_min) / 0.021 (domain.md, calc from NE 43's 21 mA level). The issue's case: 650 Ω on a 13.5 V loop
    is inside the limits at 20 mA (675 Ω) and 20.5 mA (658.5 Ω) but not at 21 mA (642.9 Ω)."""
    asset = {**CT_ASSET, "power": "loop", "max_load_ohm": None, "supply_v": 24, "min_terminal_v": 10.5}
    ctx = _ctx(tmp_path, run_folder, assets=[asset])
    row = burden.analyse(ctx, _rig(shunt_ohm=650.0)).iloc[0]
    assert row["limit_ohm"] == pytest.approx(13.5 / 0.020)
    assert row["upper_limit_ohm"] == pytest.approx(13.5 / 0.0205)
    assert row["failure_limit_ohm"] == pytest.approx(642.857, abs=1e-3)
    assert bool(row["high_failure_clipped"])
    assert "21 mA" in " ".join(v for _, v in burden.term_rows(row))
    fine = burden.analyse(ctx, _rig(shunt_ohm=640.0)).iloc[0]
    assert not bool(fine["high_failure_clipped"])


def test_a_loop_that_cannot_carry_21_ma_gets_its_own_warning(tmp_path, run_folder):
    """The fixture's 100 Ω shunt on a loop with 2.08 V of headroom: 104 Ω at 20 mA, 101.5 Ω at 20.5 mA,
    99.05 Ω at 21 mA (R = V / I, NE 43's levels): the high failure signal would be clipped."""
    asset = {**CT_ASSET, "power": "loop", "max_load_ohm": None, "supply_v": 12, "min_terminal_v": 9.92}
    volts = [(i, f"{float(r.split()[0]) * 0.1:.5f} V") for i, r in good_points()]  # 100 Ω: V = 0.1 × mA
    ctx = _ctx(tmp_path, run_folder, assets=[asset],
               results={"a.yaml": result_yaml(method="shunt", as_found=volts)})
    found = [f for f in ctx.findings if f.code == "burden-ne43"]
    assert len(found) == 1 and "99.0 Ω" in found[0].message and "clipped" in found[0].message
    assert bool(ctx.tests["high_failure_clipped"].iloc[0])
