"""Strict formats (issue 20): a key, field or column that nothing reads is an error at its line with the
nearest known name; swapped ranges; dates that disagree with the file's name or folder; every as-found
failure on record. The fixtures are invented plumbing; each check states the rule it holds."""

from __future__ import annotations

import copy

import yaml
from loopledger.cli import main
from loopledger.spelling import nearest

from tests.evidence import CT_ASSET, INSTRUMENTS, good_points, result_yaml, write_evidence


def _errors(ctx, file):
    return [(f.line, f.field, f.message) for f in ctx.findings if f.file == file and f.severity == "error"]


def test_nearest_name():
    assert nearest("due_date", ["due", "calibrated", "kind"]) == "due"  # a word added to the name
    assert nearest("interval_month", ["interval_months", "accuracy"]) == "interval_months"
    assert nearest("Technician", ["technician", "date"]) == "technician"  # case only
    assert nearest("zzz", ["due", "kind"]) is None


def test_a_misspelt_header_key_in_a_yaml_result_is_an_error_at_its_line(tmp_path, run_folder):
    text = result_yaml(as_found=good_points()).replace("technician:", "technican:")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": text}))
    said = _errors(ctx, "results/a.yaml")
    (line, field, message), = [e for e in said if e[1] == "technican"]
    assert (line, field) == (3, "technican") and "did you mean 'technician'?" in message
    # the rest of the file is still checked in the same pass: the technician it names is missing
    assert any(e[1] == "technician" for e in said)
    assert ctx.tests.at[0, "verdict"] == "invalid"


def test_a_misspelt_point_field_is_an_error_at_its_line(tmp_path, run_folder):
    doc = yaml.safe_load(result_yaml(as_found=good_points()))
    doc["as_found"][1]["readng"] = doc["as_found"][1].pop("reading")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": yaml.safe_dump(doc, sort_keys=False)}))
    said = [e for e in _errors(ctx, "results/a.yaml") if e[1] == "readng"]
    assert len(said) == 1 and "did you mean 'reading'?" in said[0][2]
    lines = (tmp_path / "ev" / "results" / "a.yaml").read_text(encoding="utf-8").splitlines()
    assert "readng" in lines[said[0][0] - 1]  # the line named is the one holding the key


def test_an_unknown_column_of_a_csv_result_is_an_error(tmp_path, run_folder):
    text = ("asset,date,technician,connection,method,injection,source,meter,phase,input,readng\n"
            "T-CT1,2026-04-14,T. Tester,standalone,direct,secondary,SRC-1,DMM-1,as_found,50 %,12.000 mA\n")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.csv": text}))
    assert (1, "readng") in [(line, field) for line, field, _ in _errors(ctx, "results/a.csv")]
    assert any("did you mean 'reading'?" in m for _, _, m in _errors(ctx, "results/a.csv"))


def test_a_misspelt_key_of_instruments_yaml_is_an_error_at_its_line(tmp_path, run_folder):
    inst = copy.deepcopy(INSTRUMENTS)
    inst["SRC-1"]["due_date"] = inst["SRC-1"].pop("due")
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())}, instruments=inst)
    ctx = run_folder(ev)
    lines = (ev / "instruments.yaml").read_text(encoding="utf-8").splitlines()
    said = _errors(ctx, "instruments.yaml")
    assert len(said) == 1
    line, field, message = said[0]
    assert field == "due_date" and "did you mean 'due'?" in message and lines[line - 1].strip().startswith("due_date")
    # the instrument is left out, so its test cannot pass as if its calibration were in order
    assert ctx.tests.at[0, "verdict"] == "invalid"


def test_a_misspelt_key_inside_a_meter_range_or_a_calibration(tmp_path, run_folder):
    inst = copy.deepcopy(INSTRUMENTS)
    inst["DMM-1"]["ranges"][0]["resoluton"] = inst["DMM-1"]["ranges"][0].pop("resolution")
    del inst["SRC-1"]["calibrated"], inst["SRC-1"]["due"]
    inst["SRC-1"]["calibrations"] = [{"date": "2026-01-01", "due": "2027-01-01", "certifcate": "X-1"}]
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                                    instruments=inst))
    fields = {field: message for _, field, message in _errors(ctx, "instruments.yaml")}
    assert "did you mean 'resolution'?" in fields["ranges.resoluton"]
    assert "did you mean 'certificate'?" in fields["calibrations.certifcate"]


def test_an_unknown_column_of_assets_csv_is_an_error_and_the_rows_are_still_read(tmp_path, run_folder):
    row = dict(CT_ASSET)
    row["interval_month"] = row.pop("interval_months")
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                                    assets=[row]))
    (line, field, message), = _errors(ctx, "assets.csv")
    assert (line, field) == (1, "interval_month") and "did you mean 'interval_months'?" in message
    assert ctx.tests.at[0, "verdict"] == "pass"  # the row itself is good: its tests are judged


def test_a_column_a_signal_type_declares_is_known(tmp_path, run_folder):
    row = {**CT_ASSET, "tc_type": ""}  # declared by the thermocouple transmitter, blank for this asset
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                                    assets=[row]))
    assert _errors(ctx, "assets.csv") == []


def test_swapped_input_range_is_a_registry_error_at_its_line(tmp_path, run_folder):
    row = {**CT_ASSET, "input_min": 1, "input_max": 0}
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                                    assets=[row]))
    (line, field, message), = _errors(ctx, "assets.csv")
    assert (line, field) == (2, "input_max") and "input_max must be above input_min" in message
    # the result file says why it is not judged, rather than "readings fall as the input rises"
    assert any("line 2" in m for _, _, m in _errors(ctx, "results/a.yaml"))


def test_a_date_that_disagrees_with_the_file_name_and_folder_is_a_warning(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {
        "2025/T-CT1_2025-03-18.yaml": result_yaml(date="2026-03-18", as_found=good_points()),
        "2026/T-CT1_2026-04-14.yaml": result_yaml(date="2026-04-14", as_found=good_points())})
    ctx = run_folder(ev)
    said = [f.message for f in ctx.findings if f.code == "date-mismatch"]
    assert len(said) == 2
    assert all(f.file == "results/2025/T-CT1_2025-03-18.yaml" for f in ctx.findings if f.code == "date-mismatch")
    assert any("2026-03-18" in m and "2025-03-18" in m for m in said)
    assert any("2026-03-18" in m and "2025/" in m for m in said)


def _failures_evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        # as found +0.12 mA at every point: beyond ±0.08 mA (class 0.5 of 16 mA); adjusted, as left good
        "2024/adjusted.yaml": result_yaml(date="2024-04-14", as_found=good_points(0.12), as_left=good_points()),
        # as found +0.10 mA, no as-left phase: put right by the next passing test
        "2025/left.yaml": result_yaml(date="2025-04-14", as_found=good_points(0.10)),
        "2026/good.yaml": result_yaml(date="2026-04-14", as_found=good_points(0.01))})


def test_the_failures_page_lists_every_as_found_failure(tmp_path):
    ev = _failures_evidence(tmp_path)
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 1  # the test of 2025 failed
    page = (tmp_path / "out" / "handbook" / "failures.html").read_text(encoding="utf-8")
    events = page[page.index("Every as-found failure"):page.index("Every failed test")]
    assert "2024-04-14" in events and "2025-04-14" in events and "2026-04-14</a></th>" not in events
    assert ">adjusted<" in events and ">not adjusted<" in events
    # the worst point of the adjusted test: +0.12 mA against 0.08 mA is 150 % of the limit
    assert "error +0.12 mA, 150 % of the limit" in events
    # the failure with no as-left phase was put right by the test of 2026-04-14
    assert "<td>2026-04-14</td>" in events


def test_check_lists_the_as_found_failures(tmp_path, capsys):
    ev = _failures_evidence(tmp_path)
    main(["check", str(ev / "results"), "--evidence", str(ev)])
    out = capsys.readouterr().out
    assert "as-found failures on record: 2" in out
    # every point is 0.12 mA off, so which is "worst" is a tie; the event's words are not
    assert "error +0.12 mA, 150 % of the limit; adjusted; as left pass  (results/2024/adjusted.yaml)" in out
    assert "not adjusted; put right 2026-04-14" in out


def test_a_column_a_plugin_declares_with_ll_registry_keys_is_known_and_listed(tmp_path, run_folder, capsys):
    # counts_min/counts_max are declared by the counts reading method through ll_registry_keys
    row = {**CT_ASSET, "counts_min": "", "counts_max": ""}
    ctx = run_folder(write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())},
                                    assets=[row]))
    assert _errors(ctx, "assets.csv") == []
    assert main(["plugins"]) == 0
    assert "assets.csv column counts_min:" in capsys.readouterr().out
