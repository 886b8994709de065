"""The evidence folder's registries: assets.csv and instruments.yaml."""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

import pandas as pd
import yaml
from loopledger.findings import Finding, error
from loopledger.validation import validate

ASSETS = "assets.csv"
INSTRUMENTS = "instruments.yaml"


def load_assets(evidence: Path) -> tuple[pd.DataFrame, list[Finding], dict[str, int]]:
    """assets.csv validated against :class:`AssetsFile`; bad rows are dropped and reported, and returned
    as the ids they gave with their line numbers (so a result file of such an asset can say why it is not
    judged)."""
    from loopledger.plugins._text import decode
    from loopledger.schemas.assets import OPTIONAL, REQUIRED, AssetsFile

    path = evidence / ASSETS
    empty = pd.DataFrame(columns=REQUIRED + OPTIONAL).set_index("asset", drop=False).rename_axis(None)
    if not path.is_file():
        return empty, [error(f"no {ASSETS} in the evidence folder", file=ASSETS)], {}
    try:
        frame = pd.read_csv(io.StringIO(decode(path.read_bytes())), dtype=str, keep_default_na=False,
                            skipinitialspace=True)
    except (ValueError, pd.errors.ParserError) as exc:
        return empty, [error(f"cannot read: {exc}", file=ASSETS)], {}
    frame.columns = [str(c).strip() for c in frame.columns]
    for name in OPTIONAL:  # a column left out is read as one left empty (pd.NA put in as such cannot be coerced)
        if name not in frame.columns:
            frame[name] = ""
    frame = frame.apply(lambda col: col.str.strip()).replace("", pd.NA)
    given = frame["asset"] if "asset" in frame.columns else pd.Series(dtype=object)
    frame, findings = validate(frame, AssetsFile, lambda i: {"file": ASSETS, "line": 0 if i is None else int(i) + 2})
    frame, more = _check_accuracy(frame)
    findings += more
    frame = frame.astype({c: "object" for c in frame.columns if frame[c].dtype == "string"})
    frame["characteristic"] = frame["characteristic"].fillna("linear")
    rejected: dict[str, int] = {}
    for index, ident in given.drop(index=frame.index, errors="ignore").dropna().items():
        rejected.setdefault(str(ident), int(index) + 2)
    return frame.set_index("asset", drop=False).rename_axis(None), findings, rejected


def _check_accuracy(frame: pd.DataFrame) -> tuple[pd.DataFrame, list[Finding]]:
    """Rows whose ``accuracy`` cannot give a limit in the output's unit are dropped and reported.

    A term of a meter's datasheet that means nothing for an asset (% of range, digits) is refused rather
    than read as zero: a zero limit would fail every point of a good device."""
    from loopledger import quantities as q

    findings: list[Finding] = []
    bad: list[Any] = []
    for index, text, unit in zip(frame.index, frame["accuracy"], frame["output_unit"], strict=True):
        try:
            spec = q.parse_spec(str(text))
            if spec.pct_range or spec.digits:
                raise ValueError("% of range and digits are meter terms; for an asset write a class index "
                                 "(0.5), % of span (0.25 %span), % of reading (0.1 %rdg) or an amount (0.08 mA)")
            spec.half_width(1.0, span=1.0, unit=str(unit))
        except ValueError as exc:
            bad.append(index)
            findings.append(error(f"accuracy '{text}': {exc}", file=ASSETS, line=int(index) + 2, field="accuracy"))
    return frame.drop(index=bad), findings


def load_instruments(evidence: Path) -> tuple[pd.DataFrame, pd.DataFrame, list[Finding]]:
    """instruments.yaml as two tables: instruments and meter ranges."""
    from loopledger.plugins._text import decode
    from loopledger.schemas.instruments import InstrumentsTable, MeterRanges

    path = evidence / INSTRUMENTS
    empty = pd.DataFrame(columns=["instrument", "kind"]).set_index("instrument", drop=False)
    no_ranges = pd.DataFrame(columns=["instrument", "range", "accuracy", "resolution", "burden"])
    if not path.is_file():
        return empty, no_ranges, [error(f"no {INSTRUMENTS} in the evidence folder", file=INSTRUMENTS)]
    try:
        doc = yaml.safe_load(decode(path.read_bytes()))
    except (yaml.YAMLError, ValueError) as exc:
        return empty, no_ranges, [error(f"cannot read: {exc}", file=INSTRUMENTS)]
    if not isinstance(doc, dict):
        return empty, no_ranges, [error("expected a mapping of instrument id -> details", file=INSTRUMENTS)]
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
        "file": INSTRUMENTS, "point": "" if i is None else f"instrument {rows[i]['instrument']}"})
    findings += more
    range_table = pd.DataFrame(ranges, columns=["instrument", "range", "accuracy", "resolution", "burden"])
    if not range_table.empty:
        range_table, more = validate(range_table, MeterRanges,
                                     lambda i: {"file": INSTRUMENTS, "point": "" if i is None else
                                                f"instrument {ranges[i]['instrument']} range"})
        findings += more
    return table.set_index("instrument", drop=False).rename_axis(None), range_table, findings
