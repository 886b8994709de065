"""Typed keys for what stages share, each with one owner (in the spirit of pytest's ``StashKey``).

A stage that leaves a table for later stages and the handbook declares a :class:`StashKey` for it in
:mod:`loopledger.keys`, naming the plugin that writes it, the type of the value and what it holds. Readers
and the writer go through ``ctx.stash[KEY]``, so a misspelt key is a NameError when the module loads, not
a silent ``None``, and mypy checks the value's type. The values live in ``RunContext.extras`` under the key's
``name``; that name is what ``fleet_only`` and the handbook's digests use.
"""

from __future__ import annotations

from collections.abc import MutableMapping
from dataclasses import dataclass
from typing import Any, Generic, TypeVar, overload

T = TypeVar("T")
D = TypeVar("D")


@dataclass(frozen=True)
class StashKey(Generic[T]):
    """One shared value: its ``name`` in ``ctx.extras``, the ``owner`` that writes it (a plugin's registered
    name, or ``"engine"``), and what it holds."""

    name: str
    owner: str
    doc: str

    def __repr__(self) -> str:
        return f"StashKey({self.name!r}, owner={self.owner!r})"


class Stash:
    """Typed access to the values stages share (a view over ``RunContext.extras``)."""

    __slots__ = ("_data",)

    def __init__(self, data: MutableMapping[str, Any]) -> None:
        self._data = data

    def __getitem__(self, key: StashKey[T]) -> T:
        value: T = self._data[key.name]
        return value

    def __setitem__(self, key: StashKey[T], value: T) -> None:
        self._data[key.name] = value

    def __contains__(self, key: StashKey[Any]) -> bool:
        return key.name in self._data

    @overload
    def get(self, key: StashKey[T]) -> T | None: ...

    @overload
    def get(self, key: StashKey[T], default: D) -> T | D: ...

    def get(self, key: StashKey[Any], default: Any = None) -> Any:
        return self._data.get(key.name, default)

    def setdefault(self, key: StashKey[T], default: T) -> T:
        value: T = self._data.setdefault(key.name, default)
        return value
