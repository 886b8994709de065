"""Incremental runs: a manifest of what the last run read and wrote, and a cache of parsed files.

Standard library only, on purpose: a rerun over an unchanged evidence folder
decides "nothing changed" from file sizes, modification times and (where those
moved) SHA-256 hashes, then reprints the previous summary and exits with the
previous code, without importing pandas, pandera, pint or numpy.

The cache lives in ``OUT/.loopledger-cache`` (or the folder ``--cache`` names),
never in the evidence folder. Every cache file carries a format version and a
SHA-256 of its body; a file that fails either check is ignored and rebuilt,
never trusted over the input. Writes go through a temporary file and
``os.replace``, so an interrupted run leaves the previous cache whole.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import io
import json
import os
import re
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any, TextIO

from loopledger.output import write_bytes as atomic_write

VERSION = 1
CACHE_NAME = ".loopledger-cache"
MANIFEST = "manifest.json"
PARSED = "parsed.json"
#: the evidence folder's own files besides results/ (a change to one may change any verdict)
REGISTRY_FILES = ("assets.csv", "instruments.yaml", "loopledger.toml")
_ANSI = re.compile(r"\x1b\[[0-9;?]*[A-Za-z]")

Stat = tuple[int, int]  # size, mtime_ns


def _sealed(body: bytes) -> bytes:
    """``VERSION`` line, SHA-256 line, then the body."""
    return f"loopledger-cache {VERSION}\n{hashlib.sha256(body).hexdigest()}\n".encode() + body


def _unseal(data: bytes) -> bytes | None:
    """The body if the version and checksum hold, else None (a damaged or foreign cache file)."""
    head, _, rest = data.partition(b"\n")
    digest, _, body = rest.partition(b"\n")
    if head != f"loopledger-cache {VERSION}".encode():
        return None
    if hashlib.sha256(body).hexdigest().encode() != digest:
        return None
    return body


def sha256_file(path: Path) -> str:
    if path.is_symlink():
        return "symlink:" + os.readlink(path)
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def scan_inputs(evidence: Path) -> dict[str, Stat]:
    """(size, mtime_ns) of every file a run could read: the registries and everything under results/.

    Uses lstat, so a symbolic link is recorded as the link itself (it is never followed).
    """
    out: dict[str, Stat] = {}
    for name in REGISTRY_FILES:
        with contextlib.suppress(OSError):
            st = os.lstat(evidence / name)
            out[name] = (st.st_size, st.st_mtime_ns)
    stack = [evidence / "results"]
    while stack:
        folder = stack.pop()
        try:
            entries = list(os.scandir(folder))
        except OSError:
            continue
        for entry in entries:
            rel = os.path.relpath(entry.path, evidence).replace(os.sep, "/")
            if entry.is_dir(follow_symlinks=False):
                stack.append(Path(entry.path))
                continue
            st = entry.stat(follow_symlinks=False)
            out[rel] = (st.st_size, st.st_mtime_ns)
    return out


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

    with contextlib.suppress(OSError, ValueError):
        value = tomllib.loads((evidence / "loopledger.toml").read_text(encoding="utf-8-sig")).get("as_of")
        if value is not None:
            return str(value)
    return dt.date.today().isoformat()


class Cache:
    """The manifest and parsed-file cache of one output (or ``--cache``) folder."""

    def __init__(self, folder: Path, key: dict[str, Any], outputs: list[Path]) -> None:
        self.folder = folder
        self.key = key
        self.outputs = outputs
        self.inputs: dict[str, Stat] = {}

    # --- the no-change path ------------------------------------------------------

    def _read_manifest(self) -> dict[str, Any] | None:
        try:
            body = _unseal((self.folder / MANIFEST).read_bytes())
            return json.loads(body) if body is not None else None
        except (OSError, ValueError):
            return None

    def replay(self, evidence: Path, stream: TextIO) -> int | None:
        """If nothing changed since the last complete run, reprint its output and return its exit code."""
        manifest = self._read_manifest()
        if manifest is None or manifest.get("key") != self.key:
            return None
        self.inputs = scan_inputs(evidence)
        old: dict[str, list[Any]] = manifest["files"]
        if set(old) != set(self.inputs):
            return None
        moved = False
        for rel, (size, mtime) in self.inputs.items():
            o_size, o_mtime, o_sha = old[rel]
            if (size, mtime) == (o_size, o_mtime):
                continue
            if size != o_size or sha256_file(evidence / rel) != o_sha:
                return None
            old[rel] = [size, mtime, o_sha]  # touched, same content
            moved = True
        for path, stat in zip(self.outputs, manifest["outputs"], strict=False):
            try:
                st = path.stat()
            except OSError:
                return None
            if stat is not None and [st.st_size, st.st_mtime_ns] != stat:
                return None
        if len(manifest["outputs"]) != len(self.outputs):
            return None
        if moved:
            atomic_write(self.folder / MANIFEST, _sealed(json.dumps(manifest).encode()))
        text = manifest["stdout"]
        stream.write(text if _isatty(stream) else _ANSI.sub("", text))
        stream.flush()
        return int(manifest["code"])

    def invalidate(self) -> None:
        """Forget the manifest before a full run (a half-finished run must never look complete)."""
        with contextlib.suppress(OSError):
            os.unlink(self.folder / MANIFEST)

    def save(self, evidence: Path, hashes: dict[str, str], stdout: str, code: int) -> None:
        """Record a complete run: input stats taken *before* it read anything, their hashes, its output."""
        files: dict[str, list[Any]] = {}
        for rel, (size, mtime) in self.inputs.items():
            sha = hashes.get(rel)
            if not sha:
                try:
                    sha = sha256_file(evidence / rel)
                except OSError:
                    sha = ""
            files[rel] = [size, mtime, sha]
        outputs: list[list[int] | None] = []
        for path in self.outputs:
            try:
                st = path.stat()
                outputs.append([st.st_size, st.st_mtime_ns])
            except OSError:
                outputs.append(None)
        manifest = {"key": self.key, "files": files, "outputs": outputs, "stdout": stdout, "code": code}
        atomic_write(self.folder / MANIFEST, _sealed(json.dumps(manifest).encode()))

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
        atomic_write(self.folder / PARSED, _sealed(json.dumps(body, default=str).encode()))


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
