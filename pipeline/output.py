"""Writing outputs atomically: a file via a temporary file, a folder via a staging folder.

A run killed at any moment leaves every output either as the previous run
wrote it or as this run wrote it, never half-written: files are renamed into
place, and folders are swapped whole (on Linux with an atomic exchange of the
two names; elsewhere with two renames and a recovery of the old folder on the
next run if the process died between them).
"""

from __future__ import annotations

import contextlib
import os
import shutil
import sys
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import numpy as np
    import pandas as pd

_UMASK: int | None = None


def public_mode() -> int:
    """The mode an ordinary ``open()`` gives a new file (0o666 less the process umask)."""
    return _public_mode()


def _public_mode() -> int:
    """0o666 less the process umask: what an ordinary ``open()`` would have given (mkstemp gives 0o600)."""
    global _UMASK
    if _UMASK is None:
        _UMASK = os.umask(0)
        os.umask(_UMASK)
    return 0o666 & ~_UMASK


#: the lock a run holds on OUT lives in :mod:`loopledger.lock`; named here too for older imports
from loopledger.lock import LOCK_NAME, exclusive  # noqa: E402,F401


def file_problem(exc: OSError) -> str:
    """How a run reports a file it could not write or read (a full disk, a folder it may not write to)."""
    return f"loopledger: cannot write or read a file: {exc}"


def write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file and ``os.replace``."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, _public_mode())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


#: how floats are written in the exported tables (ten significant digits)
FLOAT_FORMAT = "%.10g"
#: rows formatted at a time when writing a table
CSV_CHUNK = 5000


def write_csv(path: Path, frame: pd.DataFrame) -> None:
    write_bytes(path, csv_text(frame).encode("utf-8"))


#: write tables in worker processes only when they hold at least this many cells in all
PARALLEL_CELLS = 500_000

_TABLES: list[tuple[Path, pd.DataFrame]] | None = None  # handed to forked workers, never pickled


def _write_group(indices: list[int]) -> None:
    assert _TABLES is not None, "no tables being written"
    for i in indices:
        write_csv(*_TABLES[i])


def write_csvs(tables: list[tuple[Path, pd.DataFrame]], workers: int | None = None) -> None:
    """Write each ``(path, frame)`` as :func:`write_csv` does, over the machine's cores when the tables
    are large: forked workers share the frames without copying, each takes tables of about equal size
    (largest first) and writes them itself. Where fork is not offered, or the tables are small, they are
    written here, one after another. An error in any worker is raised here."""
    from loopledger.cache.forking import can_fork, fork_pool, share_out

    global _TABLES
    workers = workers if workers is not None else (os.cpu_count() or 1)
    cells = [max(1, frame.size) for _path, frame in tables]
    if workers < 2 or len(tables) < 2 or sum(cells) < PARALLEL_CELLS or not can_fork():
        for path, frame in tables:
            write_csv(path, frame)
        return
    groups = share_out(cells, min(workers, len(tables)))
    _TABLES = tables
    try:
        with fork_pool(len(groups)) as pool:
            for done in [pool.submit(_write_group, g) for g in groups]:
                done.result()
    finally:
        _TABLES = None


def csv_text(frame: pd.DataFrame) -> str:
    """``frame.to_csv(index=False, lineterminator="\\n", float_format=FLOAT_FORMAT)``, the same text (but for
    free-text cells a spreadsheet would read as formulas: :func:`neutralised`), made
    column by column and written by the standard library's C csv writer (pandas' own writer formats a
    large table about three times more slowly). Dates and nullable numbers are formatted by pandas
    itself; a table the csv module cannot write falls back to pandas' writer whole."""
    import csv

    try:
        return _csv_text(frame)
    except csv.Error:
        return _safe_text(frame).to_csv(index=False, lineterminator="\n", float_format=FLOAT_FORMAT)


#: what makes a spreadsheet read a cell as a formula (OWASP, "CSV Injection": = + - @, tab and carriage
#: return), and the apostrophe itself, so that stripping one leading apostrophe always gives the text back
FORMULA_START = frozenset("=+-@\t\r'")


def neutralised(cells: list[str]) -> list[str]:
    """Each cell a spreadsheet would read as a formula with a leading apostrophe (OWASP's advice), so it shows
    as the text it is; a reader of the table gets the text back by stripping one leading apostrophe."""
    return ["'" + v if v[:1] in FORMULA_START else v for v in cells]


def _safe_text(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its free-text columns neutralised (for the slow path, pandas' own writer)."""
    from loopledger.schemas.points import FREE_TEXT_COLUMNS

    out = frame.copy()
    for i, name in enumerate(frame.columns):
        if name in FREE_TEXT_COLUMNS:
            col = frame.iloc[:, i]
            out.iloc[:, i] = col.map(lambda v: neutralised([v])[0] if isinstance(v, str) else v)
    return out


def _csv_text(frame: pd.DataFrame) -> str:
    import csv
    import io

    from loopledger.schemas.points import FREE_TEXT_COLUMNS

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([str(c) for c in frame.columns])
    if not frame.shape[1]:
        buf.write("\n" * len(frame))
    kinds = [_kind(frame.iloc[:, i]) for i in range(frame.shape[1])]
    whole = {i: _pandas_column(frame.iloc[:, i]) for i, kind in enumerate(kinds) if kind == ""}
    free = [str(name) in FREE_TEXT_COLUMNS and kind == "O" for name, kind in zip(frame.columns, kinds, strict=True)]
    for start in range(0, len(frame), CSV_CHUNK):  # the cells of a few rows at a time: bounded memory
        part = frame.iloc[start:start + CSV_CHUNK]
        columns = (whole[i][start:start + CSV_CHUNK] if i in whole else
                   neutralised(_csv_column(part.iloc[:, i], kind)) if free[i] else _csv_column(part.iloc[:, i], kind)
                   for i, kind in enumerate(kinds))
        writer.writerows(zip(*columns, strict=True))
    return buf.getvalue()


def _kind(series: pd.Series) -> str:
    """numpy's kind letter for plain columns, "O" for text, "" for pandas' own dtypes."""
    import pandas as pd

    if isinstance(series.dtype, pd.StringDtype | pd.CategoricalDtype):  # text: written as its values are
        return "O"
    import numpy as np

    return series.dtype.kind if isinstance(series.dtype, np.dtype) and series.dtype.kind in "fiubO" else ""


def _csv_column(series: pd.Series, kind: str) -> list[str]:
    """A plain column's cells as text; ``kind`` is its :func:`_kind`."""
    if kind == "f":
        import numpy as np

        return _floats_text(np.ascontiguousarray(series.to_numpy(dtype=np.float64)))
    if kind in ("i", "u"):
        return [str(v) for v in series.to_numpy().tolist()]
    if kind == "b":
        return ["True" if v else "False" for v in series.to_numpy().tolist()]
    return [v if type(v) is str else _csv_cell(v) for v in series.to_numpy(dtype=object).tolist()]


def _floats_text(values: np.ndarray) -> list[str]:
    """Each float as ``FLOAT_FORMAT`` writes it ("" for NaN), formatted once per distinct bit pattern (a
    column repeats its limits, spans and inputs many times); -0.0 and 0.0, equal as numbers, stay apart."""
    import numpy as np
    import pandas as pd

    codes, bits = pd.factorize(values.view(np.int64), sort=False)
    made = np.array(["" if v != v else FLOAT_FORMAT % v for v in bits.view(np.float64).tolist()], dtype=object)
    return made[codes].tolist()


def _pandas_column(series: pd.Series) -> list[str]:
    """Dates and nullable numbers: pandas' own text for the whole column (its date format depends
    on every value), read back cell by cell."""
    import csv
    import io

    text = series.to_frame().to_csv(index=False, header=False, lineterminator="\n", float_format=FLOAT_FORMAT)
    return [row[0] if row else "" for row in csv.reader(io.StringIO(text, newline=""))]


def _csv_cell(value: Any) -> str:
    if type(value) is str:
        return value
    import pandas as pd

    if value is None or value is pd.NaT or value is pd.NA:
        return ""
    if isinstance(value, float) and value != value:
        return ""
    return str(value)  # as pandas: a float among other kinds of value is written in full


def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one atomic step (Linux renameat2 RENAME_EXCHANGE); False where unsupported."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    return int(fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange)) == 0


def recover(final: Path) -> None:
    """Put back ``final`` from ``.final.old`` if a run died between the two renames of a swap."""
    old = final.parent / f".{final.name}.old"
    if old.is_dir() and not final.exists():
        os.replace(old, final)


#: checks a staged folder must pass before it replaces the live one (see :func:`before_swap`)
_BEFORE_SWAP: list[Callable[[], None]] = []


@contextlib.contextmanager
def before_swap(check: Callable[[], None]) -> Iterator[None]:
    """Within the block, every :func:`staged_dir` calls ``check`` before its swap; if ``check`` raises,
    the staged folder is dropped and the live one kept (e.g. the handbook waits for the tables)."""
    _BEFORE_SWAP.append(check)
    try:
        yield
    finally:
        _BEFORE_SWAP.remove(check)


def _clear_leftovers(final: Path) -> None:
    """Remove the staging folders a killed run left beside ``final`` (``final`` itself is never touched)."""
    for stale in final.parent.glob(f".{final.name}.new-*"):
        if stale.is_dir():
            shutil.rmtree(stale, ignore_errors=True)


@contextlib.contextmanager
def staged_dir(final: Path) -> Iterator[Path]:
    """Yield a staging folder beside ``final``; on success swap it into place.

    If the body raises (or the process dies), or a :func:`before_swap` check fails, ``final`` is left
    as it was. What an earlier run killed mid-swap or mid-build left beside ``final`` is tidied first.
    """
    final.parent.mkdir(parents=True, exist_ok=True)
    recover(final)
    _clear_leftovers(final)
    stage = Path(tempfile.mkdtemp(prefix=f".{final.name}.new-", dir=final.parent))
    try:
        yield stage
        for check in list(_BEFORE_SWAP):
            check()
        os.chmod(stage, 0o777 & ~(0o666 & ~_public_mode()))  # mkdtemp gives 0o700
    except BaseException:
        shutil.rmtree(stage, ignore_errors=True)
        raise
    if final.exists() and _exchange(stage, final):
        shutil.rmtree(stage, ignore_errors=True)  # now holds the previous outputs
        return
    old = final.parent / f".{final.name}.old"
    if old.exists():
        shutil.rmtree(old)
    if final.exists():
        os.replace(final, old)
    os.replace(stage, final)
    shutil.rmtree(old, ignore_errors=True)
