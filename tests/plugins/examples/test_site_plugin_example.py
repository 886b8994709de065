"""The example site plugin (plugins/examples/valve_feedback), installed into the venv by `make install`.

It is loaded through its entry point in the `loopledger` group, as any site plugin would be, and run
through the whole pipeline via the CLI.
"""

from __future__ import annotations

from importlib.metadata import entry_points

import pandas as pd
import pytest
from loopledger.cli import main
from loopledger.host import get_plugin_manager

from tests.evidence import write_evidence
from tests.signal_checks import asset, finite_difference, result_doc

#: invented: a valve positioner driven 4-20 mA, feeding back position on 0-20 mA, 2 % dead band
ASSETS = [asset("T-FV-101", "valve-position", (4, 20, "mA"), (0, 20, "mA"), deadband_pct=2)]
POINTS = [{"input": "4 mA", "reading": "0.002 mA", "direction": "up"},
          {"input": "12 mA", "reading": "9.801 mA", "direction": "up"},
          {"input": "20 mA", "reading": "19.798 mA", "direction": "up"},
          {"input": "12 mA", "reading": "10.203 mA", "direction": "down"},
          {"input": "4 mA", "reading": "0.199 mA", "direction": "down"}]


def _evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {"fv.yaml": result_doc("T-FV-101", POINTS)}, assets=ASSETS)


def test_the_entry_point_is_installed():
    names = {ep.name: ep.value for ep in entry_points(group="loopledger")}
    assert names.get("valve_feedback") == "ll_valve_feedback.plugin", "run `make install` to install it"


def test_runs_through_the_whole_pipeline_via_the_cli(tmp_path):
    out = tmp_path / "out"
    assert main(["run", str(_evidence(tmp_path)), "--out", str(out)]) == 0
    points = pd.read_csv(out / "data" / "points.csv").sort_values(["phase", "point"])
    # the plugin's rule (its own docstring): rising, the valve stops half the dead band short (−1 %);
    # falling, as far past (+1 %); clipped to the stroke. 0-20 mA feedback: 1 % = 0.2 mA
    assert points["expected"].tolist() == pytest.approx([0.0, 9.8, 19.8, 10.2, 0.2])
    assert (points["decision"] == "pass").all()
    assert (out / "handbook" / "index.html").is_file()


def test_listed_by_the_plugins_command(capsys):
    assert main(["plugins"]) == 0
    out = capsys.readouterr().out
    assert "valve_feedback  (loopledger-valve-feedback" in out
    assert "signal type valve-position:" in out and "assets.csv column deadband_pct" in out


def test_sensitivity_matches_finite_difference(tmp_path):
    from loopledger import runner

    ctx = runner.run(runner.RunOptions(_evidence(tmp_path)), get_plugin_manager())
    fd = finite_difference(ctx, "valve-position")
    # 0-20 mA out per 4-20 mA in is 1.25 except on the seat (rising to 0 %), where the valve cannot move
    assert fd["sensitivity"].tolist() == pytest.approx(fd["numeric"].tolist(), abs=1e-6)
    assert sorted(fd["sensitivity"].round(6).tolist()) == [0.0, 1.25, 1.25, 1.25, 1.25]


def test_bad_dead_band_is_reported_by_its_schema(tmp_path):
    from loopledger import runner

    rows = [dict(ASSETS[0], deadband_pct=-1)]
    ev = write_evidence(tmp_path / "ev", {"fv.yaml": result_doc("T-FV-101", POINTS)}, assets=rows)
    ctx = runner.run(runner.RunOptions(ev), get_plugin_manager())
    bad = [f for f in ctx.findings if f.severity == "error"]
    assert bad and bad[0].field == "assets.deadband_pct" and "T-FV-101" in bad[0].message
