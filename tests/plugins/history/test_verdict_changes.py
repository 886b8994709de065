"""Nothing changes silently (issue 20): a verdict that changes between two runs in the same OUT although its
result file did not is a warning naming the cause, listed in tests.csv, changes.csv and the handbook.

Arithmetic (class index as ± % of the 16 mA output span, IEC 60688's fiducial rule, from memory): a reading
0.06 mA off passes class 0.5 (±0.08 mA) and fails class 0.25 (±0.04 mA). Invented plumbing data.
"""

from __future__ import annotations

import copy

import pandas as pd
import yaml
from loopledger.cli import main

from tests.evidence import CT_ASSET, INSTRUMENTS, good_points, result_yaml, write_evidence


def _run(ev, out, capsys):
    code = main(["run", str(ev), "--out", str(out)])
    return code, capsys.readouterr().out


def _tests(out):
    return pd.read_csv(out / "data" / "tests.csv", dtype=str, keep_default_na=False).set_index("source_file")


def test_a_register_edit_that_flips_a_verdict_is_a_warning_naming_the_row(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.06)),
                                          "b.yaml": result_yaml(date="2026-05-01", as_found=good_points(0.01))})
    out = tmp_path / "out"
    assert _run(ev, out, capsys)[0] == 0
    assert _tests(out).at["results/a.yaml", "verdict_changed"] == ""
    write_evidence(ev, {}, assets=[{**CT_ASSET, "accuracy": "0.25"}])  # the class tightened in assets.csv
    code, said = _run(ev, out, capsys)
    assert code == 1  # a warning, not an error: the exit code is the failing test's
    tests = _tests(out)
    assert tests.at["results/a.yaml", "verdict"] == "fail"
    assert tests.at["results/a.yaml", "verdict_changed"] == "pass"
    assert tests.at["results/a.yaml", "changed_because"] == "assets.csv line 2 (the row in force on its date) changed"
    assert tests.at["results/b.yaml", "verdict_changed"] == ""  # 0.01 mA passes either class
    assert "verdict changed from pass to fail although this file did not change" in said
    changes = pd.read_csv(out / "data" / "changes.csv", dtype=str)
    assert list(changes["source_file"]) == ["results/a.yaml"]
    page = (out / "handbook" / "changes.html").read_text(encoding="utf-8")
    assert "assets.csv line 2 (the row in force on its date) changed" in page
    # a third run with nothing changed keeps the list (the page keeps every change on record)
    write_evidence(ev, {"c.yaml": result_yaml(date="2026-06-01", as_found=good_points(0.01))},
                   assets=[{**CT_ASSET, "accuracy": "0.25"}])
    _run(ev, out, capsys)
    assert list(pd.read_csv(out / "data" / "changes.csv", dtype=str)["source_file"]) == ["results/a.yaml"]
    assert _tests(out).at["results/a.yaml", "verdict_changed"] == ""


def test_a_changed_file_is_not_a_silent_change(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.01))})
    out = tmp_path / "out"
    _run(ev, out, capsys)
    write_evidence(ev, {"a.yaml": result_yaml(as_found=good_points(0.2))})  # the file itself now fails
    _, said = _run(ev, out, capsys)
    assert _tests(out).at["results/a.yaml", "verdict_changed"] == "" and "verdict changed" not in said


def test_a_history_edit_that_leaves_the_verdict_alone_is_not_reported(tmp_path, capsys):
    inst = copy.deepcopy(INSTRUMENTS)
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(date="2025-06-01", as_found=good_points())},
                        instruments=inst)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    assert _tests(out).at["results/a.yaml", "verdict"] == "pass"
    # the meter's history now names the certificate in force on 2025-06-01; the verdict stays, so nothing
    # is said (only a verdict change is reported), but tests.csv names the certificate
    meter = inst["DMM-1"]
    del meter["calibrated"], meter["due"]
    meter["calibrations"] = [{"date": "2025-01-05", "due": "2026-01-05", "certificate": "M-25"},
                             {"date": "2026-01-01", "due": "2027-01-01", "certificate": "M-26"}]
    (ev / "instruments.yaml").write_text(yaml.safe_dump(inst, sort_keys=False), encoding="utf-8")
    _, said = _run(ev, out, capsys)
    assert "verdict changed" not in said
    assert _tests(out).at["results/a.yaml", "certificates"] == "DMM-1:M-25"


def test_the_cause_named_is_the_one_that_changed():
    from loopledger.plugins.history.changes import _because

    old = pd.Series({"asset_row": "2", "asset_row_sha256": "aa", "certificates": "DMM-1:M-25",
                     "references_sha256": "rr"})
    assert _because(pd.Series({**old, "asset_row": "3"}), old).startswith(
        "it is now judged against assets.csv line 3 (was line 2)")
    assert _because(pd.Series({**old, "certificates": "DMM-1:M-26"}), old) == \
        "the certificates in force are now DMM-1:M-26 (were DMM-1:M-25)"
    assert _because(pd.Series({**old, "references_sha256": "ss", "meter": "DMM-1"}), old) == \
        "the instruments.yaml entry of DMM-1 changed"
    assert _because(old, old).startswith("neither its register row nor its instruments changed")
