"""Incremental runs, the cache's integrity, atomic outputs and the pre-commit entry points.

Plumbing tests on invented evidence folders (tests/evidence.py). What they
check is the project's own contract (DEVELOPERS.md, docs/guide.md "Incremental runs
and pre-commit"): an unchanged rerun replays the previous result without doing
the work, a changed file is re-read and nothing else is, a damaged cache is
rebuilt and never trusted, and a killed run leaves the previous outputs whole.
"""

from __future__ import annotations

import csv
import hashlib
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from loopledger.cache import store as incremental
from loopledger.cli import main

from tests.evidence import good_points, result_yaml, write_evidence

ROOT = Path(__file__).resolve().parents[2]


def _fleet(tmp_path: Path, n: int = 4) -> Path:
    return write_evidence(tmp_path / "ev", {
        f"2026/a{i}.yaml": result_yaml(date=f"2026-0{1 + i}-10", as_found=good_points(0.01 * i)) for i in range(n)})


def _run(ev: Path, out: Path, capsys: pytest.CaptureFixture[str], *extra: str) -> tuple[int, str]:
    code = main(["run", str(ev), "--out", str(out), *extra])
    return code, capsys.readouterr().out


def test_unchanged_rerun_replays_the_summary_and_exit_code(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    code, first = _run(ev, out, capsys)
    assert code == 0 and len(parse_calls) == 4
    tests_csv = (out / "data" / "tests.csv").stat().st_mtime_ns
    code2, second = _run(ev, out, capsys)
    assert (code2, second) == (code, first)
    assert len(parse_calls) == 4, "an unchanged rerun parsed files again"
    assert (out / "data" / "tests.csv").stat().st_mtime_ns == tests_csv, "an unchanged rerun rewrote outputs"


def test_a_failing_run_replays_its_exit_code(tmp_path, capsys):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.5))})
    assert _run(ev, tmp_path / "out", capsys)[0] == 1
    assert _run(ev, tmp_path / "out", capsys)[0] == 1


def test_touched_but_unchanged_file_still_replays(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    _run(ev, tmp_path / "out", capsys)
    path = ev / "results" / "2026" / "a1.yaml"
    os.utime(path, ns=(time.time_ns(), time.time_ns() + 5_000_000_000))
    _run(ev, tmp_path / "out", capsys)
    assert len(parse_calls) == 4


def test_one_changed_file_is_the_only_one_parsed_again(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    (ev / "results" / "2026" / "a2.yaml").write_text(result_yaml(date="2026-03-10", as_found=good_points(0.5)),
                                                     encoding="utf-8")
    code, text = _run(ev, out, capsys)
    assert parse_calls[4:] == ["results/2026/a2.yaml"]
    assert code == 1 and "results/2026/a2.yaml" in text
    with open(out / "data" / "tests.csv", encoding="utf-8") as fh:
        verdicts = {r["source_file"]: r["verdict"] for r in csv.DictReader(fh)}
    assert verdicts == {"results/2026/a0.yaml": "pass", "results/2026/a1.yaml": "pass",
                        "results/2026/a2.yaml": "fail", "results/2026/a3.yaml": "pass"}


def test_a_changed_rerun_scans_the_folder_once_and_records_it(tmp_path, capsys, parse_calls, monkeypatch):
    """The CLI's quick no-change check hands its scan of the folder to the full run (no second scan),
    and what the full run records is right: the next rerun, with nothing changed, replays."""
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    scans: list[Path] = []
    original = incremental.scan_inputs
    monkeypatch.setattr(incremental, "scan_inputs", lambda evidence: scans.append(evidence) or original(evidence))
    (ev / "results" / "2026" / "a1.yaml").write_text(result_yaml(date="2026-02-10", as_found=good_points(0.5)),
                                                     encoding="utf-8")
    code, text = _run(ev, out, capsys)
    assert code == 1 and len(scans) == 1
    assert _run(ev, out, capsys) == (code, text)
    assert parse_calls[4:] == ["results/2026/a1.yaml"], "the rerun after the changed one did not replay"


def test_added_and_removed_files_rerun(tmp_path, capsys):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    (ev / "results" / "2026" / "a0.yaml").unlink()
    _run(ev, out, capsys)
    with open(out / "data" / "tests.csv", encoding="utf-8") as fh:
        assert len(list(csv.DictReader(fh))) == 3


def test_options_and_registry_changes_rerun(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    _, text = _run(ev, out, capsys, "--as-of", "2026-10-01")
    assert "judged on 2026-10-01" in text
    assets = ev / "assets.csv"
    assets.write_text(assets.read_text(encoding="utf-8").replace(",0.5,", ",0.1,"), encoding="utf-8")
    code, _ = _run(ev, out, capsys, "--as-of", "2026-10-01")
    assert code == 1, "a tighter accuracy class in assets.csv was not judged again"
    assert len(parse_calls) == 4, "a registry change should not re-parse unchanged result files"


def test_a_plugin_edited_in_place_changes_the_engine_fingerprint(tmp_path, monkeypatch):
    """A site plugin being developed (installed editable, same version) must not be answered from the cache
    nor keep handbook pages its page hooks would now make differently."""
    import importlib.metadata

    (tmp_path / "ll_fake_site.py").write_text("NOTE = 'first'\n", encoding="utf-8")
    monkeypatch.syspath_prepend(str(tmp_path))
    fake = importlib.metadata.EntryPoint(name="fake_site", value="ll_fake_site", group="loopledger")
    monkeypatch.setattr(importlib.metadata, "entry_points", lambda **kw: [fake] if kw.get("group") == "loopledger"
                        else [])
    before = incremental.engine_fingerprint()
    assert incremental.engine_fingerprint() == before  # stable while nothing changes
    (tmp_path / "ll_fake_site.py").write_text("NOTE = 'second, longer'\n", encoding="utf-8")
    assert incremental.engine_fingerprint() != before


def test_an_upgraded_library_changes_the_engine_fingerprint(tmp_path, monkeypatch):
    """pandas, numpy or jinja2 upgraded under unchanged inputs may format a page or a table differently."""
    (tmp_path / "somelib-1.0.dist-info").mkdir()
    monkeypatch.syspath_prepend(str(tmp_path))
    before = incremental.engine_fingerprint()
    (tmp_path / "somelib-1.0.dist-info").rename(tmp_path / "somelib-1.1.dist-info")
    assert incremental.engine_fingerprint() != before


def test_the_folder_a_run_starts_from_does_not_change_the_engine_fingerprint(tmp_path, monkeypatch):
    """``python -m loopledger`` puts the current folder on the import path; metadata folders lying there
    (a checkout's egg-info) are not part of the installation, so starting from there keeps the cache."""
    (tmp_path / "elsewhere").mkdir()
    monkeypatch.chdir(tmp_path / "elsewhere")
    before = incremental.engine_fingerprint()
    start = tmp_path / "checkout"
    (start / "checkout.egg-info").mkdir(parents=True)
    (start / "other-2.0.dist-info").mkdir()
    monkeypatch.chdir(start)
    monkeypatch.syspath_prepend(str(start))
    assert incremental.engine_fingerprint() == before
    monkeypatch.syspath_prepend("")
    assert incremental.engine_fingerprint() == before


def test_deleted_output_is_rebuilt(tmp_path, capsys):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    (out / "data" / "points.csv").unlink()
    _run(ev, out, capsys)
    assert (out / "data" / "points.csv").is_file()


@pytest.mark.parametrize("victim", [incremental.MANIFEST, incremental.PARSED])
def test_a_damaged_cache_is_detected_and_rebuilt(tmp_path, capsys, parse_calls, victim):
    ev = _fleet(tmp_path)
    out = tmp_path / "out"
    _, first = _run(ev, out, capsys)
    cache = out / incremental.CACHE_NAME
    path = cache / victim
    data = bytearray(path.read_bytes())
    data[-3] ^= 0x55  # one flipped byte in the body
    path.write_bytes(bytes(data))
    (ev / "results" / "2026" / "a3.yaml").write_text(result_yaml(date="2026-04-10", as_found=good_points(0.02)),
                                                     encoding="utf-8")
    code, second = _run(ev, out, capsys)
    assert code == 0
    expected = 4 + (4 if victim == incremental.PARSED else 1)
    assert len(parse_calls) == expected
    assert incremental._unseal((cache / victim).read_bytes()) is not None, "the cache was not rebuilt"


def test_a_forged_manifest_is_not_trusted(tmp_path, capsys):
    """A manifest saying 'nothing changed, exit 0' without the right checksum is ignored."""
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.5))})
    out = tmp_path / "out"
    _run(ev, out, capsys)
    path = out / incremental.CACHE_NAME / incremental.MANIFEST
    path.write_bytes(path.read_bytes().replace(b'"code": 1', b'"code": 0'))
    assert _run(ev, out, capsys)[0] == 1


def test_cache_inside_the_evidence_folder_is_refused(tmp_path, capsys):
    ev = _fleet(tmp_path)
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--cache", str(ev / "cache")]) == 3
    assert "inside the evidence folder" in capsys.readouterr().err
    assert not (ev / "cache").exists()


def test_named_cache_folder_and_no_cache(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    cache = tmp_path / "cache"
    _run(ev, tmp_path / "out", capsys, "--cache", str(cache))
    assert (cache / incremental.MANIFEST).is_file()
    assert not (tmp_path / "out" / incremental.CACHE_NAME).exists()
    _run(ev, tmp_path / "out", capsys, "--no-cache")
    assert len(parse_calls) == 8


def test_check_accepts_folders_and_caches_when_asked(tmp_path, capsys, parse_calls):
    ev = _fleet(tmp_path)
    cache = tmp_path / "cache"
    assert main(["check", str(ev), "--cache", str(cache)]) == 0
    first = capsys.readouterr().out
    assert "4 file(s), 0 failing, 0 invalid" in first
    assert main(["check", str(ev), "--cache", str(cache)]) == 0
    assert capsys.readouterr().out == first and len(parse_calls) == 4
    assert main(["check", str(ev / "results" / "2026")]) == 0
    assert "4 file(s)" in capsys.readouterr().out


def test_no_change_rerun_does_not_import_pandas(tmp_path, capsys):
    """The replay path stays in the standard library (measured in a fresh interpreter)."""
    ev = _fleet(tmp_path, 2)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    probe = ("import sys; from loopledger.cli import main; code = main(['run', sys.argv[1], '--out', sys.argv[2]]); "
             "heavy = [m for m in ('pandas', 'pandera', 'matplotlib', 'pint', 'numpy', 'rich') if m in sys.modules]; "
             "print('HEAVY', heavy); sys.exit(code)")
    done = subprocess.run([sys.executable, "-c", probe, str(ev), str(out)], capture_output=True, text=True,
                          timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    assert "HEAVY []" in done.stdout
    assert "read 2 result files" in done.stdout


def _digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() and incremental.CACHE_NAME not in p.parts}


def test_a_killed_run_leaves_the_previous_outputs_whole(tmp_path, capsys):
    """Kill `loopledger run` with SIGKILL at several moments; every output stays from one complete run."""
    ev = _fleet(tmp_path, 30)
    out = tmp_path / "out"
    _run(ev, out, capsys)
    before = _digest(out)
    for i in range(30):  # the new run differs from the old one in every table and page
        (ev / "results" / "2026" / f"a{i}.yaml").write_text(
            result_yaml(date=f"2026-0{1 + i % 9}-{10 + i % 18}", as_found=good_points(0.001 * i + 0.003)),
            encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    for delay in (0.3, 0.8, 1.5, 2.5, 3.5):
        proc = subprocess.Popen([sys.executable, "-m", "loopledger", "run", str(ev), "--out", str(out)], env=env,
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=60)
        now = _digest(out)
        assert {p for p in now if not p.startswith(".")} == {p for p in before if not p.startswith(".")}, \
            "an output disappeared or appeared"
        for folder in ("data/", "handbook/"):
            part_now = {k: v for k, v in now.items() if k.startswith(folder)}
            part_before = {k: v for k, v in before.items() if k.startswith(folder)}
            if part_now != part_before:  # swapped in: then it is the new run's whole folder
                assert all(part_now[k] != part_before[k] for k in part_now if k.endswith("tests.csv")
                           or k.endswith("index.html"))
    # a full run afterwards still works and replaces everything
    assert main(["run", str(ev), "--out", str(out)]) == 0
    capsys.readouterr()


def test_pre_commit_hook_definitions_are_present():
    import yaml

    hooks = yaml.safe_load((ROOT / ".pre-commit-hooks.yaml").read_text(encoding="utf-8"))
    hook = next(h for h in hooks if h["id"] == "loopledger-check")
    assert hook["entry"] == "loopledger check" and hook["pass_filenames"] is True
    import re

    pattern = re.compile(hook["files"])
    assert pattern.search("results/2026/QM-1_2026-01-02.yaml")
    assert pattern.search("plant/results/a.csv")
    # a staged register is checked too (every result file is judged again with it)
    assert pattern.search("assets.csv") and pattern.search("plant/instruments.yaml")
    assert pattern.search("loopledger.toml")
    assert not pattern.search("README.md") and not pattern.search("notes/assets.csv.bak")
    assert os.access(ROOT / "hooks" / "pre-commit", os.X_OK)


def test_plain_git_hook_checks_staged_result_files(tmp_path):
    git = subprocess.run(["git", "--version"], capture_output=True, check=False)
    if git.returncode != 0:
        pytest.skip("git is not installed")
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.01))})
    env = {**os.environ, "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.invalid",
           "GIT_COMMITTER_NAME": "t", "GIT_COMMITTER_EMAIL": "t@example.invalid",
           "LOOPLEDGER": f"{sys.executable} -m loopledger", "PYTHONPATH": str(ROOT)}
    for cmd in (["git", "init", "-q"], ["git", "add", "-A"]):
        subprocess.run(cmd, cwd=ev, check=True, env=env)
    hook = ROOT / "hooks" / "pre-commit"
    ok = subprocess.run(["sh", str(hook)], cwd=ev, env=env, capture_output=True, text=True, check=False)
    assert ok.returncode == 0, ok.stdout + ok.stderr
    assert "1 file(s), 0 failing, 0 invalid" in ok.stdout
    (ev / "results" / "b.yaml").write_text(result_yaml(date="2026-05-01", as_found=[("0 %", "4,01 mA")]),
                                          encoding="utf-8")
    subprocess.run(["git", "add", "results/b.yaml"], cwd=ev, check=True, env=env)
    bad = subprocess.run(["sh", str(hook)], cwd=ev, env=env, capture_output=True, text=True, check=False)
    assert bad.returncode == 2
    assert "results/b.yaml" in bad.stdout and "decimal comma" in bad.stdout
    # a staged assets.csv alone: its rows are checked and every result file judged again with them
    (ev / "results" / "b.yaml").unlink()
    subprocess.run(["git", "rm", "-q", "--cached", "results/b.yaml"], cwd=ev, check=True, env=env)
    subprocess.run(["git", "commit", "-q", "-m", "a"], cwd=ev, check=True, env=env)
    text = (ev / "assets.csv").read_text(encoding="utf-8")
    (ev / "assets.csv").write_text(text.replace(",0.5,", ",-0.5,"), encoding="utf-8")
    subprocess.run(["git", "add", "assets.csv"], cwd=ev, check=True, env=env)
    reg = subprocess.run(["sh", str(hook)], cwd=ev, env=env, capture_output=True, text=True, check=False)
    assert reg.returncode == 2, reg.stdout + reg.stderr
    assert "assets.csv:2: error: accuracy '-0.5'" in reg.stdout
    assert "results/a.yaml" in reg.stdout and "1 file(s), 0 failing, 1 invalid" in reg.stdout


def test_a_second_run_into_the_same_out_waits_for_the_first(tmp_path):
    """Two runs writing one OUT at once would each take the other's staging folder for a killed run's
    leftovers and remove it. While a run holds OUT's lock a second one says it is waiting and does not
    touch OUT; it goes on when the lock is let go."""
    import fcntl

    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points())})
    out = tmp_path / "out"
    out.mkdir()
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    with open(out / ".loopledger.lock", "a+b") as held:
        fcntl.lockf(held.fileno(), fcntl.LOCK_EX)  # as a first run holds it (a POSIX record lock)
        proc = subprocess.Popen([sys.executable, "-m", "loopledger", "run", str(ev), "--out", str(out)], env=env,
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        time.sleep(8)  # time to start and reach the lock (a run of this folder takes a few seconds)
        assert proc.poll() is None, "the second run did not wait"
        assert sorted(p.name for p in out.iterdir()) == [".loopledger.lock"], "the waiting run wrote into OUT"
        fcntl.lockf(held.fileno(), fcntl.LOCK_UN)
    assert proc.wait(timeout=120) == 0
    assert "another run is writing to" in proc.stderr.read()
    assert (out / "handbook" / "index.html").is_file()
