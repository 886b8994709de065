"""Instrument-transformer ratio error under primary injection (plugins/signals/transformers.py).

Limits: IEC 61869-2 measuring CTs and IEC 61869-3 inductive VTs, ratio-error limits as listed in
/work/shared/domain.md, which marks them **from memory** (carried over from IEC 60044-1); they are to be
confirmed against the published standard. Linear interpolation between the listed currents is common
practice. GUM 4.3.7 for the rectangular divisor √3.
"""

from __future__ import annotations

import copy

import pandas as pd
import pytest
from loopledger.plugins.signals import transformers

from tests.evidence import CT_ASSET, INSTRUMENTS, result_yaml, write_evidence
from tests.signal_checks import asset

#: IEC 61869-2 (from memory): ± % ratio error at 5 / 20 / 100 / 120 % of rated current
CT_TABLE = {"0.2": (0.75, 0.35, 0.2, 0.2), "0.5": (1.5, 0.75, 0.5, 0.5), "1": (3.0, 1.5, 1.0, 1.0)}


@pytest.mark.parametrize("cls", sorted(CT_TABLE))
@pytest.mark.parametrize("i", range(4))
def test_ct_ratio_error_limits_at_the_listed_currents(cls, i):
    pct = (5.0, 20.0, 100.0, 120.0)[i]
    got = transformers.ct_limit_pct(pd.Series([cls]), pd.Series([pct]))
    assert got.iloc[0] == pytest.approx(CT_TABLE[cls][i])


def test_ct_limit_between_listed_currents_is_interpolated_and_classes_are_read_as_numbers():
    """Class 0.5 at 60 % of rated current: 0.75 + (0.5 − 0.75) × 40/80 = 0.625 % (linear, common practice);
    '0.50' is class 0.5; class 5 is ±5 % (IEC 61869-2 classes 3 and 5, from memory)."""
    got = transformers.ct_limit_pct(pd.Series(["0.5", "0.50", "5", None]), pd.Series([60.0, 60.0, 80.0, 50.0]))
    assert got.iloc[0] == pytest.approx(0.625) and got.iloc[1] == pytest.approx(0.625)
    assert got.iloc[2] == 5.0 and pd.isna(got.iloc[3])


@pytest.mark.parametrize("cls,limit", [("0.1", 0.1), ("0.2", 0.2), ("0.5", 0.5), ("1", 1.0), ("3", 3.0)])
def test_vt_ratio_error_limits(cls, limit):
    """IEC 61869-3 (from memory): ±0.1 / 0.2 / 0.5 / 1.0 / 3.0 % from 80 to 120 % of rated voltage."""
    assert transformers.vt_limit_pct(pd.Series([cls])).iloc[0] == pytest.approx(limit)


RIG = copy.deepcopy(INSTRUMENTS)
RIG["PRI-1"] = {"kind": "source", "range": "2000 A", "accuracy": "0.2 %rdg"}


def _primary(tmp_path, run_folder, ct_class):
    doc = result_yaml(as_found=[("1000 A", "12.000 mA")], injection="primary",
                      instruments={"source": "PRI-1", "meter": "DMM-1"})
    return run_folder(write_evidence(tmp_path / "ev", {"p.yaml": doc}, assets=[{**CT_ASSET, "ct_class": ct_class}],
                                     instruments=RIG))


def test_primary_injection_puts_the_ct_class_in_the_budget(tmp_path, run_folder):
    """1000 A through a 2000/1 class 0.5 CT is 50 % of rated current: limit 0.75 + (0.5 − 0.75) × 30/80 =
    0.65625 % (interpolated), a half-width of 6.5625 A, carried by 16 mA / 2000 A, divided by √3."""
    ctx = _primary(tmp_path, run_folder, "0.5")
    terms = ctx.extras["budget"].set_index("component")
    row = terms.loc["CT ratio error"]
    assert row["half_width"] == pytest.approx(6.5625) and row["distribution"] == "rectangular"
    assert row["contribution"] == pytest.approx(6.5625 * 16 / 2000 / 3 ** 0.5)
    assert not [f for f in ctx.findings if f.field == "assets.ct_class"]


def test_primary_injection_without_a_class_warns(tmp_path, run_folder):
    ctx = _primary(tmp_path, run_folder, None)
    found = [f for f in ctx.findings if f.field == "assets.ct_class"]
    assert len(found) == 1 and found[0].severity == "warning" and "not in the uncertainty budget" in found[0].message
    assert "CT ratio error" not in set(ctx.extras["budget"]["component"])


def test_an_unknown_class_is_refused(tmp_path, run_folder):
    ctx = _primary(tmp_path, run_folder, "0.3")
    assert any(f.field == "assets.ct_class" and f.severity == "error" for f in ctx.findings)


def test_power_transducer_states_that_phase_displacement_is_left_out(tmp_path, run_folder):
    """A power transducer through a class 0.5 CT and class 0.5 VT: two rectangular terms, each 0.5 % of the
    injected power at rated current (100 % of the range), and the budget names what is left out."""
    pw = asset("T-P1", "power-transducer", (0, 500, "kW"), (4, 20, "mA"), ct_ratio="1000/1", vt_ratio="11000/110",
               ct_class="0.5", vt_class="0.5")
    rig = copy.deepcopy(RIG)  # a primary source must reach the 50,000 MW injected (source-range check, issue 20)
    rig["PW-1"] = {"kind": "source", "range": "60000 MW", "accuracy": "0.1 %rdg"}
    doc = result_yaml(asset="T-P1", as_found=[("50000 MW", "20.000 mA")], injection="primary",
                      instruments={"source": "PW-1", "meter": "DMM-1"})
    ctx = run_folder(write_evidence(tmp_path / "ev", {"p.yaml": doc}, assets=[pw], instruments=rig))
    terms = ctx.extras["budget"]
    mine = terms[terms["component"].str.contains("ratio error")]
    assert sorted(mine["component"]) == ["CT ratio error (phase displacement left out)",
                                         "VT ratio error (phase displacement left out)"]
    assert mine["half_width"].to_numpy() == pytest.approx([0.005 * 50000 * 1000] * 2)  # kW, the input unit
