"""A result file still blank: every reading empty, as ``loopledger sheet --fill`` writes it.

Reported once, as "not filled in", rather than as a missing reading at every point, so a file carried to
site and dropped into results/ before it was filled in is told apart from a damaged one.
"""

from __future__ import annotations

from loopledger.contracts import ResultRead
from loopledger.findings import error

#: the point fields that hold what was read
READING_FIELDS = ("reading", "readings", "reading_min", "reading_max")


def not_filled_in(read: ResultRead, rel: str) -> ResultRead:
    """``read`` as it is, or (points planned, none of them read) one error saying the file is not filled in.

    The reader's own errors are kept beside it: a misspelt reading column or key also leaves every reading
    empty, and its "did you mean" is the fix that matters."""
    if not read.points or any(p.get(f) not in (None, "", ()) for p in read.points for f in READING_FIELDS):
        return read
    kept = [f for f in read.findings if f.severity == "error"]
    return ResultRead({}, [], findings=[*kept, error(
        f"not filled in: the {len(read.points)} planned point(s) have no reading yet; type the date, technician "
        "and each reading, then save the file here again (or keep it out of results/ until the test is done)",
        file=rel, line=1, field="reading", code="not-filled-in")])
