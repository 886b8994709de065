"""TUR and specific risk per point (plugins/conformity.py).

TUR = tolerance span / (2 × U95) = MPE / U (ANSI/NCSL Z540.3, as listed in domain.md); specific
risk per JCGM 106:2012, normal model, checked with scipy.stats.norm.
"""

from __future__ import annotations

import copy

import pandas as pd
import pytest
from loopledger.cli import main
from scipy import stats

from tests.evidence import INSTRUMENTS, good_points, result_yaml, write_evidence


def test_tur_and_risk_per_point(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.03))})
    ctx = run_folder(ev)
    pts = ctx.points
    assert pts["tur"].to_numpy() == pytest.approx((2 * pts["mpe"] / (2 * pts["U"])).to_numpy())
    e, u, mpe = pts["error"], pts["u"], pts["mpe"]
    want = stats.norm.sf((mpe - e) / u) + stats.norm.cdf((-mpe - e) / u)
    assert pts["risk"].to_numpy() == pytest.approx(want, rel=1e-9)


def test_low_tur_is_a_warning_naming_the_file(tmp_path, run_folder):
    """An injection set of ±(0.1 %rdg + 0.05 %range) on its 5 A range, for a 0-1 A device, gives
    U ≈ 0.066 mA against MPE 0.08 mA: TUR below 4:1 (Z540.3 §5.3 alternative)."""
    rig = copy.deepcopy(INSTRUMENTS)
    rig["SRC-1"].update({"range": "5 A", "accuracy": "0.1 %rdg + 0.05 %range"})
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.0))}, instruments=rig)
    ctx = run_folder(ev)
    low = [f for f in ctx.findings if f.code == "low-tur"]
    assert len(low) == 1 and low[0].severity == "warning" and low[0].file == "results/a.yaml"
    assert (ctx.points["tur"] < 4).all()


def test_empty_acceptance_zone_is_a_warning_not_a_crash(tmp_path):
    """An injection set on its 20 A range for a 0-1 A device: ±(0.1 %rdg + 0.05 %range) is ±0.01 A
    or more, 0.16 mA at the output, so U > MPE = 0.08 mA and nothing can pass under `guarded`."""
    rig = copy.deepcopy(INSTRUMENTS)
    rig["SRC-1"].update({"range": "20 A", "accuracy": "0.1 %rdg + 0.05 %range"})
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.0))}, instruments=rig,
                        config='as_of = 2026-11-30\n[decision]\nrule = "guarded"\n')
    out = tmp_path / "out"
    # issue 22: this test once pinned exit code 0 (the conditional passes counted as passes, which is
    # simple acceptance). Under ILAC-G8:2019 §4.2.2's binary statement with a guard band, nothing inside
    # an empty acceptance zone passes, so the test fails (exit 1), and the warning says why.
    assert main(["run", str(ev), "--out", str(out), "--no-handbook"]) == 1
    tests = pd.read_csv(out / "data" / "tests.csv")
    assert "acceptance zone is empty" in tests["warnings"].iloc[0]
    assert list(tests["verdict"]) == ["fail"]
    pts = pd.read_csv(out / "data" / "points.csv")
    assert set(pts["decision"]) == {"conditional-pass"}


def test_the_fixture_rig_is_good_enough(tmp_path, run_folder):
    """The plumbing fixture's calibrator-grade source and meter give TUR ≥ 4:1, so no warning."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.0))})
    ctx = run_folder(ev)
    assert (ctx.points["tur"] >= 4).all()
    assert not [f for f in ctx.findings if f.code == "low-tur"]
