"""What each asset's pages are made from, as one digest per asset (the handbook keeps an asset's pages
when its digest is the one the live site was built with, without making their page data again).

A page is made from the run context alone (tables, findings, parsed headers, the files' bytes,
configuration) and from loopledger's code and theme. Each part of the context is attributed:

- a table row goes to the asset it names: an ``asset`` column or index level, else a ``test`` or
  ``source_file`` column or index level (mapped through the tests table);
- a finding goes to the asset of its file; a dict keyed by test or file goes entry by entry;
- everything else (a table naming none of these, a row naming no known test, the registries of
  instruments, configuration, the code, the theme, every table's columns and types) goes to the
  fleet part, which is folded into every asset's digest.

So the attribution errs one way only: whatever cannot be pinned on one asset makes every page again.
Row contents are hashed with pandas' ``hash_pandas_object`` (64 bits a row, in row order per asset) and
combined with SHA-256. A ``RangeIndex`` is a row position, not content, and is left out, so
adding a test to one asset does not shift every other asset's digest; so is any unnamed integer
index (the positions left after rows were dropped).
"""

from __future__ import annotations

import hashlib
import json
from collections import defaultdict
from typing import Any

import numpy as np
import pandas as pd
from loopledger.context import RunContext

#: run-context extras that are indexes of other parts of the context (made again from them)
#: ``previous_run`` is the last run's tables, which no page shows (what they change, the verdict_changed
#: column and the changes list, is hashed where it lands): hashed, it would remake every page on every run
DERIVED_EXTRAS = {"_findings_by_file", "previous_run"}
#: columns and index levels that name a row's test or file, tried after ``asset``
OWNER_KEYS = ("test", "source_file")


def _dumps(value: Any) -> bytes:
    return json.dumps(value, sort_keys=True, default=repr, ensure_ascii=False).encode("utf-8")


def _is_text(value: Any) -> bool:
    return isinstance(value, str)


def _positional(index: pd.Index) -> bool:
    """An unnamed integer index: row positions (after rows were dropped, perhaps), not content."""
    return index.nlevels == 1 and index.name is None and pd.api.types.is_integer_dtype(index.dtype)


class _Digests:
    """SHA-256 per asset, fed in the order the parts are visited (the same in every build)."""

    def __init__(self, owners: dict[str, str]) -> None:
        self.owners = owners  # test id or source file -> asset
        self.fleet = hashlib.sha256()
        self.assets: dict[str, Any] = defaultdict(hashlib.sha256)

    def add(self, asset: Any, data: bytes) -> None:
        if isinstance(asset, str) and asset:
            self.assets[asset].update(data)
        else:
            self.fleet.update(data)

    def frame(self, name: str, frame: pd.DataFrame) -> None:
        """A table: its shape of columns and types to the fleet part, each row to its asset's part."""
        index_names = [str(n) for n in frame.index.names]
        self.fleet.update(_dumps([name, [str(c) for c in frame.columns], [str(t) for t in frame.dtypes],
                                  index_names, type(frame.index).__name__]))
        if frame.empty:
            return
        try:
            rows = pd.util.hash_pandas_object(frame, index=not _positional(frame.index)).to_numpy()
        except (TypeError, ValueError):  # a cell pandas cannot hash: the table's text, all to the fleet part
            self.fleet.update(frame.to_csv().encode("utf-8"))
            return
        owner = self._owner_column(frame)
        if owner is None:
            self.fleet.update(rows.tobytes())
            return
        codes, uniques = pd.factorize(owner, use_na_sentinel=True)
        if (codes < 0).any():
            self.fleet.update(rows[codes < 0].tobytes())
        order = np.argsort(codes, kind="stable")
        bounds = np.searchsorted(codes[order], np.arange(len(uniques) + 1))
        for k, asset in enumerate(uniques):
            mine = rows[order[bounds[k]:bounds[k + 1]]]
            self.add(asset, name.encode() + b"\0" + len(mine).to_bytes(8, "little") + mine.tobytes())

    def _owner_column(self, frame: pd.DataFrame) -> pd.Series | None:
        """The asset of each row (NaN where none is known), or None when the table names no owner."""
        def named(key: str) -> Any:
            if key in frame.columns:
                column = frame[key]
                return column if isinstance(column, pd.Series) else None  # a name used twice: no owner
            if key in frame.index.names:
                return frame.index.get_level_values(key)
            return None

        asset = named("asset")
        if asset is not None:
            values = pd.Series(np.asarray(asset, dtype=object))
            return values.where(values.map(_is_text))
        for key in OWNER_KEYS:
            values = named(key)
            if values is not None:
                return pd.Series(np.asarray(values, dtype=object)).map(self.owners)
        return None

    def mapping(self, name: str, value: dict[Any, Any]) -> None:
        """A dict keyed by test or file: each entry to its asset; the rest to the fleet part."""
        for key in sorted(value, key=repr):
            self.add(self.owners.get(key) if isinstance(key, str) else None,
                     _dumps([name, repr(key), value[key]]))


def digests(ctx: RunContext, shared_tables: dict[str, pd.DataFrame], fleet: Any) -> dict[str, str]:
    """One hex digest per asset named anywhere in the run (registered or not).

    ``shared_tables`` are the tables the handbook derived for its pages (their page names depend on
    other assets' ids); ``fleet`` is whatever else every page depends on (the code, the theme, common
    page data), hashed as JSON.
    """
    tests = ctx.tests
    owners: dict[str, str] = {}
    if len(tests) and "asset" in tests.columns:
        named = tests[tests["asset"].map(_is_text)]
        owners.update(zip(named["test"], named["asset"], strict=True))
        owners.update(zip(named["source_file"], named["asset"], strict=True))
    d = _Digests(owners)
    d.fleet.update(_dumps(["fleet", fleet, ctx.config]))
    tables = {"tests": ctx.tests, "points": ctx.points, "assets": ctx.assets, "instruments": ctx.instruments,
              "ranges": ctx.ranges, **{f"page:{k}": v for k, v in shared_tables.items()}}
    for name, frame in tables.items():
        d.frame(name, frame)
    for name in sorted(ctx.extras):
        value = ctx.extras[name]
        if name in DERIVED_EXTRAS:
            continue
        if isinstance(value, pd.DataFrame):
            d.frame(f"extra:{name}", value)
        elif isinstance(value, dict) and all(isinstance(k, str) for k in value):
            d.mapping(f"extra:{name}", value)
        else:
            d.fleet.update(_dumps([f"extra:{name}", value]))
    for f in ctx.findings:
        d.add(owners.get(f.file) if f.file else None, repr(f).encode("utf-8"))
    for rel in sorted(ctx.raw_files):
        data = ctx.raw_files[rel]
        d.add(owners.get(rel), rel.encode() + b"\0" + hashlib.sha256(data or b"").digest())
    base = d.fleet.hexdigest()
    names = set(d.assets) | {a for a in ctx.assets.index if isinstance(a, str)}
    return {a: hashlib.sha256((base + (d.assets[a].hexdigest() if a in d.assets else "")).encode()).hexdigest()
            for a in sorted(names)}
