"""The CLI end to end: `loopledger run` and `loopledger check` on temporary evidence folders."""

from __future__ import annotations

import csv

import pytest
from loopledger.cli import main

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence


def _rows(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_run_exports_judged_numbers_and_exits_0(tmp_path, capsys):
    # 100 ohm shunt (Ohm's law): 1.2008 V is 12.008 mA; expected at 50 % of 4-20 mA is 12 mA
    # (common practice); error +0.008 mA = +0.05 % of the 16 mA span; MPE of class 0.5 = 0.08 mA.
    pts = [("0 %", "0.4001 V"), ("50 %", "1.2008 V"), ("100 %", "2.0004 V")]
    ev = write_evidence(tmp_path / "ev", {"2026/a.yaml": result_yaml(method="shunt", as_found=pts)})
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 0
    points = _rows(out / "data" / "points.csv")
    assert [p["point"] for p in points] == ["1", "2", "3"]
    mid = points[1]
    assert mid["asset"] == "T-CT1" and mid["test"] == "2026/a" and mid["phase"] == "as_found"
    assert float(mid["input_pct"]) == pytest.approx(50)
    assert float(mid["expected"]) == pytest.approx(12.0)
    assert float(mid["measured"]) == pytest.approx(12.008)
    assert float(mid["error"]) == pytest.approx(0.008)
    assert float(mid["error_pct_span"]) == pytest.approx(0.05)
    assert float(mid["mpe"]) == pytest.approx(0.08)
    assert mid["decision"] == "pass" and mid["output_unit"] == "mA"
    tests = _rows(out / "data" / "tests.csv")
    assert len(tests) == 1
    t = tests[0]
    assert (t["verdict"], t["as_found"], t["as_left"], t["source_file"]) == ("pass", "pass", "", "results/2026/a.yaml")
    import hashlib

    assert t["sha256"] == hashlib.sha256((ev / "results/2026/a.yaml").read_bytes()).hexdigest()
    assert (out / "handbook" / "index.html").is_file()
    assert "Handbook:" in capsys.readouterr().out


def test_run_exits_1_when_a_test_fails(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.5))})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 1
    assert _rows(tmp_path / "out" / "data" / "tests.csv")[0]["verdict"] == "fail"


def test_run_exits_2_on_an_invalid_file_and_still_publishes_the_rest(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"good.yaml": result_yaml(as_found=good_points()),
                                          "bad.yaml": result_yaml(asset="NOPE", as_found=good_points())})
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 2
    verdicts = {r["source_file"]: (r["verdict"], r["errors"]) for r in _rows(out / "data" / "tests.csv")}
    assert verdicts["results/good.yaml"][0] == "pass"
    assert verdicts["results/bad.yaml"][0] == "invalid" and "NOPE" in verdicts["results/bad.yaml"][1]
    assert {r["source_file"] for r in _rows(out / "data" / "points.csv")} == {"results/good.yaml"}
    assert list((out / "handbook" / "tests").glob("*.html"))


def test_usage_and_configuration_errors_exit_3(tmp_path, capsys):
    assert main(["run", str(tmp_path / "missing")]) == 3
    with pytest.raises(SystemExit) as exc:
        main(["run"])
    assert exc.value.code == 3
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                        config='[decision]\nrule = "coin-toss"\n')
    assert main(["run", str(ev), "--out", str(tmp_path / "o")]) == 3
    assert "coin-toss" in capsys.readouterr().err


def test_out_inside_the_evidence_folder_is_refused(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    assert main(["run", str(ev), "--out", str(ev / "build")]) == 3
    assert not (ev / "build").exists()


def test_check_prints_path_line_severity_and_exit_code(tmp_path, capsys):
    pts = good_points()
    pts[3] = ("75 %", "16.3 mA")
    ev = write_evidence(tmp_path / "ev", {"ok.yaml": result_yaml(as_found=good_points()),
                                          "fails.yaml": result_yaml(as_found=pts, date="2026-04-15"),
                                          "bad.yaml": result_yaml(as_found=good_points(), method="telepathy",
                                                                  date="2026-04-16")})
    # a failure is evidence: without --strict it is printed (as a warning) and does not block
    code = main(["check", str(ev / "results" / "fails.yaml"), str(ev / "results" / "ok.yaml")])
    out = capsys.readouterr().out
    assert code == 0
    assert "results/fails.yaml:" in out and ": warning: fail:" in out and "--strict blocks" in out
    code = main(["check", "--strict", str(ev / "results" / "fails.yaml"), str(ev / "results" / "ok.yaml")])
    out = capsys.readouterr().out.splitlines()
    assert code == 1
    lines = [ln for ln in out if ln.startswith("results/") and ": error:" in ln]  # warnings may add lines
    assert len(lines) == 1
    path, line, severity, message = lines[0].split(":", 3)
    assert (path, severity.strip()) == ("results/fails.yaml", "error")
    text = (ev / "results" / "fails.yaml").read_text().splitlines()
    assert text[int(line) - 1].strip() == "- input: 75 %"  # the line where the point starts
    assert "fail" in message and "as_found #4" in message
    assert not (tmp_path / "build").exists()

    code = main(["check", str(ev / "results")])
    out = capsys.readouterr().out
    assert code == 2
    assert "results/bad.yaml:" in out and "telepathy" in out


def test_tables_that_cannot_be_written_leave_the_previous_ones_and_say_why_once(tmp_path, capfd, monkeypatch):
    """``run`` writes data/ in a forked process while the handbook is built: when that fails, the error is
    shown once (from the process that met it), the exit code is 4, and the previous data/ and handbook
    both stay as they were (the new handbook waits for the tables before it replaces the old)."""
    from loopledger import output

    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out), "--no-cache"]) == 0
    before = {p.name: p.read_bytes() for p in (out / "data").iterdir()}
    pages = {p.relative_to(out): p.read_bytes() for p in (out / "handbook").rglob("*") if p.is_file()}
    capfd.readouterr()

    def full_disk(tables, workers=None):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(output, "write_csvs", full_disk)
    (ev / "results" / "a.yaml").write_text(result_yaml(as_found=good_points(), remarks="retested"), encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out), "--no-cache"]) == 4
    err = capfd.readouterr().err
    assert err.count("No space left on device") == 1, err
    assert "cannot write or read a file: [Errno 28] No space left on device" in err
    assert "Traceback" not in err and "a bug" not in err, "a full disk is not reported as a bug"
    assert "outputs already in place were not replaced" in err

    # without the handbook the tables are written in the run's own process: the same message
    assert main(["run", str(ev), "--out", str(out), "--no-cache", "--no-handbook"]) == 4
    err = capfd.readouterr().err
    assert err.count("cannot write or read a file: [Errno 28] No space left on device") == 1, err
    assert "Traceback" not in err
    assert {p.name: p.read_bytes() for p in (out / "data").iterdir()} == before
    assert {p.name: p.read_bytes() for p in (out / "data").iterdir()} == before
    assert {p.relative_to(out): p.read_bytes() for p in (out / "handbook").rglob("*") if p.is_file()} == pages
    assert sorted(p.name for p in out.iterdir() if p.name.startswith(".")) in (
        [".loopledger.lock"], [".loopledger-cache", ".loopledger.lock"]), "a staging folder was left behind"


def test_staging_folders_a_killed_run_left_are_cleared_by_the_next(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    out = tmp_path / "out"
    for name in (".data.new-k1l3d", ".handbook.new-k1l3d"):  # as a run killed mid-write leaves them
        (out / name / "tests").mkdir(parents=True)
        (out / name / "tests" / "half.html").write_text("<p>half a page", encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out), "--no-cache"]) == 0
    assert sorted(p.name for p in out.iterdir()) == [".loopledger.lock", "data", "handbook"]


def test_a_command_naming_an_asset_left_out_for_errors_says_so(tmp_path, capsys):
    """`loop` and `sheet` look an asset up by name: one whose assets.csv row has errors is named with its line,
    not reported as missing from the file it is in."""
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points())},
                        assets=[CT_ASSET, {**CT_ASSET, "asset": "T-BAD", "interval_months": "0.5"}])
    for command in (["loop", "T-BAD"], ["sheet", "T-BAD"]):
        assert main([*command, "--evidence", str(ev)]) == 3
        said = capsys.readouterr().err
        assert f"asset 'T-BAD' has errors in {ev / 'assets.csv'} (line 3): put them right first" in said, said


@pytest.mark.parametrize(("toml", "said"), [
    # a misspelt table once left the guard-banded rule silently unused: the run judged by the simple rule
    ('[decison]\nrule = "guarded"\n', "no plugin reads a setting 'decison'"),
    ('rule = "guarded"\n', "no plugin reads a setting 'rule'"),
    ("[limits]\nmax_point = 5\n", "[limits] has no setting 'max_point' (known: max_file_bytes, max_points, "
                                  "max_register_bytes, max_register_rows, max_remarks_bytes, max_repeats, "
                                  "max_unpacked_bytes)"),
    # issue 22 added the [decision] conditional setting, so it is listed among the known keys
    ("[decision]\nrisk_tagret = 0.02\n",
     "[decision] has no setting 'risk_tagret' (known: conditional, risk_target, rule)"),
])
def test_a_setting_nothing_reads_is_a_configuration_error(tmp_path, capsys, toml, said):
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=good_points())},
                        config="as_of = 2026-11-30\n" + toml)
    assert main(["check", str(ev)]) == 3
    assert said in capsys.readouterr().err


def test_an_installed_plugin_that_does_not_import_is_named(monkeypatch, capsys):
    """A site plugin with a broken import stopped every command with 'internal error (a bug ...)'; the
    message names the entry point, and the exit code is a configuration error's (3)."""
    import importlib.metadata

    import pluggy

    def broken_load(self, group, name=None):  # what pluggy meets when the plugin's module raises
        raise ModuleNotFoundError("No module named 'site_extras'")

    fake = importlib.metadata.EntryPoint(name="site_plugin", value="site_plugin_that_is_not_there", group="loopledger")
    monkeypatch.setattr(pluggy.PluginManager, "load_setuptools_entrypoints", broken_load)
    real = importlib.metadata.entry_points
    monkeypatch.setattr(importlib.metadata, "entry_points",
                        lambda **kw: [fake] if kw.get("group") == "loopledger" else real(**kw))
    assert main(["plugins"]) == 3
    err = capsys.readouterr().err
    assert "the installed plugin 'site_plugin = site_plugin_that_is_not_there' could not be loaded" in err
    assert "internal error" not in err
