"""Publish: the static HTML handbook of every asset's test history (hook ``ll_publish``).

Pages: ``index.html`` (fleet status at ``as_of``), ``assets/<asset>.html``, ``tests/<test>.html`` (one
evidence sheet per test, its chart drawn into it as inline SVG so the page is one self-contained file),
``sheets/<asset>.html`` (printable test sheet to take to site), ``overdue.html``, ``failures.html`` and
``instruments.html``. Each test page carries its result file exactly as read (shown as text, and as a
download link holding the bytes), so one file is the whole evidence of one test; the site holds no separate
copies. The handbook shows what the stages worked out; it works nothing out again.

The package, module by module:

- :mod:`.build`: the build. Pages are jobs; the fleet is split into batches (each asset with its tests),
  made in forked worker processes when there are many pages. The site is built in a staging folder and
  swapped into place whole. A manifest (``.manifest.json`` in the site) keeps a hash of each page's inputs
  and a digest per asset of everything its pages are made from; an asset whose digest is unchanged has its
  pages reused from the previous site without their data being made, and for the other assets each page
  whose hash is unchanged is reused rather than rendered and written again. A page is reused only when the
  live one still has the SHA-256 the manifest records (:mod:`.reuse`); with ``--no-cache`` every page is
  rendered.
- :mod:`.reuse`: writing pages (read-only), checking a live page before it is reused, linking or copying it.
- :mod:`.digests`: the per-asset digests of the run's tables that decide which pages are kept.
- :mod:`.fleet_pages`: data of the pages about the whole fleet (index, overdue, failures, instruments) and the
  asset and test tables they are made from.
- :mod:`.asset_pages`: data of the asset and test pages, for a batch at a time.
- :mod:`.values`: plain JSON-able page values, safe page names, the plugins' blocks in page order.
- :mod:`.blocks`: HTML of the plugins' blocks and of the points table (jinja2 filters).
- :mod:`.render`: the jinja2 environment over the site/ theme, Markdown remarks, the theme's digest.
- :mod:`.charts` over :mod:`.svgplot`: the error and drift charts as inline SVG.

How it stays fast (a fleet has tens of thousands of pages):

- Worker processes are forked from the run where the platform offers ``fork`` (elsewhere the batches are
  made one after another), so a page hook sees the finished ``ctx`` without it being copied or pickled;
  anything a hook stores while making pages stays in its worker. Forked pools (parsing, the CSV export,
  the handbook) go through :func:`loopledger.cache.forking.fork_pool`, which keeps the inherited heap out
  of the workers' garbage collector (``gc.freeze``). Two jobs run beside the main process with
  :func:`loopledger.cache.forking.side_job`, on the core it leaves idle: writing the parsed-file cache while
  the stages run, and writing ``data/`` while the handbook is built. The new handbook replaces the live one
  only once the tables are written (:func:`loopledger.output.before_swap`).
- Page data for a batch is made per column (:func:`.values.column_lists`): each table sorted once, its
  columns turned into Python lists once, each page taking its slice.
- The parts every page repeats (the verdict badge, the plugins' blocks, the points table's rows) are made in
  Python by :mod:`.blocks`, giving the bytes jinja2 would give (``tests/plugins/handbook/test_page_html.py`` renders the
  equivalent macros and compares); change both together if a block's look changes.
- Charts are SVG text (:mod:`.charts` over :mod:`.svgplot`, about 1 ms a chart), inline in the page.
- Each test page carries its result file exactly as read (:func:`.asset_pages.original_file`).
- ``benchmarks/run.py`` times a whole fleet; profile a batch with ``cProfile`` around
  :func:`.build._run_batch` before and after a change to a page hook.

The test sheet's planning is :mod:`loopledger.plugins.sheet.plan`; the calibration status of reference
instruments comes from the traceability stage (:mod:`loopledger.plugins.history.traceability`).
"""

from __future__ import annotations

from pathlib import Path

from loopledger import keys
from loopledger.context import RunContext
from loopledger.findings import Finding, warning
from loopledger.hookspecs import hookimpl
from loopledger.plugins.handbook.build import build as build_handbook


@hookimpl
def ll_publish(ctx: RunContext, out: Path) -> list[Finding]:
    from loopledger.output import staged_dir

    live = out / "handbook"
    reuse = live.is_dir() and not ctx.stash.get(keys.REBUILD_ALL)
    with staged_dir(live) as folder:
        stats = build_handbook(ctx, folder, previous=live if reuse else None)
        ctx.stash[keys.HANDBOOK_BUILD] = stats
    return [warning("this page of the published handbook was not as the last run wrote it (edited by hand?); "
                    "it was made again", file=f"handbook/{rel}", code="edited-page") for rel in stats.edited]
