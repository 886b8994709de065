"""Sealing cache files with a keyed MAC, so that whoever can write to OUT cannot forge one.

Every cache file (the manifest, the parsed-file cache) starts with a format line and an HMAC-SHA-256 of the
format line and the body. The key is 32 random bytes in the user's cache directory
(``platformdirs.user_cache_dir("loopledger")/cache.key``, or the folder ``LOOPLEDGER_KEY_DIR`` names),
made on first use with mode 0600 in a folder of mode 0700, and never written into OUT.

The trust boundary: a cache file is trusted only if it was sealed with this user's key. Someone who can
write to OUT but cannot read the key (another account, a CI job restoring a shared cache, a file share)
can delete or damage the cache, which costs a full run, but cannot make a run trust altered contents. Whoever
can read the key (the same account, an administrator) can forge a cache; against them the cache guards
nothing, and ``--no-cache`` reads everything. A cache sealed with another key (copied from another machine
or account) does not verify and is rebuilt. A key that cannot be made or read (a read-only home folder, a
key readable by others) means the run goes on without a cache, with a warning.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import secrets
import stat
from pathlib import Path

VERSION = 2
KEY_NAME = "cache.key"
KEY_BYTES = 32

_KEY: dict[str, bytes | None] = {}  # per key folder, for this process


class NoKey(OSError):
    """The key cannot be made or read safely; the cache is not used."""


def key_folder() -> Path:
    given = os.environ.get("LOOPLEDGER_KEY_DIR")
    if given:
        return Path(given)
    import platformdirs

    return Path(platformdirs.user_cache_dir("loopledger", appauthor=False))


def _read_key(path: Path) -> bytes:
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0))
    with os.fdopen(fd, "rb") as fh:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise NoKey(f"'{path}' is not a regular file")
        if os.name == "posix" and (st.st_mode & 0o077 or st.st_uid != os.getuid()):
            raise NoKey(f"'{path}' may be read or written by others (mode {stat.S_IMODE(st.st_mode):o}); "
                        "make it yours with mode 600, or delete it to have a new one made")
        data = fh.read(KEY_BYTES + 1)
    if len(data) != KEY_BYTES:
        raise NoKey(f"'{path}' is not a key of {KEY_BYTES} bytes; delete it to have a new one made")
    return data


def _make_key(folder: Path) -> None:
    """Write a new key: made whole in a temporary file of mode 0600, then linked into place (so two runs
    making one at once agree on the first, and no run ever reads half a key)."""
    folder.mkdir(mode=0o700, parents=True, exist_ok=True)
    tmp = folder / f".{KEY_NAME}.{os.getpid()}"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_TRUNC, 0o600)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(secrets.token_bytes(KEY_BYTES))
        try:
            os.link(tmp, folder / KEY_NAME)
        except FileExistsError:
            pass
    finally:
        os.unlink(tmp)


def key(create: bool = True) -> bytes:
    """This user's cache key, made on first use when ``create``; :class:`NoKey` (an OSError) when it
    cannot be made or read safely."""
    folder = key_folder()
    cached = _KEY.get(str(folder))
    if cached is not None:
        return cached
    path = folder / KEY_NAME
    try:
        found = _read_key(path)
    except FileNotFoundError:
        if not create:
            raise NoKey(f"no key at '{path}'") from None
        try:
            _make_key(folder)
            found = _read_key(path)
        except NoKey:
            raise
        except OSError as exc:
            raise NoKey(f"cannot make the cache key '{path}': {exc}") from exc
    except NoKey:
        raise
    except OSError as exc:
        raise NoKey(f"cannot read the cache key '{path}': {exc}") from exc
    _KEY[str(folder)] = found
    return found


def _head() -> bytes:
    return f"loopledger-cache {VERSION}\n".encode()


def seal(body: bytes) -> bytes:
    """Format line, HMAC-SHA-256 line, then the body (:class:`NoKey` when there is no key)."""
    mac = hmac.new(key(), _head() + body, hashlib.sha256).hexdigest()
    return _head() + mac.encode() + b"\n" + body


def unseal(data: bytes) -> bytes | None:
    """The body if the format and the MAC hold under this user's key; else None (damaged, forged, sealed
    with another key, or no key to check it with)."""
    head, _, rest = data.partition(b"\n")
    mac, _, body = rest.partition(b"\n")
    if head + b"\n" != _head():
        return None
    try:
        expected = hmac.new(key(create=False), head + b"\n" + body, hashlib.sha256).hexdigest().encode()
    except NoKey:
        return None
    return body if hmac.compare_digest(mac, expected) else None
