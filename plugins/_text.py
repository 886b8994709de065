"""Helpers shared by the readers: decoding bytes into text with a clear message, and naming a table's
separator when it is not a comma."""

from __future__ import annotations

import codecs


def decode(data: bytes) -> str:
    """UTF-8 (with or without BOM) or UTF-16 with a BOM; anything else is refused.

    Raises ValueError with a message naming what was found.
    """
    if not data.strip():
        raise ValueError("file is empty")
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise ValueError(f"UTF-16 file does not decode: {exc.reason} at byte {exc.start}") from exc
    else:
        if b"\x00" in data:
            raise ValueError("file holds NUL bytes: it is binary, or UTF-16 without a byte-order mark; "
                             "save it as UTF-8 text")
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise ValueError(f"not UTF-8 text (byte 0x{data[exc.start]:02x} at offset {exc.start}); "
                             "save the file as UTF-8") from exc
    return text.replace("\r\n", "\n").replace("\r", "\n")



def other_separator(header: list[str]) -> str | None:
    """How to name the separator of a table read as one column that holds ';', a tab or '|' (a sheet saved
    where the list separator is ';', and the decimal mark a comma): "';'", "tabs", "'|'"; None otherwise."""
    if len(header) != 1:
        return None
    sep = next((c for c in ";\t|" if c in header[0]), None)
    return None if sep is None else "tabs" if sep == "\t" else repr(sep)
