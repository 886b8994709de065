"""Every value the stages share, declared once with its owner (see :mod:`loopledger.stash`).

Read a value with ``ctx.stash.get(KEY)`` (None when its owner did not run) or ``ctx.stash[KEY]``; only the
owner writes it (``tests/pipeline/test_architecture.py`` checks that). The exported-column lists are the
exception: every stage appends the columns it adds that belong in ``OUT/data/``. A site plugin declares keys
of its own the same way, with its own name as owner, in its own module.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from loopledger.stash import StashKey

if TYPE_CHECKING:
    import pandas as pd

# --- the engine -----------------------------------------------------------------------------------

HEADER_LINES: StashKey[dict[str, dict[str, int]]] = StashKey(
    "header_lines", "engine", "per result file (its path), the line of each header field, for findings")
POINT_EXPORTS: StashKey[list[str]] = StashKey(
    "point_exports", "engine", "columns of ctx.points written to points.csv beyond the schema's; every stage "
    "appends the columns it adds")
TEST_EXPORTS: StashKey[list[str]] = StashKey(
    "test_exports", "engine", "columns of ctx.tests written to tests.csv beyond the schema's; every stage "
    "appends the columns it adds")

REBUILD_ALL: StashKey[bool] = StashKey(
    "rebuild_all", "engine", "True when the run was told not to use its cache (--no-cache): outputs are made "
    "again whole, and the handbook renders every page rather than reuse any of the live site's")
PREVIOUS_RUN: StashKey[dict[str, pd.DataFrame]] = StashKey(
    "previous_run", "engine", "the previous complete run's tables in the same OUT, read before they are replaced: "
    "'tests' (data/tests.csv) and 'changes' (data/changes.csv), as text; empty when there was none")

# --- ll_uncertainty --------------------------------------------------------------------------------

BUDGET: StashKey[pd.DataFrame] = StashKey(
    "budget", "uncertainty", "one row per (point, component) of every GUM budget: value, divisor, "
    "sensitivity, u, degrees of freedom (budget.csv)")

MC_QUANTILES: StashKey[pd.DataFrame] = StashKey(
    "mc_quantiles", "uncertainty", "per point whose U came from Monte Carlo (JCGM 101), the simulated "
    "deviation's quantiles at montecarlo.LEVELS and the point's source_file; the conformity stage reads its risk")

# --- ll_judge --------------------------------------------------------------------------------------

DECISION_NOTE: StashKey[str] = StashKey(
    "decision_note", "tolerance", "what the terminal says of the rule's statement when [decision] conditional = "
    "\"pass\" accepts conditional passes (empty otherwise)")

# --- ll_analyse ------------------------------------------------------------------------------------

ANALYSIS: StashKey[pd.DataFrame] = StashKey(
    "analysis", "linearity", "one row per test: zero, span, non-linearity, hysteresis, non-repeatability in % "
    "of span (ISA-51.1 / IEC 61298-2 terms)")
METHOD_COMPARISON: StashKey[pd.DataFrame] = StashKey(
    "method_comparison", "method_compare", "per test, U and TUR with the other reading rig the registry allows")
LOOP_SPLIT: StashKey[pd.DataFrame] = StashKey(
    "loop_split", "loop_split", "per in-loop test, the transmitter's error apart from the whole loop's")
BURDEN: StashKey[pd.DataFrame] = StashKey(
    "burden", "burden", "per test (indexed by test), the loop's resistance terms and the output's drive limit")
FAULT_SIGNATURES: StashKey[pd.DataFrame] = StashKey(
    "fault_signatures", "fault_signatures", "per test, the fault signature read from the shape of its errors")

# --- ll_history ------------------------------------------------------------------------------------

HISTORY: StashKey[pd.DataFrame] = StashKey(
    "history", "history", "one row per valid test in date order per asset: verdicts, worst errors")
DRIFT_POINTS: StashKey[pd.DataFrame] = StashKey(
    "drift_points", "drift", "the as-found and as-left errors the drift fits are made from")
DRIFT_FITS: StashKey[pd.DataFrame] = StashKey(
    "drift_fits", "drift", "per asset and fit segment, the least-squares drift line")
DRIFT_ASSETS: StashKey[pd.DataFrame] = StashKey(
    "drift_assets", "drift", "per asset, its drift rate and when it is predicted to leave tolerance")
EOPR: StashKey[pd.DataFrame] = StashKey(
    "eopr", "intervals", "the fleet's end-of-period reliability (fleet_only: never on an asset's pages)")
ASSETS_SUMMARY: StashKey[pd.DataFrame] = StashKey(
    "assets_summary", "intervals", "one row per asset: latest verdict, next due, overdue, recommended interval "
    "(assets.csv of OUT/data)")
AS_FOUND_FAILURES: StashKey[pd.DataFrame] = StashKey(
    "as_found_failures", "failures", "one row per test whose as-found phase failed (adjusted or not): worst "
    "point, what was done, as-left result, the date a later test put it right")
REFERENCE_USES: StashKey[pd.DataFrame] = StashKey(
    "reference_uses", "traceability", "one row per (test, role) naming a reference instrument, with the "
    "certificate in force and its status on the test date")
REFERENCES_FOUND_OUT: StashKey[pd.DataFrame] = StashKey(
    "references_found_out", "traceability", "one row per reference a calibration found out of tolerance: the "
    "certificate, its previous good calibration and how many tests used it in between")
VERDICT_CHANGES: StashKey[pd.DataFrame] = StashKey(
    "verdict_changes", "changes", "every verdict changed although its result file did not, with the date of the "
    "run that saw it: the previous run's list and this run's (changes.csv, the handbook's changes page)")

# --- ll_publish ------------------------------------------------------------------------------------

HANDBOOK_BUILD: StashKey[Any] = StashKey(
    "handbook_build", "handbook", "what the last build did: pages made, kept and reused (BuildStats)")
FINDINGS_BY_FILE: StashKey[tuple[Any, int, dict[str, list[Any]]]] = StashKey(
    "_findings_by_file", "handbook", "an index of ctx.findings by file, made again when the findings change")

ALL: tuple[StashKey[Any], ...] = tuple(v for v in list(globals().values()) if isinstance(v, StashKey))
