"""The hostile-input corpus, end to end through the CLI (``loopledger run``).

Every case puts one bad file (or a bad asset row) beside one good result file
and checks, for the run as a whole:

- a clear message naming the file, the row/point where there is one, the field, and what was expected;
- exit code 2 (a file was invalid);
- the good file still judged and published (tests.csv row, handbook page);
- no input file changed (a SHA-256 of every file under the evidence folder before and after);
- nothing written outside OUT.

The cases are plumbing fixtures (invented data), not reference values. The
expectations are the project's own rules (DEVELOPERS.md: "Evidence is never
lost or invented"), applied as common practice for evidence handling.
"""

from __future__ import annotations

import codecs
import csv
import hashlib
import os
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from loopledger.cli import main

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

GOOD = result_yaml(date="2026-04-14", as_found=good_points(0.01))
GOOD_NAME = "good/T-CT1_2026-04-14.yaml"

CSV_HEAD = "asset,date,technician,connection,method,injection,ambient_c,source,meter,phase,input,reading\n"
CSV_ROW = "T-CT1,2026-05-01,T. Tester,standalone,direct,secondary,23,SRC-1,DMM-1,as_found,{i},{r}\n"


def _csv(rows: list[tuple[str, str]]) -> str:
    return CSV_HEAD + "".join(CSV_ROW.format(i=i, r=r) for i, r in rows)


def _yaml_points(*points: str, date: str = "2026-05-01", extra: str = "") -> str:
    body = "".join(f"  - {p}\n" for p in points)
    return (f"asset: T-CT1\ndate: {date}\ntechnician: T. Tester\nconnection: standalone\nmethod: direct\n"
            f"injection: secondary\n{extra}instruments: {{source: SRC-1, meter: DMM-1}}\nas_found:\n{body}")


FIVE = ["{input: 0 %, reading: 4.01 mA}", "{input: 25 %, reading: 8.01 mA}", "{input: 50 %, reading: 12.01 mA}",
        "{input: 75 %, reading: 16.01 mA}", "{input: 100 %, reading: 20.01 mA}"]

ALIAS_BOMB = "a: &a [x, x, x, x, x, x, x, x, x]\n" + "".join(
    f"{chr(98 + i)}: &{chr(98 + i)} [*{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, "
    f"*{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}]\n" for i in range(8))


@dataclass
class Case:
    name: str
    rel: str  # path under results/
    data: bytes
    expect: list[str]  # substrings of one finding line, all required in that line
    accepted: bool = False  # the file is fine (exit 0 and judged)
    assets: list[dict[str, object]] = field(default_factory=list)


def _b(text: str) -> bytes:
    return text.encode("utf-8")


CASES = [
    Case("truncated-yaml", "bad/t.yaml", _b(GOOD[: GOOD.index("as_found") + 30]),
         ["bad/t.yaml:", "error", "YAML"]),
    Case("truncated-csv", "bad/t.csv", _b(CSV_HEAD + "T-CT1,2026-05-01,T. Tester,standalone\n"),
         ["bad/t.csv:", "error"]),
    Case("empty-yaml", "bad/e.yaml", b"", ["bad/e.yaml", "error", "empty"]),
    Case("empty-csv", "bad/e.csv", b"", ["bad/e.csv", "error", "empty"]),
    Case("blank-yaml", "bad/blank.yaml", b"\n\n  \n", ["bad/blank.yaml", "error", "empty"]),
    Case("binary", "bad/b.yaml", bytes(range(256)) * 4, ["bad/b.yaml", "error", "binary"]),
    Case("binary-xlsx", "bad/b.xlsx", b"PK\x03\x04 not really a workbook", ["bad/b.xlsx", "error"]),
    Case("bom-crlf-yaml", "ok/bom.yaml", codecs.BOM_UTF8 + _b(_yaml_points(*FIVE).replace("\n", "\r\n")),
         [], accepted=True),
    Case("bom-crlf-csv", "ok/bom.csv",
         codecs.BOM_UTF8 + _b(_csv([(f"{p} %", f"{4 + 16 * p / 100 + 0.01:.3f} mA")
                                    for p in (0, 25, 50, 75, 100)]).replace("\n", "\r\n")), [], accepted=True),
    Case("utf16-with-bom", "ok/u16.yaml", _yaml_points(*FIVE).encode("utf-16"), [], accepted=True),
    Case("utf16-no-bom", "bad/u16.yaml", _yaml_points(*FIVE).encode("utf-16-le"),
         ["bad/u16.yaml", "error", "UTF-16", "UTF-8"]),
    Case("latin1", "bad/l1.yaml", _yaml_points(*FIVE).replace("T. Tester", "T. Tést").encode("latin-1"),
         ["bad/l1.yaml", "error", "not UTF-8"]),
    Case("decimal-comma", "bad/dc.yaml", _b(_yaml_points("{input: 0 %, reading: '0,4011 V'}", *FIVE[1:])),
         ["bad/dc.yaml:9", "as_found #1", "field 'reading'", "decimal comma", "0.4011 V"]),
    Case("decimal-comma-csv", "bad/dc.csv", _b(_csv([("0 %", '"4,011 mA"'), ("50 %", "12.01 mA")])),
         ["bad/dc.csv:2", "as_found #1", "field 'reading'", "decimal comma"]),
    Case("not-a-number", "bad/nan.yaml", _b(_yaml_points("{input: 0 %, reading: about four mA}", *FIVE[1:])),
         ["bad/nan.yaml:9", "as_found #1", "field 'reading'", "not a number with a unit"]),
    Case("no-unit", "bad/nounit.yaml", _b(_yaml_points("{input: 0 %, reading: 4.01}", *FIVE[1:])),
         ["bad/nounit.yaml:9", "as_found #1", "field 'reading'", "no unit"]),
    Case("nan", "bad/nan2.yaml", _b(_yaml_points("{input: 0 %, reading: nan mA}", *FIVE[1:])),
         ["bad/nan2.yaml:9", "as_found #1", "field 'reading'"]),
    Case("yaml-nan-float", "bad/nan3.yaml", _b(_yaml_points("{input: 0 %, reading: .nan}", *FIVE[1:])),
         ["bad/nan3.yaml:9", "as_found #1", "field 'reading'"]),
    Case("inf", "bad/inf.yaml", _b(_yaml_points("{input: inf %, reading: 4.01 mA}", *FIVE[1:])),
         ["bad/inf.yaml:9", "as_found #1", "field 'input'"]),
    Case("huge-exponent", "bad/exp.yaml", _b(_yaml_points("{input: 0 %, reading: 1e999 mA}", *FIVE[1:])),
         ["bad/exp.yaml:9", "as_found #1", "field 'reading'", "finite"]),
    Case("duplicate-point", "bad/dup.yaml", _b(_yaml_points(*FIVE, FIVE[2])),
         ["bad/dup.yaml:14", "as_found #6", "duplicate point"]),
    Case("same-test-twice", "zcopy/T-CT1_2026-04-14.yaml", _b(GOOD),
         ["zcopy/T-CT1_2026-04-14.yaml", "error", "same content as results/good/T-CT1_2026-04-14.yaml"]),
    Case("future-date", "bad/future.yaml", _b(_yaml_points(*FIVE, date="2099-01-01")),
         ["bad/future.yaml:2", "field 'date'", "in the future"]),
    Case("impossible-date", "bad/feb30.yaml", _b(_yaml_points(*FIVE, date="2026-02-30")),
         ["bad/feb30.yaml:2", "field 'date'", "'2026-02-30'", "YYYY-MM-DD"]),
    Case("impossible-date-text", "bad/month13.yaml", _b(_yaml_points(*FIVE, date="'2026-13-01'")),
         ["bad/month13.yaml", "field 'date'", "YYYY-MM-DD"]),
    Case("unknown-asset", "bad/ua.yaml", _b(_yaml_points(*FIVE).replace("asset: T-CT1", "asset: NOPE-9")),
         ["bad/ua.yaml:1", "field 'asset'", "'NOPE-9' is not in assets.csv"]),
    Case("unknown-instrument", "bad/ui.yaml", _b(_yaml_points(*FIVE).replace("meter: DMM-1", "meter: DMM-404")),
         ["bad/ui.yaml", "field 'instruments.meter'", "'DMM-404' is not in instruments.yaml"]),
    Case("unknown-signal", "bad/us.yaml", _b(_yaml_points(*FIVE).replace("T-CT1", "T-ODD")),
         ["bad/us.yaml", "field 'signal'", "no loaded plugin handles"],
         assets=[{**CT_ASSET, "asset": "T-ODD", "signal": "warp-drive"}]),
    Case("wrong-dimension", "bad/dim.yaml", _b(_yaml_points("{input: 0 %, reading: 4.01 degC}", *FIVE[1:])),
         ["bad/dim.yaml:9", "as_found #1", "field 'reading'", "in units of the output"]),
    Case("wrong-dimension-input", "bad/dimi.yaml", _b(_yaml_points("{input: 0 V, reading: 4.01 mA}", *FIVE[1:])),
         ["bad/dimi.yaml:9", "as_found #1", "field 'input'", "not in units of A"]),
    # pint's dimensionalities (a general-purpose units library): a furlong is a [length], the input of a
    # current transducer a [current]; inputs written in % would otherwise be judged against a range in furlongs
    Case("input-unit-of-wrong-kind", "bad/kind.yaml",
         _b(_yaml_points(*FIVE).replace("T-CT1", "T-FUR")),
         ["bad/kind.yaml", "field 'assets.input_unit'",
          "'furlong' is not of the kind signal 'current-transducer' takes", "a unit like A"],
         assets=[{**CT_ASSET, "asset": "T-FUR", "input_unit": "furlong"}]),
    Case("alias-bomb", "bad/bomb.yaml", _b(ALIAS_BOMB),
         ["bad/bomb.yaml", "error", "alias bomb", "expand to more than"]),
    Case("oversized", "bad/big.yaml", _b(_yaml_points(*FIVE) + "remarks: '" + "x" * 2_100_000 + "'\n"),
         ["bad/big.yaml", "error", "over the limit", "limits.max_file_bytes"]),
    Case("too-many-points", "bad/many.yaml",
         _b(_yaml_points(*[f"{{input: {i / 100:.2f} %, reading: {4 + i * 0.0016:.4f} mA}}" for i in range(600)])),
         ["bad/many.yaml", "error", "limits.max_points"]),
    Case("too-many-repeats", "bad/reps.yaml",
         _b(_yaml_points("{input: 0 %, readings: [" + ", ".join(["4.01 mA"] * 101) + "]}", *FIVE[1:])),
         ["bad/reps.yaml:9", "as_found #1", "field 'readings'", "limits.max_repeats"]),
    Case("python-tag", "bad/tag.yaml",
         _b(_yaml_points(*FIVE).replace("technician: T. Tester", "technician: !!python/object/apply:os.system "
                                                                 "['echo pwned']")),
         ["bad/tag.yaml:3", "error", "YAML", "python/object/apply"]),
    Case("custom-tag", "bad/tag2.yaml",
         _b(_yaml_points(*FIVE).replace("technician: T. Tester", "technician: !secret x")),
         ["bad/tag2.yaml:3", "error", "YAML"]),
    Case("dotdot-asset", "bad/dd.yaml", _b(_yaml_points(*FIVE).replace("T-CT1", "../../../escape")),
         ["bad/dd.yaml:1", "field 'asset'", "'../../../escape'"],
         assets=[{**CT_ASSET, "asset": "../../../escape"}]),
    Case("slash-asset", "bad/slash.yaml", _b(_yaml_points(*FIVE).replace("T-CT1", "a/b\\c")),
         ["bad/slash.yaml:1", "field 'asset'", "'a/b\\c'"],
         assets=[{**CT_ASSET, "asset": "a/b\\c"}]),
    Case("control-char-asset", "bad/ctl.yaml", _b(_yaml_points(*FIVE).replace("asset: T-CT1", 'asset: "T-\\x1bCT1"')),
         ["bad/ctl.yaml:1", "field 'asset'"]),
    Case("control-char-name", "bad/na\x07me.yaml", _b(_yaml_points(*FIVE)),
         ["results/bad/na\\x07me.yaml", "error", "control characters"]),
    Case("dotdot-name", "bad/..evil..yaml", _b(_yaml_points(*FIVE)), [], accepted=True),
    Case("mapping-not-list", "bad/map.yaml", _b(_yaml_points(*FIVE).replace("as_found:\n", "as_found: {a: 1}\nzzz:\n")),
         ["bad/map.yaml:8", "field 'as_found'", "expected a list of points"]),
    Case("list-document", "bad/list.yaml", b"- 1\n- 2\n", ["bad/list.yaml:1", "expected a mapping"]),
    Case("multi-document", "bad/multi.yaml", _b(_yaml_points(*FIVE) + "---\n" + _yaml_points(*FIVE)),
         ["bad/multi.yaml", "error", "YAML"]),
    Case("csv-ragged", "bad/rag.csv", _b(CSV_HEAD + CSV_ROW.format(i="0 %", r="4.01 mA").rstrip() + ",extra,cells\n"),
         ["bad/rag.csv:2", "error", "row has 14 cells but the header row has 12"]),
    Case("csv-bad-phase", "bad/ph.csv", _b(_csv([("0 %", "4.01 mA")]).replace("as_found", "as_fnd")),
         ["bad/ph.csv:2", "field 'phase'", "as_fnd"]),
    # YAML loaders keep the last of two equal keys without a word: a second reading replaced the first
    Case("duplicate-key-in-point", "bad/dupr.yaml",
         _b(_yaml_points("{input: 0 %, reading: 4.01 mA, reading: 9.9 mA}", *FIVE[1:])),
         ["bad/dupr.yaml:9", "error", "'reading' is given twice in one mapping (line 9)"]),
    Case("duplicate-key-in-header", "bad/dupd.yaml",
         _b(_yaml_points(*FIVE).replace("date: 2026-05-01\n", "date: 2026-05-01\ndate: 2026-05-02\n")),
         ["bad/dupd.yaml:3", "error", "'date' is given twice in one mapping (lines 2 and 3)"]),
    # caps lock: 'MA' is mega-amperes, which pint converts faithfully; a 4-20 mA output cannot give 4e9 mA
    Case("mega-for-milli", "bad/mega.yaml", _b(_yaml_points("{input: 0 %, reading: 4.01 MA}", *FIVE[1:])),
         ["bad/mega.yaml:9", "error", "reading '4.01 MA' is 4.01e+09 mA, beyond anything a 4-20 mA output"]),
    # a repeat in other units once dropped out of the mean without a word; min and max in units that do not
    # convert once gave a NaN error judged as a fail
    Case("repeats-in-two-units", "bad/rep2.yaml",
         _b(_yaml_points("{input: 0 %, readings: [4.01 mA, 4.02 V]}", *FIVE[1:])),
         ["bad/rep2.yaml:9", "error", "every repeat must be in units of the first ('mA')"]),
    Case("repeats-empty", "bad/rep0.yaml", _b(_yaml_points("{input: 0 %, readings: []}", *FIVE[1:])),
         ["bad/rep0.yaml:9", "error", "readings is an empty list"]),
    Case("min-max-in-two-units", "bad/mm.yaml",
         _b(_yaml_points("{input: 0 %, reading_min: 4.0 mA, reading_max: 4.1 V}", *FIVE[1:])),
         ["bad/mm.yaml:9", "error", "reading_max must be in units of reading_min ('mA')"]),
    # a spreadsheet saved where the list separator is ';' (with decimal commas, as often as not)
    Case("csv-semicolons", "bad/semi.csv",
         _b(_csv([("0 %", "4.01 mA"), ("50 %", "12.01 mA")]).replace(",", ";").replace(".01 mA", ",01 mA")),
         ["bad/semi.csv:1", "error", "separated by ';', not commas"]),
]


def _tree_hash(root: Path) -> dict[str, str]:
    out = {}
    for dirpath, _dirs, files in os.walk(root):
        for name in files:
            p = Path(dirpath) / name
            if p.is_symlink():
                out[p.relative_to(root).as_posix()] = "link:" + os.readlink(p)
            else:
                out[p.relative_to(root).as_posix()] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def _evidence(tmp_path: Path, case: Case) -> Path:
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD}, assets=[CT_ASSET, *case.assets])
    path = ev / "results" / case.rel
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(case.data)
    return ev


def _run(ev: Path, out: Path, capsys: pytest.CaptureFixture[str]) -> tuple[int, str]:
    code = main(["run", str(ev), "--out", str(out), "--verbose"])
    captured = capsys.readouterr()
    return code, captured.out + captured.err


def _tests_csv(out: Path) -> dict[str, dict[str, str]]:
    with open(out / "data" / "tests.csv", encoding="utf-8") as fh:
        return {row["source_file"]: row for row in csv.DictReader(fh)}


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_hostile_file(tmp_path: Path, capsys: pytest.CaptureFixture[str], case: Case) -> None:
    ev = _evidence(tmp_path, case)
    before = _tree_hash(ev)
    out = tmp_path / "out"
    code, text = _run(ev, out, capsys)
    assert _tree_hash(ev) == before, "an input file was changed"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ev", "out"], "something was written outside OUT"
    tests = _tests_csv(out)
    good = tests["results/" + GOOD_NAME]
    assert good["verdict"] == "pass", "the good file was not judged"
    assert (out / "handbook" / "tests" / "good_T-CT1_2026-04-14.html").is_file()
    lines = text.replace("\n  ", " ").splitlines()
    if case.accepted:
        assert code == 0, text
        assert all(row["verdict"] == "pass" for row in tests.values()), tests
        return
    assert code == 2, text
    hits = [line for line in lines if all(bit in line for bit in case.expect)]
    assert hits, f"no line holds all of {case.expect}:\n{text}"
    bad_rows = [row for rel, row in tests.items() if rel != "results/" + GOOD_NAME]
    if bad_rows:  # the bad file stays listed, marked invalid (unless it was refused before reading)
        assert any(row["verdict"] == "invalid" for row in bad_rows)


def test_symlinks_inside_results_are_not_followed(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "secret.yaml").write_text(_yaml_points(*FIVE), encoding="utf-8")
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD})
    (ev / "results" / "link.yaml").symlink_to(outside / "secret.yaml")
    (ev / "results" / "linkdir").symlink_to(outside, target_is_directory=True)
    before = _tree_hash(ev)
    code, text = _run(ev, tmp_path / "out", capsys)
    assert code == 2
    assert "results/link.yaml: error: symbolic link is not followed" in text
    assert "results/linkdir: error: symbolic link to a folder is not followed" in text
    tests = _tests_csv(tmp_path / "out")
    assert list(tests) == ["results/" + GOOD_NAME]
    assert not list((tmp_path / "out").rglob("secret*"))
    assert _tree_hash(ev) == before


def test_a_spreadsheet_lock_file_is_skipped(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A spreadsheet program keeps '~$NAME.xlsx' beside a workbook it has open; read as a result file it was
    an error that stopped the commit while the technician had the sheet open."""
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD})
    (ev / "results" / "~$T-CT1_2026-05-02.xlsx").write_bytes(b"\x0bT. Tester" + bytes(150))
    code, text = _run(ev, tmp_path / "out", capsys)
    assert code == 0, text
    assert "results/~$T-CT1_2026-05-02.xlsx: warning: a lock file of a workbook open in a spreadsheet program" in text
    assert list(_tests_csv(tmp_path / "out")) == ["results/" + GOOD_NAME]


def test_page_names_never_leave_out(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """An asset id with ../ and slashes that *is* registered still gets a page, inside OUT."""
    nasty = "../../x/..\\y"
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD, "n.yaml": _yaml_points(*FIVE).replace("T-CT1", nasty)},
                        assets=[CT_ASSET, {**CT_ASSET, "asset": nasty}])
    out = tmp_path / "out"
    main(["run", str(ev), "--out", str(out)])
    capsys.readouterr()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ev", "out"]
    for path in out.rglob("*"):
        assert out.resolve() in path.resolve().parents
        assert ".." not in path.relative_to(out).parts


def test_limits_come_from_loopledger_toml(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    six = _yaml_points(*FIVE, FIVE[0].replace("0 %", "1 %"))
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD, "six.yaml": six},
                        config="as_of = 2026-11-30\n[limits]\nmax_points = 5\n")
    code, text = _run(ev, tmp_path / "out", capsys)
    assert code == 2
    assert "results/six.yaml: error: 6 points is over the limit of 5 (limits.max_points)" in text
    assert _tests_csv(tmp_path / "out")["results/" + GOOD_NAME]["verdict"] == "pass"
    (ev / "loopledger.toml").write_text("[limits]\nmax_file_bytes = -1\n", encoding="utf-8")
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 3
    assert "limits.max_file_bytes must be a whole number" in capsys.readouterr().err


def test_every_file_invalid_still_publishes(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    ev = write_evidence(tmp_path / "ev", {"a.yaml": "asset: [", "b.csv": ""})
    code, text = _run(ev, tmp_path / "out", capsys)
    assert code == 2, text
    assert {r["verdict"] for r in _tests_csv(tmp_path / "out").values()} == {"invalid"}
    assert (tmp_path / "out" / "handbook" / "index.html").is_file()


def test_out_inside_evidence_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD})
    before = _tree_hash(ev)
    assert main(["run", str(ev), "--out", str(ev / "build")]) == 3
    assert "inside the evidence folder" in capsys.readouterr().err
    assert _tree_hash(ev) == before


@pytest.mark.parametrize("option", ["--out", "--cache"])
def test_out_or_cache_naming_a_file_is_refused(tmp_path: Path, capsys: pytest.CaptureFixture[str], option: str) -> None:
    """It said '[Errno 17] File exists' from deep in the writer; the file is left as it was."""
    ev = write_evidence(tmp_path / "ev", {GOOD_NAME: GOOD})
    target = tmp_path / "a-file"
    target.write_text("keep me\n", encoding="utf-8")
    args = ["run", str(ev), "--out", str(tmp_path / "out")] if option == "--cache" else ["run", str(ev)]
    assert main([*args, option, str(target)]) == 3
    assert f"{option} '{target}' is a file; name a folder" in capsys.readouterr().err
    assert target.read_text(encoding="utf-8") == "keep me\n"
