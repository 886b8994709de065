"""Order within a stage is named by what a plugin needs, not by tryfirst/trylast; the point table meets
each stage's contract (loopledger.schemas.stages)."""

from __future__ import annotations

from types import SimpleNamespace

import pandas as pd
import pytest
from loopledger import runner
from loopledger.config import ConfigError
from loopledger.hookspecs import hookimpl, needs
from loopledger.host import get_plugin_manager

from tests.evidence import good_points, result_yaml, write_evidence


def _plugins(calls: list[str]) -> tuple[object, object, object]:
    """``user`` needs the column ``added_by_maker`` that ``maker`` adds; ``loner`` needs one nobody adds."""

    class Maker:
        @hookimpl
        def ll_analyse(self, ctx):
            calls.append("maker")
            ctx.points["added_by_maker"] = 1.0
            return []

    class User:
        @hookimpl
        @needs("added_by_maker")
        def ll_analyse(self, ctx):
            calls.append("user" if "added_by_maker" in ctx.points.columns else "user-too-early")
            return []

    class Loner:
        @hookimpl
        @needs("tests.nobody_adds_this")
        def ll_analyse(self, ctx):
            calls.append("loner")
            return []

    return Maker(), User(), Loner()


@pytest.mark.parametrize("reverse", [False, True])
def test_a_plugin_runs_after_the_one_that_adds_what_it_needs(tmp_path, reverse):
    calls: list[str] = []
    maker, user, loner = _plugins(calls)
    extra = (loner, user, maker) if reverse else (maker, user, loner)  # either registration order
    pm = get_plugin_manager(autoload=False, extra=extra)
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    runner.run(runner.RunOptions(ev), pm)
    assert [c for c in calls if c != "loner"] == ["maker", "user"]
    assert calls[-1] == "loner"  # what nothing provides: called last, not never


def test_a_wrapper_on_a_stage_hook_is_refused_by_name(tmp_path):
    class Timer:
        @hookimpl(wrapper=True)
        def ll_judge(self, ctx):
            return (yield)

    pm = get_plugin_manager(autoload=False, extra=(Timer(),))
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    with pytest.raises(ConfigError, match="wraps the stage hook ll_judge"):
        runner.run(runner.RunOptions(ev), pm)


def test_the_suite_checks_contracts_and_a_broken_one_names_the_stage(tmp_path, monkeypatch):
    class Careless:
        @hookimpl
        def ll_measured(self, ctx):
            ctx.points = ctx.points.drop(columns=["expected"])  # a plugin's bug: drops a guaranteed column
            return []

    monkeypatch.setenv("LOOPLEDGER_CHECK_CONTRACTS", "1")
    pm = get_plugin_manager(autoload=False, extra=(Careless(),))
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    with pytest.raises(runner.ContractError, match=r"after stage measured.*MeasuredPoints.*expected"):
        runner.run(runner.RunOptions(ev), pm)


def test_contracts_build_on_each_other():
    from loopledger.schemas import stages

    chain = [stages.LoadedPoints, stages.CheckedPoints, stages.ExpectedPoints, stages.MeasuredPoints,
             stages.JudgedPoints]
    columns = [set(model.to_schema().columns) for model in chain]
    for before, after in zip(columns, columns[1:], strict=False):
        assert before < after  # each stage's contract is the previous one's plus what it adds


def test_present_reads_points_tests_and_stash_names():
    ctx = SimpleNamespace(points=pd.DataFrame(columns=["error"]), tests=pd.DataFrame(columns=["verdict"]),
                          extras={"burden": object()})
    assert runner._present(ctx, "error") and not runner._present(ctx, "mpe")
    assert runner._present(ctx, "tests.verdict") and not runner._present(ctx, "tests.error")
    assert runner._present(ctx, "stash.burden") and not runner._present(ctx, "stash.budget")
