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


def load_assets(evidence: Path, limits: dict[str, Any] | None = None, follow_links: bool = False,
                declared: dict[str, str] | None = None) -> tuple[pd.DataFrame, list[Finding], dict[str, int]]:
    """assets.csv validated against :class:`AssetsFile`: every row kept (an asset's history), each with its
    ``asset_row`` (its line) and ``valid_from`` as YYYY-MM-DD or None; bad rows are dropped and reported, and
    returned as the ids they gave with their line numbers (so a result file of such an asset can say why it
    is not judged). ``declared`` holds the extra columns plugins read, by name with the plugin that reads
    it: any other column is an error at line 1 (it would be silently unused), and the rows are still read.
    :func:`current` picks each asset's latest row."""
    from loopledger.schemas.assets import OPTIONAL, REQUIRED, AssetsFile
    from loopledger.spelling import unknown
    from loopledger.textio import decode, other_separator

    empty = pd.DataFrame(columns=[*REQUIRED, *OPTIONAL, "asset_row"])
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
    known = [*REQUIRED, *OPTIONAL, *(declared or {})]
    findings = [error(unknown("column", col, known), file=ASSETS, line=1, field=str(col), code="unknown-key")
                for col in frame.columns if col not in known]
    for name in OPTIONAL:  # a column left out is read as one left empty (pd.NA put in as such cannot be coerced)
        if name not in frame.columns:
            frame[name] = ""
    frame = frame.apply(lambda col: col.str.strip()).replace("", pd.NA)
    given = frame["asset"] if "asset" in frame.columns else pd.Series(dtype=object)
    frame, found = validate(frame, AssetsFile, lambda i: {"file": ASSETS, "line": 0 if i is None else int(i) + 2})
    findings += found
    frame, more = _check_units_and_accuracy(frame)
    findings += more
    frame = frame.astype({c: "object" for c in frame.columns if frame[c].dtype == "string"})
    frame["characteristic"] = frame["characteristic"].fillna("linear")
    frame["asset_row"] = [int(i) + 2 for i in frame.index]
    from loopledger.schemas.results import date_part

    days = date_part(frame["valid_from"]) if len(frame) else pd.Series(dtype="datetime64[ns]")
    frame["valid_from"] = days.dt.strftime("%Y-%m-%d").astype(object).where(days.notna(), None)
    rejected: dict[str, int] = {}
    whole = any(f.line == 0 for f in findings)  # a fault of the file (a column missing): no row is read
    for index, ident in given.drop(index=frame.index, errors="ignore").dropna().items():
        rejected.setdefault(str(ident), 0 if whole else int(index) + 2)
    findings += _lookalike_ids(frame)
    return frame.reset_index(drop=True), findings, rejected


def current(rows: pd.DataFrame) -> pd.DataFrame:
    """Each asset's row in force now (its latest ``valid_from``; a blank one is the earliest), indexed by
    ``asset``: what the sheet, the loop check and the due dates use."""
    if rows.empty:
        return rows.set_index("asset", drop=False).rename_axis(None)
    order = pd.to_datetime(rows["valid_from"], format="%Y-%m-%d").astype("datetime64[ns]").fillna(
        pd.Timestamp("1900-01-01"))
    latest = rows.assign(_order=order).sort_values(["asset", "_order"], kind="stable").groupby("asset").tail(1)
    latest = latest.drop(columns="_order").sort_values("asset_row")
    return latest.set_index("asset", drop=False).rename_axis(None)


def _lookalike_ids(frame: pd.DataFrame) -> list[Finding]:
    """A warning for each asset id that looks like another one (UTS #39 confusables, loopledger.lookalike):
    the two are told apart, so their tests make two histories."""
    from loopledger.lookalike import differences, lookalikes

    ids = list(dict.fromkeys(str(i) for i in frame["asset"].dropna()))  # an asset's later rows are its history
    line: dict[str, int] = {}
    for index, ident in frame["asset"].dropna().items():
        line.setdefault(str(ident), int(index) + 2)
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


#: the keys of one entry of ``calibrations:`` in instruments.yaml
CALIBRATION_KEYS = ("date", "due", "certificate", "as_found", "remarks")
CALIBRATION_COLUMNS = ["instrument", *CALIBRATION_KEYS, "line"]


def load_instruments(evidence: Path, limits: dict[str, Any] | None = None, follow_links: bool = False,
                     declared: dict[str, str] | None = None,
                     ) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, list[Finding], dict[str, int]]:
    """instruments.yaml as three tables: instruments (``calibrated`` / ``due`` of the latest calibration),
    meter ranges and calibrations (one row per certificate, ``CALIBRATION_COLUMNS``); and the ids of
    instruments dropped for errors, with the line of each. A key nobody reads is an error at its line (a
    misspelt ``due`` would hide an instrument's lapsed calibration); ``declared`` holds the keys plugins read
    besides the schema's."""
    from loopledger.schemas.instruments import Calibrations, InstrumentsTable, MeterRanges
    from loopledger.textio import decode

    empty = pd.DataFrame(columns=["instrument", "kind"]).set_index("instrument", drop=False)
    no_ranges = pd.DataFrame(columns=["instrument", "range", "accuracy", "resolution", "burden"])
    no_cals = pd.DataFrame(columns=CALIBRATION_COLUMNS)
    data, problems = _register_bytes(evidence, INSTRUMENTS, limits, follow_links)
    if data is None:
        return empty, no_ranges, no_cals, problems, {}
    from loopledger.textio import DuplicateKey, TooManyNodes, compose, key_lines

    most = _max_rows(limits)
    try:  # safe loading with the result files' loader: dates stay text, so one bad date is one instrument's error
        doc, node = compose(decode(data), max_nodes=most * NODES_PER_INSTRUMENT)
    except TooManyNodes:
        return empty, no_ranges, no_cals, [error(f"more values than {most:,} instruments could hold (limits."
                                                 "max_register_rows in loopledger.toml); no instrument is read",
                                                 file=INSTRUMENTS, code="too-many")], {}
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        return empty, no_ranges, no_cals, [error(f"cannot read: {getattr(exc, 'problem', None) or exc}",
                                                 file=INSTRUMENTS, line=int(mark.line) + 1 if mark is not None
                                                 else 0)], {}
    except DuplicateKey as exc:  # two entries for one id: which is the instrument used cannot be told
        return empty, no_ranges, no_cals, [error(f"cannot read: {exc}", file=INSTRUMENTS, line=exc.line)], {}
    except ValueError as exc:
        return empty, no_ranges, no_cals, [error(f"cannot read: {exc}", file=INSTRUMENTS)], {}
    if not isinstance(doc, dict) or node is None:
        return empty, no_ranges, no_cals, [error("expected a mapping of instrument id -> details",
                                                 file=INSTRUMENTS)], {}
    if len(doc) > most:
        return empty, no_ranges, no_cals, [error(f"{len(doc):,} instruments, over the limit of {most:,} (limits."
                                                 "max_register_rows in loopledger.toml); no instrument is read",
                                                 file=INSTRUMENTS, code="too-many")], {}
    nodes = key_lines(node)
    at = {key: line for key, (line, _) in nodes.items()}
    rows: list[dict[str, Any]] = []
    ranges: list[dict[str, Any]] = []
    cals: list[dict[str, Any]] = []
    findings: list[Finding] = []
    strays: set[str] = set()
    for ident, spec in doc.items():
        if not isinstance(spec, dict):
            findings.append(error("expected a mapping of details", file=INSTRUMENTS, field=str(ident)))
            continue
        inner = key_lines(nodes[str(ident)][1]) if str(ident) in nodes else {}
        more = _unknown_keys(str(ident), spec, inner, declared or {})
        strays |= {str(ident)} if more else set()
        findings += more
        row = {k: (None if v is None else str(v)) for k, v in spec.items() if k not in ("ranges", "calibrations")}
        row["instrument"] = str(ident)
        rows.append(row)
        for entry in spec.get("ranges") or []:
            if isinstance(entry, dict):
                ranges.append({"instrument": str(ident), **{k: str(v) for k, v in entry.items()}})
            else:
                findings.append(error("each range must be a mapping", file=INSTRUMENTS, field=f"{ident}.ranges"))
        found, more = _calibrations(str(ident), spec, inner)
        cals += found
        findings += more
        strays |= {str(ident)} if more else set()
    table = pd.DataFrame(rows)
    for col in InstrumentsTable.to_schema().columns:
        if col not in table.columns:
            table[col] = None
    cal_table = pd.DataFrame(cals, columns=CALIBRATION_COLUMNS)
    if not cal_table.empty:
        cal_table, more = validate(cal_table, Calibrations, lambda i: {
            "file": INSTRUMENTS, "line": 0 if i is None else cals[i]["line"],
            "point": "" if i is None else f"instrument {cals[i]['instrument']} calibration"})
        findings += more
        strays |= {cals[i]["instrument"] for i in set(range(len(cals))) - set(cal_table.index)}
        latest = cal_table.sort_values("date").groupby("instrument").tail(1).set_index("instrument")
        listed = table["instrument"].isin(latest.index)
        for col, source in (("calibrated", "date"), ("due", "due")):
            table.loc[listed, col] = table.loc[listed, "instrument"].map(latest[source].dt.strftime("%Y-%m-%d"))
    table, more = validate(table, InstrumentsTable, lambda i: {
        "file": INSTRUMENTS, "line": 0 if i is None else at.get(rows[i]["instrument"], 0),
        "point": "" if i is None else f"instrument {rows[i]['instrument']}"})
    findings += more
    range_table = pd.DataFrame(ranges, columns=["instrument", "range", "accuracy", "resolution", "burden"])
    bad, more = _check_magnitudes(table, range_table, at)
    findings += more + _check_specs(table, range_table, at)
    table = table[~table["instrument"].astype(str).isin(bad | strays)]
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
    flat = table[~table["instrument"].isin(cal_table["instrument"]) & table["calibrated"].notna()]
    cal_table = pd.concat([cal_table, pd.DataFrame({  # the flat calibrated/due: a history of one
        "instrument": flat["instrument"], "date": flat["calibrated"], "due": flat["due"],
        "line": [at.get(str(i), 0) for i in flat["instrument"]]})], ignore_index=True) if len(flat) else cal_table
    cal_table = cal_table[cal_table["instrument"].astype(str).isin(kept)].sort_values(["instrument", "date"])
    return (table.set_index("instrument", drop=False).rename_axis(None), range_table.reset_index(drop=True),
            cal_table.reset_index(drop=True), findings, rejected)


def _unknown_keys(ident: str, spec: dict[Any, Any], inner: dict[str, tuple[int, Any]],
                  declared: dict[str, str]) -> list[Finding]:
    """An error at its line for each key of an instrument (or of one of its ranges or calibrations) that
    nothing reads, with the nearest known key."""
    from loopledger.schemas.instruments import InstrumentsTable, MeterRanges
    from loopledger.spelling import unknown
    from loopledger.textio import key_lines, node_line

    known = [c for c in InstrumentsTable.to_schema().columns if c != "instrument"] + ["ranges", "calibrations",
                                                                                       *declared]
    findings = [error(unknown("key", str(k), known), file=INSTRUMENTS, line=inner.get(str(k), (0, None))[0],
                      field=str(k), point=f"instrument {ident}", code="unknown-key")
                for k in spec if str(k) not in known]
    for name, keys_known in (("ranges", [c for c in MeterRanges.to_schema().columns if c != "instrument"]),
                             ("calibrations", list(CALIBRATION_KEYS))):
        seq = inner.get(name, (0, None))[1]
        given = spec.get(name)
        entries: list[Any] = given if isinstance(given, list) else []
        for entry, entry_node in zip(entries, getattr(seq, "value", None) or [], strict=False):
            if not isinstance(entry, dict):
                continue
            lines = key_lines(entry_node)
            findings += [error(unknown("key", str(k), keys_known), file=INSTRUMENTS,
                               line=lines.get(str(k), (node_line(entry_node), None))[0], field=f"{name}.{k}",
                               point=f"instrument {ident}", code="unknown-key")
                         for k in entry if str(k) not in keys_known]
    return findings


def _calibrations(ident: str, spec: dict[Any, Any], inner: dict[str, tuple[int, Any]],
                  ) -> tuple[list[dict[str, Any]], list[Finding]]:
    """An instrument's certificates as rows, from its ``calibrations:`` list (the flat ``calibrated``/``due``
    become a history of one in :func:`load_instruments`). Both at once is an error (which holds cannot be
    told)."""
    from loopledger.textio import node_line

    def text(value: Any) -> str | None:
        return None if value is None else str(value)

    given = spec.get("calibrations")
    if given is None:  # the flat form is checked with the instrument, and becomes a row once it is valid
        return [], []
    line, seq = inner.get("calibrations", (0, None))
    if spec.get("calibrated") is not None or spec.get("due") is not None:
        return [], [error("give calibrated/due or a calibrations list, not both (which is in force cannot be "
                          "told)", file=INSTRUMENTS, line=line, field="calibrations", point=f"instrument {ident}")]
    if not isinstance(given, list) or not all(isinstance(e, dict) for e in given):
        return [], [error("calibrations must be a list of mappings such as {date: 2026-01-12, due: 2027-01-12, "
                          "certificate: C-1234}", file=INSTRUMENTS, line=line, field="calibrations",
                          point=f"instrument {ident}")]
    return [{"instrument": ident, **{k: text(e.get(k)) for k in CALIBRATION_KEYS}, "line": node_line(n)}
            for e, n in zip(given, seq.value, strict=True)], []


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
