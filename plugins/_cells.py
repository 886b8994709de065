"""Helpers shared by the page hooks, which format the cells of a whole batch of pages at once."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any, TypeVar

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
