"""Instrument-transformer ratio error for primary injection (not a plugin itself).

Under ``injection: primary`` the test current or voltage passes through the site's current or voltage
transformer, whose ratio error is part of what the transducer receives. The ratio-error limit of the
transformer's accuracy class (assets.csv ``ct_class`` / ``vt_class``) at the injected value enters the
budget as a rectangular term (``ct_error_pct`` / ``vt_error_pct`` on each point, in % of the injected
value; the budget in :mod:`loopledger.plugins.uncertainty.budget` carries it).

Limits, ± % (from memory, carried over from IEC 60044-1; to be confirmed against IEC 61869-2 / -3):

- measuring CTs (IEC 61869-2), at 5 / 20 / 100 / 120 % of rated current: class 0.1: 0.4 / 0.2 / 0.1 /
  0.1; 0.2: 0.75 / 0.35 / 0.2 / 0.2; 0.5: 1.5 / 0.75 / 0.5 / 0.5; 1: 3.0 / 1.5 / 1.0 / 1.0; classes 3
  and 5: ±3 / ±5 at 50 and 120 %. Between the listed currents the limit is interpolated linearly (common
  practice); below the lowest listed current and above 120 % the standard gives none, and we hold the
  nearest listed one (our choice);
- inductive VTs (IEC 61869-3), 80-120 % of rated voltage: class 0.1 / 0.2 / 0.5 / 1 / 3: ±0.1 / 0.2 /
  0.5 / 1.0 / 3.0 %, held outside that band (our choice).

Phase displacement is left out: it does not change a current's or a voltage's magnitude; for power it
does (through the power factor), and the power transducer's budget term says it is left out.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from loopledger import scaling
from loopledger.findings import Finding, warning

#: the currents (% of rated) at which IEC 61869-2 lists a measuring CT's ratio-error limits
CT_CURRENTS = (5.0, 20.0, 100.0, 120.0)
CT_LIMITS: dict[str, tuple[float, ...]] = {"0.1": (0.4, 0.2, 0.1, 0.1), "0.2": (0.75, 0.35, 0.2, 0.2),
                                           "0.5": (1.5, 0.75, 0.5, 0.5), "1": (3.0, 1.5, 1.0, 1.0)}
#: classes 3 and 5: one limit from 50 to 120 % of rated current
CT_FLAT = {"3": 3.0, "5": 5.0}
VT_LIMITS = {"0.1": 0.1, "0.2": 0.2, "0.5": 0.5, "1": 1.0, "3": 3.0}


def class_text(values: pd.Series) -> pd.Series:
    """An accuracy class as its table key (``0.50`` and ``0.5`` → ``0.5``, ``1.0`` → ``1``); NaN where blank
    or not a number."""
    number = pd.to_numeric(values, errors="coerce")
    return number.map(lambda v: f"{v:g}", na_action="ignore")


def ct_limit_pct(ct_class: pd.Series, pct_rated: pd.Series) -> pd.Series:
    """The ratio-error limit (± %) of each CT class at each current (% of rated); NaN where either is unknown."""
    key = class_text(ct_class)
    pct = pd.to_numeric(pct_rated, errors="coerce").abs()
    out = pd.Series(np.nan, index=key.index, dtype=float)
    for cls, limits in CT_LIMITS.items():
        rows = (key == cls) & pct.notna()
        out[rows] = np.interp(pct[rows].to_numpy(dtype=float), CT_CURRENTS, limits)
    for cls, limit in CT_FLAT.items():
        out[(key == cls) & pct.notna()] = limit
    return out


def vt_limit_pct(vt_class: pd.Series) -> pd.Series:
    """The ratio-error limit (± %) of each VT class."""
    return class_text(vt_class).map(VT_LIMITS).astype(float)


def rated_primary(ratio_text: pd.Series) -> pd.Series:
    """The rated primary of a ratio such as ``2000/1`` (2000); NaN where blank or unreadable."""
    first = ratio_text.astype("string").str.extract(r"^\s*([\d.]+)\s*/", expand=False)
    return pd.to_numeric(first, errors="coerce")


def _blank_class(points: pd.DataFrame, primary: pd.Series, cls: pd.Series, which: str) -> list[Finding]:
    """A warning per file injected through a transformer whose class is blank."""
    rows = points[primary & cls.isna()].drop_duplicates("source_file")
    kind = {"ct": "current", "vt": "voltage"}[which]
    return [warning(f"injection: primary through the {kind} transformer, but {which}_class is blank in assets.csv: "
                    f"the transformer's ratio error is not in the uncertainty budget (give its IEC 61869 accuracy "
                    f"class, e.g. 0.5)", field=f"assets.{which}_class", **scaling.where(points, i))
            for i in rows.index]


def ct_error(points: pd.DataFrame, injected: pd.Series, ct_class: pd.Series, pct_rated: pd.Series,
             ) -> tuple[pd.Series, list[Finding]]:
    """``ct_error_pct`` for primary-injected points (NaN elsewhere), and a warning where the class is blank."""
    primary = points["injection"] == "primary"
    limit = ct_limit_pct(ct_class, pct_rated).where(primary & injected.notna())
    return limit, _blank_class(points, primary, class_text(ct_class), "ct")


def vt_error(points: pd.DataFrame, vt_class: pd.Series) -> tuple[pd.Series, list[Finding]]:
    """``vt_error_pct`` for primary-injected points (NaN elsewhere), and a warning where the class is blank."""
    primary = points["injection"] == "primary"
    return vt_limit_pct(vt_class).where(primary), _blank_class(points, primary, class_text(vt_class), "vt")
