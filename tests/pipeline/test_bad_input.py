"""Bad input: one clear message naming file, line/point and field; the good files are still judged."""

from __future__ import annotations

from typing import Any

import pytest
from loopledger.cli import main

from tests.evidence import good_points, result_yaml, write_evidence

GOOD = result_yaml(as_found=good_points(0.01), date="2026-03-01")


def _run(tmp_path, bad_name: str, bad_text: str | bytes, run_folder) -> Any:
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    path = ev / "results" / bad_name
    if isinstance(bad_text, bytes):
        path.write_bytes(bad_text)
    else:
        path.write_text(bad_text, encoding="utf-8")
    ctx = run_folder(ev)
    good = ctx.tests.set_index("source_file").loc["results/good.yaml"]
    assert good["verdict"] == "pass", "the good file must still be judged"
    assert (ctx.points["source_file"] == "results/good.yaml").sum() == 5
    bad = ctx.tests.set_index("source_file").loc[f"results/{bad_name}"]
    assert bad["verdict"] == "invalid", "the bad file stays listed, as invalid"
    errs = [f for f in ctx.findings if f.severity == "error" and f.file == f"results/{bad_name}"]
    assert errs, ctx.findings
    return errs


def _one(errs, field: str):
    hits = [f for f in errs if f.field == field]
    assert hits, [f.format() for f in errs]
    return hits[0]


def test_missing_header_field(tmp_path, run_folder):
    text = result_yaml(as_found=good_points()).replace("technician: T. Tester\n", "")
    f = _one(_run(tmp_path, "bad.yaml", text, run_folder), "technician")
    assert "missing" in f.message


def test_wrong_value_of_a_header_field(tmp_path, run_folder):
    text = result_yaml(as_found=good_points(), connection="sideways")
    f = _one(_run(tmp_path, "bad.yaml", text, run_folder), "connection")
    assert "sideways" in f.message and "standalone" in f.message and f.line == 4


def test_unknown_asset(tmp_path, run_folder):
    f = _one(_run(tmp_path, "bad.yaml", result_yaml(asset="NOPE-1", as_found=good_points()), run_folder), "asset")
    assert "NOPE-1" in f.message and "assets.csv" in f.message and f.line == 1


def test_unknown_instrument(tmp_path, run_folder):
    text = result_yaml(as_found=good_points()).replace("meter: DMM-1", "meter: DMM-404")
    f = _one(_run(tmp_path, "bad.yaml", text, run_folder), "instruments.meter")
    assert "DMM-404" in f.message and f.line > 0


def test_instrument_of_the_wrong_kind(tmp_path, run_folder):
    text = result_yaml(as_found=good_points()).replace("meter: DMM-1", "meter: SH-100")
    f = _one(_run(tmp_path, "bad.yaml", text, run_folder), "instruments.meter")
    assert "is a shunt" in f.message


def test_amps_where_volts_were_expected(tmp_path, run_folder):
    pts = good_points(shunt=True)
    pts[2] = ("50 %", "12 mA")
    f = _one(_run(tmp_path, "bad.yaml", result_yaml(method="shunt", as_found=pts), run_folder), "reading")
    assert f.point == "as_found #3" and "voltage" in f.message and f.line > 0


def test_non_number_reading(tmp_path, run_folder):
    pts = good_points()
    pts[1] = ("25 %", "about eight mA")
    f = _one(_run(tmp_path, "bad.yaml", result_yaml(as_found=pts), run_folder), "reading")
    assert f.point == "as_found #2" and "not a number" in f.message


def test_reading_without_unit(tmp_path, run_folder):
    text = result_yaml(as_found=good_points()).replace("reading: 8.0000 mA", "reading: 8.0")
    f = _one(_run(tmp_path, "bad.yaml", text, run_folder), "reading")
    assert "has no unit" in f.message


def test_decimal_comma_is_not_read_as_thousands(tmp_path, run_folder):
    pts = good_points(shunt=True)
    pts[0] = ("0 %", "0,4011 V")
    f = _one(_run(tmp_path, "bad.yaml", result_yaml(method="shunt", as_found=pts), run_folder), "reading")
    assert "decimal comma" in f.message


def test_unknown_unit(tmp_path, run_folder):
    pts = good_points()
    pts[0] = ("0 %", "4 mQ")
    f = _one(_run(tmp_path, "bad.yaml", result_yaml(as_found=pts), run_folder), "reading")
    assert "not a unit" in f.message


def test_empty_file(tmp_path, run_folder):
    errs = _run(tmp_path, "empty.yaml", "", run_folder)
    assert "empty" in errs[0].message


def test_unreadable_yaml_names_the_line(tmp_path, run_folder):
    text = "asset: T-CT1\ndate: 2026-01-01\nas_found:\n  - {input: 0 %, reading: 4 mA\n"
    errs = _run(tmp_path, "broken.yaml", text, run_folder)
    assert "YAML cannot be read" in errs[0].message and errs[0].line >= 4


def test_impossible_date(tmp_path, run_folder):
    errs = _run(tmp_path, "bad.yaml", result_yaml(as_found=good_points(), date="2026-02-30"), run_folder)
    assert any("date" in f.field or "date" in f.message for f in errs)


def test_binary_file(tmp_path, run_folder):
    errs = _run(tmp_path, "junk.yaml", bytes(range(256)) * 4, run_folder)
    assert "binary" in errs[0].message


def test_missing_column_in_a_csv(tmp_path, run_folder):
    text = "asset,date,technician,connection,method,input,reading\nT-CT1,2026-01-01,A,standalone,direct,0 %,4 mA\n"
    f = _one(_run(tmp_path, "bad.csv", text, run_folder), "phase")
    assert "missing column" in f.message


def test_csv_row_error_names_its_line(tmp_path, run_folder):
    text = ("asset,date,technician,connection,method,source,meter,phase,input,reading\n"
            "T-CT1,2026-01-01,A,standalone,direct,SRC-1,DMM-1,as_found,0 %,4.001 mA\n"
            "T-CT1,2026-01-01,A,standalone,direct,SRC-1,DMM-1,as_found,50 %,twelve\n")
    f = _one(_run(tmp_path, "bad.csv", text, run_folder), "reading")
    assert f.line == 3 and f.point == "as_found #2"


@pytest.mark.parametrize("name", ["bad.yaml"])
def test_inputs_are_never_modified(tmp_path, run_folder, name):
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD, name: "asset: [unclosed\n"})
    before = {p: p.read_bytes() for p in ev.rglob("*") if p.is_file()}
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    after = {p: p.read_bytes() for p in ev.rglob("*") if p.is_file()}
    assert before == after
    assert (tmp_path / "out" / "handbook" / "index.html").is_file()


def test_unparseable_assets_csv_is_reported_not_a_crash(tmp_path):
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    (ev / "assets.csv").write_text('asset,description\n"T-CT1,unclosed quote\n', encoding="utf-8")
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    import csv

    rows = list(csv.DictReader(open(tmp_path / "out" / "data" / "tests.csv", encoding="utf-8")))
    assert rows[0]["verdict"] == "invalid" and "T-CT1" in rows[0]["errors"]


def test_optional_columns_may_be_left_out_of_assets_csv(tmp_path, run_folder):
    """README's assets.csv format: only the required columns must be there; a column left out reads as one
    left empty (this once failed as "'<NA>' is not a number" for every numeric column left out)."""
    from loopledger.schemas.assets import OPTIONAL, REQUIRED

    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    keep = [*REQUIRED, "ct_ratio"]  # the current transducer's primary injection needs its ratio
    lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    rows = [dict(zip(header, line.split(","), strict=True)) for line in lines[1:]]
    (ev / "assets.csv").write_text("\n".join([",".join(keep), *(",".join(r[c] for c in keep) for r in rows)]) + "\n",
                                   encoding="utf-8")
    ctx = run_folder(ev)
    assert [f for f in ctx.findings if f.severity == "error"] == []
    assert ctx.tests["verdict"].tolist() == ["pass"]
    assert set(OPTIONAL) <= set(ctx.assets.columns)
    assert ctx.assets[[c for c in OPTIONAL if c not in ("ct_ratio", "characteristic")]].isna().all().all()


def test_a_bad_number_in_assets_csv_is_reported_once(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    text = (ev / "assets.csv").read_text(encoding="utf-8")
    lines = text.splitlines()
    cells = lines[1].split(",")
    cells[lines[0].split(",").index("input_max")] = "one"
    (ev / "assets.csv").write_text("\n".join([lines[0], ",".join(cells)]) + "\n", encoding="utf-8")
    ctx = run_folder(ev)
    said = [f for f in ctx.findings if f.file == "assets.csv"]
    assert [(f.line, f.field, f.message) for f in said] == [(2, "input_max", "input_max 'one' is not a number")]


def test_decimal_comma_split_by_yaml_flow_syntax_is_named(tmp_path, run_folder):
    # In `{input: 50 %, reading: 12,010 mA}` YAML reads `reading: 12` and a field `010 mA`.
    text = result_yaml(as_found=good_points()).replace("reading: 12.0000 mA", "reading: 12,010 mA")
    text = text.replace("- input: 50 %\n  reading: 12,010 mA", "- {input: 50 %, reading: 12,010 mA}")
    errs = _run(tmp_path, "bad.yaml", text, run_folder)
    assert any("split at a comma" in f.message and f.point == "as_found #3" for f in errs), errs


def test_parsing_over_several_processes_gives_what_one_process_gives(tmp_path, pm, monkeypatch):
    """Good, broken, binary and oversized files read in forked workers give the same tables and findings."""
    from loopledger import load, runner

    files = {f"t{i}.yaml": result_yaml(as_found=good_points(0.01 * i), date=f"2026-03-0{i + 1}") for i in range(4)}
    files["broken.yaml"] = "asset: T-CT1\ndate: [2026-03-01\n"
    ev = write_evidence(tmp_path / "ev", files, config="[limits]\nmax_file_bytes = 4000\n")
    (ev / "results" / "binary.csv").write_bytes(b"\x00\xff\xfe" * 50)
    (ev / "results" / "huge.yaml").write_text("remarks: " + "x" * 5000 + "\n", encoding="utf-8")

    def judged() -> tuple[Any, Any, list[str]]:
        ctx = runner.run(runner.RunOptions(ev), pm)
        return ctx.tests, ctx.points, sorted(f.format() for f in ctx.findings)

    serial = judged()
    monkeypatch.setattr(load, "PARALLEL_MIN", 1)
    ahead: list[dict[str, Any]] = []
    real = load.parse_ahead
    monkeypatch.setattr(load, "parse_ahead", lambda ctx, files, workers=2: ahead.append(real(ctx, files, workers))
                        or ahead[-1])
    parallel = judged()
    assert len(ahead[0]) == 7, "the files were not parsed in worker processes"
    assert parallel[2] == serial[2] and any("huge.yaml" in f and "limit" in f for f in serial[2])
    assert parallel[0].equals(serial[0]) and parallel[1].equals(serial[1])


def _edit_asset(ev, **cells: str) -> None:
    """Set cells of the first asset row of ``ev``/assets.csv."""
    lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
    header = lines[0].split(",")
    row = lines[1].split(",")
    for name, value in cells.items():
        row[header.index(name)] = value
    (ev / "assets.csv").write_text("\n".join([lines[0], ",".join(row), *lines[2:]]) + "\n", encoding="utf-8")


@pytest.mark.parametrize(("cells", "field", "said"), [
    # a negative or unreadable accuracy once left the limit empty, and every point failed against it
    ({"accuracy": "-0.5"}, "accuracy", "must be a non-negative number"),
    # % of range and digits are meter terms; read as zero for an asset they failed a good device
    ({"accuracy": "0.1 %fs"}, "accuracy", "meter terms"),
    ({"accuracy": "0.05 V"}, "accuracy", "is not in mA"),
    # an accuracy class of 50 (for 0.50) allows ±8 mA on 4-20 mA: every reading would pass
    ({"accuracy": "50"}, "accuracy", "it allows ±8 mA, half the output span or more"),
    # an interval of billions of months once crashed the due-date arithmetic
    ({"interval_months": "99999999999"}, "interval_months", "must be at most 240"),
    ({"interval_months": "1.5"}, "interval_months", "must be a whole number of months"),
    # units: each must be one pint knows; an output is read as a current or a voltage
    ({"input_unit": "amperez"}, "input_unit", "'amperez' is not a unit loopledger knows"),
    ({"output_unit": "mAh"}, "output_unit", "'mAh' is not a current or a voltage"),
    # a ratio of 0/1 once made every expected value infinite and crashed the linearity fit (exit code 4)
    ({"ct_ratio": "0/1"}, "ct_ratio", "'0/1' must be a ratio of two numbers above zero, such as 2000/1"),
    ({"ct_ratio": "2000/0"}, "ct_ratio", "must be a ratio of two numbers above zero"),
])
def test_an_asset_row_that_gives_no_sound_limit_or_interval_is_refused(tmp_path, run_folder, cells, field, said):
    """The row is reported at its line and field; the asset's result file is invalid (not failed, not
    crashed) and says which row of assets.csv to put right."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    _edit_asset(ev, **cells)
    ctx = run_folder(ev)
    reg = [f for f in ctx.findings if f.file == "assets.csv"]
    assert [(f.line, f.field) for f in reg] == [(2, field)] and said in reg[0].message, [f.format() for f in reg]
    assert ctx.tests["verdict"].tolist() == ["invalid"]
    mine = [f for f in ctx.findings if f.file == "results/good.yaml" and f.severity == "error"]
    assert [f.message for f in mine] == [
        "asset 'T-CT1' has errors in its row of assets.csv (line 2): this file is judged once that row is put right"]


def test_a_check_across_a_row_is_said_once_with_the_values_it_compares(tmp_path, run_folder):
    """pandera lists every cell of a row that fails a check across columns; it is reported once."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    _edit_asset(ev, input_min="5", input_max="5")
    ctx = run_folder(ev)
    reg = [f for f in ctx.findings if f.file == "assets.csv"]
    assert [(f.line, f.field, f.message) for f in reg] == [
        (2, "input_max", "input_max must be above input_min (are they swapped?) (input_max 5, input_min 5)")]


def _instruments_text(ev, old: str, new: str) -> None:
    text = (ev / "instruments.yaml").read_text(encoding="utf-8")
    assert old in text, text
    (ev / "instruments.yaml").write_text(text.replace(old, new, 1), encoding="utf-8")


@pytest.mark.parametrize(("method", "old", "new", "ident", "field", "said"), [
    # an impossible date once made instruments.yaml unreadable as a whole, and every result file invalid
    ("direct", "due: '2027-01-01'", "due: 2027-13-45", "SRC-1", "due", "'2027-13-45' is not a date (YYYY-MM-DD)"),
    # due before calibrated is a typing error; taken as written, every later test was "past due"
    ("direct", "due: '2027-01-01'", "due: 2025-01-01", "SRC-1", "due",
     "due must not be before calibrated (due 2025-01-01, calibrated 2026-01-01)"),
    # a negative shunt once turned every reading around, taken for reversed leads and failed
    ("shunt", "resistance: 100 ohm", "resistance: -100 ohm", "SH-100", "resistance", "must be a quantity above zero"),
    ("direct", "resolution: 0.001 mA", "resolution: 0 mA", "DMM-1", "resolution", "must be a quantity above zero"),
])
def test_an_instrument_that_cannot_be_measured_against_is_refused(tmp_path, run_folder, method, old, new, ident,
                                                                 field, said):
    """That instrument alone is reported, at the line of its id; the result file that used it is invalid
    and names it (rather than failing, or saying the instrument is not there)."""
    ev = write_evidence(tmp_path / "ev", {"used.yaml": result_yaml(method=method, as_found=good_points(
        0.01, shunt=method == "shunt"), instruments={"source": "SRC-1", "meter": "DMM-1",
                                                     **({"shunt": "SH-100"} if method == "shunt" else {})})})
    _instruments_text(ev, old, new)
    lines = (ev / "instruments.yaml").read_text(encoding="utf-8").splitlines()
    ctx = run_folder(ev)
    reg = [f for f in ctx.findings if f.file == "instruments.yaml"]
    assert [(f.line, f.field, f.point) for f in reg] == [(lines.index(f"{ident}:") + 1, field, f"instrument {ident}")]
    assert said in reg[0].message, reg[0].format()
    assert ctx.tests["verdict"].tolist() == ["invalid"]
    mine = [f.message for f in ctx.findings if f.file == "results/used.yaml" and f.severity == "error"]
    assert any(m.startswith(f"instrument '{ident}' has errors in instruments.yaml (line ") for m in mine), mine


def test_a_word_where_a_number_belongs_does_not_stop_the_other_files_being_checked(tmp_path, run_folder):
    """'warm' for ambient_c cannot be coerced, so pandera's range check on that column fails as a whole;
    that once dropped every file's header from the check, and a file naming an unknown asset went through
    unchecked. Each file must get its own finding."""
    ev = write_evidence(tmp_path / "ev", {
        "good.yaml": GOOD,
        "warm.yaml": result_yaml(as_found=good_points(), date="2026-03-02", ambient_c="warm"),
        "ghost.yaml": result_yaml(asset="NOPE-1", as_found=good_points(), date="2026-03-03")})
    ctx = run_folder(ev)
    verdicts = ctx.tests.set_index("source_file")["verdict"].to_dict()
    assert verdicts == {"results/good.yaml": "pass", "results/warm.yaml": "invalid", "results/ghost.yaml": "invalid"}
    said = {(f.file, f.field, f.message) for f in ctx.findings if f.severity == "error"}
    assert said == {("results/warm.yaml", "ambient_c", "ambient_c 'warm' is not a number"),
                    ("results/ghost.yaml", "asset", "asset 'NOPE-1' is not in assets.csv")}


@pytest.mark.parametrize(("header", "field", "said"), [
    ({"date": "2026-03-04 after lunch"}, "date", "a real date written YYYY-MM-DD"),
    ({"date": "0001-01-01"}, "date", "before 1950"),
    ({"ambient_c": 1e6}, "ambient_c", "must be at most 90"),
])
def test_header_values_no_test_could_have(tmp_path, run_folder, header, field, said):
    text = result_yaml(as_found=good_points(), **{"date": "2026-03-04", **header})
    errs = _run(tmp_path, "bad.yaml", text, run_folder)
    assert said in _one(errs, field).message


def test_a_file_without_readings_is_invalid_not_left_without_a_verdict(tmp_path, run_folder):
    errs = _run(tmp_path, "empty.yaml", result_yaml(as_found=[], date="2026-03-04"), run_folder)
    assert _one(errs, "as_found").message == "no readings: as_found and as_left are both empty"


def test_an_input_far_outside_the_range_is_flagged(tmp_path, run_folder):
    # -0.6 A on the fixture's 0-1 A input is -60 % of the range: a typing error more often than a test point
    pts = [("-0.6 A", "4.00 mA"), *good_points()[1:]]
    ev = write_evidence(tmp_path / "ev", {"t.yaml": result_yaml(as_found=pts)})
    ctx = run_folder(ev)
    flagged = [f for f in ctx.findings if f.field == "input" and f.severity == "warning"]
    assert [(f.point, f.message.split(":")[0]) for f in flagged] == [
        ("as_found #1", "input at -60 % of the asset's input range")]


def test_an_instrument_id_given_twice_is_an_error_at_its_line(tmp_path, run_folder):
    """Two entries under one id: the YAML loader would keep the second silently, and which of the two was
    the instrument used could not be told."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    text = (ev / "instruments.yaml").read_text(encoding="utf-8")
    (ev / "instruments.yaml").write_text(text + "DMM-1:\n  kind: meter\n", encoding="utf-8")
    line = len(text.splitlines()) + 1
    ctx = run_folder(ev)
    reg = [f for f in ctx.findings if f.file == "instruments.yaml"]
    assert [(f.line, f.message) for f in reg] == [
        (line, f"cannot read: 'DMM-1' is given twice in one mapping (lines {text.splitlines().index('DMM-1:') + 1} "
               f"and {line}): keep the one meant")]
    assert ctx.tests["verdict"].tolist() == ["invalid"]


def test_a_test_dated_after_as_of_is_judged_and_said(tmp_path, run_folder):
    """A status 'as of' a date that shows a later test is taken for a mistake in as_of (a fixed as_of left in
    loopledger.toml while new tests come in): the test is judged, with a warning saying so."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD}, config="as_of = 2026-02-01\n")
    ctx = run_folder(ev)
    assert ctx.tests["verdict"].tolist() == ["pass"]
    said = [f for f in ctx.findings if f.field == "date"]
    assert [(f.severity, f.file, f.message.split(":")[0]) for f in said] == [
        ("warning", "results/good.yaml", "date 2026-03-01 is after this run's as_of date 2026-02-01")]


def test_a_date_with_a_time_of_day_or_single_digits_is_read_as_its_date(tmp_path, run_folder):
    """'2026-3-5T10:30' names a day as plainly as '2026-03-05': the test is judged on that day, and every
    table carries it as YYYY-MM-DD (a raw text once reached the history stage's date arithmetic and broke it,
    when a word in another file's ambient_c had stopped the header check)."""
    ev = write_evidence(tmp_path / "ev", {
        "good.yaml": GOOD,
        "timed.yaml": result_yaml(as_found=good_points(0.01), date="2026-3-5T10:30"),
        "warm.yaml": result_yaml(as_found=good_points(), date="2026-03-06", ambient_c="warm")})
    ctx = run_folder(ev)
    tests = ctx.tests.set_index("source_file")
    assert tests.at["results/timed.yaml", "date"] == "2026-03-05"
    assert tests.at["results/timed.yaml", "verdict"] == "pass"
    assert set(ctx.points.loc[ctx.points["source_file"] == "results/timed.yaml", "date"]) == {"2026-03-05"}


def test_check_of_a_lone_file_without_readings_still_checks_its_header(tmp_path, capsys):
    """With no point in the run the judging stages are skipped; the header check once was too, so a staged
    file with an unknown asset and no readings passed the pre-commit check with exit code 0."""
    ev = write_evidence(tmp_path / "ev", {"lone.yaml": result_yaml(asset="TYPO-1", as_found=[])})
    assert main(["check", "--evidence", str(ev), str(ev / "results" / "lone.yaml")]) == 2
    said = capsys.readouterr().out
    assert "results/lone.yaml:1: error: asset 'TYPO-1' is not in assets.csv" in said
    (ev / "results" / "lone.yaml").write_text(result_yaml(as_found=[]), encoding="utf-8")
    assert main(["check", "--evidence", str(ev), str(ev / "results" / "lone.yaml")]) == 2
    assert "results/lone.yaml: error: no readings: as_found and as_left are both empty" in capsys.readouterr().out


@pytest.mark.parametrize(("written", "hint"), [
    # a word processor's hyphen (U+2010) looks like the ASCII one and is not: the commonest copy-paste slip
    ("T\u2010CT1", "; did you mean 'T-CT1'? (it holds U+2010, not the plain ASCII character it resembles)"),
    ("t-ct1", "; did you mean 'T-CT1'?"),
    ("T-CT11", "; did you mean 'T-CT1'?"),
    ("PUMP-9", ""),
])
def test_an_unknown_asset_id_close_to_a_known_one_is_pointed_at(tmp_path, run_folder, written, hint):
    errs = _run(tmp_path, "bad.yaml", result_yaml(asset=written, as_found=good_points()), run_folder)
    assert _one(errs, "asset").message == f"asset '{written}' is not in assets.csv{hint}"


def test_an_assets_csv_without_a_required_column_names_the_column_and_no_row(tmp_path, run_folder):
    """A fault of the whole file is said once, naming the column (not pandera's model), and a result file
    is not sent looking for a faulty row (this once crashed the registry check, which read that column)."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    lines = (ev / "assets.csv").read_text(encoding="utf-8").splitlines()
    at = lines[0].split(",").index("input_unit")
    (ev / "assets.csv").write_text("\n".join(",".join(c for i, c in enumerate(line.split(",")) if i != at)
                                             for line in lines) + "\n", encoding="utf-8")
    ctx = run_folder(ev)
    assert [(f.line, f.field, f.message) for f in ctx.findings if f.file == "assets.csv"] == [
        (0, "input_unit", "column 'input_unit' is missing")]
    mine = [f.message for f in ctx.findings if f.file == "results/good.yaml"]
    assert mine == ["asset 'T-CT1' is in an assets.csv whose errors stop any row being read: this file is judged "
                    "once they are put right"]


def test_an_assets_csv_saved_with_semicolons_says_so(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    (ev / "assets.csv").write_text((ev / "assets.csv").read_text(encoding="utf-8").replace(",", ";"),
                                   encoding="utf-8")
    ctx = run_folder(ev)
    assert [(f.line, f.message) for f in ctx.findings if f.file == "assets.csv"] == [
        (1, "the columns are separated by ';', not commas: save it as comma-separated CSV with '.' as the decimal "
            "mark")]
    assert ctx.tests["verdict"].tolist() == ["invalid"]


def test_an_unreadable_instrument_specification_is_said_at_its_line(tmp_path, run_folder):
    """The instrument is kept (the simple rule needs no uncertainty) but instruments.yaml says, at the
    instrument's line, why the tests that used it have none."""
    ev = write_evidence(tmp_path / "ev", {"good.yaml": GOOD})
    _instruments_text(ev, "accuracy: 0.05 %rdg + 2 digits", "accuracy: 0.05 %rdg + two digits")
    lines = (ev / "instruments.yaml").read_text(encoding="utf-8").splitlines()
    ctx = run_folder(ev)
    reg = [f for f in ctx.findings if f.file == "instruments.yaml"]
    assert [(f.severity, f.line, f.field, f.point) for f in reg] == [
        ("warning", lines.index("DMM-1:") + 1, "ranges.accuracy", "instrument DMM-1")]
    assert "cannot read accuracy term 'two digits'" in reg[0].message
    assert ctx.tests["verdict"].tolist() == ["pass"]
