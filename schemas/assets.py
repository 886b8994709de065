"""assets.csv: one row per asset and period (the registry of devices under test, with its history).

An asset may have several rows, each with a ``valid_from`` date (blank: from the beginning). A test is
judged against the row in force on its date: the row with the latest ``valid_from`` on or before it. So a
re-ranged transmitter keeps its old range for its old tests.
"""

from __future__ import annotations

import pandera.pandas as pa
from loopledger.schemas.signals import RATIO_ERROR, ratio_ok
from pandera.typing import Series

#: an asset id is used in page names: no path separators or control characters
ASSET_ID = r"^[^\x00-\x1f\x7f/\\]+$"


def _above(high, low):  # type: ignore[no-untyped-def]
    """high > low where both are numbers (a cell that is not one is reported by its own column's check)."""
    import pandas as pd

    hi, lo = pd.to_numeric(high, errors="coerce"), pd.to_numeric(low, errors="coerce")
    return hi.isna() | lo.isna() | (hi > lo)


class AssetsFile(pa.DataFrameModel):
    """Required columns are the device's identity, signal and ranges; the rest are optional.

    - ``signal`` names the plugin that handles the device (``loopledger plugins`` lists them);
    - ``accuracy`` is a class index (``0.5`` = ±0.5 % of output span), or ``0.08 mA``, or ``0.25 %span``;
    - ``ct_ratio`` such as ``2000/1`` relates primary amps to the transducer's input;
    - ``display_*`` is the control system's engineering range for the same signal;
    - ``max_load_ohm``, ``power``, ``supply_v``, ``min_terminal_v``, ``receiver_ohm`` and the
      ``cable_*`` columns describe the loop for the burden check;
    - ``interval_months`` is the planned test interval, in whole months (1 to 240);
    - ``hazardous_area`` marks a loop in a hazardous area (e.g. ``zone 1``; blank, ``no`` or ``false`` when
      it is not): its test sheet and pages then carry the intrinsically-safe caution.
    - ``valid_from`` (YYYY-MM-DD or blank) is the first date a row is in force; two rows of one asset must
      not share it (two blanks included).
    """

    asset: Series[str] = pa.Field(str_matches=ASSET_ID, str_length={"min_value": 1, "max_value": 120})
    description: Series[str] = pa.Field(nullable=True)
    site: Series[str] = pa.Field(nullable=True)
    area: Series[str] = pa.Field(nullable=True)
    signal: Series[str] = pa.Field(str_length={"min_value": 1})
    input_min: Series[float]
    input_max: Series[float]
    input_unit: Series[str]
    output_min: Series[float]
    output_max: Series[float]
    output_unit: Series[str]
    characteristic: Series[str] = pa.Field(isin=["linear", "sqrt"], nullable=True)
    accuracy: Series[str]
    ct_ratio: Series[str] = pa.Field(nullable=True)
    display_min: Series[float] = pa.Field(nullable=True)
    display_max: Series[float] = pa.Field(nullable=True)
    display_unit: Series[str] = pa.Field(nullable=True)
    max_load_ohm: Series[float] = pa.Field(nullable=True, gt=0)
    power: Series[str] = pa.Field(nullable=True, isin=["self", "loop"])
    supply_v: Series[float] = pa.Field(nullable=True, gt=0)
    min_terminal_v: Series[float] = pa.Field(nullable=True, ge=0)
    receiver_ohm: Series[float] = pa.Field(nullable=True, ge=0)
    cable_mm2: Series[float] = pa.Field(nullable=True, gt=0)
    cable_awg: Series[float] = pa.Field(nullable=True)
    cable_length_m: Series[float] = pa.Field(nullable=True, ge=0)
    #: whole months, at most 20 years (our own bound: a longer plan is taken for a typing error)
    interval_months: Series[float] = pa.Field(nullable=True, gt=0, le=240)
    hazardous_area: Series[str] = pa.Field(nullable=True)
    valid_from: Series[str] = pa.Field(nullable=True)

    @pa.check("ct_ratio", error=RATIO_ERROR)
    def ct_ratio_ok(cls, col):  # type: ignore[no-untyped-def]
        return ratio_ok(col)

    @pa.check("interval_months", error="must be a whole number of months")
    def whole_months(cls, col):  # type: ignore[no-untyped-def]
        return col.isna() | (col % 1 == 0)

    @pa.check("valid_from", error="must be a date written YYYY-MM-DD (or left blank: from the beginning)")
    def valid_from_is_date(cls, col):  # type: ignore[no-untyped-def]
        from loopledger.schemas.results import date_part

        return col.isna() | date_part(col).notna()

    @pa.dataframe_check(error="input_max must be above input_min (are they swapped?)")
    def input_range(cls, df):  # type: ignore[no-untyped-def]
        return _above(df["input_max"], df["input_min"])

    @pa.dataframe_check(error="output_max must be above output_min (are they swapped?)")
    def output_range(cls, df):  # type: ignore[no-untyped-def]
        return _above(df["output_max"], df["output_min"])

    @pa.dataframe_check(error="asset and valid_from must not repeat another row's: two rows of one asset in "
                              "force from the same date")
    def one_row_per_date(cls, df):  # type: ignore[no-untyped-def]
        return ~df.duplicated(["asset", "valid_from"], keep=False)

    class Config:
        strict = False
        coerce = True


OPTIONAL = [name for name, field in AssetsFile.to_schema().columns.items() if field.nullable]
REQUIRED = [name for name, field in AssetsFile.to_schema().columns.items() if not field.nullable]
