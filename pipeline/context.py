"""The run context: one columnar table of all points, the registries and the findings."""

from __future__ import annotations

import dataclasses
import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd
from loopledger.findings import Finding
from loopledger.stash import Stash

if TYPE_CHECKING:
    import pluggy
    from loopledger.contracts import DecisionRule, ReadingMethod, SignalType


@dataclass
class RunContext:
    """Everything a stage sees.

    - ``points``: one row per reading point of every valid test, with the test's
      header fields and the asset's registry fields joined on;
    - ``tests``: one row per result file (invalid ones included, ``valid`` False);
    - ``assets``: each asset's row of assets.csv in force now (its latest ``valid_from``), indexed by
      ``asset``; ``asset_rows``: every valid row (an asset's history), with its line as ``asset_row``;
      a test's points are joined with the row in force on its date;
    - ``instruments`` / ``ranges``: instruments.yaml, one row per instrument and
      one row per meter range; ``calibrations``: one row per certificate (instrument, date, due,
      certificate, as_found, remarks, line), oldest first;
    - ``extras``: the storage behind :attr:`stash`; read and write it through ``ctx.stash[KEY]`` with a key
      declared in :mod:`loopledger.keys` (each has one owner), never by a string;
    - ``fleet_only``: what only stages, exported tables and the pages about the
      whole fleet may read, never an asset's or a test's pages (see :meth:`page_view`).
    """

    evidence: Path
    config: dict[str, Any]
    pm: pluggy.PluginManager
    assets: pd.DataFrame = field(default_factory=pd.DataFrame)
    asset_rows: pd.DataFrame = field(default_factory=pd.DataFrame)
    instruments: pd.DataFrame = field(default_factory=pd.DataFrame)
    ranges: pd.DataFrame = field(default_factory=pd.DataFrame)
    calibrations: pd.DataFrame = field(default_factory=pd.DataFrame)
    tests: pd.DataFrame = field(default_factory=pd.DataFrame)
    points: pd.DataFrame = field(default_factory=pd.DataFrame)
    findings: list[Finding] = field(default_factory=list)
    extras: dict[str, Any] = field(default_factory=dict)
    signal_types: dict[str, SignalType] = field(default_factory=dict)
    methods: dict[str, ReadingMethod] = field(default_factory=dict)
    decision_rules: dict[str, DecisionRule] = field(default_factory=dict)
    raw_files: dict[str, bytes] = field(default_factory=dict)
    #: asset ids of assets.csv rows dropped for errors, with their line numbers
    rejected_assets: dict[str, int] = field(default_factory=dict)
    #: instrument ids of instruments.yaml entries dropped for errors, with the lines of their ids
    rejected_instruments: dict[str, int] = field(default_factory=dict)
    #: names of ``extras`` entries, and ``"tests.COLUMN"`` / ``"points.COLUMN"``, that depend on the
    #: whole fleet (the fleet's as-found reliability, say): the handbook leaves them out of the context
    #: its asset, test and sheet pages are made from, so one new test does not make every page again
    fleet_only: set[str] = field(default_factory=set)

    @property
    def stash(self) -> Stash:
        """What stages share, by typed key (:mod:`loopledger.keys`): ``ctx.stash[keys.BUDGET]``."""
        return Stash(self.extras)

    @property
    def as_of(self) -> dt.date:
        value = self.config["as_of"]
        assert isinstance(value, dt.date)
        return value

    def section(self, name: str) -> dict[str, Any]:
        """This plugin's table of loopledger.toml (empty when absent)."""
        value = self.config.get(name, {})
        return value if isinstance(value, dict) else {}

    def page_view(self) -> RunContext:
        """This context without what is marked ``fleet_only``: what the pages of one asset and of its tests
        are made from (a page hook that reads a fleet-only name gets a KeyError, never a stale value)."""
        if not self.fleet_only:
            return self
        hidden = {table: [name.split(".", 1)[1] for name in self.fleet_only if name.startswith(table + ".")]
                  for table in ("tests", "points")}
        return dataclasses.replace(
            self, tests=self.tests.drop(columns=hidden["tests"], errors="ignore"),
            points=self.points.drop(columns=hidden["points"], errors="ignore"),
            extras={k: v for k, v in self.extras.items() if k not in self.fleet_only})

    def invalidate(self, files: set[str]) -> None:
        """Drop the points of ``files`` and mark their tests invalid (they stay listed)."""
        if not files:
            return
        if not self.tests.empty:
            self.tests.loc[self.tests["source_file"].isin(files), "valid"] = False
        if not self.points.empty:
            self.points = self.points[~self.points["source_file"].isin(files)].copy()
