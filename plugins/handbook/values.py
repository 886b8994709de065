"""Page values: what every handbook page's data is made of.

Page data is plain and JSON-able (str, int, float, bool, None) so that a page's inputs can be hashed for the
incremental build and handed to a worker process: :func:`plain` for one value, :func:`column_lists` for a
whole column at once. Also here: safe page names, and the plugins' page blocks (``Section``) gathered from
the page hooks and put in page order.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import math
import re
from dataclasses import fields
from typing import Any

import numpy as np
import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import Section

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


#: the device names Windows reserves in any folder, whatever the case and with any extension ("NUL.txt" too):
#: a page named so cannot be written or opened there (Microsoft's "Naming Files, Paths, and Namespaces")
WINDOWS_RESERVED = frozenset({"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(10)),
                              *(f"LPT{i}" for i in range(10))})


def page_name(ident: Any) -> str:
    """A file name that is safe on any file system and cannot leave its folder: only ``A-Z a-z 0-9 . _ -``,
    no leading or trailing dot (nor space, which becomes ``_`` and is stripped), and never a name Windows
    reserves for a device (``CON`` and ``PRN.txt`` become ``CON_`` and ``PRN_.txt``)."""
    name = _UNSAFE.sub("_", str(ident)).strip("._") or "_"
    name = name[:150].rstrip(".")
    stem, dot, rest = name.partition(".")
    return f"{stem}_{dot}{rest}" if stem.upper() in WINDOWS_RESERVED else name


def page_names(idents: Any) -> list[str]:
    """:func:`page_name` of each id, made unique: ids whose safe names coincide (``a/b`` and ``a_b``,
    two long ids cut to the same 150 characters, or ``TX-1a`` and ``TX-1A``, one file on a file system
    that ignores case, as Windows and macOS do by default) each get a short hash of the id itself, so no
    page is written over another wherever the handbook is copied. The same id always gets the same name,
    whatever else is listed that does not coincide with it."""
    idents = [str(i) for i in idents]
    names = [page_name(i) for i in idents]
    owners: dict[str, set[str]] = {}
    for ident, name in zip(idents, names, strict=True):
        owners.setdefault(name.casefold(), set()).add(ident)
    shared = {name for name, who in owners.items() if len(who) > 1}
    return [f"{name[:140]}-{hashlib.sha256(ident.encode('utf-8')).hexdigest()[:9]}" if name.casefold() in shared
            else name for ident, name in zip(idents, names, strict=True)]


def plain(value: Any) -> Any:
    """A JSON-able Python value: NaN/NaT -> None, numpy scalars -> Python, dates -> 'YYYY-MM-DD'."""
    if type(value) is str:
        return value
    if value is None or value is pd.NaT:
        return None
    if isinstance(value, (pd.Timestamp, dt.datetime)):
        return value.date().isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return None if math.isnan(f) or math.isinf(f) else f
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return value if isinstance(value, (str, int)) else str(value)


def records(frame: pd.DataFrame, columns: list[str] | None = None) -> list[dict[str, Any]]:
    cols = [c for c in (columns or list(frame.columns)) if c in frame.columns]
    return [{c: plain(v) for c, v in zip(cols, row, strict=True)}
            for row in frame[cols].itertuples(index=False, name=None)]


_SECTION_FIELDS = [f.name for f in fields(Section) if f.name != "rows"]


def section_dict(s: Section) -> dict[str, Any]:
    """A :class:`Section` as a JSON-able dict (rows of pairs or of table cells; no deep copy)."""
    out = {name: plain(getattr(s, name)) for name in _SECTION_FIELDS}
    out["rows"] = [[plain(v) for v in row] if isinstance(row, (list, tuple)) else plain(row) for row in s.rows]
    return out


def sorted_sections(results: list[dict[str, list[Section]] | None]) -> dict[str, list[Section]]:
    """The answers of a batch page hook (one ``{id: sections}`` per plugin), as each page's blocks in
    page order."""
    merged: dict[str, list[Section]] = {}
    for found in results:
        for key, blocks in (found or {}).items():
            merged.setdefault(str(key), []).extend(blocks or [])
    return {key: sorted(blocks, key=lambda s: (s.order, s.title)) for key, blocks in merged.items()}


def merged_sections(results: list[dict[str, list[Section]] | None]) -> dict[str, list[dict[str, Any]]]:
    """:func:`sorted_sections` as page data (dicts)."""
    return {key: [section_dict(s) for s in blocks] for key, blocks in sorted_sections(results).items()}


def test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]]:
    return sorted_sections(ctx.pm.hook.ll_test_sections(ctx=ctx, tests=list(tests))) if len(tests) else {}


def asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]]:
    return sorted_sections(ctx.pm.hook.ll_asset_sections(ctx=ctx, assets=list(assets))) if len(assets) else {}


def fleet_sections(ctx: RunContext) -> list[Section]:
    """The index page's blocks about the whole fleet (``ll_fleet_sections``), in order."""
    found = [s for blocks in ctx.pm.hook.ll_fleet_sections(ctx=ctx) for s in blocks or []]
    return sorted(found, key=lambda s: (s.order, s.title))


def sheet_sections(ctx: RunContext, plans: dict[str, dict[str, Any]]) -> dict[str, list[dict[str, Any]]]:
    return merged_sections(ctx.pm.hook.ll_sheet_sections(ctx=ctx, plans=plans)) if plans else {}


def _col(frame: pd.DataFrame, name: str, default: Any = np.nan) -> pd.Series:
    return frame[name] if name in frame.columns else pd.Series(default, index=frame.index)


def _dates(values: pd.Series) -> pd.Series:
    return pd.to_datetime(values, errors="coerce", format="ISO8601")


def column_lists(frame: pd.DataFrame, columns: list[str] | None = None) -> dict[str, list[Any]]:
    """Each column as a list of JSON-able values (the values :func:`plain` gives), made per
    column rather than per cell: NaN, NaT and ±inf become None, numpy scalars Python ones, dates text."""
    out: dict[str, list[Any]] = {}
    for col in columns if columns is not None else list(frame.columns):
        series = frame[col]
        kind = series.dtype.kind if isinstance(series.dtype, np.dtype) else "O"  # pandas' own dtypes: cell by cell
        if kind == "f":
            values = series.to_numpy(dtype=float)
            items: list[Any] = values.tolist()
            for i in np.flatnonzero(~np.isfinite(values)):
                items[i] = None
        elif kind in "iub":
            items = series.to_numpy().tolist()
        elif kind == "M":
            items = [None if v is None or isinstance(v, float) else v
                     for v in series.dt.strftime("%Y-%m-%d").astype(object).where(series.notna(), None)]
        else:
            items = [v if type(v) is str else plain(v) for v in series.to_numpy(dtype=object)]
        out[col] = items
    return out


def dict_rows(lists: dict[str, list[Any]], start: int = 0, stop: int | None = None) -> list[dict[str, Any]]:
    """Rows ``start:stop`` of :func:`column_lists` output as dicts."""
    cols = list(lists)
    if not cols:
        return []
    return [dict(zip(cols, vals, strict=True)) for vals in zip(*(lists[c][start:stop] for c in cols), strict=True)]


def slices(keys: pd.Series) -> dict[Any, tuple[int, int]]:
    """Where each key's run of rows starts and stops in a frame already sorted by ``keys``."""
    values = keys.to_numpy(dtype=object)
    if not len(values):
        return {}
    change = np.flatnonzero(values[1:] != values[:-1]) + 1
    starts = np.concatenate([[0], change])
    stops = np.concatenate([change, [len(values)]])
    return {values[a]: (int(a), int(b)) for a, b in zip(starts, stops, strict=True)}


def grouped(frame: pd.DataFrame, key: str, order: list[str], columns: list[str],
            ascending: bool | list[bool] = True) -> dict[Any, list[dict[str, Any]]]:
    """``frame``'s rows as dicts per value of ``key``, each group sorted by ``order``."""
    if frame.empty:
        return {}
    cols = [c for c in columns if c in frame.columns]
    ranks = [key, *order]
    asc = [True, *([ascending] * len(order) if isinstance(ascending, bool) else ascending)]
    ordered = frame.sort_values(ranks, ascending=asc, kind="stable")
    lists = column_lists(ordered, cols)
    return {k: dict_rows(lists, a, b) for k, (a, b) in slices(ordered[key]).items()}
