"""The handbook keeps an asset's pages (no page data made) only when nothing they are made from changed.

The reference here is the project's own cold build: a site built over the previous one must be byte
for byte the site built from nothing, whatever changed in between (a file's comment, a result that
moves the fleet's reliability figures, the registry, the configuration, files added or removed). The
counts of kept assets show the work saved is real. The last tests check how the digests attribute the
run's parts to assets (rules of our own, stated in ``plugins/digests.py``; no outside source).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pytest
from loopledger import keys, runner
from loopledger.context import RunContext
from loopledger.findings import warning
from loopledger.plugins.handbook import build, digests

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

ASSETS = [f"T-CT{i}" for i in range(1, 6)]  # T-CT5 is never tested


def _fleet(root: Path) -> Path:
    files = {}
    for asset in ASSETS[:4]:
        for year, offset in (("2024", 0.01), ("2025", 0.02)):
            files[f"{asset}/{year}.yaml"] = result_yaml(asset=asset, date=f"{year}-03-0{ASSETS.index(asset) + 1}",
                                                        as_found=good_points(offset))
    return write_evidence(root, files, assets=[{**CT_ASSET, "asset": a} for a in ASSETS])


def _tree(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _append(path: Path, text: str) -> None:
    path.write_text(path.read_text(encoding="utf-8") + text, encoding="utf-8")


def _assets_csv(ev: Path, old: str, new: str) -> None:
    text = (ev / "assets.csv").read_text(encoding="utf-8")
    assert old in text
    (ev / "assets.csv").write_text(text.replace(old, new, 1), encoding="utf-8")


CHANGES: dict[str, tuple[Callable[[Path], None], int | None]] = {
    # a comment only: the file's own page shows its bytes, so that one asset is made again
    "comment": (lambda ev: _append(ev / "results" / "T-CT1" / "2025.yaml", "# checked twice\n"), 4),
    # a failed as-found result moves the fleet's reliability and with it every test's false-accept
    # probability as its page shows it
    "fleet figures": (lambda ev: (ev / "results" / "T-CT2" / "2025.yaml").write_text(
        result_yaml(asset="T-CT2", date="2025-03-02", as_found=good_points(0.3)), encoding="utf-8"), None),
    # a new passing test: the fleet's reliability stays at 100 % (its figures are on the index only), so
    # the other assets' pages are kept
    "next test": (lambda ev: (ev / "results" / "T-CT1" / "2026.yaml").write_text(
        result_yaml(asset="T-CT1", date="2026-03-01", as_found=good_points(0.01)), encoding="utf-8"), 4),
    # another panel for one asset: its own pages and the fleet's (the index groups by panel)
    "registry row": (lambda ev: _assets_csv(ev, "T-CT3,Test current transducer,Test site,Panel 1",
                                            "T-CT3,Test current transducer,Test site,Panel 9"), 4),
    "configuration": (lambda ev: (ev / "loopledger.toml").write_text("as_of = 2026-12-01\n", encoding="utf-8"), 0),
    "file removed": (lambda ev: (ev / "results" / "T-CT4" / "2024.yaml").unlink(), None),
    "first test": (lambda ev: (ev / "results" / "T-CT5.yaml").write_text(
        result_yaml(asset="T-CT5", date="2026-01-05", as_found=good_points(0.01)), encoding="utf-8"), None),
    "unregistered asset": (lambda ev: (ev / "results" / "stray.yaml").write_text(
        result_yaml(asset="T-NOT-LISTED", date="2026-01-05", as_found=good_points()), encoding="utf-8"), None),
}


@pytest.mark.parametrize("change", list(CHANGES))
def test_a_site_built_over_the_last_one_equals_a_cold_build(tmp_path, pm, change):
    ev = _fleet(tmp_path / "ev")

    def build(out: Path) -> build.BuildStats:
        ctx = runner.run(runner.RunOptions(ev), pm)
        runner.publish(ctx, out)
        return ctx.stash[keys.HANDBOOK_BUILD]

    live = tmp_path / "live"
    first = build(live)
    assert first.kept == 0 and first.rendered == first.pages
    again = build(live)  # nothing changed: every asset kept, no page made
    assert again.kept == len(ASSETS) and again.rendered == 0
    before = _tree(live / "handbook")

    edit, kept = CHANGES[change]
    edit(ev)
    warm = build(live)
    cold = build(tmp_path / "cold")
    assert cold.kept == 0
    assert _tree(live / "handbook") == _tree(tmp_path / "cold" / "handbook")
    assert _tree(live / "handbook") != before
    if kept is not None:
        assert warm.kept == kept
    assert warm.kept < len(ASSETS)


def test_fleet_figures_move_the_index_and_what_each_test_page_shows_of_them(tmp_path, pm):
    """The fleet's reliability is shown on the index only: when it moves, another asset's own page stays
    as it was, while each test page shows its new false-accept probability (the "fleet figures" case)."""
    ev = _fleet(tmp_path / "ev")
    live = tmp_path / "live" / "handbook"

    def pages() -> tuple[str, str, str]:
        asset = next((live / "assets").glob("T-CT3*.html")).read_text(encoding="utf-8")
        test = next((live / "tests").glob("T-CT3*2025*.html")).read_text(encoding="utf-8")
        return asset, test, (live / "index.html").read_text(encoding="utf-8")

    first = runner.run(runner.RunOptions(ev), pm)
    runner.publish(first, live.parent)
    before = pages()
    CHANGES["fleet figures"][0](ev)
    ctx = runner.run(runner.RunOptions(ev), pm)
    runner.publish(ctx, live.parent)
    after = pages()
    assert after[0] == before[0]  # T-CT3's own page: nothing on it depends on other assets
    assert "<td>8 of 8</td>" in before[2] and "<td>7 of 8</td>" in after[2]  # 8 tests, one now fails as found

    def shown(c: RunContext) -> str:
        return str(c.tests.set_index("test").loc["T-CT3/2025", "false_accept_shown"])

    assert shown(first) != shown(ctx)
    assert f"<dd>{shown(first)}</dd>" in before[1] and f"<dd>{shown(ctx)}</dd>" in after[1]


# --- the digests themselves -----------------------------------------------------------------------

def _ctx(**extras: object):
    ctx = RunContext(evidence=Path("."), config={"as_of": "2026-11-30"}, pm=None)  # type: ignore[arg-type]
    ctx.assets = pd.DataFrame({"asset": ["A", "B"], "accuracy": ["0.5", "0.5"]}).set_index("asset", drop=False)
    ctx.tests = pd.DataFrame({"test": ["a1", "b1"], "asset": ["A", "B"], "source_file": ["a1.yaml", "b1.yaml"]})
    ctx.points = pd.DataFrame({"test": ["a1", "a1", "b1"], "reading": [4.01, 12.0, 20.0]})
    ctx.extras.update(extras)
    return ctx


def _digests(ctx):
    return digests.digests(ctx, {}, ["code"])


def test_what_is_fleet_only_is_neither_in_a_pages_context_nor_in_its_digest():
    ctx = _ctx(eopr=pd.DataFrame({"group": ["x"], "eopr": [0.9]}))
    ctx.tests["global_false_accept"] = [0.01, 0.02]
    ctx.fleet_only |= {"eopr", "tests.global_false_accept"}
    view = ctx.page_view()
    assert keys.EOPR not in view.stash and "global_false_accept" not in view.tests.columns
    assert keys.EOPR in ctx.stash and "global_false_accept" in ctx.tests.columns  # the run keeps them
    base = _digests(view)
    ctx.stash[keys.EOPR] = pd.DataFrame({"group": ["x"], "eopr": [0.8]})
    ctx.tests["global_false_accept"] = [0.011, 0.02]
    assert _digests(ctx.page_view()) == base
    ctx.fleet_only.clear()  # not marked: the same change makes every asset's pages again
    assert all(_digests(ctx.page_view())[a] != base[a] for a in base)


def test_a_row_counts_for_its_own_asset_only():
    base = _digests(_ctx())
    ctx = _ctx()
    ctx.points.loc[2, "reading"] = 20.001  # a point of B's test
    moved = _digests(ctx)
    assert moved["A"] == base["A"] and moved["B"] != base["B"]


def test_row_positions_do_not_count_but_order_within_an_asset_does():
    base = _digests(_ctx())
    ctx = _ctx()  # a new point of A's first: every later row's position shifts
    ctx.points = pd.concat([pd.DataFrame({"test": ["a1"], "reading": [8.0]}), ctx.points], ignore_index=True)
    shifted = _digests(ctx)
    assert shifted["B"] == base["B"] and shifted["A"] != base["A"]
    ctx = _ctx()
    ctx.points = ctx.points.iloc[[1, 0, 2]].reset_index(drop=True)  # A's two points swapped
    assert _digests(ctx)["A"] != base["A"]


def test_what_names_no_asset_counts_for_every_asset():
    base = _digests(_ctx(rates=pd.DataFrame({"group": ["current"], "in_tolerance": [0.9]})))
    fleet = _digests(_ctx(rates=pd.DataFrame({"group": ["current"], "in_tolerance": [0.8]})))
    assert fleet["A"] != base["A"] and fleet["B"] != base["B"]
    ctx = _ctx(rates=pd.DataFrame({"group": ["current"], "in_tolerance": [0.9]}))
    ctx.findings.append(warning("a registry remark", file="assets.csv"))
    assert all(_digests(ctx)[a] != base[a] for a in "AB")
    ctx = _ctx(rates=pd.DataFrame({"group": ["current"], "in_tolerance": [0.9]}))
    ctx.findings.append(warning("a remark about A's file", file="a1.yaml"))
    mine = _digests(ctx)
    assert mine["A"] != base["A"] and mine["B"] == base["B"]


def test_dicts_by_file_and_cells_pandas_cannot_hash():
    base = _digests(_ctx(lines={"a1.yaml": {"date": 2}, "b1.yaml": {"date": 2}}))
    moved = _digests(_ctx(lines={"a1.yaml": {"date": 3}, "b1.yaml": {"date": 2}}))
    assert moved["A"] != base["A"] and moved["B"] == base["B"]
    odd = pd.DataFrame({"test": ["a1", "b1"], "cell": [{"x": [1]}, {"x": [2]}]})  # dicts: not hashable
    one, two = _digests(_ctx(odd=odd)), _digests(_ctx(odd=odd.assign(cell=[{"x": [1]}, {"x": [3]}])))
    assert one == _digests(_ctx(odd=odd)) and one["A"] != two["A"]  # stable, and to the fleet part


@pytest.mark.parametrize("damage", ["page deleted", "manifest cut short", "asset digests not a table"])
def test_a_damaged_live_site_is_made_whole_again(tmp_path, pm, damage):
    ev = _fleet(tmp_path / "ev")
    live, cold = tmp_path / "live", tmp_path / "cold"
    runner.publish(runner.run(runner.RunOptions(ev), pm), live)
    runner.publish(runner.run(runner.RunOptions(ev), pm), cold)
    site = live / "handbook"
    manifest = site / build.MANIFEST
    if damage == "page deleted":
        next((site / "tests").glob("T-CT2*.html")).unlink()
    elif damage == "manifest cut short":
        manifest.write_bytes(manifest.read_bytes()[:100])
    else:
        manifest.write_text(manifest.read_text(encoding="utf-8").replace('"assets": {', '"assets": [], "x": {', 1),
                            encoding="utf-8")
    ctx = runner.run(runner.RunOptions(ev), pm)
    runner.publish(ctx, live)
    assert _tree(site) == _tree(cold / "handbook")
    assert ctx.stash[keys.HANDBOOK_BUILD].kept == (len(ASSETS) - 1 if damage == "page deleted" else 0)
