"""The evidence folder's registries: assets.csv and instruments.yaml."""

from __future__ import annotations

import io
import math
from pathlib import Path
from typing import Any

import pandas as pd
import yaml
from loopledger.findings import Finding, error, warning
from loopledger.validation import validate

ASSETS = "assets.csv"
INSTRUMENTS = "instruments.yaml"
#: YAML values allowed per instrument when instruments.yaml is read (an instrument with ten ranges of four
#: fields each and ten details of its own holds about 100)
NODES_PER_INSTRUMENT = 200


def absent(what: str, ident: str, rejected: dict[str, int], where: object) -> str:
    """Why ``ident`` is not among the loaded assets or instruments: left out for errors at a line of
    ``where``, or not there at all (for the commands that look one up by name)."""
    if ident in rejected:
        at = f"line {rejected[ident]}" if rejected[ident] else "errors of the whole file"
        return f"{what} '{ident}' has errors in {where} ({at}): put them right first"
    return f"{what} '{ident}' is not in {where}"


def _register_bytes(evidence: Path, name: str, limits: dict[str, Any] | None,
                    follow_links: bool) -> tuple[bytes | None, list[Finding]]:
    """A register's bytes, or None with the error that says why not: missing, a link (unless followed to a
    file inside the evidence folder), not a regular file, or over ``limits.max_register_bytes``."""
    from loopledger.config import DEFAULTS
    from loopledger.files import LinkRefused, evidence_entry, read_regular

    limit = int((limits or DEFAULTS["limits"])["max_register_bytes"])
    try:
        path = evidence_entry(evidence, name, follow_links)
        if path is None:
            return None, [error(f"no {name} in the evidence folder", file=name)]
        return read_regular(path, limit, "limits.max_register_bytes in loopledger.toml"), []
    except LinkRefused as exc:
        return None, [error(str(exc), file=name, code="symlink")]
    except (OSError, ValueError) as exc:
        return None, [error(f"cannot read: {exc}", file=name)]


def _max_rows(limits: dict[str, Any] | None) -> int:
    from loopledger.config import DEFAULTS

    return int((limits or DEFAULTS["limits"])["max_register_rows"])


def load_assets(evidence: Path, limits: dict[str, Any] | None = None,
                follow_links: bool = False) -> tuple[pd.DataFrame, list[Finding], dict[str, int]]:
    """assets.csv validated against :class:`AssetsFile`; bad rows are dropped and reported, and returned
    as the ids they gave with their line numbers (so a result file of such an asset can say why it is not
    judged). A file of more than ``limits.max_register_rows`` rows is refused after reading one row more."""
    from loopledger.schemas.assets import OPTIONAL, REQUIRED, AssetsFile
    from loopledger.textio import decode, other_separator

    empty = pd.DataFrame(columns=REQUIRED + OPTIONAL).set_index("asset", drop=False).rename_axis(None)
    data, problems = _register_bytes(evidence, ASSETS, limits, follow_links)
    if data is None:
        return empty, problems, {}
    most = _max_rows(limits)
    try:
        frame = pd.read_csv(io.StringIO(decode(data)), dtype=str, keep_default_na=False, skipinitialspace=True,
                            nrows=most + 1)
    except (ValueError, pd.errors.ParserError) as exc:
        return empty, [error(f"cannot read: {exc}", file=ASSETS)], {}
    del data
    if len(frame) > most:
        return empty, [error(f"more than {most:,} rows, over the limit (limits.max_register_rows in "
                             "loopledger.toml); no asset is read", file=ASSETS, code="too-many")], {}
    frame.columns = [str(c).strip() for c in frame.columns]
    sep = other_separator(list(frame.columns))
    if sep is not None:
        return empty, [error(f"the columns are separated by {sep}, not commas: save it as comma-separated CSV "
                             "with '.' as the decimal mark", file=ASSETS, line=1)], {}
    for name in OPTIONAL:  # a column left out is read as one left empty (pd.NA put in as such cannot be coerced)
        if name not in frame.columns:
            frame[name] = ""
    frame = frame.apply(lambda col: col.str.strip()).replace("", pd.NA)
    given = frame["asset"] if "asset" in frame.columns else pd.Series(dtype=object)
    frame, findings = validate(frame, AssetsFile, lambda i: {"file": ASSETS, "line": 0 if i is None else int(i) + 2})
    frame, more = _check_units_and_accuracy(frame)
    findings += more
    frame = frame.astype({c: "object" for c in frame.columns if frame[c].dtype == "string"})
    frame["characteristic"] = frame["characteristic"].fillna("linear")
    rejected: dict[str, int] = {}
    whole = any(f.line == 0 for f in findings)  # a fault of the file (a column missing): no row is read
    for index, ident in given.drop(index=frame.index, errors="ignore").dropna().items():
        rejected.setdefault(str(ident), 0 if whole else int(index) + 2)
    findings += _lookalike_ids(frame)
    return frame.set_index("asset", drop=False).rename_axis(None), findings, rejected


def _lookalike_ids(frame: pd.DataFrame) -> list[Finding]:
    """A warning for each asset id that looks like another one (UTS #39 confusables, loopledger.lookalike):
    the two are told apart, so their tests make two histories."""
    from loopledger.lookalike import differences, lookalikes

    ids = [str(i) for i in frame["asset"].dropna()]
    line = {str(ident): int(index) + 2 for index, ident in frame["asset"].dropna().items()}
    return [warning(f"asset '{ident}' looks like '{other}' (line {line[other]}) but is another id "
                    f"({differences(ident, other)}): their tests make two histories; if they are one device, "
                    "write its id the same way in both",
                    file=ASSETS, line=line[ident], field="asset", code="lookalike")
            for ident, other in lookalikes(ids)]


def _check_units_and_accuracy(frame: pd.DataFrame) -> tuple[pd.DataFrame, list[Finding]]:
    """Rows whose units are not units, whose output is neither a current nor a voltage, or whose
    ``accuracy`` cannot give a limit in the output's unit are dropped and reported.

    A term of a meter's datasheet that means nothing for an asset (% of range, digits) is refused rather
    than read as zero: a zero limit would fail every point of a good device."""
    from loopledger import quantities as q

    findings: list[Finding] = []
    bad: list[Any] = []
    if frame.empty:  # nothing kept (or the file's columns were not there to keep)
        return frame, findings
    signals = (q.unit_check("mA"), q.unit_check("V"))
    for index, given_in, given_out in zip(frame.index, frame["input_unit"], frame["output_unit"], strict=True):
        for field, unit in (("input_unit", given_in), ("output_unit", given_out)):
            try:
                dimension = q.unit_check(q.normalise_unit(str(unit)))
                if field == "output_unit" and dimension not in signals:
                    raise ValueError(f"'{unit}' is not a current or a voltage (an output is read as mA or V)")
            except ValueError as exc:
                bad.append(index)
                findings.append(error(f"{field}: {exc}", file=ASSETS, line=int(index) + 2, field=field))
    for index, text, unit, low, high in zip(frame.index, frame["accuracy"], frame["output_unit"],
                                            frame["output_min"], frame["output_max"], strict=True):
        if index in bad:
            continue
        try:
            spec = q.parse_spec(str(text))
            if spec.pct_range or spec.digits:
                raise ValueError("% of range and digits are meter terms; for an asset write a class index "
                                 "(0.5), % of span (0.25 %span), % of reading (0.1 %rdg) or an amount (0.08 mA)")
            span = abs(float(high) - float(low))
            widest = float(spec.half_width(max(abs(float(low)), abs(float(high))), span=span, unit=str(unit)))
            if not math.isfinite(widest) or widest >= span / 2:  # a bound of our own
                raise ValueError(f"it allows ±{widest:.3g} {unit}, half the output span or more: every "
                                 "reading would pass (a slip of the decimal point?)")
        except ValueError as exc:
            bad.append(index)
            findings.append(error(f"accuracy '{text}': {exc}", file=ASSETS, line=int(index) + 2, field="accuracy"))
    return frame.drop(index=list(dict.fromkeys(bad))), findings


def load_instruments(evidence: Path, limits: dict[str, Any] | None = None, follow_links: bool = False,
                     ) -> tuple[pd.DataFrame, pd.DataFrame, list[Finding], dict[str, int]]:
    """instruments.yaml as two tables, instruments and meter ranges; and the ids of instruments dropped for
    errors, with the line of each. A document of more values than ``limits.max_register_rows`` instruments
    could hold is refused while it is read (:data:`NODES_PER_INSTRUMENT` each), and so is one of more
    instruments than that."""
    from loopledger.schemas.instruments import InstrumentsTable, MeterRanges
    from loopledger.textio import decode

    empty = pd.DataFrame(columns=["instrument", "kind"]).set_index("instrument", drop=False)
    no_ranges = pd.DataFrame(columns=["instrument", "range", "accuracy", "resolution", "burden"])
    data, problems = _register_bytes(evidence, INSTRUMENTS, limits, follow_links)
    if data is None:
        return empty, no_ranges, problems, {}
    from loopledger.textio import DuplicateKey, TooManyNodes, compose, key_lines

    most = _max_rows(limits)
    try:  # safe loading with the result files' loader: dates stay text, so one bad date is one instrument's error
        doc, node = compose(decode(data), max_nodes=most * NODES_PER_INSTRUMENT)
    except TooManyNodes:
        return empty, no_ranges, [error(f"more values than {most:,} instruments could hold (limits."
                                        "max_register_rows in loopledger.toml); no instrument is read",
                                        file=INSTRUMENTS, code="too-many")], {}
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        return empty, no_ranges, [error(f"cannot read: {getattr(exc, 'problem', None) or exc}", file=INSTRUMENTS,
                                        line=int(mark.line) + 1 if mark is not None else 0)], {}
    except DuplicateKey as exc:  # two entries for one id: which is the instrument used cannot be told
        return empty, no_ranges, [error(f"cannot read: {exc}", file=INSTRUMENTS, line=exc.line)], {}
    except ValueError as exc:
        return empty, no_ranges, [error(f"cannot read: {exc}", file=INSTRUMENTS)], {}
    if not isinstance(doc, dict) or node is None:
        return empty, no_ranges, [error("expected a mapping of instrument id -> details", file=INSTRUMENTS)], {}
    if len(doc) > most:
        return empty, no_ranges, [error(f"{len(doc):,} instruments, over the limit of {most:,} (limits."
                                        "max_register_rows in loopledger.toml); no instrument is read",
                                        file=INSTRUMENTS, code="too-many")], {}
    at = {key: line for key, (line, _) in key_lines(node).items()}
    rows: list[dict[str, Any]] = []
    ranges: list[dict[str, Any]] = []
    findings: list[Finding] = []
    for ident, spec in doc.items():
        if not isinstance(spec, dict):
            findings.append(error("expected a mapping of details", file=INSTRUMENTS, field=str(ident)))
            continue
        row = {k: (None if v is None else str(v)) for k, v in spec.items() if k != "ranges"}
        row["instrument"] = str(ident)
        rows.append(row)
        for entry in spec.get("ranges") or []:
            if isinstance(entry, dict):
                ranges.append({"instrument": str(ident), **{k: str(v) for k, v in entry.items()}})
            else:
                findings.append(error("each range must be a mapping", file=INSTRUMENTS, field=f"{ident}.ranges"))
    table = pd.DataFrame(rows)
    for col in InstrumentsTable.to_schema().columns:
        if col not in table.columns:
            table[col] = None
    table, more = validate(table, InstrumentsTable, lambda i: {
        "file": INSTRUMENTS, "line": 0 if i is None else at.get(rows[i]["instrument"], 0),
        "point": "" if i is None else f"instrument {rows[i]['instrument']}"})
    findings += more
    range_table = pd.DataFrame(ranges, columns=["instrument", "range", "accuracy", "resolution", "burden"])
    bad, more = _check_magnitudes(table, range_table, at)
    findings += more + _check_specs(table, range_table, at)
    table = table[~table["instrument"].astype(str).isin(bad)]
    kept = set(table["instrument"].astype(str))
    rejected = {str(r["instrument"]): at.get(str(r["instrument"]), 0) for r in rows if str(r["instrument"]) not in kept}
    # the ranges of the instruments kept, on their index in ``ranges`` (which the findings' lines look up)
    range_table = range_table[range_table["instrument"].astype(str).isin(kept)]
    if not range_table.empty:
        range_table, more = validate(range_table, MeterRanges,
                                     lambda i: {"file": INSTRUMENTS, "line": at.get(ranges[i]["instrument"], 0)
                                                if i is not None else 0, "point": "" if i is None else
                                                f"instrument {ranges[i]['instrument']} range"})
        findings += more
    return (table.set_index("instrument", drop=False).rename_axis(None), range_table.reset_index(drop=True),
            findings, rejected)


def _blank(value: Any) -> bool:
    """A value instruments.yaml left out (None, or NaN once in a table)."""
    return value is None or (isinstance(value, float) and math.isnan(value))


def _check_magnitudes(table: pd.DataFrame, ranges: pd.DataFrame, at: dict[str, int]) -> tuple[set[str], list[Finding]]:
    """The instruments whose values cannot be measured against: a shunt without a resistance above zero
    (a negative one would turn every reading around and be taken for reversed leads), a meter range or
    resolution that is not above zero. Each is reported at its line and left out."""
    from loopledger import quantities as q

    bad: set[str] = set()
    findings: list[Finding] = []

    def positive(ident: str, field: str, text: Any, unit: str | None, example: str) -> None:
        try:
            value = q.to_float(text, unit) if unit else q.parse_one(text).value
            ok = math.isfinite(value) and value > 0
        except ValueError:
            ok = False
        if not ok:
            bad.add(ident)
            said = "is missing" if text is None else f"'{text}' must be a quantity above zero"
            findings.append(error(f"{field} {said} (e.g. {example})", file=INSTRUMENTS,
                                  line=at.get(ident, 0), field=field, point=f"instrument {ident}"))

    for ident, kind, resistance in zip(table["instrument"], table["kind"], table["resistance"], strict=True):
        if kind == "shunt":
            positive(str(ident), "resistance", resistance, "ohm", "100 ohm")
    for ident, rng, resolution in zip(ranges["instrument"], ranges["range"], ranges["resolution"], strict=True):
        positive(str(ident), "range", rng, None, "20 mA")
        if not _blank(resolution):
            positive(str(ident), "resolution", resolution, None, "0.001 mA")
    return bad, findings


def _check_specs(table: pd.DataFrame, ranges: pd.DataFrame, at: dict[str, int]) -> list[Finding]:
    """A warning at its line for an accuracy specification that cannot be read: the instrument is kept
    (the simple rule needs no uncertainty), and each test that used it says it has none."""
    from loopledger import quantities as q

    findings: list[Finding] = []
    specs = [(str(i), "accuracy", a) for i, a in zip(table["instrument"], table["accuracy"], strict=True)]
    specs += [(str(i), "ranges.accuracy", a) for i, a in zip(ranges["instrument"], ranges["accuracy"], strict=True)]
    for ident, field, text in specs:
        if _blank(text):
            continue
        try:
            q.parse_spec(str(text))
        except ValueError as exc:
            findings.append(warning(f"{field} '{text}': {exc}: no uncertainty is worked out for the tests that "
                                    "used it", file=INSTRUMENTS, line=at.get(ident, 0), field=field,
                                    point=f"instrument {ident}"))
    return findings
