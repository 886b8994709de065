"""Every hook loopledger calls, grouped by phase, in the order a run calls them.

Hooks are called with keyword arguments; an implementation may accept fewer
arguments than the specification names, so these specifications can grow
without breaking plugins. All names carry the ``ll_`` prefix.

Stage hooks (``ll_check`` … ``ll_history``) receive the :class:`RunContext`,
add columns to ``ctx.points`` / ``ctx.tests`` (vectorised over the whole
table, never a loop over files) and return a list of findings. After each
stage the engine drops the points of every file that got an ``error``.

Within a stage the runner calls the implementations one at a time. One that
reads what another plugin of the same stage adds says so with :func:`needs`
(``@needs("error", "mpe")`` on an ``ll_judge``); it is called once those are
there. The others keep pluggy's order. Wrapper implementations
(``wrapper=True``) are not supported on stage hooks; the other hooks take them.
The point table after each stage meets the contract in
:mod:`loopledger.schemas.stages`.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import pluggy

if TYPE_CHECKING:
    import pandas as pd
    from loopledger.context import RunContext
    from loopledger.contracts import Command, DecisionRule, ReadingMethod, ResultRead, Section, SignalType
    from loopledger.findings import Finding

hookspec = pluggy.HookspecMarker("loopledger")
hookimpl = pluggy.HookimplMarker("loopledger")

F = TypeVar("F", bound=Callable[..., Any])


def needs(*names: str) -> Callable[[F], F]:
    """Mark a stage hook implementation as reading what other plugins of the same stage add.

    Each name is a column of ``ctx.points`` (``"error"``), a column of ``ctx.tests`` (``"tests.burden_status"``)
    or a shared value (``"stash.drift_assets"``, a :class:`~loopledger.stash.StashKey`'s name). The runner
    calls the implementation after the others of its stage have added them; if none of them does, it is
    called last, and must cope (as it must when a site has switched the providing plugin off).
    """
    def mark(function: F) -> F:
        function.ll_needs = tuple(names)  # type: ignore[attr-defined]
        return function
    return mark


# --- set-up: what the plugins bring ------------------------------------------------

@hookspec
def ll_cli_commands() -> list[Command]:
    """Subcommands this plugin adds to ``loopledger`` (called once when the CLI starts).

    :return: a list of :class:`Command`; names must be unique across plugins.
    """


@hookspec
def ll_signal_types() -> list[SignalType]:
    """Signal types this plugin handles (the ``signal`` column of assets.csv).

    :return: a list of :class:`SignalType` instances.
    """


@hookspec
def ll_reading_methods() -> list[ReadingMethod]:
    """Ways of reading the output (the ``method`` field of a result file).

    :return: a list of :class:`ReadingMethod` instances.
    """


@hookspec
def ll_decision_rules() -> list[DecisionRule]:
    """Decision rules this plugin offers (chosen by ``[decision] rule`` in loopledger.toml).

    :return: a list of :class:`DecisionRule` instances.
    """


@hookspec
def ll_config_keys() -> dict[str, list[str]] | None:
    """The loopledger.toml tables this plugin reads, each with the keys it reads in it.

    A table or a key no plugin (and not loopledger itself: ``as_of``, ``[decision] rule``, ``[limits]``)
    names is a configuration error, so a misspelt ``[decison]`` never leaves a setting silently unused.

    :return: ``{"table": ["key", ...]}``; two plugins may name keys of the same table.
    """


@hookspec
def ll_registry_keys() -> dict[str, dict[str, str]] | None:
    """The extra assets.csv columns and instruments.yaml keys this plugin reads, beyond the schemas'.

    A column of assets.csv that neither :class:`~loopledger.schemas.assets.AssetsFile`, a signal type's
    ``asset_columns`` nor a plugin declares here is an error at line 1, and a key of an instrument in
    instruments.yaml likewise at its line, so a misspelt column is never silently unused.

    :return: ``{"assets.csv": {"column": "meaning"}, "instruments.yaml": {"key": "meaning"}}`` (either may be
        left out).
    """


@hookspec
def ll_configure(config: dict[str, Any]) -> list[Finding] | None:
    """Check this plugin's section of loopledger.toml before anything is read.

    :param config: the whole parsed loopledger.toml (with defaults filled in).
    :return: findings; an ``error`` here is a configuration error (exit code 3).
    """


# --- load ---------------------------------------------------------------------------

@hookspec(firstresult=True)
def ll_read_result(path: Path, rel: str, data: bytes, limits: dict[str, int]) -> ResultRead | None:
    """Read one result file. Stops at first non-None result.

    :param path: the file on disk (already read into ``data``; do not reopen it).
    :param rel: its path relative to the evidence folder, for findings.
    :param data: its bytes.
    :param limits: the ``[limits]`` in force (``max_points``, ``max_repeats``, ``max_unpacked_bytes`` ...).
        A reader stops as soon as a file is past one (a file under the byte limit can still unpack or
        expand to gigabytes) and returns an error naming the limit, rather than read the file whole first.
    :return: a :class:`ResultRead`, or None when the file's format is not this plugin's.
    """


# --- stages, in run order -----------------------------------------------------------

@hookspec
def ll_check(ctx: RunContext) -> list[Finding] | None:
    """Schema check: validate the tests and points tables and parse quantities.

    Runs first. Adds ``input_value``, ``input_written_unit``, ``reading``, ``reading_unit``,
    ``n_readings``, ``reading_sd``, ``reading_half_spread`` to ``ctx.points``.
    """


@hookspec
def ll_expected(ctx: RunContext) -> list[Finding] | None:
    """Expected output: fill ``input_pct``, ``expected``, ``injected``, ``sensitivity``."""


@hookspec
def ll_measured(ctx: RunContext) -> list[Finding] | None:
    """Measured output: fill ``measured`` (output units) from each test's reading method."""


@hookspec
def ll_uncertainty(ctx: RunContext) -> list[Finding] | None:
    """Measurement uncertainty: add ``u``, ``U``, ``k`` and friends per point (optional stage)."""


@hookspec
def ll_judge(ctx: RunContext) -> list[Finding] | None:
    """Error and tolerance judgement: ``error``, ``mpe``, ``decision`` per point; verdicts per test."""


@hookspec
def ll_analyse(ctx: RunContext) -> list[Finding] | None:
    """Per-test analyses after judgement (burden, signal integrity, fault signatures, linearity)."""


@hookspec
def ll_history(ctx: RunContext) -> list[Finding] | None:
    """Per-asset history across tests (drift, intervals, traceability); fills ``ctx.assets_out``."""


# --- outputs ------------------------------------------------------------------------

@hookspec
def ll_export_tables(ctx: RunContext) -> dict[str, pd.DataFrame] | None:
    """Tables to write under ``OUT/data/`` as CSV, name -> frame (``points`` → points.csv).

    Only read the run here, never change it: ``loopledger run`` writes the tables in a forked process
    while the handbook is being built, so a change made here would not reach the handbook.
    """


@hookspec
def ll_publish(ctx: RunContext, out: Path) -> list[Finding] | None:
    """Write the handbook under ``out / "handbook"``. Runs last, only for ``loopledger run``."""


@hookspec
def ll_test_sections(ctx: RunContext, tests: list[str]) -> dict[str, list[Section]] | None:
    """Blocks for the evidence pages of a batch of tests: ``{test id: [Section, ...]}``.

    Called once per batch, not once per page (the handbook splits a fleet into batches, one per
    worker process): take the rows of all ``tests`` together, e.g.
    ``ctx.points[ctx.points["test"].isin(tests)]``, work over them in one pass and group the result.
    Leave out tests with nothing to show. A page's blocks must depend only on the run's tables.
    ``ctx`` is :meth:`RunContext.page_view`: what a stage marked ``fleet_only`` is not in it (the
    handbook keeps an asset's pages when nothing else they are made from changed). A page shows each
    fact once: a block that states one of the plugin's findings in full names its code in
    ``Section.covers``, and the page shows that finding beside the block instead of in its list.
    """


@hookspec
def ll_asset_sections(ctx: RunContext, assets: list[str]) -> dict[str, list[Section]] | None:
    """Blocks for the pages of a batch of assets: ``{asset id: [Section, ...]}`` (see ``ll_test_sections``)."""


@hookspec
def ll_fleet_sections(ctx: RunContext) -> list[Section] | None:
    """Blocks for the index page, about the whole fleet (figures over every asset, such as the fleet's
    as-found reliability, belong here rather than on each asset's page).

    Unlike the other page hooks this one sees the whole context, ``fleet_only`` names included: the index
    is made again on every run. The asset, test and sheet page hooks see ``ctx.page_view()``.
    """


@hookspec
def ll_sheet_sections(ctx: RunContext, plans: dict[str, dict[str, Any]]) -> dict[str, list[Section]] | None:
    """Blocks for the printable test sheets of a batch of assets: ``{asset id: [Section, ...]}``.

    :param plans: asset id -> the planned rig: ``method`` (direct | shunt | display), ``shunt_ohm``
        (float or None), ``meter`` (instrument id or None), ``connection`` (standalone | in-loop).
    """
