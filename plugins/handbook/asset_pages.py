"""Data of the asset and test pages, for many pages at once (used by :mod:`.build`).

A fleet has tens of thousands of test pages, so nothing here works one page at a
time with pandas: each table is sorted once, its columns turned into plain Python
lists once (:func:`column_lists`), and each page takes its slice. The dicts made
are the same JSON-able shapes :mod:`.values` describes (str, int, float, bool,
None), which the incremental build hashes.
"""

from __future__ import annotations

import base64
from typing import Any

import pandas as pd
from loopledger import keys
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.plugins.handbook import fleet_pages, values
from loopledger.plugins.handbook.blocks import SEVERITY_MARKS, finding_mark, sections_html
from loopledger.plugins.handbook.values import column_lists, dict_rows, grouped
from loopledger.plugins.history import traceability


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


def _rig(ctx: RunContext, used: pd.DataFrame,
         instruments: dict[Any, dict[str, Any]]) -> dict[Any, list[dict[str, Any]]]:
    """Each test's reference instruments, one row per role, for the page's one table of them: what
    instruments.yaml says of each (description, serial, specification), and the certificate in force on the
    test date with its dates and status in words (:func:`traceability.page_rows`; where the history stage
    has none, the register's flat dates and :func:`traceability.usage`'s words)."""
    out: dict[Any, list[dict[str, Any]]] = {}
    blank = {"description": None, "serial": None, "calibrated": None, "due": None, "spec": None}
    tests = list(dict.fromkeys(str(t) for t in used["test"]))
    in_force = {(test, row[0]): row for test, rows in traceability.page_rows(ctx, tests).items() for row in rows}
    for test, role, ident, status, out_of_cal, known in zip(
            used["test"], used["role"], used["instrument"], used["status"], used["out_of_cal"], used["known"],
            strict=True):
        info = instruments.get(ident, blank) if known else blank
        row = {"role": role, "id": ident, "status": status, "out_of_cal": bool(out_of_cal), "certificate": None,
               **info}
        cert = in_force.get((str(test), role))
        if cert is not None:
            row.update(certificate=cert[2], calibrated=cert[3], due=cert[4], status=cert[5])
        out.setdefault(test, []).append(row)
    return out


#: the findings the page's own table of reference instruments states in full
INSTRUMENT_CODES = ("reference-past-due",)


def page_findings(findings: list[dict[str, Any]], sections: list[Section]) -> dict[str, Any]:
    """A test page's findings, each shown once: a finding whose code a block on the page ``covers`` (or the
    page's table of reference instruments) is shown as a mark beside that block's title, and the list names
    the blocks that carry them. Returns ``findings`` (those listed), ``marks`` (block index -> mark),
    ``carried`` (title and mark of each block carrying findings) and ``instruments_mark``."""
    where: dict[str, int] = {}
    for i, s in enumerate(sections):
        for code in getattr(s, "covers", ()) or ():
            where.setdefault(code, i)
    listed: list[dict[str, Any]] = []
    by_block: dict[int, list[dict[str, Any]]] = {}
    for f in findings:
        code = f.get("code") or ""
        at = -1 if code in INSTRUMENT_CODES else where.get(code)
        if at is None:
            listed.append(f)
        else:
            by_block.setdefault(at, []).append(f)
    marks = {i: finding_mark(fs) for i, fs in by_block.items()}
    carried = [{"title": "Reference instruments" if i < 0 else sections[i].title, "mark": marks[i]}
               for i in sorted(by_block)]
    return {"findings": listed, "marks": {i: m for i, m in marks.items() if i >= 0}, "carried": carried,
            "instruments_mark": marks.get(-1, ""), "tally": finding_tally(findings)}


def finding_tally(findings: list[dict[str, Any]]) -> str:
    """How many findings of each severity the page has, in words with their marks ("⚠ 2 warnings")."""
    words = {"error": ("error", "errors"), "warning": ("warning", "warnings"), "note": ("note", "notes")}
    counts = {sev: sum(f["severity"] == sev for f in findings) for sev in words}
    return ", ".join(f"{SEVERITY_MARKS[sev]} {n} {words[sev][n != 1]}" for sev, n in counts.items() if n)


def test_pages(ctx: RunContext, tests: pd.DataFrame, points: pd.DataFrame, used: pd.DataFrame,
               registry: dict[Any, dict[str, Any]], instruments: dict[Any, dict[str, Any]],
               blocks: dict[str, list[Section]]) -> dict[Any, dict[str, Any]]:
    """Each test's evidence page: ``tests`` (rows of :func:`fleet_pages.test_table`), their ``points``
    (with the chart columns), their rows of :func:`traceability.usage`, and the plugins' ``blocks`` (as
    the HTML of the page's plugin sections)."""
    pts_cols = [c for c in fleet_pages.POINT_COLS if c in points.columns]
    mine = points[points["test"].isin(tests["test"])] if len(points) else points
    table = grouped(mine, "test", ["phase", "point"], pts_cols)
    charts = grouped(mine, "test", ["phase", "input_pct"], fleet_pages.CHART_COLS) if len(mine) else {}
    rig = _rig(ctx, used[used["test"].isin(tests["test"])], instruments)
    heads = dict_rows(column_lists(tests))
    out: dict[Any, dict[str, Any]] = {}
    for head in heads:
        tid = head["test"]
        chart = charts.get(tid)
        shown = (blocks.get(str(tid)) or []) if head.get("valid") else []
        said = page_findings([{"severity": f.severity, "line": values.plain(f.line), "field": f.field,
                               "point": f.point, "message": f.message, "stage": f.stage, "code": f.code}
                              for f in fleet_pages.findings_of(ctx, str(head["source_file"]))], shown)
        out[tid] = {
            "test": head, "asset": registry.get(head.get("asset"), {}), "instruments": rig.get(tid, []),
            "points": table.get(tid, []), "point_cols": pts_cols, "findings": said["findings"],
            "carried": said["carried"], "instruments_mark": said["instruments_mark"], "tally": said["tally"],
            "chart": {"points": chart} if chart else None,
            "sections": sections_html(shown, said["marks"])}
    return out


STATUS_COLS = [*fleet_pages.ASSET_COLS, "drift_pct_span_per_year", "recommended_interval_months", "last_test"]


def asset_pages(ctx: RunContext, assets: pd.DataFrame, tests: pd.DataFrame, points: pd.DataFrame,
                registry: dict[Any, dict[str, Any]], latest: dict[Any, dict[str, Any] | None],
                blocks: dict[str, list[Section]]) -> dict[Any, dict[str, Any]]:
    """Each asset's page: ``assets`` (rows of :func:`fleet_pages.asset_table`), their ``tests`` and
    ``points``, the error chart of each test (``latest``: test id -> chart data) and the plugins' blocks."""
    history = grouped(tests[tests["asset"].isin(assets["asset"])] if len(tests) else tests, "asset",
                      ["date", "test"], fleet_pages.TEST_COLS, ascending=False)
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
    history stage's fitted drift lines when present (see :func:`drift_charts`)."""
    pts = points[points["asset"].isin(assets["asset"])] if len(points) else points
    if pts.empty:
        return {}
    n_tests = pts.groupby("asset", sort=False)["test"].nunique()
    charted = n_tests.index[n_tests > 1]
    if not len(charted):
        return {}
    pts = pts[pts["asset"].isin(charted)]
    drift = ctx.stash.get(keys.DRIFT_POINTS)
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
    fits = ctx.stash.get(keys.DRIFT_FITS)
    lines: dict[Any, list[dict[str, Any]]] = {}
    if isinstance(fits, pd.DataFrame) and {"asset", "input_pct", "slope_pct_per_year", "intercept_pct",
                                           "ref_date"} <= set(fits.columns):
        lines = grouped(fits[fits["asset"].isin(charted)], "asset", ["input_pct"],
                        ["input_pct", "slope_pct_per_year", "intercept_pct", "ref_date", "n", "stderr", "status"])
    mpe = (pts["mpe"] / pts["span"].abs() * 100.0).groupby(pts["asset"], sort=False).max()
    end = ctx.as_of.isoformat()
    return {a: {"points": series.get(a, []), "fits": lines.get(a, []), "mpe_pct": values.plain(mpe.get(a)), "end": end}
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
