"""instruments.yaml: the reference instruments, by id.

```yaml
DMM-1:
  kind: meter                 # source | meter | shunt | probe
  description: Handheld multimeter
  serial: "4417021"
  calibrations:               # every certificate, oldest first (or the flat calibrated/due of the latest one)
    - {date: 2025-01-10, due: 2026-01-10, certificate: C-2025-0117}
    - {date: 2026-01-12, due: 2027-01-12, certificate: C-2026-0042, as_found: fail,
       remarks: "20 mA range read 0.02 % high"}
  ranges:                     # meters: one entry per range; the unit says the function
    - {range: 20 mA, accuracy: 0.05 %rdg + 2 digits, resolution: 0.001 mA, burden: 1.8 mV/mA}
    - {range: 2 V,   accuracy: 0.025 %rdg + 2 digits, resolution: 0.0001 V}
INJ-1:
  kind: source
  range: 5 A
  accuracy: 0.1 %rdg + 0.05 %range
  calibrated: 2026-02-01      # one calibration: the flat form
  due: 2027-02-01
SH-100:
  kind: shunt
  resistance: 100 ohm
  tolerance: 0.01 %
  tempco: 5 ppm/K
  reference_temperature: 23 degC
CJ-1:
  kind: probe                 # a cold-junction temperature probe (cjc_probe in a result file)
  accuracy: 0.2 degC          # a rectangular half-width
```
"""

from __future__ import annotations

import pandera.pandas as pa
from pandera.typing import Series


class InstrumentsTable(pa.DataFrameModel):
    """One row per instrument (instruments.yaml flattened)."""

    instrument: Series[str] = pa.Field(unique=True, str_matches=r"^[^\x00-\x1f\x7f/\\]+$")
    kind: Series[str] = pa.Field(isin=["source", "meter", "shunt", "probe"])
    description: Series[str] = pa.Field(nullable=True)
    serial: Series[str] = pa.Field(nullable=True)
    calibrated: Series[pa.DateTime] = pa.Field(nullable=True)
    due: Series[pa.DateTime] = pa.Field(nullable=True)
    range: Series[str] = pa.Field(nullable=True)
    accuracy: Series[str] = pa.Field(nullable=True)
    resistance: Series[str] = pa.Field(nullable=True)
    tolerance: Series[str] = pa.Field(nullable=True)
    tempco: Series[str] = pa.Field(nullable=True)
    reference_temperature: Series[str] = pa.Field(nullable=True)

    @pa.dataframe_check(error="due must not be before calibrated")
    def due_after_calibration(cls, df):  # type: ignore[no-untyped-def]
        return df["due"].isna() | df["calibrated"].isna() | (df["due"] >= df["calibrated"])

    class Config:
        strict = False
        coerce = True


class MeterRanges(pa.DataFrameModel):
    """One row per meter range."""

    instrument: Series[str]
    range: Series[str]
    accuracy: Series[str] = pa.Field(nullable=True)
    resolution: Series[str] = pa.Field(nullable=True)
    burden: Series[str] = pa.Field(nullable=True)

    class Config:
        strict = False
        coerce = True


class Calibrations(pa.DataFrameModel):
    """One row per certificate of ``calibrations:`` (the flat ``calibrated``/``due`` make one row).

    ``as_found: fail`` says the instrument was found out of tolerance at that calibration: the tests that
    used it since the calibration before are suspect (``loopledger impacted``).
    """

    instrument: Series[str]
    date: Series[pa.DateTime]
    due: Series[pa.DateTime] = pa.Field(nullable=True)
    certificate: Series[str] = pa.Field(nullable=True)
    as_found: Series[str] = pa.Field(nullable=True, isin=["pass", "fail"])
    remarks: Series[str] = pa.Field(nullable=True)
    line: Series[int]

    @pa.dataframe_check(error="due must not be before date")
    def due_after_date(cls, df):  # type: ignore[no-untyped-def]
        return df["due"].isna() | (df["due"] >= df["date"])

    @pa.dataframe_check(error="instrument and date must not repeat another calibration's: two certificates "
                              "of one day")
    def one_per_day(cls, df):  # type: ignore[no-untyped-def]
        return ~df.duplicated(["instrument", "date"], keep=False)

    class Config:
        strict = False
        coerce = True
