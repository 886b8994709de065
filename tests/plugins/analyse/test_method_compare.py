"""Method comparison (plugins/method_compare.py): U and TUR with the other rig the registry allows.

The alternative's U must equal the budget of a test actually read that way with the same
output — so a direct test and a shunt test of the same readings cross-check each other. The
2 V range's ±(0.05 %rdg + 2 digits) against the 20 mA range's ±(0.05 %rdg + 2 digits) at
12.003 mA: 0.00080015 V × 10 mA/V = 0.0080015 mA against 0.0080015 mA of meter accuracy, plus the
shunt's tolerance — so the shunt rig's U is the larger (arithmetic from the datasheet specs).
"""

from __future__ import annotations

import copy

import pandas as pd
import pytest
from loopledger import keys
from loopledger.cli import main

from tests.evidence import CT_ASSET, INSTRUMENTS, blocks, good_points, result_yaml, write_evidence

RIG = copy.deepcopy(INSTRUMENTS)
RIG["CAL-1"] = {"kind": "source", "range": "1 A", "accuracy": "0.01 %rdg"}


def two_tests(tmp_path):
    direct = result_yaml(as_found=[("50 %", "12.003 mA")], instruments={"source": "CAL-1", "meter": "DMM-1"})
    shunt = result_yaml(method="shunt", date="2026-04-15", as_found=[("50 %", "1.2003 V")],
                        instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"})
    return write_evidence(tmp_path / "ev", {"d.yaml": direct, "s.yaml": shunt}, instruments=RIG)


def test_each_alternative_equals_the_budget_of_the_other_rig(tmp_path, run_folder):
    ctx = run_folder(two_tests(tmp_path))
    pts = ctx.points.set_index("method")
    table = ctx.stash[keys.METHOD_COMPARISON].set_index("method")
    assert table.at["shunt", "U"] == pytest.approx(pts.at["shunt", "U"], rel=1e-9)
    assert table.at["direct", "U"] == pytest.approx(pts.at["direct", "U"], rel=1e-9)
    assert pts.at["shunt", "U"] > pts.at["direct", "U"]
    assert table.at["shunt", "tur"] == pytest.approx(pts.at["direct", "mpe"] / table.at["shunt", "U"])


def test_cli_shows_the_comparison_on_the_test_page(tmp_path):
    ev = two_tests(tmp_path)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    table = pd.read_csv(out / "data" / "method_comparison.csv")
    assert set(table["method"]) == {"direct", "shunt"}
    pages = [p.read_text(encoding="utf-8") for p in (out / "handbook" / "tests").glob("*.html")]
    assert all("Method comparison" in p for p in pages)


def test_planned_rig_on_the_site_sheet(tmp_path, run_folder):
    """The sheet's planned shunt rig gives the U of the shunt test actually read at that point (the same
    budget; the reading differs by 0.003 mA of 12, so the %rdg term by 0.025 %), and a shunt that is not
    registered gives no U, saying why, rather than no table."""
    from loopledger.plugins.sheet.plan import sheet_data

    ctx = run_folder(two_tests(tmp_path))
    plan = {"method": "shunt", "shunt_ohm": 100.0, "meter": "DMM-1", "source": "CAL-1", "connection": "standalone"}
    rows = {r["input_pct"]: r for r in sheet_data(ctx, "T-CT1", plan)["rows"]}
    shunt_u = ctx.points.loc[ctx.points["method"] == "shunt", "U"].iloc[0]
    assert rows[50.0]["U"] == pytest.approx(shunt_u, rel=1e-3)
    assert rows[50.0]["tur"] == pytest.approx(rows[50.0]["mpe"] / rows[50.0]["U"])
    unknown = sheet_data(ctx, "T-CT1", {**plan, "shunt_ohm": 250.0})["rows"]
    assert all(r["U"] is None and "shunt" in r["u_problem"] for r in unknown)


def fleet(tmp_path):
    """Two assets (class 0.5 and class 0.2), read directly and across the shunt, with 1 to 5 points."""
    second = {**CT_ASSET, "asset": "T-CT2", "accuracy": "0.2"}
    files = {
        "a1.yaml": result_yaml(as_found=good_points(0.002), instruments={"source": "CAL-1", "meter": "DMM-1"}),
        "a2.yaml": result_yaml(method="shunt", date="2026-05-02", as_found=good_points(0.004, shunt=True)[:3],
                               instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"}),
        "b1.yaml": result_yaml(asset="T-CT2", date="2026-03-01", as_found=[("50 %", "12.011 mA")],
                               instruments={"source": "CAL-1", "meter": "DMM-1"}),
        "b2.yaml": result_yaml(asset="T-CT2", date="2026-06-01", method="shunt", as_found=good_points(shunt=True)[1:],
                               instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"}),
    }
    return write_evidence(tmp_path / "ev", files, assets=[CT_ASSET, second], instruments=RIG)


def test_a_batch_gives_each_test_and_sheet_the_sections_it_gets_alone(tmp_path, run_folder):
    """Pages asked for together get what each gets alone, with rows for its own points only."""
    ctx = run_folder(fleet(tmp_path))
    hook = ctx.pm.hook
    tests = list(ctx.tests["test"])
    together = hook.ll_test_sections(ctx=ctx, tests=tests)
    for test in tests:
        mine = [s for s in blocks(together, test) if s.title.startswith("Method comparison")]
        assert mine == [s for s in blocks(hook.ll_test_sections(ctx=ctx, tests=[test]), test)
                        if s.title.startswith("Method comparison")]
        n_points = int((ctx.points["test"] == test).sum())
        assert len(mine) == 1 and len(mine[0].rows) == n_points
    from loopledger.plugins.sheet.plan import sheets

    plans = {"T-CT1": {"method": "shunt", "shunt_ohm": 100.0, "meter": "DMM-1", "source": "CAL-1",
                       "connection": "standalone"},
             "T-CT2": {"method": "direct", "meter": "DMM-1", "source": "CAL-1", "connection": "standalone"}}
    together = sheets(ctx, plans)
    for asset, plan in plans.items():
        alone = sheets(ctx, {asset: plan})[asset]
        assert together[asset]["rows"] == alone["rows"] and all(r["U"] for r in alone["rows"])
