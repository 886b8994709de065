"""Thermocouples: the IEC 60584-1 reference functions (= NIST ITS-90, Monograph 175), not a plugin.

The reference functions and their inversion come from the registry package
``thermocouple-its90`` (coefficients machine-read from the NIST ITS-90
database; Newton-refined inverse). That package works one value at a time, so
these wrappers call it once per distinct (type, value, reference) — a test
repeats the same handful of nominal inputs — and map the answers back onto
the column.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import thermocouple_its90 as its90


def _per_unique(func: Callable[..., float], *columns: pd.Series) -> pd.Series:
    frame = pd.concat([c.rename(str(i)) for i, c in enumerate(columns)], axis=1)
    keys = frame.drop_duplicates().dropna()
    answers: dict[tuple[object, ...], float] = {}
    for row in keys.itertuples(index=False):
        try:
            answers[tuple(row)] = float(func(*row))
        except (ValueError, KeyError):  # its90.RangeError is a ValueError; KeyError: unknown type
            answers[tuple(row)] = float("nan")
    index = pd.MultiIndex.from_frame(frame) if len(frame.columns) > 1 else pd.Index(frame.iloc[:, 0])
    values = [answers.get(k if isinstance(k, tuple) else (k,), np.nan) for k in index]
    return pd.Series(values, index=columns[0].index, dtype=float)


def emf(t_c: pd.Series, tc_type: pd.Series) -> pd.Series:
    """E(t) in mV against a 0 °C reference junction (NaN outside the type's range)."""
    return _per_unique(lambda t, k: its90.get(k).emf(t), t_c.astype(float), tc_type.astype(str))


def seebeck(t_c: pd.Series, tc_type: pd.Series) -> pd.Series:
    """dE/dt in mV/°C at ``t_c``."""
    return _per_unique(lambda t, k: its90.get(k).seebeck(t), t_c.astype(float), tc_type.astype(str))


def temperature(mv: pd.Series, tc_type: pd.Series, reference_c: pd.Series) -> pd.Series:
    """Hot-junction temperature (°C) for ``mv`` measured with the reference junction at ``reference_c``.

    The measured emf plus E(reference) is inverted: what a transmitter with
    cold-junction compensation indicates when ``mv`` is applied at terminals
    that sit at ``reference_c``.
    """
    return _per_unique(lambda e, k, r: its90.get(k).temperature(e, reference=r), mv.astype(float),
                       tc_type.astype(str), reference_c.astype(float))
