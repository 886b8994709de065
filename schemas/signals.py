"""The extra assets.csv columns each built-in signal type (and the ``counts`` reading method) reads.

assets.csv keeps one header for every asset; a column that a signal type does
not use is left blank. Each model below is checked, by the plugin that owns
it, on the rows of the assets that use that plugin (so a blank ``tc_type``
is an error only for a thermocouple transmitter). Columns are optional
unless the model says otherwise.
"""

from __future__ import annotations

import pandera.pandas as pa
from pandera.typing import Series

#: a number above zero as a ratio's side: a non-zero digit before the point or after it
_SIDE = r"(?:\d*[1-9]\d*(?:\.\d+)?|\d+\.\d*[1-9]\d*)"
#: an instrument-transformer ratio such as ``11000/110`` (both sides above zero: ``0/1`` once made every
#: expected value infinite and crashed the linearity fit)
RATIO = rf"^\s*{_SIDE}\s*/\s*{_SIDE}\s*$"
RATIO_ERROR = "must be a ratio of two numbers above zero, such as 2000/1"


def ratio_ok(series):  # type: ignore[no-untyped-def]
    """Blank, or a ratio as :data:`RATIO` has it."""
    return series.isna() | series.astype(str).str.fullmatch(RATIO)
#: thermocouple types with IEC 60584-1 reference functions
TC_TYPES = ["B", "E", "J", "K", "N", "R", "S", "T"]


class _Columns(pa.DataFrameModel):
    asset: Series[str]

    class Config:
        strict = False
        coerce = True


#: accuracy classes of measuring CTs (IEC 61869-2) and inductive VTs (IEC 61869-3), from memory
CT_CLASSES = ["0.1", "0.2", "0.5", "1", "3", "5"]
VT_CLASSES = ["0.1", "0.2", "0.5", "1", "3"]


def class_ok(series, known):  # type: ignore[no-untyped-def]
    """Blank, or a number that is one of the ``known`` classes (``0.50`` is ``0.5``)."""
    import pandas as pd

    number = pd.to_numeric(series, errors="coerce")
    return series.isna() | number.map(lambda v: f"{v:g}" in known, na_action="ignore").fillna(False).astype(bool)


class CurrentTransducerColumns(_Columns):
    """``current-transducer``: ``ct_ratio`` for primary injection and the CT's ``ct_class``."""

    ct_ratio: Series[str] = pa.Field(nullable=True)
    ct_class: Series[str] = pa.Field(nullable=True)

    @pa.check("ct_ratio", error=RATIO_ERROR)
    def ct_ratio_ok(cls, col):  # type: ignore[no-untyped-def]
        return ratio_ok(col)

    @pa.check("ct_class", error=f"must be a measuring CT accuracy class (IEC 61869-2): {', '.join(CT_CLASSES)}")
    def ct_class_ok(cls, col):  # type: ignore[no-untyped-def]
        return class_ok(col, CT_CLASSES)


class VoltageTransducerColumns(_Columns):
    """``voltage-transducer``: ``vt_ratio`` (e.g. ``11000/110``) for primary injection, and ``vt_class``."""

    vt_ratio: Series[str] = pa.Field(nullable=True)
    vt_class: Series[str] = pa.Field(nullable=True)

    @pa.check("vt_ratio", error=RATIO_ERROR)
    def vt_ratio_ok(cls, col):  # type: ignore[no-untyped-def]
        return ratio_ok(col)

    @pa.check("vt_class", error=f"must be a VT accuracy class (IEC 61869-3): {', '.join(VT_CLASSES)}")
    def vt_class_ok(cls, col):  # type: ignore[no-untyped-def]
        return class_ok(col, VT_CLASSES)


class PowerTransducerColumns(CurrentTransducerColumns, VoltageTransducerColumns):
    """``power-transducer``: ``ct_ratio`` and ``vt_ratio``; primary power = secondary × both; ``ct_class`` and
    ``vt_class`` (the columns and checks of both transducers above)."""


class ProcessTransmitterColumns(_Columns):
    """``process-transmitter``: ``low_flow_cutoff_pct``, % of output (flow) below which the output
    is held at zero flow (``output_min``); blank or 0 means no cut-off."""

    low_flow_cutoff_pct: Series[float] = pa.Field(nullable=True, ge=0, lt=100)


class RtdTransmitterColumns(_Columns):
    """``rtd-transmitter``: ``r0_ohm``, the sensor's resistance at 0 °C (blank = 100 Ω, a Pt100)."""

    r0_ohm: Series[float] = pa.Field(nullable=True, gt=0, le=100_000)


class ThermocoupleTransmitterColumns(_Columns):
    """``thermocouple-transmitter``: ``tc_type`` (required), one of B E J K N R S T."""

    tc_type: Series[str] = pa.Field(isin=TC_TYPES)


class CountsColumns(_Columns):
    """Reading method ``counts``: the raw counts the input card reports at ``output_min`` and at
    ``output_max`` (e.g. 0 and 4095 for a 12-bit card scaled over 4-20 mA)."""

    counts_min: Series[float]
    counts_max: Series[float]

    @pa.dataframe_check(error="counts_max must differ from counts_min")
    def count_range(cls, df):  # type: ignore[no-untyped-def]
        return df["counts_max"] != df["counts_min"]
