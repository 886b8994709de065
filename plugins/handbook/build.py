"""Building the handbook: pages as jobs, batches made in worker processes, the manifest, and the reuse
of the pages of assets whose inputs did not change (see the package's docstring)."""

from __future__ import annotations

import importlib.resources
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd
from loopledger.cache.forking import can_fork, fork_pool, share_out
from loopledger.context import RunContext
from loopledger.plugins.handbook import asset_pages as pages
from loopledger.plugins.handbook import blocks, cautions, digests, fleet_pages, reuse, values
from loopledger.plugins.handbook.fleet_pages import CAUTIONS
from loopledger.plugins.handbook.render import FORMAT, STATIC, Job, _depth, _theme_digest, render_job, render_markdown
from loopledger.plugins.history import traceability
from loopledger.plugins.sheet import plan

MANIFEST = ".manifest.json"
#: render in worker processes only when at least this many pages changed (process start-up costs)
PARALLEL_MIN = 48


@dataclass
class Shared:
    """What every page is made from, worked out once per build (before any worker process starts)."""

    common: dict[str, Any]
    used: pd.DataFrame
    tests: pd.DataFrame
    assets: pd.DataFrame
    points: pd.DataFrame
    registry: dict[Any, dict[str, Any]]
    instruments: dict[Any, dict[str, Any]]


#: the point columns page data reads besides those a page shows (fleet_pages.POINT_COLS)
PAGE_POINT_COLS = ["test", "asset", "date", "phase", "point", "input_pct", "error_pct_span", "mpe", "span"]


def prepare(ctx: RunContext) -> Shared:
    rule = str(ctx.section("decision").get("rule", "simple"))
    used = traceability.usage(ctx)
    tests = fleet_pages.test_table(ctx)
    assets = fleet_pages.asset_table(ctx, tests)
    points = ctx.points
    if len(points):  # only the columns pages show or chart (not a copy of the wide table), computed once
        keep = [c for c in dict.fromkeys([*PAGE_POINT_COLS, *fleet_pages.POINT_COLS]) if c in points.columns]
        extra = fleet_pages.chart_columns(points)
        points = points[keep].assign(**{c: extra[c].to_numpy() for c in fleet_pages.CHART_COLS[2:]})
    return Shared({"as_of": ctx.as_of.isoformat(), "cautions": CAUTIONS, "rule": rule}, used, tests, assets,
                  points, pages.registry_rows(ctx), pages.instrument_rows(ctx))


def _job(sh: Shared, rel: str, template: str, data: dict[str, Any], charts: dict[str, Any] | None = None) -> Job:
    return Job(rel, template, {**sh.common, **data, "root": _depth(rel), "page_rel": rel}, charts or {})


def fleet_jobs(ctx: RunContext, sh: Shared) -> list[Job]:
    """The pages about the whole fleet: index, overdue, failures, reference instruments."""
    assets, tests = sh.assets, sh.tests
    index = {**fleet_pages.index_data(ctx, assets, tests), "sections": blocks.sections_html(values.fleet_sections(ctx))}
    failed_tests = tests[tests["verdict"].isin(["fail", "invalid"])].sort_values(["date", "test"], ascending=False) \
        if len(tests) else tests
    return [
        _job(sh, "index.html", "index.html", index),
        _job(sh, "overdue.html", "overdue.html", {
            "assets": index["action"]["overdue"],
            "untested": values.records(assets[assets["verdict"] == "untested"], fleet_pages.ASSET_COLS),
            "soon": values.records(assets[assets["due_soon"]].sort_values("next_due"), fleet_pages.ASSET_COLS)}),
        _job(sh, "failures.html", "failures.html", {"tests": values.records(failed_tests, fleet_pages.TEST_COLS),
                                                    "assets": index["action"]["failed"],
                                                    **fleet_pages.failure_events(ctx, tests)}),
        _job(sh, "instruments.html", "instruments.html", fleet_pages.instruments_data(ctx, sh.used, tests)),
        _job(sh, "changes.html", "changes.html", fleet_pages.changes_data(ctx, tests)),
    ]


def batch_jobs(ctx: RunContext, sh: Shared, asset_ids: list[Any], test_ids: list[Any]) -> list[Job]:
    """The pages of some assets (asset page and test sheet) and of some tests (an asset's tests come in
    the same batch as the asset), each page hook asked once for the whole batch."""
    no_tests = sh.tests.iloc[0:0]
    assets = sh.assets.loc[list(asset_ids)] if len(asset_ids) else sh.assets.iloc[0:0]
    tests = sh.tests[sh.tests["test"].isin(test_ids)] if len(test_ids) else no_tests
    points = sh.points[sh.points["test"].isin(test_ids)] if len(sh.points) and len(test_ids) else sh.points.iloc[0:0]
    valid = [str(t) for t in tests.loc[tests["valid"].astype(bool), "test"]] if len(tests) else []
    test_pages = pages.test_pages(ctx, tests, points, sh.used, sh.registry, sh.instruments,
                                 values.test_sections(ctx, valid))
    latest = {tid: page["chart"] for tid, page in test_pages.items()}
    asset_data = pages.asset_pages(ctx, assets, tests, points, sh.registry, latest,
                                 values.asset_sections(ctx, [str(a) for a in assets["asset"]]))
    plans = plan.default_plans(ctx, list(assets["asset"]), tests)
    sheets = plan.sheets(ctx, plans, points, values.sheet_sections(ctx, plans))
    out: list[Job] = []
    for name, ident, last_date in zip(assets["page"], assets["asset"], assets["last_date"], strict=True):
        data = asset_data[ident]
        charts: dict[str, Any] = {}
        if data["latest_chart"]:  # the same chart as the latest test's page
            charts["latest_chart"] = ("error", data.pop("latest_chart"), f"{ident}: test of {last_date}")
        if data["drift_chart"]:
            charts["drift_chart"] = ("drift", data.pop("drift_chart"), f"{ident}: as-found error over time")
        out.append(_job(sh, f"assets/{name}.html", "asset.html", data, charts))
        out.append(_job(sh, f"sheets/{name}.html", "sheet.html", {"sheet": sheets[str(ident)],
                                                                   "asset_page": f"{name}.html",
                                                                   "page_cautions": sheets[str(ident)]["cautions"]}))
    for tid, page, asset, date, source, remarks, connection in zip(
            tests["test"], tests["page"], tests["asset"], tests["date"], tests["source_file"],
            tests["remarks"] if "remarks" in tests else [None] * len(tests),
            tests["connection"] if "connection" in tests else [None] * len(tests), strict=True):
        data = dict(test_pages[tid])
        chart = data.pop("chart")
        charts = {"chart": ("error", chart, f"{asset}: test of {date}")} if chart else {}
        data["remarks_html"] = render_markdown(remarks)
        data["original"] = pages.original_file(ctx.raw_files.get(source), source)
        data["has_asset"] = asset in ctx.assets.index
        data["page_cautions"] = cautions.for_asset(ctx.assets.loc[asset] if data["has_asset"] else {}, connection)
        out.append(_job(sh, f"tests/{page}.html", "test.html", data, charts))
    return out


def jobs(ctx: RunContext) -> list[Job]:
    """Every page of the site with the data it is made from."""
    view = ctx.page_view()
    sh = prepare(view)
    return [*fleet_jobs(ctx, sh), *batch_jobs(view, sh, list(sh.assets.index), list(sh.tests["test"]))]


def batches(sh: Shared, n: int, only: set[Any] | None = None) -> list[tuple[list[Any], list[Any]]]:
    """The assets (with their tests) shared out into ``n`` batches of about equal work; tests whose asset
    is not in the registry are shared out too. ``only``: just these registered assets (and every such
    test)."""
    mine = sh.tests.groupby("asset", sort=False)["test"].agg(list).to_dict() if len(sh.tests) else {}
    assets = [a for a in sh.assets.index if only is None or a in only]
    # a page per test; the asset page and sheet weigh 3
    groups = share_out([len(mine.get(a, ())) + 3 for a in assets], n)
    out = [([assets[i] for i in g], [t for i in g for t in mine.get(assets[i], ())]) for g in groups]
    orphans = sh.tests.loc[~sh.tests["asset"].isin(sh.assets.index), "test"] if len(sh.tests) else []
    for i, test in enumerate(orphans):
        out[i % len(out)][1].append(test)
    return [b for b in out if b[0] or b[1]]


def _read_manifest(folder: Path) -> dict[str, Any]:
    try:
        found = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
        return found if isinstance(found, dict) and isinstance(found.get("pages"), dict) else {}
    except (OSError, ValueError):
        return {}


@dataclass
class BuildStats:
    pages: int = 0
    rendered: int = 0
    reused: int = 0
    #: registered assets whose page data was not made again (their digest matched the live site's)
    kept: int = 0
    #: pages of the live site that differed from what the last build wrote (edited by hand), made again
    edited: list[str] = field(default_factory=list)


@dataclass
class _Build:
    """One build's settings, handed to worker processes by forking (never pickled). ``ctx`` is the run's
    :meth:`~RunContext.page_view`, which an asset's pages and its digest are made from; ``fleet`` the whole
    run, for the pages about the fleet."""

    ctx: RunContext
    fleet: RunContext
    shared: Shared
    folder: Path
    previous: Path | None
    old_pages: dict[str, Any]
    theme: str


_CURRENT: _Build | None = None


def _emit(b: _Build, job: Job) -> tuple[dict[str, Any], bool]:
    """Write one page into the staging folder: reused from the live site when its inputs are unchanged and
    the live page is intact (:mod:`.reuse`), else rendered. Returns its manifest entry (``edited`` when the
    live page had been changed by hand) and whether it was rendered."""
    digest = job.digest(b.theme)
    prev = b.old_pages.get(job.rel)
    if b.previous is not None and prev and prev.get("hash") == digest:
        data = reuse.verified(b.previous, job.rel, prev)
        if data is not None:
            reuse.place(b.previous, b.folder, job.rel, data)
            return {"hash": digest, "sha": prev["sha"]}, False
    data = render_job(job)
    reuse.write(b.folder / job.rel, data)
    entry: dict[str, Any] = {"hash": digest, "sha": reuse.sha(data)}
    if b.previous is not None and prev and prev.get("hash") == digest and reuse.edited(b.previous, job.rel, prev):
        entry["edited"] = True
    return entry, True


def _run_batch(batch: tuple[list[Any], list[Any]]) -> tuple[dict[str, Any], int]:
    """Make, compare and write the pages of one batch (in a worker process when parallel): (manifest page
    entries, pages rendered)."""
    b = _CURRENT
    assert b is not None, "no build in progress"
    entries: dict[str, Any] = {}
    rendered = 0
    for job in batch_jobs(b.ctx, b.shared, *batch):
        entries[job.rel], made = _emit(b, job)
        rendered += made
    return entries, rendered


def _run_fleet(b: _Build) -> tuple[dict[str, Any], int]:
    """The pages about the whole fleet (made in this process while the workers make the batches)."""
    entries: dict[str, Any] = {}
    rendered = 0
    for job in fleet_jobs(b.fleet, b.shared):
        entries[job.rel], made = _emit(b, job)
        rendered += made
    return entries, rendered


def build(ctx: RunContext, folder: Path, previous: Path | None = None, workers: int | None = None) -> BuildStats:
    """Write the whole site into ``folder``; reuse unchanged pages from ``previous`` (the live site)."""
    global _CURRENT
    theme = _theme_digest()
    view = ctx.page_view()  # what an asset's pages are made from: nothing that depends on other assets
    sh = prepare(view)
    live = previous if previous is not None and previous.is_dir() else None
    old = _read_manifest(live) if live is not None else {}
    old_pages = old.get("pages", {}) if old.get("theme") == theme else {}
    found = old.get("assets") if old_pages else None
    old_keys: dict[str, Any] = found if isinstance(found, dict) else {}
    # with nothing to keep, the digests (for the next build) are worked out while the workers make pages
    keys = asset_digests(view, sh, theme) if live is not None and old_keys else None
    kept = _kept_assets(sh, keys, old_keys, old_pages, live) if keys is not None and live is not None else {}
    b = _Build(view, ctx, sh, folder, live, old_pages, theme)
    kept_done, edited = _keep(b, kept)  # an asset with a page edited by hand is made again whole
    kept = {asset: rels for asset, rels in kept.items() if asset not in edited}
    workers = workers if workers is not None else (os.cpu_count() or 1)
    made = set(sh.assets.index) - set(kept)
    todo = batches(sh, 1, only=made)
    pages = 4 + sum(2 * len(a) + len(t) for a, t in todo)
    _CURRENT = b
    try:
        if workers < 2 or pages < PARALLEL_MIN or not can_fork():  # in this process
            done = [*(_run_batch(batch) for batch in todo), _run_fleet(b)]
            keys = keys if keys is not None else asset_digests(view, sh, theme)
        else:  # forked workers share the run's tables without copying them
            with fork_pool(workers) as pool:
                futures = [pool.submit(_run_batch, batch) for batch in batches(sh, workers * 4, only=made)]
                fleet = _run_fleet(b)
                keys = keys if keys is not None else asset_digests(view, sh, theme)
                done = [*(f.result() for f in futures), fleet]
    finally:
        _CURRENT = None
    done.append(kept_done)
    manifest: dict[str, Any] = {"theme": theme, "assets": keys, "pages": {}}
    stats = BuildStats(edited=sorted(rel for rels in edited.values() for rel in rels))
    for entries, rendered in done:
        for rel, entry in entries.items():
            if entry.pop("edited", False):
                stats.edited.append(rel)
        manifest["pages"].update(entries)
        stats.pages += len(entries)
        stats.rendered += rendered
    stats.reused = stats.pages - stats.rendered
    stats.kept = len(kept)
    static = importlib.resources.files("loopledger.site").joinpath("static")
    stats.edited.sort()
    for name in STATIC:
        reuse.write(folder / name, static.joinpath(name).read_bytes())
    reuse.write(folder / MANIFEST, json.dumps(manifest, sort_keys=True, indent=1).encode("utf-8") + b"\n")
    return stats


def asset_digests(ctx: RunContext, sh: Shared, theme: str) -> dict[str, str]:
    """A digest per asset of everything its pages are made from (:mod:`.digests`)."""
    from loopledger.cache.store import engine_fingerprint

    return digests.digests(ctx, {"tests": sh.tests, "assets": sh.assets, "used": sh.used},
                               [FORMAT, theme, engine_fingerprint(), sh.common])


def asset_pages(sh: Shared) -> dict[Any, list[str]]:
    """The pages of each registered asset: its page, its test sheet and its tests' pages."""
    tests = sh.tests.groupby("asset", sort=False)["page"].agg(list).to_dict() if len(sh.tests) else {}
    return {asset: [f"assets/{name}.html", f"sheets/{name}.html", *(f"tests/{t}.html" for t in tests.get(asset, ()))]
            for asset, name in zip(sh.assets.index, sh.assets["page"], strict=True)}


def _kept_assets(sh: Shared, keys: dict[str, str], old_keys: dict[str, Any], old_pages: dict[str, Any],
                 live: Path) -> dict[Any, list[str]]:
    """The registered assets whose pages the live site already holds as this build would make them
    (same digest as in the live site's manifest, every page listed there and on disk), with those pages."""
    kept: dict[Any, list[str]] = {}
    for asset, rels in asset_pages(sh).items():
        if isinstance(asset, str) and keys.get(asset) is not None and old_keys.get(asset) == keys[asset] and \
                all(rel in old_pages and (live / rel).is_file() for rel in rels):
            kept[asset] = rels
    return kept


def _keep(b: _Build, kept: dict[Any, list[str]]) -> tuple[tuple[dict[str, Any], int], dict[Any, list[str]]]:
    """The kept assets' pages put into the new site from the live one, with their manifest entries (none
    rendered); and the assets left out because a page of theirs is not as the last build wrote it, with
    those pages (nothing of such an asset is placed, so its pages are all made again)."""
    entries: dict[str, Any] = {}
    edited: dict[Any, list[str]] = {}
    if b.previous is None:
        return (entries, 0), edited
    for asset, rels in kept.items():
        found = [reuse.verified(b.previous, rel, b.old_pages[rel]) for rel in rels]
        if any(data is None for data in found):
            edited[asset] = [rel for rel, data in zip(rels, found, strict=True)
                             if data is None and reuse.edited(b.previous, rel, b.old_pages[rel])]
            continue
        for rel, data in zip(rels, found, strict=True):
            assert data is not None
            reuse.place(b.previous, b.folder, rel, data)
            entries[rel] = b.old_pages[rel]
    return (entries, 0), edited
