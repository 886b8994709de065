"""Messages that tell the fix (issue 23, items 4 and 5). The cases are common practice of the trade: a
current transducer behind a CT is tested with secondary amps unless the file says the primary was injected,
units such as mA are case-sensitive (SI prefixes: m milli, M mega; BIPM SI Brochure, from memory), and % of a
range counts from its minimum (the linear 4-20 mA scaling)."""

from __future__ import annotations

import datetime as dt

from loopledger.cli import main

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

POWER = {**CT_ASSET, "asset": "T-PW", "signal": "power-transducer", "input_min": -750, "input_max": 750,
         "input_unit": "W", "ct_ratio": "400/1", "display_min": -300, "display_max": 300, "display_unit": "kW"}


def messages(ctx, severity=None):
    return [f.message for f in ctx.findings if severity is None or f.severity == severity]


def test_a_bare_input_suggests_the_assets_own_input_unit(tmp_path, run_folder):
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=[(0.25, "8.000 mA")])}))
    said = [m for m in messages(ctx, "error") if "has no unit" in m]
    assert said and "'0.25 A'" in said[0] and "mA" not in said[0].split("e.g.")[1]


def test_a_unit_in_the_wrong_case_gets_a_case_hint(tmp_path, run_folder):
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=[("50 %", "12.001 ma")])}))
    said = [m for m in messages(ctx, "error") if "'ma'" in m]
    assert said and "case-sensitive" in said[0] and "did you mean 'mA'" in said[0]


def test_primary_amps_without_injection_primary_get_a_hint_at_the_ct(tmp_path, run_folder):
    """0.5 A secondary is 1000 A through 2000/1: written as 1000 A, the input is 100000 % of the 1 A range."""
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=[("1000 A", "12.001 mA")])}))
    said = [m for m in messages(ctx, "warning") if "primary value" in m]
    assert said and "ct_ratio 2000/1" in said[0] and "50 % of the range" in said[0]
    assert "injection: primary" in said[0]


def test_minus_100_percent_on_a_bidirectional_range_says_what_percent_means(tmp_path, run_folder):
    """On -750..+750 W, 0 % is -750 W, so -100 % is -750 - 1500 = -2250 W (worked by hand)."""
    ev = write_evidence(tmp_path / "ev", {"p.yaml": result_yaml(asset="T-PW", as_found=[("-100 %", "4.001 mA")])},
                        assets=[POWER])
    said = [m for m in messages(run_folder(ev), "warning") if "from its minimum" in m]
    assert said and "0 % is -750 W" in said[0] and "-2250 W" in said[0] and "'-750 W'" in said[0]


def test_a_future_date_gets_no_reference_due_warnings(tmp_path, run_folder):
    future = (dt.date.today() + dt.timedelta(days=400)).isoformat()
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(date=future, as_found=good_points())})
    ctx = run_folder(ev)
    assert any("in the future" in m for m in messages(ctx, "error"))
    assert not [f for f in ctx.findings if f.code == "reference-past-due"]


def test_run_dot_inside_the_evidence_folder_writes_beside_it(tmp_path, monkeypatch, capsys):
    ev = write_evidence(tmp_path / "site", {"a.yaml": result_yaml(as_found=good_points())})
    monkeypatch.chdir(ev)
    assert main(["run", ".", "--no-cache"]) == 0
    assert (tmp_path / "site-build" / "handbook" / "index.html").is_file()
    assert not (ev / "build").exists()
    assert str(tmp_path / "site-build") in capsys.readouterr().out
