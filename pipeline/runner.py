"""The stage runner: load, then each stage hook in order, dropping invalid files between stages."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pluggy
from loopledger import discover as disc
from loopledger import keys
from loopledger.config import ConfigError, load_config
from loopledger.context import RunContext
from loopledger.findings import Finding, sort_findings
from loopledger.load import read_files
from loopledger.registry import current, load_assets, load_instruments

#: the judging stages, in the order they run
STAGES = ("check", "expected", "measured", "uncertainty", "judge", "analyse", "history")


@dataclass
class RunOptions:
    evidence: Path
    files: list[Path] | None = None  # None: everything under results/
    overrides: dict[str, Any] | None = None
    progress: Callable[[int, int], Callable[[int], None]] | None = None
    #: parsed result files by (path, sha256), read and refreshed in place (the incremental cache)
    parsed: dict[tuple[str, str], Any] | None = None
    #: called with ``parsed`` once every file is read, in a forked process while the stages run
    save_parsed: Callable[[dict[tuple[str, str], Any]], None] | None = None
    #: a folder to read assets.csv, instruments.yaml and loopledger.toml from instead of ``evidence`` (the
    #: commit gate judges the result files again under the registers as last committed, to show what a
    #: register edit changes)
    registers: Path | None = None
    #: follow a link at results/ or a register when it points inside the evidence folder (else refused)
    follow_links: bool = False
    #: the output folder of the previous complete run, whose tables this run compares its verdicts with
    previous_out: Path | None = None


def _stamp(findings: list[Finding], stage: str) -> list[Finding]:
    """Each finding with the stage that made it (a finding that names its stage keeps it)."""
    return [f if f.stage else Finding(f.severity, f.message, f.file, f.line, f.field, f.point, f.code, stage)
            for f in findings]


def prepare(opts: RunOptions, pm: pluggy.PluginManager) -> RunContext:
    """Read configuration and registries and collect what the plugins bring."""
    if not opts.evidence.is_dir():
        raise ConfigError(f"evidence folder '{opts.evidence}' does not exist")
    registers = opts.registers or opts.evidence
    config = load_config(registers, opts.overrides, opts.follow_links)
    _known_keys(config, pm)
    ctx = RunContext(evidence=opts.evidence, config=config, pm=pm)
    for found in pm.hook.ll_configure(config=config):
        errors = [f for f in found or [] if f.severity == "error"]
        if errors:
            raise ConfigError("; ".join(f.format() for f in errors))
    ctx.signal_types = _named(pm.hook.ll_signal_types(), "signal type")
    _declared_units(ctx.signal_types)
    ctx.methods = _named(pm.hook.ll_reading_methods(), "reading method")
    ctx.decision_rules = _named(pm.hook.ll_decision_rules(), "decision rule")
    rule = str(ctx.section("decision").get("rule", "simple"))
    if rule not in ctx.decision_rules:
        raise ConfigError(f"loopledger.toml: unknown decision rule '{rule}' "
                          f"(known: {', '.join(sorted(ctx.decision_rules))})")
    declared: dict[str, dict[str, str]] = {"assets.csv": {}, "instruments.yaml": {}}
    for signal in ctx.signal_types.values():
        declared["assets.csv"].update(getattr(signal, "asset_columns", {}))
    for found_keys in pm.hook.ll_registry_keys():
        for file, names in (found_keys or {}).items():
            declared.setdefault(file, {}).update(names)
    ctx.asset_rows, found, ctx.rejected_assets = load_assets(registers, config["limits"], opts.follow_links,
                                                         declared["assets.csv"])
    ctx.assets = current(ctx.asset_rows)
    ctx.findings += _stamp(found, "registry")
    ctx.instruments, ctx.ranges, ctx.calibrations, found, ctx.rejected_instruments = load_instruments(
        registers, config["limits"], opts.follow_links, declared["instruments.yaml"])
    ctx.findings += _stamp(found, "registry")
    return ctx


def _known_keys(config: dict[str, Any], pm: pluggy.PluginManager) -> None:
    """A ConfigError for a table or key of loopledger.toml that neither loopledger nor a plugin reads."""
    from loopledger.config import CONFIG_NAME, DEFAULTS

    known: dict[str, set[str]] = {name: set(value) for name, value in DEFAULTS.items() if isinstance(value, dict)}
    for found in pm.hook.ll_config_keys():
        for table, names in (found or {}).items():
            known.setdefault(table, set()).update(names)
    for name, value in config.items():
        if name == "as_of":
            continue
        if name not in known:
            tables = ", ".join(f"[{t}]" for t in sorted(known))
            raise ConfigError(f"{CONFIG_NAME}: no plugin reads a setting '{name}' (the tables read: {tables}, and "
                              "as_of); is it misspelt?")
        if not isinstance(value, dict):
            raise ConfigError(f"{CONFIG_NAME}: [{name}] must be a table")
        for key in value:
            if key not in known[name]:
                raise ConfigError(f"{CONFIG_NAME}: [{name}] has no setting '{key}' (known: "
                                  f"{', '.join(sorted(known[name]))}); is it misspelt?")


def _declared_units(signals: dict[str, Any]) -> None:
    """A ConfigError for a signal type whose ``input_units`` names something that is not a unit (a plugin's
    slip, found before any file is judged rather than as a crash in the expected stage)."""
    from loopledger import quantities as q

    for name, signal in signals.items():
        for unit in getattr(signal, "input_units", ()):
            try:
                q.unit_check(str(unit))
            except ValueError as exc:
                raise ConfigError(f"signal type '{name}' declares input_units {unit!r}: {exc}") from None


def _named(groups: list[list[Any]], what: str) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for group in groups:
        for item in group or []:
            if item.name in out:
                raise ConfigError(f"two plugins provide the {what} '{item.name}'")
            out[item.name] = item
    return out


def _present(ctx: RunContext, name: str) -> bool:
    """Whether what a :func:`~loopledger.hookspecs.needs` name names is there yet."""
    table, _, column = name.partition(".")
    if table == "tests" and column:
        return column in ctx.tests.columns
    if table == "stash" and column:
        return column in ctx.extras
    return name in ctx.points.columns


def stage_calls(ctx: RunContext, stage: str) -> Iterator[tuple[str, list[Finding] | None]]:
    """Call each implementation of a stage hook: those with no ``needs`` in pluggy's order, then each marked
    with ``needs`` once what it needs is there; yield (plugin name, its findings)."""
    hook = getattr(ctx.pm.hook, f"ll_{stage}")
    pending = list(reversed(hook.get_hookimpls()))  # the order pluggy itself would call them in
    for impl in pending:
        if impl.wrapper or impl.hookwrapper:
            raise ConfigError(f"the plugin '{impl.plugin_name}' wraps the stage hook ll_{stage}: stage hooks are "
                              "called one implementation at a time (see loopledger.hookspecs); implement it plainly")
    # the plain ones first, in pluggy's order; then each that needs something, once it is there
    pending.sort(key=lambda i: bool(getattr(i.function, "ll_needs", ())))
    while pending:
        ready = [i for i in pending if all(_present(ctx, n) for n in getattr(i.function, "ll_needs", ()))]
        impl = ready[0] if ready else pending[0]  # needs that nothing in the stage provides: called last
        pending.remove(impl)
        yield impl.plugin_name, impl.function(**{name: ctx for name in impl.argnames if name == "ctx"})


def check_contract(ctx: RunContext, stage: str) -> None:
    """Validate ``ctx.points`` against the stage's contract (:mod:`loopledger.schemas.stages`); raise
    :class:`ContractError` naming the stage and the failures. Run by :func:`run_stages` when
    ``LOOPLEDGER_CHECK_CONTRACTS`` is set (the test suite sets it)."""
    from loopledger.schemas.stages import AFTER_STAGE

    model = AFTER_STAGE.get(stage)
    if model is None or ctx.points.empty or not getattr(ctx.pm.hook, f"ll_{stage}").get_hookimpls():
        return
    import pandera.errors

    try:
        model.validate(ctx.points, lazy=True)
    except pandera.errors.SchemaErrors as exc:
        cases = exc.failure_cases.astype(str).drop_duplicates(["column", "check"]).head(10)
        said = [f"{r.failure_case} missing" if r.check == "column_in_dataframe" else f"{r.column}: {r.check}"
                for r in cases.itertuples()]
        raise ContractError(f"after stage {stage}, the point table breaks {model.__name__}: "
                            + "; ".join(said)) from None


class ContractError(RuntimeError):
    """A stage left the point table in a shape its contract does not allow (a plugin's bug)."""


def run_stages(ctx: RunContext) -> None:
    """Call each stage hook over the whole table; drop the points of files that got errors."""
    checking = bool(os.environ.get("LOOPLEDGER_CHECK_CONTRACTS"))
    for stage in STAGES:
        if ctx.points.empty and stage not in ("check", "history"):  # headers are checked with no point too
            continue
        for _plugin, found in stage_calls(ctx, stage):
            found = _stamp(list(found or []), stage)
            ctx.findings += found
            ctx.invalidate({f.file for f in found if f.severity == "error" and f.file})
        if checking:
            check_contract(ctx, stage)
    # with no valid point left the judging stages were skipped: give every test the judged columns
    defaults = {"as_found": "", "as_left": "", "adjusted": False, "verdict": "invalid",
                "decision_rule": str(ctx.section("decision").get("rule", "simple"))}
    for column, value in defaults.items():
        if column not in ctx.tests.columns:
            ctx.tests[column] = value
    ctx.tests.loc[~ctx.tests["valid"].astype(bool), "verdict"] = "invalid"
    ctx.findings = sort_findings(ctx.findings)


def run(opts: RunOptions, pm: pluggy.PluginManager) -> RunContext:
    """Everything up to (not including) export and publication."""
    ctx = prepare(opts, pm)
    if opts.previous_out is not None:
        ctx.stash[keys.PREVIOUS_RUN] = previous_run(opts.previous_out)
    if opts.files is None:
        files, found = disc.discover(opts.evidence, opts.follow_links)
    else:
        files, found = disc.select(opts.evidence, opts.files, opts.follow_links)
    ctx.findings += _stamp(found, "discover")
    tick = opts.progress(len(files), 0) if opts.progress else None
    ctx.findings += _stamp(read_files(ctx, files, tick, parsed=opts.parsed), "load")
    parsed, save = opts.parsed, opts.save_parsed
    writing: contextlib.AbstractContextManager[Any] = contextlib.nullcontext()
    if parsed is not None and save is not None:  # the cache is written on the core the stages leave idle
        from loopledger.cache.forking import side_job

        def parsed_cache() -> None:
            save(parsed)

        writing = side_job(parsed_cache)
    with writing:
        run_stages(ctx)
    return ctx


def previous_run(out: Path) -> dict[str, Any]:
    """The tables of the previous complete run in ``out`` (``data/`` is swapped in whole, so what is there is
    one run's), as text: {'tests': ..., 'changes': ...}; a table missing or unreadable is left out."""
    import pandas as pd
    from loopledger.schemas.points import FREE_TEXT_COLUMNS

    found: dict[str, Any] = {}
    for name in ("tests", "changes"):
        path = out / "data" / f"{name}.csv"
        try:
            table = pd.read_csv(path, dtype=str, keep_default_na=False)
        except (OSError, ValueError, pd.errors.ParserError):
            continue
        for col in [c for c in table.columns if c in FREE_TEXT_COLUMNS]:  # the text as it was, before the
            table[col] = table[col].str.removeprefix("'")  # one apostrophe written against spreadsheet formulas
        found[name] = table
    return found


def file_hashes(ctx: RunContext) -> dict[str, str]:
    """SHA-256 of every result file as it was read, by path (for the incremental manifest)."""
    if ctx.tests.empty:
        return {}
    known = ctx.tests[ctx.tests["sha256"].astype(bool)]
    return dict(zip(known["source_file"], known["sha256"], strict=True))


def export(ctx: RunContext, out: Path) -> list[Path]:
    """Write every table the plugins export to ``out/data/NAME.csv``.

    The tables are written into a staging folder swapped in whole, so data/
    always holds the tables of one complete run.
    """
    from loopledger.output import staged_dir, write_csvs

    tables = {name: frame for found in ctx.pm.hook.ll_export_tables(ctx=ctx)
              for name, frame in (found or {}).items()}  # one file per name (a later plugin's wins, as before)
    with staged_dir(out / "data") as folder:
        write_csvs([(folder / f"{name}.csv", frame) for name, frame in tables.items()])
    return [out / "data" / f"{name}.csv" for name in tables]


def export_and_publish(ctx: RunContext, out: Path) -> None:
    """:func:`export` in a forked process while this one runs :func:`publish` (the tables are written on
    the core the handbook leaves idle while it works out which pages to keep); the same files as the two
    run one after the other. ``ll_export_tables`` hooks only read the run, so the handbook sees what it
    would have seen after them. The new handbook replaces the live one only once the tables are written:
    if they cannot be, both stay as the previous run left them."""
    from loopledger.cache.forking import side_job
    from loopledger.output import before_swap

    def tables() -> None:
        export(ctx, out)

    with side_job(tables) as tables_written, before_swap(tables_written):
        publish(ctx, out)


def publish(ctx: RunContext, out: Path) -> None:
    for found in ctx.pm.hook.ll_publish(ctx=ctx, out=out):
        ctx.findings += _stamp(list(found or []), "publish")


def exit_code(ctx: RunContext) -> int:
    """0 all valid and passing; 1 a test failed; 2 a file was invalid."""
    if any(f.severity == "error" for f in ctx.findings):
        return 2
    if (ctx.tests.get("verdict") == "fail").any():
        return 1
    return 0
