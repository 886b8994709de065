"""Result files, as read: the test header (one row per file) and the raw points.

A result file is YAML, CSV or .xlsx; README shows each. Fields:

- header: ``asset``, ``date`` (YYYY-MM-DD; a time of day after it is dropped), ``technician``, ``connection``
  (standalone | in-loop), ``method`` (a reading method: direct | shunt |
  display, or one a plugin adds), ``injection`` (secondary | primary),
  ``ambient_c``, instruments ``source`` / ``meter`` / ``shunt``, ``remarks``
  (Markdown), ``cjc_c`` (the reference-junction temperature at a thermocouple
  transmitter's terminals, °C, for inputs written in mV), ``cjc_u`` (how well ``cjc_c``
  is known: ``0.2 degC`` is a standard uncertainty; ``0.5 degC rectangular`` or
  ``0.5 degC triangular`` a half-width with its distribution), instrument ``cjc_probe``
  (a ``probe`` in instruments.yaml whose ``accuracy`` is a rectangular half-width; used
  when ``cjc_u`` is not given);
- points, under ``as_found`` / ``as_left``: ``input`` (``25 %`` of range or a
  quantity such as ``0.5 A``), ``reading`` (a quantity such as ``0.4011 V``),
  or ``readings`` (repeats), or ``reading_min`` + ``reading_max`` (an unsteady
  display), and optionally ``direction`` (up | down).
"""

from __future__ import annotations

import pandera.pandas as pa
from pandera.typing import Series

#: a date, YYYY-MM-DD (month and day may be one digit), optionally with a time of day, which is dropped
DATE = r"(\d{4}-\d{1,2}-\d{1,2})(?:[T ]\d{1,2}:\d{2}(?::\d{2}(?:\.\d+)?)?)?"


def date_part(series):  # type: ignore[no-untyped-def]
    """The date of each text as a datetime (NaT where the text is not a date as :data:`DATE` has it:
    trailing text of any other kind is refused, never cut off)."""
    import pandas as pd

    day = series.astype(str).str.strip().str.extract(f"^{DATE}$", expand=False)  # NaN where it does not match
    return pd.to_datetime(day, format="%Y-%m-%d", errors="coerce")


def _is_iso_date(series):  # type: ignore[no-untyped-def]
    return date_part(series).notna()


class TestHeader(pa.DataFrameModel):
    """The fields at the top of a result file."""

    test: Series[str]
    source_file: Series[str]
    asset: Series[str] = pa.Field(str_length={"min_value": 1})
    date: Series[str]
    technician: Series[str] = pa.Field(str_length={"min_value": 1})
    connection: Series[str] = pa.Field(isin=["standalone", "in-loop"])
    method: Series[str] = pa.Field(str_length={"min_value": 1})
    injection: Series[str] = pa.Field(isin=["secondary", "primary"])
    ambient_c: Series[float] = pa.Field(nullable=True, ge=-60, le=90)
    source: Series[str] = pa.Field(nullable=True)
    meter: Series[str] = pa.Field(nullable=True)
    shunt: Series[str] = pa.Field(nullable=True)
    remarks: Series[str] = pa.Field(nullable=True)
    cjc_c: Series[float] = pa.Field(nullable=True, ge=-60, le=150)
    cjc_u: Series[str] = pa.Field(nullable=True)
    cjc_probe: Series[str] = pa.Field(nullable=True)

    @pa.check("date", error="a real date written YYYY-MM-DD")
    def date_is_iso(cls, series):  # type: ignore[no-untyped-def]
        return _is_iso_date(series)

    class Config:
        strict = False
        coerce = True


class RawPoint(pa.DataFrameModel):
    """One reading point as written."""

    test: Series[str]
    source_file: Series[str]
    line: Series[int]
    phase: Series[str] = pa.Field(isin=["as_found", "as_left"])
    point: Series[int] = pa.Field(ge=1)
    direction: Series[str] = pa.Field(nullable=True, isin=["up", "down"])

    class Config:
        strict = False
        coerce = True
