"""Text from evidence files, made safe to print on a terminal.

A terminal obeys control functions (ECMA-48): ESC (0x1b) and CSI (0x9b) start sequences that move the cursor,
erase lines or recolour text, and CR or backspace overwrite what was printed. A file name, an unknown field
name or a unit written in a result file could carry them, and one file's message could then erase another's
error or print a fake summary. Every string that reaches the terminal from a file is printed with those
characters made visible as escapes (``\\x1b``), so it shows as text and does nothing. Text that rich prints
with markup on is escaped for rich's markup as well (``[bold]`` written in a file stays ``[bold]``).
"""

from __future__ import annotations

from typing import TextIO

#: C0 controls, DEL and the C1 controls (ECMA-48 §5), and the Unicode bidirectional overrides and isolates
#: (which reorder what a terminal shows, so a line could read other than it is)
_UNSAFE = [*range(0x00, 0x20), 0x7F, *range(0x80, 0xA0), 0x061C, 0x200E, 0x200F, *range(0x202A, 0x202F),
           *range(0x2066, 0x206A)]
_VISIBLE = {code: (f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}") for code in _UNSAFE}
_VISIBLE_KEEP_NEWLINE = {code: text for code, text in _VISIBLE.items() if code != 0x0A}


def visible(text: str) -> str:
    """``text`` with every control character (newline and tab too) written as an escape, e.g. ``\\x1b``."""
    return text.translate(_VISIBLE)


def cell(text: object) -> str:
    """``text`` for a rich table cell or a markup string: control characters visible, rich markup escaped."""
    from rich.markup import escape

    return escape(visible(str(text)))


class VisibleLines:
    """A text stream that writes to ``stream`` with every control character but the newline made visible.

    For output made of lines a command composes itself (``explain``), where the newlines are its own.
    """

    def __init__(self, stream: TextIO) -> None:
        self.stream = stream

    def write(self, text: str) -> int:
        return self.stream.write(text.translate(_VISIBLE_KEEP_NEWLINE))

    def flush(self) -> None:
        self.stream.flush()
