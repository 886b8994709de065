"""Copper conductor resistance for the burden check (a helper module, not a plugin).

- Metric sizes: the maximum DC resistance at 20 °C of class 1 and class 2 (solid and
  stranded) plain copper conductors from IEC 60228, Table 1/2, in Ω/km. 10 and 16 mm² are
  recalled values (from memory), the rest are read from the standard's table.
- AWG sizes: computed from the ASTM B258 gauge definition (d = 0.127 mm × 92^((36 − n)/39))
  and the resistivity of annealed copper at 20 °C of the International Annealed Copper
  Standard (IEC 60028: 1/58 Ω·mm²/m). A formula rather than a table so that every gauge
  from 0000 to 40 is covered; the tests hold it against published wire-gauge table values.
- Temperature: R(t) = R20 × (1 + α20 (t − 20 °C)) with α20 = 0.00393 /K for copper.

A loop runs out and back, so the cable's loop resistance counts both conductors.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

#: IEC 60228 class 1/2 plain copper, max DC resistance at 20 °C, Ω/km (10 and 16 mm²: from memory)
IEC60228_COPPER: dict[float, float] = {
    0.5: 36.0, 0.75: 24.5, 1.0: 18.1, 1.5: 12.1, 2.5: 7.41, 4.0: 4.61, 6.0: 3.08, 10.0: 1.83, 16.0: 1.15,
}
#: annealed copper at 20 °C (IACS, IEC 60028), Ω·mm²/m
COPPER_RESISTIVITY = 1.0 / 58.0
#: copper's temperature coefficient of resistance at 20 °C, 1/K
ALPHA_20 = 0.00393
#: AWG numbers accepted (0000 = -3 ... 40)
AWG_RANGE = (-3, 40)


def mm2_ohm_per_km(mm2: pd.Series) -> pd.Series:
    """Ω/km at 20 °C for each cross-section in mm² (NaN for a size the table does not hold)."""
    table = pd.Series(IEC60228_COPPER)
    values = pd.to_numeric(mm2, errors="coerce").astype(float)
    keys = values.round(3)
    return keys.map(table).astype(float)


def awg_diameter_mm(awg: pd.Series | float) -> pd.Series | float:
    """ASTM B258: diameter in mm of gauge n (0000 is n = -3)."""
    return 0.127 * np.power(92.0, (36.0 - np.asarray(awg, dtype=float)) / 39.0)


def awg_ohm_per_km(awg: pd.Series) -> pd.Series:
    """Ω/km at 20 °C of solid annealed copper of each AWG number (NaN outside 0000..40 or not whole)."""
    n = pd.to_numeric(awg, errors="coerce").astype(float)
    ok = (n == n.round()) & n.between(*AWG_RANGE)
    area = np.pi / 4.0 * np.power(awg_diameter_mm(n.where(ok)), 2)
    return pd.Series(COPPER_RESISTIVITY / area * 1000.0, index=n.index).where(ok)


def temperature_factor(ambient_c: pd.Series | float) -> pd.Series | float:
    """R(t) / R(20 °C) for copper: 1 + α20 (t − 20)."""
    return 1.0 + ALPHA_20 * (ambient_c - 20.0)


def loop_ohm(ohm_per_km: pd.Series, length_m: pd.Series, ambient_c: pd.Series) -> pd.Series:
    """Both conductors of a cable of ``length_m`` at ``ambient_c``: 2 × L × r × (1 + α(t − 20))."""
    factor = temperature_factor(ambient_c.astype(float))
    return 2.0 * length_m.astype(float) / 1000.0 * ohm_per_km * factor
