"""Findings: errors, warnings and notes as values that name their file, row and field."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Literal

Severity = Literal["error", "warning", "note"]
_RANK = {"error": 0, "warning": 1, "note": 2}


@dataclass(frozen=True, slots=True)
class Finding:
    """One thing a stage has to say about the evidence.

    ``file`` is relative to the evidence folder; ``line`` is 1-based in that
    file (0 when unknown); ``point`` names the reading (``as_found #3``) and
    ``field`` the field that is at fault. An ``error`` makes the file invalid:
    its test is not judged, but it is still listed in the outputs.
    """

    severity: Severity
    message: str
    file: str = ""
    line: int = 0
    field: str = ""
    point: str = ""
    code: str = ""
    stage: str = ""

    def location(self) -> str:
        where = self.file or "<evidence>"
        return f"{where}:{self.line}" if self.line else where

    def format(self) -> str:
        """``path:line: severity: message`` — the pre-commit style line, with any control character written as
        an escape (the file name and message may quote a file: :func:`loopledger.terminal.visible`)."""
        from loopledger.terminal import visible

        bits = []
        if self.point:
            bits.append(self.point)
        if self.field:
            bits.append(f"field '{self.field}'")
        context = f" [{', '.join(bits)}]" if bits else ""
        return visible(f"{self.location()}: {self.severity}: {self.message}{context}")


def error(message: str, **where: object) -> Finding:
    return Finding("error", message, **where)  # type: ignore[arg-type]


def warning(message: str, **where: object) -> Finding:
    return Finding("warning", message, **where)  # type: ignore[arg-type]


def note(message: str, **where: object) -> Finding:
    return Finding("note", message, **where)  # type: ignore[arg-type]


def sort_findings(findings: Iterable[Finding]) -> list[Finding]:
    return sorted(findings, key=lambda f: (f.file, f.line, _RANK[f.severity], f.message))


def by_file(findings: Iterable[Finding]) -> dict[str, list[Finding]]:
    """Findings grouped by the file they name, in their order (findings naming no file are left out)."""
    out: dict[str, list[Finding]] = {}
    for f in findings:
        if f.file:
            out.setdefault(f.file, []).append(f)
    return out
