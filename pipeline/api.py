"""What a plugin author imports: ``from loopledger.api import ...``.

Everything here is kept stable across releases; the modules behind it (``loopledger.runner``,
``loopledger.plugins.*``) are internals and may change. A site plugin needs nothing else
(``plugins/examples/valve_feedback`` imports only this module; a test keeps it so).

- Hooks: :data:`hookimpl` marks an implementation; :func:`needs` orders one after what other plugins of the
  same stage add. The hooks themselves are documented in :mod:`loopledger.hookspecs`.
- Contracts: :class:`SignalType`, :class:`ReadingMethod`, :class:`DecisionRule`, :class:`ResultRead`,
  :class:`Section`, :class:`Command`; the run's :class:`RunContext`.
- Findings: :class:`Finding` and :func:`error`, :func:`warning`, :func:`note`.
- Quantities and units: :mod:`quantities` (parse a column of ``4.01 mA`` texts, convert, read a spec).
- Scaling: :mod:`scaling` (range arithmetic: input % of range, expected output, a CT/VT ratio).
- Extra register columns: :func:`check_columns` checks the assets.csv columns a signal type declares
  against a pandera model of them, with one finding per bad cell.
- Shared values: :class:`StashKey` to declare a key of your own; :mod:`keys` for the built-ins' keys
  (read with ``ctx.stash.get(keys.BUDGET)``).
- Tables: :func:`validate` turns a pandera model's failures into findings naming file, line and field;
  :func:`cells` and :func:`grouped` format and group column values for page blocks.
- Registers: :func:`absent` says why an asset or instrument id is not found.
"""

from __future__ import annotations

from loopledger import keys, quantities, scaling
from loopledger.asset_columns import check as check_columns
from loopledger.cells import cells, each_value, grouped, texts
from loopledger.context import RunContext
from loopledger.contracts import Command, DecisionRule, ReadingMethod, ResultRead, Section, SignalType
from loopledger.findings import Finding, error, note, warning
from loopledger.hookspecs import hookimpl, needs
from loopledger.registry import absent
from loopledger.stash import StashKey
from loopledger.validation import validate

__all__ = [
    "Command", "DecisionRule", "Finding", "ReadingMethod", "ResultRead", "RunContext", "Section", "SignalType",
    "StashKey", "absent", "cells", "check_columns", "each_value", "error", "grouped", "hookimpl", "keys",
    "needs", "note", "quantities", "scaling", "texts", "validate", "warning",
]
