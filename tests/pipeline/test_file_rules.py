"""Issue 24 items 1, 2 and 7 (the file and cache parts): links and special files at the top of the evidence
folder, a cache sealed with a key outside OUT, an unwritable cache, and hashing only what is read.

Plumbing tests on invented evidence folders (tests/evidence.py); what they check is README's contract
("Incremental runs and pre-commit", "Limits"): nothing outside the evidence folder is read through a
link, the cache is never trusted over the input, and a cache problem never stops a run.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import stat
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest
from loopledger.cache import seal
from loopledger.cache import store as incremental
from loopledger.cli import main

from tests.evidence import good_points, result_yaml, write_evidence

ROOT = Path(__file__).resolve().parents[2]
SECRET = "password: hunter2-do-not-publish"


def _published(out: Path) -> str:
    return "\n".join(p.read_text(encoding="utf-8", errors="replace") for p in sorted(out.rglob("*"))
                     if p.is_file() and incremental.CACHE_NAME not in p.parts)


def _outside_folder(tmp_path: Path) -> Path:
    """A folder outside the evidence folder holding a YAML file with a secret in it."""
    folder = tmp_path / "elsewhere"
    folder.mkdir()
    (folder / "config.yaml").write_text(SECRET + "\n", encoding="utf-8")
    return folder


# --- 1. links and special files -------------------------------------------------------------------------

def test_results_as_a_link_to_outside_is_refused_and_nothing_there_is_published(tmp_path, capsys):
    """A `results` link to a folder outside once published a config.yaml holding a password."""
    ev = write_evidence(tmp_path / "ev", {})
    if (ev / "results").exists():
        (ev / "results").rmdir()
    (ev / "results").symlink_to(_outside_folder(tmp_path), target_is_directory=True)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 2
    said = capsys.readouterr().out
    assert "results: error: 'results' is a symbolic link" in said.replace("\n  ", " ")
    assert "hunter2" not in _published(out)
    assert main(["run", str(ev), "--out", str(out), "--follow-links"]) == 2  # outside: refused even then
    assert "outside the evidence folder" in capsys.readouterr().out
    assert "hunter2" not in _published(out)


def test_results_as_a_link_inside_the_evidence_folder_is_read_with_follow_links(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    (ev / "results").rename(ev / "kept")
    (ev / "results").symlink_to("kept", target_is_directory=True)
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 2
    capsys.readouterr()
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--follow-links"]) == 0
    assert "results/a.yaml" in (tmp_path / "out" / "data" / "tests.csv").read_text(encoding="utf-8")
    assert main(["check", str(ev), "--follow-links"]) == 0
    assert main(["check", str(ev)]) == 2
    capsys.readouterr()


@pytest.mark.parametrize("register", ["assets.csv", "instruments.yaml"])
def test_a_register_given_as_a_link_is_refused_unless_followed_inside(tmp_path, capsys, register):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    (ev / "registers").mkdir()
    (ev / register).rename(ev / "registers" / register)
    (ev / register).symlink_to(Path("registers") / register)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 2
    assert f"{register}: error: '{register}' is a symbolic link" in capsys.readouterr().out.replace("\n  ", " ")
    assert main(["run", str(ev), "--out", str(out), "--follow-links"]) == 0
    capsys.readouterr()
    outside = _outside_folder(tmp_path) / register
    outside.write_bytes((ev / "registers" / register).read_bytes())
    (ev / register).unlink()
    (ev / register).symlink_to(outside)
    assert main(["run", str(ev), "--out", str(out), "--follow-links"]) == 2
    assert "outside the evidence folder" in capsys.readouterr().out


def test_loopledger_toml_as_a_link_stops_the_run(tmp_path, capsys):
    """Judging under default settings nobody chose would publish verdicts under the wrong rule: the run
    stops with a configuration error naming the link."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    (_outside_folder(tmp_path) / "loopledger.toml").write_text('[decision]\nrule = "guarded"\n', encoding="utf-8")
    (ev / "loopledger.toml").unlink(missing_ok=True)
    (ev / "loopledger.toml").symlink_to(tmp_path / "elsewhere" / "loopledger.toml")
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 3
    assert "loopledger.toml: 'loopledger.toml' is a symbolic link" in capsys.readouterr().err


_RUN = "import sys; from loopledger.cli import main; sys.exit(main(sys.argv[1:]))"


@pytest.mark.parametrize("where", ["results/2026/fifo.yaml", "assets.csv", "loopledger.toml"])
def test_a_named_pipe_is_reported_not_waited_on(tmp_path, where):
    """A FIFO called *.yaml under results/ made run and check block for ever (its size reads as 0)."""
    ev = write_evidence(tmp_path / "ev", {"2026/a.yaml": result_yaml(as_found=good_points())})
    if (ev / where).exists():
        (ev / where).unlink()
    (ev / where).parent.mkdir(parents=True, exist_ok=True)
    os.mkfifo(ev / where)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    for command in (["run", str(ev), "--out", str(tmp_path / "out")], ["check", str(ev)]):
        done = subprocess.run([sys.executable, "-c", _RUN, *command], env=env, capture_output=True, text=True,
                              timeout=120, check=False)
        said = (done.stdout + done.stderr).replace("\n  ", " ")
        assert "a named pipe (FIFO)" in said, said
        assert done.returncode == (3 if where == "loopledger.toml" else 2), said


# --- 2. the cache is sealed with a key outside OUT ---------------------------------------------------------

def test_the_key_is_made_once_with_mode_600_outside_out(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("LOOPLEDGER_KEY_DIR", str(tmp_path / "keys"))
    monkeypatch.setattr(seal, "_KEY", {})
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    assert main(["run", str(ev), "--out", str(tmp_path / "out")]) == 0
    capsys.readouterr()
    key = tmp_path / "keys" / seal.KEY_NAME
    assert stat.S_IMODE(key.stat().st_mode) == 0o600
    assert len(key.read_bytes()) == seal.KEY_BYTES
    assert not any(seal.KEY_NAME in p.name for p in (tmp_path / "out").rglob("*"))


def _forge(path: Path, edit: Callable[[bytes], bytes], mac_key: bytes | None) -> None:
    """Change a cache file's body and seal it again: with a key of the forger's own, or (None) with the plain
    SHA-256 the cache once carried."""
    head, _, rest = path.read_bytes().partition(b"\n")
    body = edit(rest.partition(b"\n")[2])
    digest = (hmac.new(mac_key, head + b"\n" + body, hashlib.sha256).hexdigest() if mac_key is not None
              else hashlib.sha256(body).hexdigest())
    path.write_bytes(head + b"\n" + digest.encode() + b"\n" + body)


@pytest.mark.parametrize("mac_key", [None, b"k" * 32])
def test_a_resealed_forged_cache_is_not_trusted(tmp_path, capsys, mac_key):
    """Re-sealing altered readings once made a failing test pass (exit 0) while tests.csv showed the real
    file's SHA-256."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.5)),
                                          "b.yaml": result_yaml(date="2026-04-20", as_found=good_points())})
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 1
    capsys.readouterr()
    cache = out / incremental.CACHE_NAME
    _forge(cache / incremental.PARSED, lambda body: body.replace(b"4.5000 mA", b"4.0000 mA")
           .replace(b"8.5000 mA", b"8.0000 mA").replace(b"12.5000 mA", b"12.0000 mA")
           .replace(b"16.5000 mA", b"16.0000 mA").replace(b"20.5000 mA", b"20.0000 mA"), mac_key)
    _forge(cache / incremental.MANIFEST, lambda body: body.replace(b'"code": 1', b'"code": 0'), mac_key)
    (ev / "results" / "b.yaml").write_text(result_yaml(date="2026-04-21", as_found=good_points()), encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out)]) == 1  # a.yaml was read again, not taken from the forgery
    capsys.readouterr()


def test_a_missing_key_means_the_cache_is_rebuilt(tmp_path, capsys, monkeypatch, parse_calls):
    monkeypatch.setenv("LOOPLEDGER_KEY_DIR", str(tmp_path / "keys"))
    monkeypatch.setattr(seal, "_KEY", {})
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    out = tmp_path / "out"
    main(["run", str(ev), "--out", str(out)])
    (tmp_path / "keys" / seal.KEY_NAME).unlink()
    monkeypatch.setattr(seal, "_KEY", {})
    main(["run", str(ev), "--out", str(out)])  # nothing changed, but the manifest cannot be checked
    capsys.readouterr()
    assert parse_calls == ["results/a.yaml", "results/a.yaml"]
    assert incremental._unseal((out / incremental.CACHE_NAME / incremental.MANIFEST).read_bytes()) is not None


# --- 7. an unwritable cache; hashing only what is read ----------------------------------------------------

def test_an_unwritable_cache_is_a_warning_and_the_run_goes_on(tmp_path, capsys):
    """A cache file that could not be written made every run exit 4 until someone deleted it by hand."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    cache = tmp_path / "cache"
    for name in (incremental.MANIFEST, incremental.PARSED):
        (cache / name).mkdir(parents=True)  # a name the cache cannot replace
        (cache / name / "x").write_text("x", encoding="utf-8")
    for _ in range(2):
        assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--cache", str(cache)]) == 0
        captured = capsys.readouterr()
        assert "warning: the cache cannot be used" in captured.err
        assert "1 result file" in captured.out or "read 1 result file" in captured.out
    assert (tmp_path / "out" / "data" / "tests.csv").is_file()


def test_a_file_refused_as_too_large_is_never_hashed(tmp_path, capsys, monkeypatch):
    """A 64 GiB sparse file refused as too large was still hashed in full for the cache on every run."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    big = ev / "results" / "big.yaml"
    with open(big, "wb") as fh:
        fh.truncate(3 * 1024**3)  # sparse: no disk used
    hashed: list[str] = []
    original = incremental.sha256_file

    def counting(path: Path) -> str:
        hashed.append(Path(path).name)
        return original(path)

    monkeypatch.setattr(incremental, "sha256_file", counting)
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out)]) == 2
    os.utime(big, ns=(0, 5_000_000_000))  # its stats move: the rerun runs again, still without hashing it
    assert main(["run", str(ev), "--out", str(out)]) == 2
    said = capsys.readouterr().out
    assert "over the limit of 2,000,000" in said
    assert "big.yaml" not in hashed
    manifest = json.loads(incremental._unseal((out / incremental.CACHE_NAME / incremental.MANIFEST).read_bytes()))
    assert manifest["files"]["results/big.yaml"][-1] == ""


def test_an_edit_behind_a_followed_register_link_is_seen(tmp_path, capsys):
    """The no-change check records what a followed link points at, not only the link."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    (ev / "registers").mkdir()
    (ev / "assets.csv").rename(ev / "registers" / "assets.csv")
    (ev / "assets.csv").symlink_to(Path("registers") / "assets.csv")
    out = tmp_path / "out"
    assert main(["run", str(ev), "--out", str(out), "--follow-links"]) == 0
    target = ev / "registers" / "assets.csv"
    target.write_text(target.read_text(encoding="utf-8").replace(",0.5,", ",-0.5,"), encoding="utf-8")
    assert main(["run", str(ev), "--out", str(out), "--follow-links"]) == 2  # accuracy -0.5: an error now
    capsys.readouterr()
