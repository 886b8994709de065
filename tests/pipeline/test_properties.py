"""Property-based tests (hypothesis) of the readers and the computations.

Properties, and where each comes from:
- a record written as YAML and as CSV reads back the same (the two formats carry the same fields:
  README's result-file formats);
- a linear or square-root characteristic gives an output that never decreases as the input rises
  (the definition of those transfer functions; square-root extraction for differential-pressure
  flow is common practice), checked against numpy's own sqrt;
- the error is zero when the reading equals the expected output (error = measured − expected,
  the definition in ILAC-G8:2019 / JCGM 200:2012 2.16 "measurement error");
- no valid record makes a stage raise, and every valid record is judged;
- a field replaced by any value at all leaves that file judged or listed as invalid with an error naming it,
  and a good file beside it judged (issue 8's rule that bad input never hides or spares other evidence);
  the same for a cell of a CSV result file and for a cell of assets.csv.
Records are invented (plumbing fixtures), never reference values.
"""

from __future__ import annotations

import csv
import io
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from loopledger import runner, scaling
from loopledger.host import get_plugin_manager
from loopledger.plugins.read import read_table, read_yaml

from tests.evidence import ASSET_COLUMNS, CT_ASSET, result_yaml, write_evidence

SETTINGS = settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])

text = st.text(alphabet=st.characters(categories=("L", "N"), include_characters=" .-'"), min_size=1,
               max_size=20).map(str.strip).filter(bool)
pcts = st.lists(st.integers(0, 100), min_size=1, max_size=8, unique=True).map(sorted)
ma = st.floats(3.5, 21.0, allow_nan=False).map(lambda v: f"{v:.4f} mA")


@st.composite
def records(draw: st.DrawFn) -> dict[str, object]:
    found = [(f"{p} %", draw(ma)) for p in draw(pcts)]
    left = [(f"{p} %", draw(ma)) for p in draw(pcts)] if draw(st.booleans()) else None
    return {"technician": draw(text), "date": f"20{draw(st.integers(10, 25)):02d}-"
            f"{draw(st.integers(1, 12)):02d}-{draw(st.integers(1, 28)):02d}",
            "ambient_c": draw(st.floats(-20, 50, allow_nan=False).map(lambda v: round(v, 1))),
            "as_found": found, "as_left": left}


def _as_csv(read: object) -> str:
    header = read.header  # type: ignore[attr-defined]
    out = io.StringIO()
    fields = ["asset", "date", "technician", "connection", "method", "injection", "ambient_c", "source", "meter",
              "phase", "input", "reading"]
    writer = csv.DictWriter(out, fieldnames=fields, lineterminator="\n")
    writer.writeheader()
    for p in read.points:  # type: ignore[attr-defined]
        writer.writerow({**{k: header.get(k, "") for k in fields}, "phase": p["phase"], "input": p["input"],
                         "reading": p["reading"]})
    return out.getvalue()


@SETTINGS
@given(records())
def test_yaml_and_csv_read_the_same_record(record: dict[str, object]) -> None:
    text_yaml = result_yaml(**record)  # type: ignore[arg-type]
    from_yaml = read_yaml.parse(text_yaml, "r.yaml")
    assert not from_yaml.findings
    table = read_table._table(Path("r.csv"), _as_csv(from_yaml).encode("utf-8"))
    from_csv = read_table.parse(table, "r.csv")
    assert not from_csv.findings
    assert {k: str(v) for k, v in from_yaml.header.items()} == from_csv.header
    strip = [(p["phase"], p["point"], p["input"], p["reading"]) for p in from_yaml.points]
    assert strip == [(p["phase"], p["point"], p["input"], p["reading"]) for p in from_csv.points]
    assert len(strip) == len(record["as_found"]) + len(record["as_left"] or [])  # type: ignore[arg-type]


@SETTINGS
@given(st.lists(st.floats(0, 100, allow_nan=False), min_size=2, max_size=50),
       st.sampled_from(["linear", "sqrt"]), st.floats(-10, 10), st.floats(0.1, 100))
def test_expected_output_rises_with_the_input(values: list[float], kind: str, lo: float, span: float) -> None:
    pct = pd.Series(sorted(values))
    frac, _ = scaling.characteristic(pct, pd.Series(kind, index=pct.index))
    frame = pd.DataFrame({"output_min": lo, "output_max": lo + span}, index=pct.index)
    expected = scaling.expected_output(frame, frac).to_numpy()
    assert np.all(np.diff(expected) >= -1e-12 * span)
    reference = np.sqrt(pct / 100) if kind == "sqrt" else pct / 100  # numpy as the outside reference
    np.testing.assert_allclose(expected, lo + reference * span, rtol=1e-12, atol=1e-12 * span)


def _run(results: dict[str, str], assets: list[dict[str, object]]) -> runner.RunContext:
    with tempfile.TemporaryDirectory() as tmp:
        ev = write_evidence(Path(tmp) / "ev", results, assets=assets)
        return runner.run(runner.RunOptions(ev), get_plugin_manager(autoload=False))


@SETTINGS
@given(st.lists(st.integers(0, 100), min_size=1, max_size=6, unique=True), st.sampled_from([1, 5]),
       st.sampled_from([(4, 20), (0, 20), (0, 10)]), st.sampled_from(["linear", "sqrt"]))
def test_error_is_zero_when_reading_equals_expected(pcts: list[int], in_max: int, out: tuple[int, int],
                                                    kind: str) -> None:
    lo, hi = out
    unit = "mA" if hi == 20 else "V"
    points = []
    for p in pcts:
        frac = (p / 100) ** 0.5 if kind == "sqrt" else p / 100
        points.append((f"{p / 100 * in_max!r} A", f"{lo + frac * (hi - lo)!r} {unit}"))
    asset = {**CT_ASSET, "input_max": in_max, "output_min": lo, "output_max": hi, "output_unit": unit,
             "characteristic": kind}
    ctx = _run({"a.yaml": result_yaml(as_found=points)}, [asset])
    assert [f for f in ctx.findings if f.severity == "error"] == []
    assert len(ctx.points) == len(pcts)
    np.testing.assert_allclose(ctx.points["error"], 0.0, atol=1e-9 * (hi - lo))
    assert (ctx.points["decision"] == "pass").all()


@SETTINGS
@given(st.lists(records(), min_size=1, max_size=4))
def test_no_valid_record_makes_a_stage_raise(recs: list[dict[str, object]]) -> None:
    results = {f"t{i}.yaml": result_yaml(**{**r, "date": f"20{10 + i}-01-01"})  # type: ignore[arg-type]
               for i, r in enumerate(recs)}
    ctx = _run(results, [CT_ASSET])
    assert [f.format() for f in ctx.findings if f.severity == "error"] == []
    assert set(ctx.tests["verdict"]) <= {"pass", "fail", "adjusted"}
    assert len(ctx.tests) == len(recs)
    assert ctx.points["error"].notna().all() and ctx.points["mpe"].notna().all()


def _judged_or_named(ctx: runner.RunContext, good: str) -> None:
    """``good`` passed; every other file judged, or invalid with an error naming it (and only then)."""
    verdicts = ctx.tests.set_index("source_file")["verdict"].to_dict()
    assert verdicts.pop(good) == "pass", [f.format() for f in ctx.findings]
    named = {f.file for f in ctx.findings if f.severity == "error"}
    for rel, verdict in verdicts.items():
        assert verdict in {"pass", "fail", "adjusted", "invalid"}, (rel, verdict)
        assert (verdict == "invalid") == (rel in named), (rel, verdict, [f.format() for f in ctx.findings])


#: any value a spreadsheet or a hand-edited file might put in a field
hostile = st.one_of(st.text(max_size=12), st.floats(allow_nan=True, allow_infinity=True),
                    st.integers(-10**15, 10**15), st.none(), st.booleans(),
                    st.lists(st.integers(0, 9), max_size=2), st.dictionaries(st.text(max_size=3), st.integers(),
                                                                            max_size=1))
HEADER_FIELDS = ["asset", "date", "technician", "connection", "method", "injection", "ambient_c"]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from([*HEADER_FIELDS, "input", "reading"]), hostile), min_size=1, max_size=4))
@example(damage=[("ambient_c", "warm"), ("asset", 12345)])  # the case that once went through unchecked
def test_a_damaged_field_never_hides_or_spares_another_file(damage: list[tuple[str, object]]) -> None:
    """Each file with one field replaced by anything at all is judged or listed as invalid with an error
    naming it (never left without a verdict), and a good file beside them is still judged. Once, a word
    in one file's ambient_c made the header check of every file quietly drop out."""
    good = [("0 %", "4.0000 mA"), ("50 %", "12.0000 mA"), ("100 %", "20.0000 mA")]
    results = {"good.yaml": result_yaml(as_found=good, date="2026-01-01")}
    for i, (name, value) in enumerate(damage):
        if name in ("input", "reading"):
            point = {"input": "50 %", "reading": "12.0000 mA", name: value}
            pts = [good[0], (point["input"], point["reading"]), good[2]]
            results[f"d{i}.yaml"] = result_yaml(as_found=pts, date=f"2025-0{i + 1}-01")  # type: ignore[arg-type]
        else:
            results[f"d{i}.yaml"] = result_yaml(as_found=good, **{"date": f"2025-0{i + 1}-01", name: value})
    _judged_or_named(_run(results, [CT_ASSET]), "results/good.yaml")


CSV_FIELDS = ["asset", "date", "technician", "connection", "method", "injection", "ambient_c", "source", "meter",
              "phase", "input", "reading"]
cell = st.one_of(st.text(max_size=12), st.sampled_from(["warm", "nan", "inf", "1e999", "-0", "4,01", "12345",
                                                        "2026-02-30", "0 %", "12 A", "4.0 mA", "0/1", "1/0", "0",
                                                        "-1", "1e308", "1e-300", "mAh", "sqrt", "loop"]))


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(CSV_FIELDS), cell), min_size=1, max_size=4))
def test_a_damaged_csv_cell_never_hides_or_spares_another_file(damage: list[tuple[str, str]]) -> None:
    """The same rule for a CSV result file, one cell of its middle row replaced by any text."""
    good = {"asset": "T-CT1", "technician": "T. Tester", "connection": "standalone", "method": "direct",
            "injection": "secondary", "ambient_c": "23", "source": "SRC-1", "meter": "DMM-1", "phase": "as_found"}
    rows = [("0 %", "4.0000 mA"), ("50 %", "12.0000 mA"), ("100 %", "20.0000 mA")]

    def table(date: str, field: str | None = None, value: str = "") -> str:
        out = io.StringIO()
        writer = csv.DictWriter(out, fieldnames=CSV_FIELDS, lineterminator="\n")
        writer.writeheader()
        for k, (i, r) in enumerate(rows):
            row = {**good, "date": date, "input": i, "reading": r}
            if field is not None and k == 1:
                row[field] = value
            writer.writerow(row)
        return out.getvalue()

    results = {"good.csv": table("2026-01-01")}
    results.update({f"d{i}.csv": table(f"2025-0{i + 1}-01", name, value) for i, (name, value) in enumerate(damage)})
    _judged_or_named(_run(results, [CT_ASSET]), "results/good.csv")


@pytest.mark.filterwarnings("ignore:overflow encountered:RuntimeWarning")  # 1e308 ohm of cable, say: numpy says so
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(ASSET_COLUMNS), cell), min_size=1, max_size=3))
@example(damage=[("input_unit", "mAh")])
@example(damage=[("accuracy", "-1")])
def test_a_damaged_register_cell_never_hides_or_spares_a_file(damage: list[tuple[str, str]]) -> None:
    """A cell of assets.csv replaced by any text: the run never raises, the asset's test is judged or listed
    as invalid with an error naming it, and the test of an untouched asset beside it is judged."""
    second = {**CT_ASSET, "asset": "T-CT2"}
    for name, value in damage:
        # not what would break the file as a whole (a NUL byte makes it binary: every row is refused then)
        second[name] = value.replace(",", " ").replace("\n", " ").replace("\r", " ").replace('"', "'").replace(
            "\x00", " ")
    good = [("0 %", "4.0000 mA"), ("50 %", "12.0000 mA"), ("100 %", "20.0000 mA")]
    results = {"one.yaml": result_yaml(as_found=good, date="2026-01-01"),
               "two.yaml": result_yaml(asset="T-CT2", as_found=good, date="2026-01-02")}
    ctx = _run(results, [CT_ASSET, second])
    verdicts = ctx.tests.set_index("source_file")["verdict"].to_dict()
    if str(second["asset"]).strip() != "T-CT1":  # a damaged id that names the first asset takes it over
        assert verdicts["results/one.yaml"] == "pass", [f.format() for f in ctx.findings]
    named = {f.file for f in ctx.findings if f.severity == "error"}
    assert verdicts["results/two.yaml"] in {"pass", "fail", "adjusted", "invalid"}
    assert (verdicts["results/two.yaml"] == "invalid") == ("results/two.yaml" in named)
