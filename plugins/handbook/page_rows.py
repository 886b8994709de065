"""Page data for many pages at once (not a plugin itself; :mod:`loopledger.plugins.handbook.handbook` uses it).

A fleet has tens of thousands of test pages, so nothing here works one page at a
time with pandas: each table is sorted once, its columns turned into plain Python
lists once (:func:`column_lists`), and each page takes its slice. The dicts made
are the same JSON-able shapes :mod:`site_pages` describes (str, int, float, bool,
None), which the incremental build hashes.
"""

from __future__ import annotations

import base64
from typing import Any

import numpy as np
import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.plugins.handbook import site_pages as sp
from loopledger.plugins.handbook.page_html import sections_html


def column_lists(frame: pd.DataFrame, columns: list[str] | None = None) -> dict[str, list[Any]]:
    """Each column as a list of JSON-able values (the values :func:`site_pages.plain` gives), made per
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
            items = [v if type(v) is str else sp.plain(v) for v in series.to_numpy(dtype=object)]
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


def registry_rows(ctx: RunContext) -> dict[Any, dict[str, Any]]:
    """Each asset's assets.csv row as a dict."""
    lists = column_lists(ctx.assets)
    return dict(zip(ctx.assets.index, dict_rows(lists), strict=True))


def instrument_rows(ctx: RunContext) -> dict[Any, dict[str, Any]]:
    """What a test page shows of each reference instrument in instruments.yaml."""
    inst = ctx.instruments
    cols = {c: column_lists(inst, [c])[c] if c in inst.columns else [None] * len(inst)
            for c in ("description", "serial", "calibrated", "due", "accuracy", "tolerance")}
    return {ident: {"description": cols["description"][i], "serial": cols["serial"][i],
                    "calibrated": cols["calibrated"][i], "due": cols["due"][i],
                    "spec": cols["accuracy"][i] or cols["tolerance"][i]}
            for i, ident in enumerate(inst.index)}


def _rig(used: pd.DataFrame, instruments: dict[Any, dict[str, Any]]) -> dict[Any, list[dict[str, Any]]]:
    out: dict[Any, list[dict[str, Any]]] = {}
    blank = {"description": None, "serial": None, "calibrated": None, "due": None, "spec": None}
    for test, role, ident, status, out_of_cal, known in zip(
            used["test"], used["role"], used["instrument"], used["status"], used["out_of_cal"], used["known"],
            strict=True):
        info = instruments.get(ident, blank) if known else blank
        out.setdefault(test, []).append({"role": role, "id": ident, "status": status, "out_of_cal": bool(out_of_cal),
                                         **info})
    return out


def test_pages(ctx: RunContext, tests: pd.DataFrame, points: pd.DataFrame, used: pd.DataFrame,
               registry: dict[Any, dict[str, Any]], instruments: dict[Any, dict[str, Any]],
               blocks: dict[str, list[Section]]) -> dict[Any, dict[str, Any]]:
    """Each test's evidence page: ``tests`` (rows of :func:`site_pages.test_table`), their ``points``
    (with the chart columns), their rows of :func:`site_pages.usage`, and the plugins' ``blocks`` (as
    the HTML of the page's plugin sections)."""
    pts_cols = [c for c in sp.POINT_COLS if c in points.columns]
    mine = points[points["test"].isin(tests["test"])] if len(points) else points
    table = grouped(mine, "test", ["phase", "point"], pts_cols)
    charts = grouped(mine, "test", ["phase", "input_pct"], sp.CHART_COLS) if len(mine) else {}
    rig = _rig(used[used["test"].isin(tests["test"])], instruments)
    heads = dict_rows(column_lists(tests))
    out: dict[Any, dict[str, Any]] = {}
    for head in heads:
        tid = head["test"]
        burden = [(label, head[col], unit) for col, label, unit in sp.BURDEN if col in head
                  and head[col] not in (None, "")]
        analysis = [(label, head[col]) for col, label in sp.ANALYSIS if col in head and head[col] is not None]
        chart = charts.get(tid)
        out[tid] = {
            "test": head, "asset": registry.get(head.get("asset"), {}), "instruments": rig.get(tid, []),
            "points": table.get(tid, []), "point_cols": pts_cols, "burden": burden, "analysis": analysis,
            "findings": [{"severity": f.severity, "line": sp.plain(f.line), "field": f.field, "point": f.point,
                          "message": f.message, "stage": f.stage}
                         for f in sp.findings_of(ctx, str(head["source_file"]))],
            "chart": {"points": chart} if chart else None,
            "sections": sections_html(blocks.get(str(tid)) if head.get("valid") else None)}
    return out


STATUS_COLS = [*sp.ASSET_COLS, "drift_pct_span_per_year", "recommended_interval_months", "last_test"]


def asset_pages(ctx: RunContext, assets: pd.DataFrame, tests: pd.DataFrame, points: pd.DataFrame,
                registry: dict[Any, dict[str, Any]], latest: dict[Any, dict[str, Any] | None],
                blocks: dict[str, list[Section]]) -> dict[Any, dict[str, Any]]:
    """Each asset's page: ``assets`` (rows of :func:`site_pages.asset_table`), their ``tests`` and
    ``points``, the error chart of each test (``latest``: test id -> chart data) and the plugins' blocks."""
    history = grouped(tests[tests["asset"].isin(assets["asset"])] if len(tests) else tests, "asset",
                      ["date", "test"], sp.TEST_COLS, ascending=False)
    drift = drift_charts(ctx, assets, points)
    status = dict_rows(column_lists(assets.reindex(columns=STATUS_COLS)))
    out: dict[Any, dict[str, Any]] = {}
    for ident, st in zip(assets["asset"], status, strict=True):
        out[ident] = {"asset": registry[ident], "status": st, "tests": history.get(ident, []),
                      "latest_chart": latest.get(st["last_test"]) if st["last_test"] is not None else None,
                      "drift_chart": drift.get(ident), "sections": sections_html(blocks.get(str(ident)))}
    return out


def drift_charts(ctx: RunContext, assets: pd.DataFrame, points: pd.DataFrame) -> dict[Any, dict[str, Any]]:
    """As-found error per test point over the years, for each asset with more than one test, with the
    history stage's fitted drift lines when present (see :func:`site_pages.drift_chart_data`)."""
    pts = points[points["asset"].isin(assets["asset"])] if len(points) else points
    if pts.empty:
        return {}
    n_tests = pts.groupby("asset", sort=False)["test"].nunique()
    charted = n_tests.index[n_tests > 1]
    if not len(charted):
        return {}
    pts = pts[pts["asset"].isin(charted)]
    drift = ctx.extras.get("drift_points")
    if isinstance(drift, pd.DataFrame) and {"asset", "input_pct", "date", "error_pct_span", "as_left_pct",
                                            "trims_pct"} <= set(drift.columns):
        rows = drift[drift["asset"].isin(charted)]
        frame = pd.DataFrame({"asset": rows["asset"], "date": rows["date"].astype(str),
                              "input_pct": rows["input_pct"].round(3), "error_pct": rows["error_pct_span"],
                              "as_left_pct": rows["as_left_pct"], "trims_pct": rows["trims_pct"]})
    else:
        found = pts[pts["phase"] == "as_found"]
        frame = pd.DataFrame({"asset": found["asset"], "date": found["date"], "input_pct": found["input_pct"].round(3),
                              "error_pct": found["error_pct_span"]})
    series = grouped(frame, "asset", ["input_pct", "date"], [c for c in frame.columns if c != "asset"])
    fits = ctx.extras.get("drift_fits")
    lines: dict[Any, list[dict[str, Any]]] = {}
    if isinstance(fits, pd.DataFrame) and {"asset", "input_pct", "slope_pct_per_year", "intercept_pct",
                                           "ref_date"} <= set(fits.columns):
        lines = grouped(fits[fits["asset"].isin(charted)], "asset", ["input_pct"],
                        ["input_pct", "slope_pct_per_year", "intercept_pct", "ref_date", "n", "stderr"])
    mpe = (pts["mpe"] / pts["span"].abs() * 100.0).groupby(pts["asset"], sort=False).max()
    end = ctx.as_of.isoformat()
    return {a: {"points": series.get(a, []), "fits": lines.get(a, []), "mpe_pct": sp.plain(mpe.get(a)), "end": end}
            for a in charted}


#: the file as read is shown as text in its test page up to this size (always offered for download)
SHOW_ORIGINAL_BYTES = 65_536


def original_file(raw: bytes | None, rel: Any) -> dict[str, Any] | None:
    """A result file exactly as read, for its test page: name, size, the bytes in base64 (a download
    link), and the text where the file is UTF-8 without NUL characters and not over
    :data:`SHOW_ORIGINAL_BYTES`. None where the file could not be read."""
    if raw is None:
        return None
    text = None
    if len(raw) <= SHOW_ORIGINAL_BYTES and b"\0" not in raw:
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            text = None
    return {"name": str(rel).rsplit("/", 1)[-1], "bytes": len(raw), "base64": base64.b64encode(raw).decode("ascii"),
            "text": text}
