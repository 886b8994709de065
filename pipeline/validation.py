"""Run a pandera model over a table and turn its failure cases into findings."""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

import pandas as pd
from loopledger.findings import Finding, error

_ISIN = re.compile(r"^isin\((.*)\)$")
_BOUND = re.compile(r"^(greater_than_or_equal_to|less_than_or_equal_to|greater_than|less_than)\((.*)\)$")
_BOUNDS = {"greater_than": "greater than", "greater_than_or_equal_to": "at least", "less_than": "less than",
           "less_than_or_equal_to": "at most"}


def _short(value: Any, limit: int = 60) -> str:
    """A value as text, cut to ``limit`` characters (a finding quotes what it refuses, not all of it)."""
    text = str(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def describe(check: str, case: Any) -> str:
    """A sentence for one pandera failure case."""
    case = _short(case)
    if check.startswith("must "):  # a check of our own, its error text written to follow the value
        return f"'{case}' {check}"
    m = _ISIN.match(check)
    if m:
        return f"'{case}' is not one of {m.group(1)}"
    if check == "not_nullable":
        return "is missing"
    if check.startswith("coerce_dtype") or check.startswith("dtype"):
        wanted = check.split("(", 1)[-1].rstrip(")").strip("'")
        wanted = {"float64": "a number", "int64": "a whole number", "str": "text"}.get(wanted, wanted)
        wanted = "a date (YYYY-MM-DD)" if wanted.startswith("datetime64") else wanted
        return f"'{case}' is not {wanted}"
    if check == "field_uniqueness" or check.startswith("unique"):
        return f"'{case}' appears more than once"
    if check.startswith("str_matches"):
        return f"'{case}' has characters that are not allowed here"
    bound = _BOUND.match(check)
    if bound:
        return f"'{case}' must be {_BOUNDS[bound.group(1)]} {bound.group(2)}"
    if check.startswith("str_length"):
        low, _, high = check[len("str_length"):].strip("()").partition(", ")
        if high == "None":
            return "is empty"
        return f"'{case}' is too long or empty (allowed: {low} to {high} characters)"
    if check == "column_in_dataframe":
        return f"column '{case}' is missing"
    return f"'{case}' fails the check: {check}"


def _row_check(frame: pd.DataFrame, index: Any, check: str) -> tuple[str, str]:
    """(field, message) for a failed check across a row: the columns its text names, with their values."""
    named = sorted((m.start(), c) for c in frame.columns
                   if (m := re.search(rf"\b{re.escape(str(c))}\b", check)) is not None)
    values = ", ".join(f"{c} {frame.at[index, c]!s}" for _, c in named) if index in frame.index else ""
    return (str(named[0][1]) if named else ""), check + (f" ({values})" if values else "")


def validate(frame: pd.DataFrame, model: Any, where: Callable[[Any], dict[str, Any]],
             ) -> tuple[pd.DataFrame, list[Finding]]:
    """Validate ``frame`` against ``model`` lazily.

    ``where(index)`` returns the finding fields (file, line, point) of a row.
    Rows that fail are dropped from the returned (coerced) frame; every failure
    becomes one finding naming the row and field.

    A failure pandera cannot pin on a row (a missing column, say) fails every row, but only once the
    rows that failed on their own are set aside: a cell that cannot be coerced ('warm' for a number)
    also makes the column's range check fail as a whole, and that must not drop every other row.
    """
    import pandera.errors

    schema = model.to_schema()
    try:
        return schema.validate(frame, lazy=True), []
    except pandera.errors.SchemaErrors as exc:
        cases = exc.failure_cases
    findings: list[Finding] = []
    bad_rows: set[Any] = set()
    wholes: list[Finding] = []
    said: set[tuple[str, Any, str]] = set()  # pandera reports a cell it cannot coerce twice (coerce, dtype)
    for case in cases.itertuples(index=False):
        column = str(case.column) if case.column is not None and str(case.column) != "None" else ""
        check = str(case.check)
        index = case.index
        whole = index is None or (isinstance(index, float) and pd.isna(index))
        if check == "column_in_dataframe":  # pandera names the model as the column, and the column as the case
            column, message = str(case.failure_case), describe(check, case.failure_case)
        elif not whole and case.schema_context == "DataFrameSchema":
            # a check across the row: pandera lists every cell of a failing row; said once, of the columns it names
            column, message = _row_check(frame, index, check)
        else:
            message = f"{(column or 'table') if whole else column} {describe(check, case.failure_case)}".strip()
        if (column, None if whole else index, message) in said:
            continue
        said.add((column, None if whole else index, message))
        if whole:
            wholes.append(error(message, field=column, **where(None)))
            continue
        bad_rows.add(index)
        findings.append(error(message, field=column, **where(index)))
    kept = frame.drop(index=[i for i in bad_rows if i in frame.index])
    if wholes and bad_rows and not kept.empty:  # were they only the echo of the rows set aside?
        rest, more = validate(kept, model, where)
        return rest, findings + more
    if wholes:
        return frame.iloc[0:0], findings + wholes
    if kept.empty:
        return kept, findings
    return schema.validate(kept, lazy=False), findings
