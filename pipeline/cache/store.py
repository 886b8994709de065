"""Incremental runs: a manifest of what the last run read and wrote, and a cache of parsed files.

Standard library only, on purpose: a rerun over an unchanged evidence folder
decides "nothing changed" from each input file's size, modification time,
status-change time and inode (where those moved, from SHA-256 hashes), checks
that every output the last run wrote is still there as it was written, then
reprints the previous summary and exits with the previous code, without
importing pandas, pandera, pint or numpy.

The cache lives in ``OUT/.loopledger-cache`` (or the folder ``--cache`` names),
never in the evidence folder. Every cache file carries a format version and an
HMAC-SHA-256 under a key kept outside OUT (:mod:`loopledger.cache.seal`); a file
that fails either check is ignored and rebuilt, never trusted over the input.
Writes go through a temporary file and ``os.replace``, so an interrupted run
leaves the previous cache whole. A cache that cannot be written is a warning:
the run goes on without it.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import io
import json
import os
import re
import stat
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any, TextIO

from loopledger.output import write_bytes as atomic_write

CACHE_NAME = ".loopledger-cache"
MANIFEST = "manifest.json"
PARSED = "parsed.json"
#: the evidence folder's own files besides results/ (a change to one may change any verdict)
REGISTRY_FILES = ("assets.csv", "instruments.yaml", "loopledger.toml")
#: the folders of OUT a run writes, whose files the manifest lists
OUTPUT_FOLDERS = ("data", "handbook")
_ANSI = re.compile(r"\x1b\[[0-9;?]*[A-Za-z]")

#: size, modification time, status-change time (which ``touch`` cannot set back) and inode, as git's index
Stat = tuple[int, int, int, int]


def _stat(st: os.stat_result) -> Stat:
    return (st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino)


def _sealed(body: bytes) -> bytes:
    from loopledger.cache.seal import seal

    return seal(body)


def _unseal(data: bytes) -> bytes | None:
    """The body if the format and the MAC hold, else None (a damaged, forged or foreign cache file)."""
    from loopledger.cache.seal import unseal

    return unseal(data)


def warn(problem: object) -> None:
    """Say that the cache cannot be written or used; the run goes on without it."""
    sys.stderr.write(f"loopledger: warning: the cache cannot be used ({problem}); this run goes on without it\n")
    sys.stderr.flush()


def sha256_file(path: Path) -> str:
    """SHA-256 of a regular file; a link is named by its target (never followed); anything else (a named
    pipe, a socket, a device) is never opened and gets ''."""
    st = os.lstat(path)
    if stat.S_ISLNK(st.st_mode):
        return "symlink:" + os.readlink(path)
    if not stat.S_ISREG(st.st_mode):
        return ""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def scan_inputs(evidence: Path) -> dict[str, Stat]:
    """The :data:`Stat` of every file a run could read: the registries and everything under results/.

    Uses lstat, so a symbolic link is recorded as the link itself. Where a register or results/ is a link
    to somewhere inside the evidence folder (which ``--follow-links`` reads), what it points at is recorded
    too, so an edit there is seen.
    """
    out: dict[str, Stat] = {}
    base = evidence.resolve()
    for name in (*REGISTRY_FILES, "results"):
        with contextlib.suppress(OSError):
            st = os.lstat(evidence / name)
            if name != "results" or stat.S_ISLNK(st.st_mode):
                out[name] = _stat(st)
            if stat.S_ISLNK(st.st_mode) and name != "results":
                target = (evidence / name).resolve()
                if base in target.parents:
                    out[target.relative_to(base).as_posix()] = _stat(os.lstat(target))
    out.update(_files_under([evidence / "results"], evidence))
    return out


def _files_under(roots: list[Path], base: Path) -> dict[str, Stat]:
    """The :data:`Stat` of every file (not folder) under ``roots`` at any depth, by path in ``base``; a
    link is recorded as itself, and a folder that cannot be read is left out."""
    found: dict[str, Stat] = {}
    stack = list(roots)
    while stack:
        folder = stack.pop()
        try:
            entries = list(os.scandir(folder))
        except OSError:
            continue
        for entry in entries:
            if entry.is_dir(follow_symlinks=False):
                stack.append(Path(entry.path))
            else:
                found[os.path.relpath(entry.path, base).replace(os.sep, "/")] = _stat(entry.stat(follow_symlinks=False))
    return found


def scan_outputs(out: Path) -> dict[str, Stat]:
    """The :data:`Stat` of every file under OUT's output folders (``data/``, ``handbook/``), by path in OUT."""
    return _files_under([out / name for name in OUTPUT_FOLDERS], out)


def engine_fingerprint() -> str:
    """loopledger's version, its installed source files' stats, the installed plugins with the stats of
    their source files (a plugin edited in place, without a new version, still counts as changed), and the
    name and version of every installed distribution (pandas, numpy, jinja2 ... upgraded count too)."""
    import importlib.metadata
    import importlib.util

    import loopledger

    h = hashlib.sha256(f"{loopledger.__version__}|{sys.version}".encode())
    roots = [Path(loopledger.__file__).parent]
    for name in ("plugins", "schemas", "site"):
        spec = importlib.util.find_spec(f"loopledger.{name}")
        if spec is not None and spec.submodule_search_locations:
            roots += [Path(p) for p in spec.submodule_search_locations]
    _source_stats(h, roots)
    for ep in sorted(importlib.metadata.entry_points(group="loopledger"), key=lambda e: e.name):
        dist = getattr(ep, "dist", None)
        h.update(f"{ep.name}={ep.value}@{getattr(dist, 'version', '')}\n".encode())
        top = ep.value.split(":")[0].split(".")[0]
        try:
            spec = importlib.util.find_spec(top)  # a top-level name: found, not imported
        except (ImportError, ValueError):
            spec = None
        if spec is not None and spec.submodule_search_locations:
            _source_stats(h, [Path(p) for p in spec.submodule_search_locations])
        elif spec is not None and spec.origin and os.path.isfile(spec.origin):
            _source_stats(h, [], (spec.origin,))
    h.update("\n".join(_installed()).encode())
    return h.hexdigest()


def _installed() -> list[str]:
    """The metadata folders on the import path (``pandas-2.2.3.dist-info`` ...): each distribution's name and
    version, from one directory listing per path entry rather than by reading every metadata file.

    The current folder is left out (``python -m`` puts it on the path): what happens to lie in the folder
    a run is started from (a checkout's ``.egg-info``, say) would otherwise make the same installation
    look different from one folder to the next, and every run from a new folder start from nothing."""
    here = os.getcwd()
    found: list[str] = []
    for entry in sys.path:
        if not entry or os.path.abspath(entry) == here:
            continue
        try:
            names = os.listdir(entry)
        except OSError:
            continue
        found += sorted(n for n in names if n.endswith((".dist-info", ".egg-info")))
    return found


def _source_stats(h: Any, roots: list[Path], files: tuple[str, ...] = ()) -> None:
    """Feed ``h`` the path, size and modification time of every source, template or style file under
    ``roots`` and of ``files``."""
    found = list(files)
    for root in roots:
        for dirpath, dirnames, names in os.walk(root):
            dirnames[:] = sorted(d for d in dirnames if d != "__pycache__")
            found += [os.path.join(dirpath, n) for n in sorted(names) if n.endswith((".py", ".html", ".css", ".js"))]
    for path in found:
        st = os.stat(path)
        h.update(f"{path}|{st.st_size}|{st.st_mtime_ns}\n".encode())


def effective_as_of(evidence: Path, given: str | None) -> str:
    """The date a run judges on, as the full run would work it out (for the manifest key)."""
    if given:
        return str(given)
    import tomllib

    from loopledger.files import read_regular

    with contextlib.suppress(OSError, ValueError):  # a link, a named pipe: never followed, never blocked on
        data = read_regular(evidence / "loopledger.toml", 1_000_000)
        value = tomllib.loads(data.decode("utf-8-sig")).get("as_of")
        if value is not None:
            return str(value)
    return dt.date.today().isoformat()


class Cache:
    """The manifest and parsed-file cache of one output (or ``--cache``) folder. ``out`` is the output
    folder whose ``data/`` and ``handbook/`` the run writes (None for ``check``, which writes none)."""

    def __init__(self, folder: Path, key: dict[str, Any], out: Path | None) -> None:
        self.folder = folder
        self.key = key
        self.out = out
        self.inputs: dict[str, Stat] = {}

    # --- the no-change path ------------------------------------------------------

    def _read_manifest(self) -> dict[str, Any] | None:
        try:
            body = _unseal((self.folder / MANIFEST).read_bytes())
            found = json.loads(body) if body is not None else None
            return found if isinstance(found, dict) else None
        except (OSError, ValueError):
            return None

    def replay(self, evidence: Path, stream: TextIO) -> int | None:
        """If nothing changed since the last complete run, and every output it wrote is still there as it
        wrote it, reprint its output and return its exit code."""
        manifest = self._read_manifest()
        if manifest is None or manifest.get("key") != self.key:
            return None
        self.inputs = scan_inputs(evidence)
        old: dict[str, list[Any]] = manifest["files"]
        if set(old) != set(self.inputs):
            return None
        moved = False
        for rel, now in self.inputs.items():
            o_size, *o_times, o_sha = old[rel]
            if now == (o_size, *o_times):
                continue
            if not o_sha or now[0] != o_size or sha256_file(evidence / rel) != o_sha:
                return None  # a file the last run did not read (too large, not regular) is never hashed
            old[rel] = [*now, o_sha]  # touched, same content
            moved = True
        if not self._outputs_whole(manifest.get("outputs")):
            return None
        if moved:
            with contextlib.suppress(OSError):
                atomic_write(self.folder / MANIFEST, _sealed(json.dumps(manifest).encode()))
        text = manifest["stdout"]
        stream.write(text if _isatty(stream) else _ANSI.sub("", text))
        stream.flush()
        return int(manifest["code"])

    def _outputs_whole(self, recorded: Any) -> bool:
        """Every output the manifest lists is present with the size, times and inode it was written with
        (an edit in place, a deletion or a replacement moves at least one of them)."""
        if self.out is None:
            return recorded in (None, {})
        if not isinstance(recorded, dict) or not recorded:
            return False
        for rel, then in recorded.items():
            try:
                now = _stat(os.lstat(self.out / rel))
            except OSError:
                return False
            if list(now) != then:
                return False
        return True

    def invalidate(self) -> None:
        """Forget the manifest before a full run (a half-finished run must never look complete)."""
        try:
            os.unlink(self.folder / MANIFEST)
        except FileNotFoundError:
            pass
        except OSError as exc:
            warn(exc)

    def save(self, evidence: Path, hashes: dict[str, str], stdout: str, code: int) -> None:
        """Record a complete run: input stats taken *before* it read anything, the hashes of the files it
        read, its outputs' stats, its output. Files it did not read are not hashed (a result file refused as
        too large, a named pipe): a change to their stats alone makes the next run a full one."""
        files: dict[str, list[Any]] = {}
        for rel, now in self.inputs.items():
            sha = hashes.get(rel)
            if not sha and not rel.startswith("results/"):  # a register: read by every run
                sha = _register_hash(evidence / rel)
            files[rel] = [*now, sha or ""]
        outputs = scan_outputs(self.out) if self.out is not None else {}
        manifest = {"key": self.key, "files": files, "outputs": outputs, "stdout": stdout, "code": code}
        try:
            atomic_write(self.folder / MANIFEST, _sealed(json.dumps(manifest).encode()))
        except OSError as exc:
            warn(exc)

    # --- parsed files --------------------------------------------------------------

    def load_parsed(self) -> dict[tuple[str, str], Any]:
        """Parsed result files keyed by (path, sha256); empty when missing or damaged.

        Stored as JSON, never as pickle: a cache file is data, so whoever can write to OUT cannot
        make the next run execute code.
        """
        try:
            body = _unseal((self.folder / PARSED).read_bytes())
        except OSError:
            return {}
        if body is None:
            return {}
        try:
            value = json.loads(body)
            if not isinstance(value, dict) or value.get("engine") != self.key["engine"]:
                return {}  # written by another version of loopledger or its plugins
            return {(rel, sha): _from_json(entry) for rel, sha, entry in value.get("files", [])}
        except (ValueError, TypeError, KeyError, AttributeError):
            return {}  # damaged: rebuilt by this run

    def save_parsed(self, parsed: dict[tuple[str, str], Any]) -> None:
        files = [[rel, sha, _to_json(read)] for (rel, sha), read in sorted(parsed.items())]
        body = {"engine": self.key["engine"], "files": files}
        try:
            atomic_write(self.folder / PARSED, _sealed(json.dumps(body, default=str).encode()))
        except OSError as exc:
            warn(exc)


def _register_hash(path: Path) -> str:
    """SHA-256 of a register the run read; '' for one it did not (a link, not a regular file, too large)."""
    from loopledger.config import DEFAULTS

    try:
        st = os.lstat(path)
        if not stat.S_ISREG(st.st_mode) or st.st_size > int(DEFAULTS["limits"]["max_register_bytes"]):
            return ""
        return sha256_file(path)
    except OSError:
        return ""


def _to_json(read: Any) -> dict[str, Any]:
    from dataclasses import asdict

    return {"header": read.header, "points": read.points, "header_lines": read.header_lines,
            "findings": [asdict(f) for f in read.findings]}


def _from_json(entry: dict[str, Any]) -> Any:
    from loopledger.contracts import ResultRead
    from loopledger.findings import Finding

    points = [{**p, "readings": tuple(p["readings"])} if isinstance(p.get("readings"), list) else p
              for p in entry["points"]]
    return ResultRead(dict(entry["header"]), points, dict(entry["header_lines"]),
                      [Finding(**f) for f in entry["findings"]])


def _isatty(stream: TextIO) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


class Tee(io.TextIOBase):
    """A text stream that writes through to ``target`` and keeps a copy (the summary to replay)."""

    def __init__(self, target: TextIO) -> None:
        self.target = target
        self.copy = io.StringIO()

    def write(self, text: str) -> int:
        self.copy.write(text)
        return self.target.write(text)

    def flush(self) -> None:
        self.target.flush()

    def isatty(self) -> bool:
        return _isatty(self.target)

    def fileno(self) -> int:
        return self.target.fileno()

    @property
    def encoding(self) -> str:  # type: ignore[override]
        return getattr(self.target, "encoding", "utf-8")


@contextlib.contextmanager
def capture_stdout() -> Iterator[Tee]:
    tee = Tee(sys.stdout)
    sys.stdout = tee  # type: ignore[assignment]
    try:
        yield tee
    finally:
        sys.stdout = tee.target
