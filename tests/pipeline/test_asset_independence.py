"""What the stages work out for one asset depends on that asset's files alone, but for the couplings named here.

A rule of our own (no outside source), and the ground a rerun that judges only the changed assets would
stand on: each asset of the demo folder is judged once with the whole folder and once with only its own
result files beside the same registries, and every row the stages leave about it (tests, points, the
tables in ``ctx.extras`` that name an asset, a test or a file, and the findings on its files) must be the
same, value for value. A new cross-asset dependency in a stage fails here until it is named below with
its reason (and, if it reaches a page, marked fleet-only: see DEVELOPERS.md).
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pluggy
import pytest
from loopledger import runner
from loopledger.context import RunContext
from loopledger.host import get_plugin_manager

DEMO = Path(__file__).resolve().parents[2] / "sample_results"

#: the test columns that depend on other assets' tests: a test's false-accept prior counts the as-found
#: results of its signal type (every asset's) dated before it
COUPLED_TEST_COLUMNS = {"global_false_accept", "prior_n", "prior_in_tolerance", "false_accept_shown",
                        "false_accept_over", "false_accept_prior",
                        "prior_p_in"}  # issue 22: the Bayesian prior, from the same fleet counts
#: findings worked out from those columns
COUPLED_FINDINGS = {"false-accept"}


def _same(a: Any, b: Any) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (np.isnan(a) and np.isnan(b))
    missing_a = a is None or (isinstance(a, float) and np.isnan(a)) or a is pd.NaT or a is pd.NA
    missing_b = b is None or (isinstance(b, float) and np.isnan(b)) or b is pd.NaT or b is pd.NA
    if missing_a or missing_b:
        return missing_a and missing_b
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        return bool(np.array_equal(np.asarray(a, dtype=object), np.asarray(b, dtype=object)))
    return bool(a == b)


def _rows(frame: pd.DataFrame, owners: pd.Series, asset: str, drop: set[str]) -> list[dict[str, Any]]:
    """The rows of ``frame`` that belong to ``asset``, as plain values, in an order of their own (a stage may
    order its rows by what the whole folder holds; the pages and exports sort them)."""
    mine = frame[(owners == asset).to_numpy()]
    mine = mine.drop(columns=[c for c in mine.columns if c in drop])
    rows = [dict(zip(mine.columns, (v.item() if isinstance(v, np.generic) else v for v in row), strict=True))
            for row in mine.itertuples(index=False)]
    return sorted(rows, key=lambda r: repr(sorted((k, repr(v)) for k, v in r.items())))


def _owner(frame: pd.DataFrame, ctx: RunContext) -> pd.Series | None:
    test_asset = dict(zip(ctx.tests["test"], ctx.tests["asset"], strict=True))
    file_asset = dict(zip(ctx.tests["source_file"], ctx.tests["asset"], strict=True))
    for key, mapping in (("asset", None), ("test", test_asset), ("source_file", file_asset)):
        if key in frame.columns:
            values = frame[key]
        elif key in frame.index.names:
            values = pd.Series(frame.index.get_level_values(key), index=frame.index)
        else:
            continue
        return pd.Series(values.to_numpy(), index=frame.index) if mapping is None else values.map(mapping)
    return None


def _compare(full: RunContext, alone: RunContext, asset: str) -> list[str]:
    problems: list[str] = []

    def table(name: str, a: pd.DataFrame, b: pd.DataFrame, drop: frozenset[str] | set[str] = frozenset()) -> None:
        owner_a, owner_b = _owner(a, full), _owner(b, alone)
        if owner_a is None or owner_b is None:
            return  # a table about the whole fleet (it names no asset, test or file)
        rows_a, rows_b = _rows(a, owner_a, asset, set(drop)), _rows(b, owner_b, asset, set(drop))
        if len(rows_a) != len(rows_b):
            problems.append(f"{name}: {len(rows_a)} rows with the whole folder, {len(rows_b)} alone")
            return
        for i, (ra, rb) in enumerate(zip(rows_a, rows_b, strict=True)):
            for col in sorted(set(ra) | set(rb)):
                if not _same(ra.get(col), rb.get(col)):
                    problems.append(f"{name} row {i} {col}: {ra.get(col)!r} with the whole folder, "
                                    f"{rb.get(col)!r} alone")

    table("tests", full.tests, alone.tests, COUPLED_TEST_COLUMNS)
    table("points", full.points, alone.points)
    for name in sorted(set(full.extras) | set(alone.extras)):
        a, b = full.extras.get(name), alone.extras.get(name)
        if isinstance(a, pd.DataFrame) and isinstance(b, pd.DataFrame):
            table(f"extras[{name}]", a, b)
    files = set(full.tests.loc[full.tests["asset"] == asset, "source_file"])

    def found(ctx: RunContext) -> list[tuple[Any, ...]]:
        return sorted((f.file, f.line, f.field, f.point, f.code, f.severity, f.message) for f in ctx.findings
                      if f.file in files and f.code not in COUPLED_FINDINGS)

    if found(full) != found(alone):
        problems.append(f"findings differ: {set(found(full)) ^ set(found(alone))}")
    return problems


@pytest.fixture(scope="module")
def pm_module() -> pluggy.PluginManager:
    """The built-ins only, shared by this module's runs (none of them registers anything)."""
    return get_plugin_manager(autoload=False)


@pytest.fixture(scope="module")
def whole(pm_module: pluggy.PluginManager) -> RunContext:
    return runner.run(runner.RunOptions(DEMO), pm_module)


def _assets() -> list[str]:
    return sorted(pd.read_csv(DEMO / "assets.csv", dtype=str)["asset"])


@pytest.mark.parametrize("asset", _assets())
def test_an_assets_results_do_not_depend_on_the_other_assets(tmp_path, pm_module, whole, asset):
    alone_folder = tmp_path / "alone"
    alone_folder.mkdir()
    for name in ("assets.csv", "instruments.yaml", "loopledger.toml"):
        if (DEMO / name).exists():
            shutil.copy(DEMO / name, alone_folder / name)
    mine = whole.tests.loc[whole.tests["asset"] == asset, "source_file"]
    for rel in mine:
        (alone_folder / rel).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(DEMO / rel, alone_folder / rel)
    alone = runner.run(runner.RunOptions(alone_folder), pm_module)
    assert sorted(alone.tests["source_file"]) == sorted(mine)
    assert _compare(whole, alone, asset) == []


def test_the_comparison_sees_a_coupling(tmp_path, pm_module, whole):
    """The check itself: a test column that did depend on other assets is reported."""
    asset = whole.tests["asset"].value_counts().index[0]
    changed = RunContext(whole.evidence, whole.config, whole.pm, tests=whole.tests.copy(), points=whole.points,
                         extras=whole.extras, findings=whole.findings)
    changed.tests["verdict"] = changed.tests["verdict"].where(changed.tests["asset"] != asset, "other")
    problems = _compare(whole, changed, asset)
    assert problems and all(p.startswith("tests row") and "verdict" in p for p in problems)
