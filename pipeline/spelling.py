"""'did you mean ...?' for a key, column or field that no part of loopledger reads."""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable


def nearest(word: str, known: Iterable[str]) -> str | None:
    """The known name closest to ``word`` (difflib's ratio, at least 0.6; a name differing only by case or
    by ``-`` for ``_`` is taken first; else a name that is one word of ``word``), or None."""
    names = sorted({str(k) for k in known})
    folded = {n.casefold().replace("-", "_"): n for n in names}
    same = folded.get(str(word).strip().casefold().replace("-", "_"))
    if same is not None:
        return same
    match = difflib.get_close_matches(str(word), names, n=1, cutoff=0.6)
    if match:
        return match[0]
    parts = re.split(r"[_\-\s]+", str(word).strip().casefold())  # `due_date` for `due`: a word added to a name
    return next((n for n in names if n.casefold() in parts), None)


def unknown(what: str, word: str, known: Iterable[str]) -> str:
    """The message for an unknown name: "unknown key 'due_date' (did you mean 'due'?)", or with the list
    of known names when none is close."""
    names = sorted({str(k) for k in known})
    near = nearest(word, names)
    hint = f"did you mean '{near}'?" if near else f"known: {', '.join(names)}"
    return f"unknown {what} '{word}' ({hint}); nothing reads it, so it would be ignored"
