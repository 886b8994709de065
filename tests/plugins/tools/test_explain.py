"""``loopledger explain RESULT_FILE`` (plugins/explain.py), end to end through the CLI."""

from __future__ import annotations

import copy

from loopledger.cli import main

from tests.evidence import INSTRUMENTS, result_yaml, write_evidence

RIG = copy.deepcopy(INSTRUMENTS)
RIG["CAL-1"] = {"kind": "source", "range": "1 A", "accuracy": "0.01 %rdg"}


def test_explain_prints_the_calculation_trail(tmp_path, capsys):
    """The worked shunt point (see test_uncertainty): 1.2003 V / 100 Ω = 12.003 mA, U = 0.009406 mA
    (JCGM 100:2008 arithmetic written out there)."""
    doc = result_yaml(method="shunt", as_found=[("50 %", "1.2003 V")],
                      instruments={"source": "CAL-1", "meter": "DMM-1", "shunt": "SH-100"})
    ev = write_evidence(tmp_path / "ev", {"w.yaml": doc}, instruments=RIG)
    code = main(["explain", str(ev / "results" / "w.yaml"), "--rule", "guarded"])
    out = capsys.readouterr().out
    assert code == 0
    assert "1.2003 V / 100 Ω" in out and "12.003 mA" in out
    for component in ("meter accuracy", "meter resolution", "shunt tolerance", "shunt tempco", "source"):
        assert component in out
    assert "U = 0.009406 mA" in out and "k = 2" in out
    assert "pass by rule guarded" in out and "ILAC-G8" in out
    assert "method comparison" in out and "direct on DMM-1" in out
    assert "analysis (as-found" in out and "Zero error" in out


def test_explain_says_none_given_for_a_field_left_out(tmp_path, capsys):
    """A direct reading has no shunt and this file gives no ambient temperature: the header says so."""
    doc = result_yaml(as_found=[("50 %", "12.003 mA")]).replace("ambient_c: 23.0\n", "")
    ev = write_evidence(tmp_path / "ev", {"d.yaml": doc})
    assert main(["explain", str(ev / "results" / "d.yaml")]) == 0
    out = capsys.readouterr().out
    head = out.splitlines()[1]
    assert "shunt none given" in head and "ambient none given" in head and "nan" not in head
    assert "U = 0.0" in out and " mA (95.45 %)" in out  # worked out: with its unit


def test_explain_of_an_invalid_file_says_why(tmp_path, capsys):
    doc = result_yaml(as_found=[("50 %", "twelve mA")])
    ev = write_evidence(tmp_path / "ev", {"bad.yaml": doc})
    assert main(["explain", str(ev / "results" / "bad.yaml")]) == 2
    out = capsys.readouterr().out
    assert "results/bad.yaml" in out and "could not be judged" in out


def test_explain_of_a_missing_file_is_a_usage_error(tmp_path):
    ev = write_evidence(tmp_path / "ev", {})
    assert main(["explain", str(ev / "results" / "nope.yaml"), "--evidence", str(ev)]) == 3
