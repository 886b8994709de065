"""Helpers shared by the page hooks, which format the cells of a whole batch of pages at once."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any, TypeVar

import numpy as np
import pandas as pd

T = TypeVar("T")


def cells(values: pd.Series, template: str, missing: str = "—") -> list[str]:
    """Each value put into the printf-style ``template`` (``%`` formatting, faster than ``str.format``
    over many cells, with the same result), ``missing`` where there is no value."""
    return [missing if gap else template % v for v, gap in zip(values.tolist(), values.isna().tolist(), strict=True)]


def texts(values: pd.Series) -> list[str]:
    """Each value as text (``str``), "" where there is none."""
    return cells(values, "%s", missing="")


def grouped(keys: Iterable[Any], items: Iterable[T]) -> dict[str, list[T]]:
    """``items`` collected under their page id (``keys`` run alongside), each page's in the order given."""
    out: dict[str, list[T]] = {}
    for key, item in zip(keys, items, strict=True):
        out.setdefault(str(key), []).append(item)
    return out


def each_value(values: Any, one: Callable[[Any], str]) -> np.ndarray:
    """``one(v)`` for each of ``values``, as an object array, calling ``one`` once per distinct value.

    The values on a batch of pages repeat a lot (phases, components, divisors, k, ν), so
    formatting each distinct one once is most of the saving. Numbers are told apart by their
    bits (-0.0 and 0.0 print differently); an object column is grouped only when it holds
    nothing but strings (1, 1.0 and True would hash alike), else formatted value by value.
    """
    arr = np.asarray(values)
    if arr.dtype.kind == "f":
        codes, bits = pd.factorize(arr.astype(np.float64).view(np.int64))
        distinct = bits.view(np.float64).tolist()
    elif arr.dtype.kind in "iub":
        codes, found = pd.factorize(arr)
        distinct = found.tolist()
    else:
        codes, found = pd.factorize(arr, use_na_sentinel=False)
        if not all(type(v) is str for v in found):
            return np.array([one(v) for v in arr.tolist()], dtype=object)
        distinct = list(found)
    return np.array([one(v) for v in distinct], dtype=object)[codes]
