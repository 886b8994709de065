"""Numbers with units, parsed once per column and converted with pint per unique unit.

Readings arrive as text such as ``0.4011 V`` or ``25 %``. Parsing is vectorised
with a regular expression; pint is asked only once per distinct unit string,
so a table of 200,000 readings costs a handful of pint look-ups.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    import pint

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_QUANTITY = re.compile(rf"^\s*(?P<value>{_NUMBER})\s*(?P<unit>.*?)\s*$")
_DECIMAL_COMMA = re.compile(r"^\s*[+-]?\d+,\d+")
_ALIASES = {"Ω": "ohm", "ohms": "ohm", "Ohm": "ohm", "°C": "degC", "℃": "degC", "degC": "degC", "µ": "u"}
PERCENT = "%"


#: the unit names read with the small registry of ``units.txt`` (built in milliseconds); a unit text naming
#: anything else is read with pint's full default registry (about 0.2 s to build, so built only then).
#: An explicit list, not everything the small file could read: pint reads some of its own names (``Eh``,
#: ``hbar``) differently from a prefix and a unit. tests/pipeline/test_units.py checks each name against pint's.
EVERYDAY = frozenset({
    "A", "mA", "uA", "µA", "kA", "ampere", "amp", "V", "mV", "uV", "µV", "kV", "volt",
    "W", "mW", "kW", "MW", "GW", "watt", "VA", "kVA", "MVA", "volt_ampere", "Hz", "kHz", "hertz",
    "var", "kvar", "Mvar", "VAr", "kVAr", "MVAr", "volt_ampere_reactive",
    "ohm", "mohm", "kohm", "Mohm", "Ω", "mΩ", "kΩ", "MΩ", "S", "mS", "uS", "µS", "siemens",
    "degC", "degF", "K", "°C", "°F", "celsius", "fahrenheit", "kelvin", "degree_Celsius", "degree_Fahrenheit",
    "bar", "mbar", "Pa", "hPa", "kPa", "MPa", "pascal", "percent", "%", "ppm",
    "s", "ms", "us", "µs", "second", "min", "minute", "h", "hr", "hour",
    "m", "mm", "cm", "km", "meter", "metre", "l", "L", "ml", "mL", "liter", "litre", "g", "kg", "gram",
    "N", "kN", "newton", "J", "kJ", "joule", "C", "coulomb", "count", "dimensionless",
})
_NAMES = re.compile(r"[^\s\d*/^().+\-]+")  # the names in a unit text, between operators and exponents
_UNITS_FILE = Path(__file__).with_name("units.txt")
#: the var, unit of reactive power (IEC 60050-131 and IEC 60027-1 give it that name; 1 var = 1 V·A, from
#: memory), which pint's default definitions lack: added to both registries, so a reactive-power transducer
#: ranged in kvar can be registered. pint treats it as of one kind with W and VA, as the SI does.
REACTIVE = "volt_ampere_reactive = volt * ampere = var = VAr"


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
    """pint's full default registry (built on first use)."""
    import pint

    ureg: pint.UnitRegistry = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define(REACTIVE)
    return ureg


@lru_cache(maxsize=1)
def everyday_registry() -> pint.UnitRegistry:
    """A registry of ``units.txt`` and :data:`REACTIVE`: the same definitions as pint's own (and
    :func:`registry`'s) for :data:`EVERYDAY`."""
    import pint

    ureg: pint.UnitRegistry = pint.UnitRegistry(str(_UNITS_FILE), autoconvert_offset_to_baseunit=True)
    ureg.define(REACTIVE)
    return ureg


def registry_for(*units: str) -> pint.UnitRegistry:
    """The small registry when every name in ``units`` is an everyday one, else pint's full one."""
    if all(name in EVERYDAY for unit in units for name in _NAMES.findall(unit)):
        return everyday_registry()
    return registry()


def normalise_unit(text: str) -> str:
    text = text.strip()
    for old, new in _ALIASES.items():
        text = text.replace(old, new)
    return text


@dataclass(frozen=True, slots=True)
class Parsed:
    value: float
    unit: str


def parse_one(text: Any) -> Parsed:
    """Parse one quantity; raises ValueError with a message a technician can act on."""
    if isinstance(text, bool):
        raise ValueError(f"expected a number with a unit, got {text!r}")
    if isinstance(text, int | float):
        raise ValueError(f"'{text}' has no unit: write it as e.g. '{text} mA', '{text} V' or '{text} %'")
    if not isinstance(text, str):
        raise ValueError(f"expected a number with a unit, got {type(text).__name__}")
    if _DECIMAL_COMMA.match(text):
        raise ValueError(f"'{text}' uses a decimal comma; write a decimal point, e.g. '{text.replace(',', '.', 1)}'")
    m = _QUANTITY.match(text)
    if not m:
        raise ValueError(f"'{text}' is not a number with a unit (e.g. '0.4011 V', '12.00 mA', '25 %')")
    value = float(m["value"])
    if not math.isfinite(value):
        raise ValueError(f"'{text}' is not a finite number")
    unit = normalise_unit(m["unit"])
    if not unit:
        raise ValueError(f"'{text}' has no unit: write it as e.g. '{m['value']} mA' or '{m['value']} %'")
    if unit != PERCENT:
        unit_check(unit)
    return Parsed(value, unit)


def parse_column(values: pd.Series) -> pd.DataFrame:
    """Vectorised :func:`parse_one`: columns ``value``, ``unit`` and ``problem`` (None when fine)."""
    text = values.astype("string")
    # each distinct text is parsed once (a column repeats '50 %', 'mA' and the like many times)
    codes, distinct = pd.factorize(text, use_na_sentinel=True)
    parts = pd.Series(distinct, dtype="string").str.extract(_QUANTITY.pattern)
    seen = codes >= 0
    number = pd.to_numeric(parts["value"], errors="coerce").astype(float).to_numpy()
    value = pd.Series(np.where(seen, number[np.where(seen, codes, 0)] if len(number) else np.nan, np.nan),
                      index=values.index, dtype=float)
    written = parts["unit"].fillna("").to_numpy(dtype=object)
    unit = pd.Series(np.where(seen, written[np.where(seen, codes, 0)] if len(written) else "", ""),
                     index=values.index, dtype="string")
    good = value.notna() & (unit != "") & np.isfinite(value.fillna(0.0))
    problem = pd.Series(None, index=values.index, dtype=object)
    for unique in pd.unique(unit[good]):
        if unique == PERCENT:
            continue
        try:
            unit_check(normalise_unit(str(unique)))
        except ValueError:
            good &= unit != unique
    normal = {u: normalise_unit(str(u)) if u else u for u in pd.unique(unit)}
    unit = unit.map(lambda u: normal[u])
    for idx in values.index[~good]:
        try:
            parse_one(values[idx])
            problem[idx] = f"'{values[idx]}' could not be read"
        except ValueError as exc:
            problem[idx] = str(exc)
    return pd.DataFrame({"value": value.where(good), "unit": unit.where(good, ""), "problem": problem})


#: units of the trade that differ from another only by case (m is milli, M mega; a lone "a" is a year)
CASE_SENSITIVE = ("mA", "uA", "A", "kA", "V", "mV", "kV", "W", "kW", "MW", "var", "kvar", "VA", "kVA", "bar",
                  "mbar", "Pa", "kPa", "MPa", "degC", "K", "ohm", "kohm", "Hz", "counts")


def case_hint(unit: str, *wanted: str) -> str:
    """'; units are case-sensitive: did you mean 'mA'?' when ``unit`` is one of ``wanted`` (or of the trade's
    units) but for its case; '' otherwise."""
    for known in (*wanted, *CASE_SENSITIVE):
        if known and unit != known and unit.lower() == known.lower():
            return f"; units are case-sensitive (m is milli, M is mega): did you mean '{known}'?"
    return ""


@lru_cache(maxsize=512)
def unit_check(unit: str) -> str:
    """Return the dimensionality of ``unit`` as text, or raise ValueError."""
    try:
        return str(registry_for(unit).Unit(unit).dimensionality)
    except Exception as exc:  # pint raises several kinds; all mean "not a unit"
        raise ValueError(f"'{unit}' is not a unit loopledger knows{case_hint(unit)}") from exc


@lru_cache(maxsize=1024)
def affine(unit: str, target: str) -> tuple[float, float] | None:
    """(scale, offset) with ``x[target] = scale * x[unit] + offset``; None if the dimensions differ."""
    ureg = registry_for(unit, target)
    try:
        q0 = ureg.Quantity(0.0, unit).to(target).magnitude
        q1 = ureg.Quantity(1.0, unit).to(target).magnitude
    except Exception:
        return None
    return float(q1 - q0), float(q0)


def same_dimension(unit: str, target: str) -> bool:
    return affine(unit, target) is not None


def of_dimension(units: pd.Series, target: str) -> pd.Series:
    """:func:`same_dimension` of each unit (as text), worked out once per distinct unit."""
    text = units.astype(str)
    return text.map({u: same_dimension(u, target) for u in pd.unique(text)}).astype(bool)


def convert(values: pd.Series, units: pd.Series, target: str | pd.Series) -> pd.Series:
    """Convert ``values`` given in ``units`` to ``target`` (one unit or one per row).

    Rows whose unit cannot be converted come back as NaN; callers report them.
    """
    # positions, not labels: the index may repeat (one row per repeat reading of a point)
    out = np.full(len(values), np.nan)
    raw = values.to_numpy(dtype=float, na_value=np.nan)
    targets = target.to_numpy() if isinstance(target, pd.Series) else np.full(len(values), target, dtype=object)
    pairs = pd.DataFrame({"u": units.astype(str).to_numpy(), "t": pd.Series(targets).astype(str).to_numpy()})
    for (unit, tgt), pos in pairs.groupby(["u", "t"], sort=False).indices.items():
        ab = affine(str(unit), str(tgt))
        if ab is not None:
            out[pos] = ab[0] * raw[pos] + ab[1]
    return pd.Series(out, index=values.index, dtype=float)


def to_float(text: Any, target: str) -> float:
    """Parse one quantity and convert it to ``target``; raises ValueError on any problem."""
    parsed = parse_one(text)
    ab = affine(parsed.unit, target)
    if ab is None:
        raise ValueError(f"'{text}' is not in units convertible to {target}")
    return ab[0] * parsed.value + ab[1]


# ---------------------------------------------------------------------------
# Datasheet specifications such as "0.05 %rdg + 2 digits" or "0.5" (a class index)

_SPEC_TERM = re.compile(rf"^\s*(?P<value>{_NUMBER})\s*(?P<unit>%\s*\w+|%|digits?|counts?|ppm\S*|[^\s].*)?\s*$")


@dataclass(frozen=True, slots=True)
class Spec:
    """A datasheet accuracy: ``pct_rdg`` % of reading + ``pct_range`` % of range + ``pct_span``
    % of span + ``digits`` × resolution + ``absolute`` (in ``absolute_unit``)."""

    pct_rdg: float = 0.0
    pct_range: float = 0.0
    pct_span: float = 0.0
    digits: float = 0.0
    absolute: float = 0.0
    absolute_unit: str = ""
    class_index: float | None = None

    def half_width(self, reading: Any, *, range_: Any = 0.0, span: Any = 0.0, resolution: Any = 0.0,
                   unit: str = "") -> Any:
        """Half-width of the limit in ``unit`` (arrays broadcast)."""
        absolute = 0.0
        if self.absolute:
            ab = affine(self.absolute_unit, unit) if unit else (1.0, 0.0)
            if ab is None:
                raise ValueError(f"accuracy term '{self.absolute} {self.absolute_unit}' is not in {unit}")
            absolute = self.absolute * ab[0]
        pct_span = self.pct_span + (self.class_index or 0.0)
        return (self.pct_rdg / 100 * np.abs(reading) + self.pct_range / 100 * range_
                + pct_span / 100 * span + self.digits * resolution + absolute)


@lru_cache(maxsize=512)
def parse_spec(text: str) -> Spec:
    """Parse ``0.5`` (class index), ``0.08 mA``, ``0.25 %span``, ``0.05 %rdg + 2 digits`` ..."""
    text = str(text).strip()
    if not text:
        raise ValueError("empty accuracy")
    terms: dict[str, float] = {}
    absolute, absolute_unit = 0.0, ""
    class_index: float | None = None
    for raw in text.split("+"):
        m = _SPEC_TERM.match(raw)
        if not m:
            raise ValueError(f"cannot read accuracy term '{raw.strip()}' in '{text}'")
        value = float(m["value"])
        if not math.isfinite(value) or value < 0:
            raise ValueError(f"accuracy term '{raw.strip()}' must be a non-negative number")
        unit = (m["unit"] or "").replace(" ", "")
        key = {"%rdg": "pct_rdg", "%reading": "pct_rdg", "%range": "pct_range", "%fs": "pct_range",
               "%span": "pct_span", "%": "pct_rdg", "digit": "digits", "digits": "digits",
               "count": "digits", "counts": "digits"}.get(unit.lower())
        if key:
            terms[key] = terms.get(key, 0.0) + value
        elif not unit:
            if class_index is not None:
                raise ValueError(f"'{text}' gives two class indices")
            class_index = value
        else:
            if absolute_unit:
                raise ValueError(f"'{text}' gives two absolute terms")
            unit_check(normalise_unit(unit))
            absolute, absolute_unit = value, normalise_unit(unit)
    return Spec(absolute=absolute, absolute_unit=absolute_unit, class_index=class_index, **terms)
