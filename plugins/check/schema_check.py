"""Stage 1, schema check: validate headers and points, resolve registries, parse quantities.

Ends by joining each test's header and its asset's registry row onto the
points, so every later stage works on one table.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np
import pandas as pd
from loopledger import keys
from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.validation import validate

#: the earliest test date taken as real (a bound of our own, well before 4-20 mA loops were in use;
#: a year 0001 once reached date arithmetic that cannot hold it)
EARLIEST = dt.date(1950, 1, 1)
INSTRUMENT_KIND = {"source": "source", "meter": "meter", "shunt": "shunt", "cjc_probe": "probe"}


def check_tests(ctx: RunContext) -> list[Finding]:
    """Validate the header of every still-valid test; mark failures invalid."""
    from loopledger.schemas.results import TestHeader, date_part

    tests = ctx.tests
    valid = tests[tests["valid"].astype(bool)].copy()
    if valid.empty:
        return []
    valid["injection"] = valid["injection"].fillna("secondary")
    valid["date"] = valid["date"].map(lambda d: d.isoformat() if isinstance(d, dt.date) else d)
    lines = ctx.stash.get(keys.HEADER_LINES, {})
    for col in ("asset", "technician", "method", "connection", "source", "meter", "shunt", "remarks", "cjc_u",
                "cjc_probe"):
        valid[col] = valid[col].map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v))
                                    else str(v))

    def where(index: Any) -> dict[str, Any]:
        return {"file": valid.at[index, "source_file"]} if index is not None else {}

    checked, findings = validate(valid, TestHeader, where)
    findings = [_with_line(f, lines) for f in findings]
    named = {f.file for f in findings if f.file}
    unpinned = "; ".join(f.message for f in findings if not f.file)
    for idx in valid.index.difference(checked.index):  # never left valid without its header checked
        rel = valid.at[idx, "source_file"]
        if rel not in named:
            findings.append(error(f"the header could not be checked ({unpinned or 'no reason given'})", file=rel))
    today = dt.date.today()
    dates = date_part(checked["date"])
    day = dates.dt.date
    for mask, said, text in (
            (day > today, error, "is in the future"),
            (day < EARLIEST, error, f"is before {EARLIEST.year}: a typing error?"),
            ((day > ctx.as_of) & (day <= today), warning,
             f"is after this run's as_of date {ctx.as_of}: the status shown 'as of' that date includes this test "
             "(update as_of in loopledger.toml, or give --as-of)")):
        for idx in checked.index[mask]:
            rel = checked.at[idx, "source_file"]
            findings.append(said(f"date {checked.at[idx, 'date']} {text}", file=rel,
                                 line=lines.get(rel, {}).get("date", 0), field="date"))
    checked["date"] = dates.dt.strftime("%Y-%m-%d")
    findings += _check_references(ctx, checked, lines)
    findings += _rows_in_force(ctx, checked, lines)
    findings += _dates_in_names(checked, lines)
    findings += _check_duplicate_files(checked, lines)
    tests = ctx.tests.astype({c: object for c in checked.columns if c in ctx.tests.columns and c != "valid"})
    for col in checked.columns:
        tests.loc[checked.index, col] = checked[col]
    ctx.tests = tests
    return findings


def _dates_in_names(tests: pd.DataFrame, lines: dict[str, dict[str, int]]) -> list[Finding]:
    """A warning where the file's name carries a date (YYYY-MM-DD), or one of its folders a year, that
    disagrees with the header's date (a wrong-year typo would move the asset's next due date silently)."""
    rel = tests["source_file"].astype(str)
    named = rel.str.rsplit("/", n=1).str[-1].str.extract(r"(?<!\d)((?:19|20)\d\d-\d\d-\d\d)(?!\d)", expand=False)
    folders = rel.str.rsplit("/", n=1).str[0].str.extract(r"(?:^|/)((?:19|20)\d\d)(?:/|$)", expand=False)
    date = tests["date"].astype(str)
    findings: list[Finding] = []
    for at in tests.index[named.notna() & (named != date) & tests["date"].notna()]:
        findings.append(warning(f"the header's date {date[at]} disagrees with the date {named[at]} in the file's "
                                "name: which is right?", file=rel[at], line=lines.get(rel[at], {}).get("date", 0),
                                field="date", code="date-mismatch"))
    for at in tests.index[folders.notna() & (folders != date.str[:4]) & tests["date"].notna()]:
        findings.append(warning(f"the header's date {date[at]} is not in the year of the folder {folders[at]}/ "
                                "holding the file: which is right?", file=rel[at],
                                line=lines.get(rel[at], {}).get("date", 0), field="date", code="date-mismatch"))
    return findings


def _rows_in_force(ctx: RunContext, tests: pd.DataFrame, lines: dict[str, dict[str, int]]) -> list[Finding]:
    """Set ``asset_row`` (the assets.csv line in force on each test's date: the row of its asset with the
    latest ``valid_from`` on or before it); a test dated before its asset's first row is an error naming
    both dates."""
    rows = ctx.asset_rows if len(ctx.asset_rows) else ctx.assets.reset_index(drop=True)
    tests["asset_row"] = pd.NA
    if rows.empty or tests.empty:
        return []
    begins = pd.to_datetime(rows["valid_from"], format="%Y-%m-%d") if "valid_from" in rows.columns \
        else pd.Series(pd.NaT, index=rows.index)
    table = pd.DataFrame({"asset": rows["asset"].astype(str), "asset_row": rows["asset_row"].astype(int),
                          "begins": begins.fillna(pd.Timestamp("1900-01-01")).astype("datetime64[ns]")}
                         ).sort_values("begins")
    on = pd.to_datetime(tests["date"], format="%Y-%m-%d", errors="coerce")
    on = on.where(on.dt.year.between(1900, 2200)).astype("datetime64[ns]")  # the rest is refused above
    dated = pd.DataFrame({"asset": tests["asset"].astype(str), "on": on, "at": tests.index})
    dated = dated[dated["on"].notna()].sort_values("on")
    picked = pd.merge_asof(dated, table, left_on="on", right_on="begins", by="asset", direction="backward")
    tests.loc[picked["at"].to_numpy(), "asset_row"] = picked["asset_row"].to_numpy()
    first = table.groupby("asset").first()
    findings: list[Finding] = []
    for at, asset in picked.loc[picked["asset_row"].isna() & picked["asset"].isin(first.index),
                                ["at", "asset"]].itertuples(index=False):
        rel = tests.at[at, "source_file"]
        findings.append(error(
            f"date {tests.at[at, 'date']} is before the first row of asset {asset} in assets.csv (line "
            f"{first.at[asset, 'asset_row']}, valid_from {first.at[asset, 'begins'].date().isoformat()}): add a "
            "row in force on this date, or correct the date", file=rel, line=lines.get(rel, {}).get("date", 0),
            field="date", code="before-register"))
    return findings


def _with_line(f: Finding, lines: dict[str, dict[str, int]]) -> Finding:
    line = lines.get(f.file, {}).get(f.field, 0)
    return Finding(f.severity, f.message, f.file, line, f.field, f.point, f.code, f.stage)


def _check_references(ctx: RunContext, tests: pd.DataFrame, lines: dict[str, dict[str, int]]) -> list[Finding]:
    findings: list[Finding] = []
    known_assets = set(ctx.assets.index)
    near = _Near(known_assets)
    methods = sorted(ctx.methods)
    kinds = ctx.instruments["kind"].to_dict() if not ctx.instruments.empty else {}
    near_instrument = _Near(set(kinds))
    roles = ("source", "meter", "shunt", "cjc_probe")
    columns = [tests[c].tolist() if c in tests.columns else [None] * len(tests)
               for c in ("source_file", "asset", "method", *roles)]  # not row objects: 20k rows
    for rel, asset, method, *idents in zip(*columns, strict=True):
        at = lines.get(rel, {})
        if asset in ctx.rejected_assets:
            row = ctx.rejected_assets[asset]
            said = f"has errors in its row of assets.csv (line {row}): this file is judged once that row is put " \
                "right" if row else "is in an assets.csv whose errors stop any row being read: this file is judged " \
                "once they are put right"
            findings.append(error(f"asset '{asset}' {said}", file=rel, line=at.get("asset", 0), field="asset"))
        elif asset not in known_assets:
            findings.append(error(f"asset '{asset}' is not in assets.csv{near(asset)}", file=rel,
                                  line=at.get("asset", 0), field="asset"))
        if method not in ctx.methods:
            findings.append(error(f"unknown method '{method}' (known: {', '.join(methods)})", file=rel,
                                  line=at.get("method", 0), field="method"))
        for role, ident in zip(roles, idents, strict=True):
            if ident is None or (isinstance(ident, float) and np.isnan(ident)):
                continue
            if ident in ctx.rejected_instruments:
                findings.append(error(f"instrument '{ident}' has errors in instruments.yaml (line "
                                      f"{ctx.rejected_instruments[ident]}): this file is judged once they are put "
                                      "right", file=rel, line=at.get(role, 0), field=f"instruments.{role}"))
            elif ident not in kinds:
                findings.append(error(f"instrument '{ident}' is not in instruments.yaml{near_instrument(ident)}",
                                      file=rel, line=at.get(role, 0), field=f"instruments.{role}"))
            elif kinds[ident] != INSTRUMENT_KIND[role]:
                findings.append(error(f"instrument '{ident}' is a {kinds[ident]}, not a {role}", file=rel,
                                      line=at.get(role, 0), field=f"instruments.{role}"))
        shunt = idents[2]
        if method == "shunt" and (shunt is None or (isinstance(shunt, float) and np.isnan(shunt))):
            findings.append(error("method 'shunt' needs instruments.shunt (the shunt's id)", file=rel,
                                  line=at.get("method", 0), field="instruments.shunt"))
    return findings


#: characters a word processor or another keyboard puts where an id has an ASCII hyphen or space
_LOOKALIKES = str.maketrans({c: "-" for c in "\u2010\u2011\u2012\u2013\u2014\u2212\ufe63\uff0d"} |
                            {c: " " for c in "\u00a0\u2007\u202f"})


class _Near:
    """': did you mean ...' for an unknown id that differs from a known one by case, look-alike dashes and
    spaces, letters of another script that look alike (UTS #39 skeletons), or a slip of a character or two
    (difflib), naming the characters that are not plain ASCII. Worked out for the first :data:`LIMIT`
    distinct unknown ids only (difflib over a large register costs milliseconds an id; a folder whose ids
    all changed must not take minutes to say so)."""

    LIMIT = 50

    def __init__(self, known: set[Any]) -> None:
        self.known = [str(k) for k in known]
        self.plain: dict[str, str] | None = None
        self.said: dict[str, str] = {}

    @staticmethod
    def _fold(text: str) -> str:
        import unicodedata

        from loopledger.lookalike import skeleton  # a Cyrillic I for a Latin one (UTS #39)

        return skeleton(unicodedata.normalize("NFKC", text).translate(_LOOKALIKES)).casefold()

    def __call__(self, ident: Any) -> str:
        import difflib

        text = str(ident)
        if text in self.said or len(self.said) >= self.LIMIT:
            return self.said.get(text, "")
        if self.plain is None:
            self.plain = {self._fold(k): k for k in self.known}
        match = self.plain.get(self._fold(text)) or next(
            iter(difflib.get_close_matches(text, self.known, n=1, cutoff=0.85)), None)
        odd = sorted({f"U+{ord(c):04X}" for c in text if ord(c) > 126})
        hint = "" if match is None else f"; did you mean '{match}'?" + (
            f" (it holds {', '.join(odd)}, not the plain ASCII character{'s' if len(odd) > 1 else ''} "
            f"{'they resemble' if len(odd) > 1 else 'it resembles'})" if odd else "")
        self.said[text] = hint
        return hint


def _check_duplicate_files(tests: pd.DataFrame, lines: dict[str, dict[str, int]]) -> list[Finding]:
    findings: list[Finding] = []
    dup = tests[tests.duplicated("sha256", keep="first") & (tests["sha256"] != "")]
    for row in dup.itertuples():
        first = tests.loc[(tests["sha256"] == row.sha256), "source_file"].iloc[0]
        findings.append(error(f"same content as {first}: the same test is recorded twice", file=row.source_file,
                              code="duplicate-test"))
    same_day = tests[tests.duplicated(["asset", "date"], keep=False) & ~tests.index.isin(dup.index)]
    for row in same_day.itertuples():
        findings.append(warning(f"another result file has asset {row.asset} on {row.date}", file=row.source_file,
                                line=lines.get(row.source_file, {}).get("date", 0), field="date"))
    return findings


def check_points(ctx: RunContext) -> list[Finding]:
    """Validate raw points and parse input and readings into numbers with units."""
    from loopledger.schemas.results import RawPoint

    pts = ctx.points
    if pts.empty:
        return []

    def where(index: Any) -> dict[str, Any]:
        if index is None:
            return {}
        return {"file": pts.at[index, "source_file"], "line": int(pts.at[index, "line"]),
                "point": f"{pts.at[index, 'phase']} #{pts.at[index, 'point']}"}

    checked, findings = validate(pts, RawPoint, where)
    bad = set(pts.index) - set(checked.index)
    pts = pts.drop(index=list(bad))
    parsed = q.parse_column(pts["input"].where(pts["input"].notna(), ""))
    pts["input_value"], pts["input_written_unit"] = parsed["value"], parsed["unit"]
    input_units = _input_units(ctx, pts)
    for idx, problem in parsed["problem"].dropna().items():
        msg = "missing input" if pts.at[idx, "input"] is None else _own_unit(pts.at[idx, "input"], problem,
                                                                             input_units.get(idx))
        findings.append(error(f"input: {msg}", field="input", **where(idx)))
    findings += _parse_readings(pts, where)
    ctx.points = pts
    findings += _check_duplicate_points(pts, where)
    return findings


def _input_units(ctx: RunContext, pts: pd.DataFrame) -> dict[Any, str]:
    """Each point's asset's input unit from assets.csv (points of unknown assets left out)."""
    if ctx.assets.empty or "input_unit" not in ctx.assets.columns:
        return {}
    asset = pts["test"].map(ctx.tests.drop_duplicates("test").set_index("test")["asset"])
    unit = asset.map(ctx.assets["input_unit"].to_dict())
    return {i: str(u) for i, u in unit.items() if isinstance(u, str) and u}


def _own_unit(text: Any, problem: str, unit: str | None) -> str:
    """A bare input's message, suggesting the asset's own input unit (e.g. A for a current transducer)
    rather than the general mA, V or %."""
    if unit is None or not isinstance(text, int | float | str) or "has no unit" not in problem:
        return problem
    value = str(text).strip()
    return f"'{value}' has no unit: write it in the asset's input unit, e.g. '{value} {unit}', or as % of its range"


def _parse_readings(pts: pd.DataFrame, where) -> list[Finding]:  # type: ignore[no-untyped-def]
    """Fill reading (mean), reading_unit, n_readings, reading_sd, reading_half_spread."""
    findings: list[Finding] = []
    single = pts["reading"].notna()
    repeats = pts["readings"].notna()
    span = pts["reading_min"].notna() | pts["reading_max"].notna()
    given = single.astype(int) + repeats.astype(int) + span.astype(int)
    for idx in pts.index[given != 1]:
        what = "no reading" if given[idx] == 0 else "more than one of reading / readings / reading_min+max"
        findings.append(error(f"{what}: give exactly one", field="reading", **where(idx)))
    pts["reading_text"] = _reading_text(pts).astype(str)
    raw_single = pts["reading"].copy()
    pts["reading"] = np.nan
    pts["reading_unit"] = ""
    pts["n_readings"] = 1
    pts["reading_sd"] = np.nan
    pts["reading_half_spread"] = np.nan
    rows = pts.index[single & (given == 1)]
    parsed = q.parse_column(raw_single.loc[rows].rename(None)) if len(rows) else None
    if parsed is not None:
        pts.loc[rows, "reading"], pts.loc[rows, "reading_unit"] = parsed["value"], parsed["unit"]
        for idx, problem in parsed["problem"].dropna().items():
            findings.append(error(f"reading: {problem}", field="reading", **where(idx)))
        # the column was the raw text; keep the number only where it parsed
    rows = pts.index[repeats & (given == 1)]
    empty = [idx for idx in rows if isinstance(pts.at[idx, "readings"], tuple | list) and not pts.at[idx, "readings"]]
    findings += [error("readings is an empty list", field="readings", **where(idx)) for idx in empty]
    rows = rows.difference(empty)
    if len(rows):
        long = pts.loc[rows, "readings"].explode()
        parsed = q.parse_column(long.reset_index(drop=True)).set_index(long.index)
        for idx, problem in parsed["problem"].dropna().groupby(level=0).first().items():
            findings.append(error(f"readings: {problem}", field="readings", **where(idx)))
        first_unit = parsed["unit"].groupby(level=0).first()
        values = q.convert(parsed["value"], parsed["unit"], first_unit.reindex(parsed.index))
        # a repeat in units the first cannot convert to would drop out of the mean without a word
        lost = values.isna() & parsed["value"].notna() & parsed["problem"].isna()
        for idx in pd.unique(lost[lost].index):
            findings.append(error(f"readings: every repeat must be in units of the first ('{first_unit[idx]}')",
                                  field="readings", **where(idx)))
        stats = values.groupby(level=0).agg(["mean", "std", "count"])
        pts.loc[stats.index, "reading"] = stats["mean"]
        pts.loc[stats.index, "reading_sd"] = stats["std"]
        pts.loc[stats.index, "n_readings"] = stats["count"].astype(int)
        pts.loc[stats.index, "reading_unit"] = first_unit
    rows = pts.index[span & (given == 1)]
    if len(rows):
        lo = q.parse_column(pts.loc[rows, "reading_min"].fillna(""))
        hi = q.parse_column(pts.loc[rows, "reading_max"].fillna(""))
        for idx in rows:
            for name, frame in (("reading_min", lo), ("reading_max", hi)):
                if pd.notna(frame.at[idx, "problem"]):
                    findings.append(error(f"{name}: {frame.at[idx, 'problem']}", field=name, **where(idx)))
        hi_v = q.convert(hi["value"], hi["unit"], lo["unit"])
        apart = hi_v.isna() & hi["value"].notna() & lo["value"].notna()
        for idx in apart[apart].index:
            findings.append(error(f"reading_max must be in units of reading_min ('{lo.at[idx, 'unit']}')",
                                  field="reading_max", **where(idx)))
        bad = hi_v < lo["value"]
        for idx in bad[bad].index:
            findings.append(error("reading_max is below reading_min", field="reading_max", **where(idx)))
        pts.loc[rows, "reading"] = (lo["value"] + hi_v) / 2
        pts.loc[rows, "reading_half_spread"] = (hi_v - lo["value"]) / 2
        pts.loc[rows, "reading_unit"] = lo["unit"]
    pts["reading"] = pts["reading"].astype(float)
    pts["n_readings"] = pts["n_readings"].astype(int)
    return findings


def _reading_text(pts: pd.DataFrame) -> pd.Series:
    """What the technician wrote, for pages: the reading, the repeats, or min … max."""
    text = pts["reading"].where(pts["reading"].notna(), None).astype(object)
    repeats = pts["readings"].dropna().map(lambda r: "; ".join(str(v) for v in r))
    text = text.where(text.notna(), repeats.reindex(pts.index))
    spread = pts["reading_min"].astype(str) + " … " + pts["reading_max"].astype(str)
    return text.where(text.notna(), spread.where(pts["reading_min"].notna(), ""))


def _check_duplicate_points(pts: pd.DataFrame, where) -> list[Finding]:  # type: ignore[no-untyped-def]
    keys = ["source_file", "phase", "input_value", "input_written_unit", "direction", "reading", "reading_unit"]
    # points alike as text are alike as numbers too, so only rows sharing file, input and reading can
    # be duplicates: the rest are left out before the (slower) comparison as text
    maybe = pts[pts.duplicated(["source_file", "input_value", "reading"], keep=False)]
    dup = maybe[keys].astype(str).duplicated(keep="first")
    return [error("duplicate point: same phase, input, direction and reading as an earlier point",
                  field="input", code="duplicate-point", **where(idx)) for idx in maybe.index[dup]]


def join(ctx: RunContext) -> None:
    """Join each point's test header and asset registry row onto the point table."""
    header = ctx.tests[ctx.tests["valid"].astype(bool)].drop(columns=["valid"])
    row = header["asset_row"] if "asset_row" in header.columns else pd.Series(pd.NA, index=header.index)
    header = header.assign(asset_row=pd.to_numeric(row, errors="coerce").astype("Int64"))
    pts = ctx.points.drop(columns=[c for c in ("asset",) if c in ctx.points.columns])
    pts = pts.merge(header, on=["test", "source_file"], how="inner", validate="many_to_one")
    assets = ctx.asset_rows if len(ctx.asset_rows) else ctx.assets.reset_index(drop=True)
    assets = assets.assign(asset_row=assets["asset_row"].astype("Int64"))
    pts = pts.merge(assets, on=["asset", "asset_row"], how="inner", suffixes=("", "_asset"),
                    validate="many_to_one")
    ctx.points = pts.reset_index(drop=True)


@hookimpl
def ll_check(ctx: RunContext) -> list[Finding]:
    findings = check_tests(ctx)
    ctx.invalidate({f.file for f in findings if f.severity == "error"})
    findings += check_points(ctx)
    ctx.invalidate({f.file for f in findings if f.severity == "error"})
    # a file with a key nobody reads (reported when it was read) is checked whole, then left unjudged
    ctx.invalidate({f.file for f in ctx.findings if f.code == "unknown-key" and f.severity == "error" and f.file})
    findings += _without_points(ctx)
    ctx.invalidate({f.file for f in findings if f.severity == "error"})
    join(ctx)
    return findings


def _without_points(ctx: RunContext) -> list[Finding]:
    """A still-valid test with no point to judge is an error: it has no verdict to give (such a file once
    went through with none, neither passed nor failed nor listed as invalid)."""
    valid = ctx.tests[ctx.tests["valid"].astype(bool)]
    has = set(ctx.points["source_file"]) if len(ctx.points) else set()
    lines = ctx.stash.get(keys.HEADER_LINES, {})
    return [error("no readings: as_found and as_left are both empty", file=rel,
                  line=lines.get(rel, {}).get("as_found", 0), field="as_found")
            for rel in valid["source_file"] if rel not in has]


@hookimpl
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    """The assets.csv row each test was judged against: its line, from when it is in force, and the ranges it
    gave (a re-ranged asset's old tests keep their old range)."""
    if ctx.points.empty or "asset_row" not in ctx.points.columns:
        return {}
    cols = ["test", "asset_row", "valid_from", "input_min", "input_max", "input_unit", "output_min", "output_max",
            "output_unit"]
    rows = ctx.points.loc[ctx.points["test"].isin(tests), [c for c in cols if c in ctx.points.columns]]
    out: dict[str, list[Section]] = {}
    for r in rows.drop_duplicates("test").itertuples(index=False):
        begins = getattr(r, "valid_from", None)
        out[str(r.test)] = [Section(title="Register row used", kind="facts", order=15, rows=[
            ["assets.csv line", str(r.asset_row)],
            ["In force from", str(begins) if isinstance(begins, str) and begins else "the beginning (no valid_from)"],
            ["Input range", f"{r.input_min:g} to {r.input_max:g} {r.input_unit}"],
            ["Output range", f"{r.output_min:g} to {r.output_max:g} {r.output_unit}"]])]
    return out
