"""The small objects that plugins hand to the engine through the hooks.

Each is a plain class: a plugin subclasses it (or builds one) and returns it
from the matching ``ll_*`` hook in :mod:`loopledger.hookspecs`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, ClassVar

if TYPE_CHECKING:
    import pandas as pd
    from loopledger.context import RunContext
    from loopledger.findings import Finding


class SignalType:
    """How one kind of device turns its input into an output.

    ``evaluate`` receives the rows of the point table whose asset names this
    signal (asset columns and test columns joined, ``input_value`` and
    ``input_written_unit`` parsed from what the technician wrote) and returns a frame
    on the same index with:

    - ``input_pct``: the input as % of the input range (the point's position);
    - ``expected``: the ideal output in the asset's ``output_unit``;
    - ``injected``: the quantity the source produced, in ``injected_unit``
      (what the uncertainty stage applies the source's specification to);
    - ``injected_unit``: its unit;
    - ``sensitivity``: d expected / d injected (output unit per injected unit).

    Rows it cannot evaluate get NaN and a finding naming the row and field.
    """

    name: ClassVar[str] = ""
    description: ClassVar[str] = ""
    #: extra assets.csv columns this signal reads, name -> meaning (shown by `loopledger plugins`)
    asset_columns: ClassVar[dict[str, str]] = {}
    #: one unit of each kind the asset's ``input_unit`` may be (``("A",)`` admits kA and mA as well); an
    #: asset whose input_unit is of another kind is refused before ``evaluate`` sees it. Empty: any unit
    input_units: ClassVar[tuple[str, ...]] = ()

    def evaluate(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.DataFrame, list[Finding]]:
        raise NotImplementedError


class ReadingMethod:
    """How a test's readings become an output value (``method:`` in a result file).

    ``measured`` receives the rows of the point table using this method, with
    ``reading`` (mean of repeats, in ``reading_unit``) parsed, and returns the
    measured output in the asset's ``output_unit`` on the same index (NaN plus
    a finding where a row cannot be converted).
    """

    name: ClassVar[str] = ""
    description: ClassVar[str] = ""

    def measured(self, points: pd.DataFrame, ctx: RunContext) -> tuple[pd.Series, list[Finding]]:
        raise NotImplementedError


class DecisionRule:
    """A statement of conformity rule (ILAC-G8:2019 terms).

    ``decide`` receives the judged rows (``error``, ``mpe`` and whatever the
    uncertainty stage added, e.g. ``U``) and returns a frame on the same index
    with ``decision`` (pass | fail | conditional-pass | conditional-fail) and
    ``acceptance_limit`` (the |error| up to which a point passes, output units).
    """

    name: ClassVar[str] = ""
    description: ClassVar[str] = ""
    #: point-table columns the rule needs (the engine reports a clear error if missing)
    needs: ClassVar[tuple[str, ...]] = ()

    def decide(self, points: pd.DataFrame, ctx: RunContext) -> pd.DataFrame:
        raise NotImplementedError


@dataclass
class ResultRead:
    """One result file as read: the header fields, its points and anything wrong with it.

    ``header_lines`` maps a header field to its 1-based line; every point dict
    carries ``line``, ``phase`` and ``point`` besides the fields the file gave.
    """

    header: dict[str, Any]
    points: list[dict[str, Any]]
    header_lines: dict[str, int] = field(default_factory=dict)
    findings: list[Finding] = field(default_factory=list)


@dataclass
class Section:
    """A block that a plugin adds to a test or asset page of the handbook.

    ``kind`` says how the page lays it out: ``facts`` (``rows`` of label/value
    pairs), ``table`` (``columns`` and ``rows``), ``text`` (plain ``text``,
    escaped), ``html`` (``html`` the plugin has made safe) or ``svg`` (an
    inline chart in ``html`` with ``alt`` text). ``screen_only`` keeps a long
    block (a whole budget) off the printed page, which says where it is instead;
    give it only where another block summarises it. ``covers`` names the codes of
    the findings this block states in full (``"fault-signature"``): on the page
    such a finding of the test is shown once, as a severity mark beside the
    block's title, and the list of findings points to the block instead.
    """

    title: str
    kind: str = "facts"
    rows: list[Any] = field(default_factory=list)
    columns: list[str] = field(default_factory=list)
    text: str = ""
    html: str = ""
    alt: str = ""
    order: int = 50
    screen_only: bool = False
    covers: tuple[str, ...] = ()


@dataclass
class Command:
    """A subcommand a plugin adds to the ``loopledger`` CLI."""

    name: str
    help: str
    add_arguments: Any  # Callable[[argparse.ArgumentParser], None]
    run: Any  # Callable[[argparse.Namespace], int]


@dataclass(frozen=True)
class SourceFile:
    """A result file found by discovery: path relative to the evidence folder, absolute path."""

    rel: str
    path: Path
