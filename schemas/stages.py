"""The point table between stages, as pandera models that build on each other.

Each stage's contract is the previous one's plus the columns it adds: ``LoadedPoints`` (what the readers
give) → ``CheckedPoints`` (``ll_check``: parsed quantities, the test's header and the asset's register row
joined on) → ``ExpectedPoints`` (``ll_expected``) → ``MeasuredPoints`` (``ll_measured``) → ``UncertainPoints``
(``ll_uncertainty``, an optional stage: the judged contract does not depend on it) → ``JudgedPoints``
(``ll_judge``). Plugins add more columns; these are the ones a later stage may rely on. The runner
validates ``ctx.points`` against them after each stage when contract checking is on (the test suite turns
it on; see :func:`loopledger.runner.run_stages`), so a plugin that drops or retypes a column is caught
where it does it.

Values may be missing (a point whose reading could not be parsed is still a row until its file is set
aside), so the numeric columns are nullable; what is checked is that the column is there, its type, and
the bounds that always hold.
"""

from __future__ import annotations

import pandera.pandas as pa
from loopledger.schemas.points import DECISIONS
from pandera.typing import Series


class LoadedPoints(pa.DataFrameModel):
    """One row per reading point of every result file, as read (``loopledger.load``)."""

    test: Series[str]
    source_file: Series[str]
    line: Series[int] = pa.Field(ge=0)
    phase: Series[str] = pa.Field(isin=["as_found", "as_left"])
    point: Series[int] = pa.Field(ge=1)

    class Config:
        strict = False


class CheckedPoints(LoadedPoints):
    """After ``ll_check``: inputs and readings parsed, the test's header and the asset's row joined on."""

    input_value: Series[float] = pa.Field(nullable=True)
    input_written_unit: Series[str] = pa.Field(nullable=True)
    reading_unit: Series[str] = pa.Field(nullable=True)
    n_readings: Series[int] = pa.Field(ge=0)
    reading_sd: Series[float] = pa.Field(nullable=True)
    reading_half_spread: Series[float] = pa.Field(nullable=True)
    asset: Series[str]
    date: Series[str]
    signal: Series[str]
    input_min: Series[float] = pa.Field(nullable=True)
    input_max: Series[float] = pa.Field(nullable=True)
    output_min: Series[float]
    output_max: Series[float]
    output_unit: Series[str]


class ExpectedPoints(CheckedPoints):
    """After ``ll_expected``: where each point sits on the range and what its output should be."""

    input_pct: Series[float] = pa.Field(nullable=True)
    expected: Series[float] = pa.Field(nullable=True)
    injected: Series[float] = pa.Field(nullable=True)
    sensitivity: Series[float] = pa.Field(nullable=True)


class MeasuredPoints(ExpectedPoints):
    """After ``ll_measured``: the measured output in output units."""

    measured: Series[float] = pa.Field(nullable=True)


class UncertainPoints(MeasuredPoints):
    """After ``ll_uncertainty`` (optional): the combined and expanded uncertainty of each point."""

    u: Series[float] = pa.Field(nullable=True, ge=0)
    U: Series[float] = pa.Field(nullable=True, ge=0)
    k: Series[float] = pa.Field(nullable=True, gt=0)


class JudgedPoints(MeasuredPoints):
    """After ``ll_judge``: error, MPE, the acceptance limit of the rule in force, the decision and whether the
    verdict accepted the point."""

    span: Series[float]
    error: Series[float] = pa.Field(nullable=True)
    error_pct_span: Series[float] = pa.Field(nullable=True)
    mpe: Series[float] = pa.Field(nullable=True, ge=0)
    acceptance_limit: Series[float] = pa.Field(nullable=True)
    decision: Series[str] = pa.Field(isin=DECISIONS)
    decision_rule: Series[str]
    #: the limit the test's verdict used: the acceptance limit, or the MPE where conditional passes are accepted
    verdict_limit: Series[float] = pa.Field(nullable=True)
    #: whether the point counts as a pass in its test's verdict (ILAC-G8:2019 §4.2.2 binary statement)
    accepted: Series[bool]


#: the contract ``ctx.points`` must meet after each stage (stages not named add no guaranteed column)
AFTER_STAGE: dict[str, type[pa.DataFrameModel]] = {
    "check": CheckedPoints,
    "expected": ExpectedPoints,
    "measured": MeasuredPoints,
    "uncertainty": UncertainPoints,
    "judge": JudgedPoints,
}
