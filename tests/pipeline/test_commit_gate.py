"""The commit gate in a real git repository: the plain hook (hooks/pre-commit) and the pre-commit framework
with this repository's hook definition (.pre-commit-hooks.yaml), committing for real.

The repository holds two evidence folders and file names with accents and quotes, which `git diff
--name-only` quotes (the plain hook once skipped them and let a bad file through). What the gate must do is
issue 24's contract (docs/guide.md "Incremental runs and pre-commit"): an invalid file stops the commit (exit 2); a
failing test is evidence and is committed with its summary printed, unless --strict; a register edit is
checked, its verdict changes printed, and a test that was already failing or invalid blocks nothing.
The evidence is invented plumbing data (tests/evidence.py); the pass/fail figures are class 0.5 and 0.25
on a 16 mA span (MPE 0.08 and 0.04 mA; the fiducial rule of IEC 60688, from memory).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from tests.evidence import CT_ASSET, good_points, result_yaml, write_evidence

ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed")


def _env(tmp: Path) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith("GIT_")}
    return {**env, "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.invalid", "GIT_COMMITTER_NAME": "t",
            "GIT_COMMITTER_EMAIL": "t@example.invalid", "LOOPLEDGER": f"{sys.executable} -m loopledger",
            "PRE_COMMIT_HOME": str(tmp / "pre-commit-home"), "HOME": str(tmp), "GIT_CONFIG_NOSYSTEM": "1"}


class Repo:
    def __init__(self, root: Path, env: dict[str, str]) -> None:
        self.root, self.env = root, env

    def git(self, *args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run(["git", *args], cwd=self.root, env=self.env, capture_output=True, text=True,
                              check=False)

    def write(self, rel: str, text: str) -> None:
        path = self.root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")

    def commit(self, *rels: str, message: str = "evidence") -> subprocess.CompletedProcess[str]:
        """Stage ``rels`` and commit through the installed hook; the result carries the hook's output."""
        assert self.git("add", "--", *rels).returncode == 0
        done = self.git("commit", "-q", "-m", message)
        if done.returncode != 0:
            self.git("reset", "-q")  # unstage, as a user would before fixing the file
        # git shows a hook's output on its standard error: keep it as .stdout for the checks
        return subprocess.CompletedProcess(done.args, done.returncode, done.stdout + done.stderr, "")


def _repo(tmp_path: Path) -> Repo:
    root = tmp_path / "évidence repo"
    for plant in ("plant-a", "plant-b"):
        write_evidence(root / plant, {"2026/base.yaml": result_yaml(as_found=good_points(0.01))})
    repo = Repo(root, _env(tmp_path))
    assert repo.git("init", "-q").returncode == 0
    repo.git("config", "commit.gpgsign", "false")
    return repo


def _install_plain(repo: Repo) -> None:
    hook = repo.root / ".git" / "hooks" / "pre-commit"
    shutil.copy(ROOT / "hooks" / "pre-commit", hook)
    hook.chmod(0o755)


def _install_framework(repo: Repo) -> None:
    """This repository's hook definition as a local hook run with this interpreter (the framework would
    otherwise build a virtualenv of loopledger from the network): its file pattern, file passing and serial
    running are the ones users get."""
    pytest.importorskip("pre_commit")  # in the dev extras (pyproject.toml)
    hook = yaml.safe_load((ROOT / ".pre-commit-hooks.yaml").read_text(encoding="utf-8"))[0]
    local = {**hook, "language": "system", "entry": f"{sys.executable} -m loopledger check"}
    config = {"repos": [{"repo": "local", "hooks": [local]}]}
    repo.write(".pre-commit-config.yaml", yaml.safe_dump(config, sort_keys=False))
    repo.git("add", ".pre-commit-config.yaml")
    done = subprocess.run([sys.executable, "-m", "pre_commit", "install"], cwd=repo.root, env=repo.env,
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.parametrize("install", [_install_plain, _install_framework], ids=["plain-hook", "pre-commit"])
def test_the_gate_stops_invalid_files_and_lets_evidence_of_failures_in(tmp_path, install):
    repo = _repo(tmp_path)
    install(repo)
    first = repo.commit(".")
    assert first.returncode == 0, first.stdout + first.stderr

    # a good edit in each evidence folder, under names git quotes (accents, a double quote)
    accented, quoted = "plant-a/results/2026/mesure-été.yaml", 'plant-b/results/2026/relevé "2".yaml'
    repo.write(accented, result_yaml(date="2026-05-02", as_found=good_points(0.02)))
    repo.write(quoted, result_yaml(date="2026-05-03", as_found=good_points(-0.02)))
    both = repo.commit(accented, quoted)
    assert both.returncode == 0, both.stdout + both.stderr
    assert "not a result file" not in both.stdout + both.stderr

    # an invalid file whose name git quotes is checked and stops the commit
    bad = "plant-b/results/2026/défaut.yaml"
    repo.write(bad, result_yaml(date="2026-05-04", as_found=[("0 %", "4,01 mA")]))
    stopped = repo.commit(bad)
    assert stopped.returncode != 0
    assert "défaut.yaml" in stopped.stdout and "decimal comma" in stopped.stdout
    assert "défaut.yaml" not in repo.git("ls-files", "-z").stdout

    # a new as-found failure is evidence: committed, with its summary printed
    failing = "plant-a/results/2026/échec.yaml"
    repo.write(failing, result_yaml(date="2026-05-05", as_found=good_points(0.5)))
    kept = repo.commit(failing)
    assert kept.returncode == 0, kept.stdout + kept.stderr
    assert "échec.yaml" in kept.stdout and "fail:" in kept.stdout and "1 failing" in kept.stdout

    # a register edit with a failing test already committed: checked, not blocked
    text = (repo.root / "plant-a" / "assets.csv").read_text(encoding="utf-8")
    repo.write("plant-a/assets.csv", text.replace("Test current transducer", "Feeder 3 current"))
    edit = repo.commit("plant-a/assets.csv")
    assert edit.returncode == 0, edit.stdout + edit.stderr


def test_plain_hook_register_edits_print_verdict_changes_and_strict_blocks_failures(tmp_path):
    repo = _repo(tmp_path)
    _install_plain(repo)
    # a test 0.05 mA off: inside class 0.5's 0.08 mA, outside class 0.25's 0.04 mA (a 16 mA span)
    repo.write("plant-a/results/2026/close.yaml", result_yaml(date="2026-06-01", as_found=good_points(0.05)))
    # a file committed invalid before the gate was installed (--no-verify) blocks no later register edit
    repo.write("plant-a/results/2026/old-bad.yaml", result_yaml(date="2026-06-02", as_found=[("0 %", "4,0 mA")]))
    assert repo.git("add", ".").returncode == 0
    assert repo.git("commit", "-q", "--no-verify", "-m", "before the gate").returncode == 0

    assets = repo.root / "plant-a" / "assets.csv"
    text = assets.read_text(encoding="utf-8")
    assets.write_text(text.replace(",0.5,", ",0.25,"), encoding="utf-8")
    tighter = repo.commit("plant-a/assets.csv")
    assert tighter.returncode == 0, tighter.stdout + tighter.stderr
    assert "plant-a/results/2026/close.yaml: verdict pass -> fail with the staged assets.csv" in tighter.stdout
    assert "base.yaml: verdict" not in tighter.stdout  # 0.01 mA off passes under both classes

    # a register edit that leaves result files without their asset makes them invalid: that blocks
    assets.write_text(assets.read_text(encoding="utf-8").replace("T-CT1,", "T-CT9,"), encoding="utf-8")
    orphaned = repo.commit("plant-a/assets.csv")
    assert orphaned.returncode != 0
    assert "verdict pass -> invalid" in orphaned.stdout or "verdict fail -> invalid" in orphaned.stdout
    assets.write_text(text, encoding="utf-8")

    # --strict (LOOPLEDGER_STRICT=1 for the plain hook) stops a failing staged test
    repo.env["LOOPLEDGER_STRICT"] = "1"
    repo.write("plant-b/results/2026/échec.yaml", result_yaml(date="2026-06-03", as_found=good_points(0.5)))
    strict = repo.commit("plant-b/results/2026/échec.yaml")
    assert strict.returncode != 0 and "échec.yaml" in strict.stdout and ": error: fail:" in strict.stdout


def test_both_hooks_pick_the_same_files():
    """The framework filters names by `files` in .pre-commit-hooks.yaml; the plain hook leaves it to `check
    --paths-from`, which must keep the same ones."""
    from loopledger.commands.gate import _GATED

    hook = yaml.safe_load((ROOT / ".pre-commit-hooks.yaml").read_text(encoding="utf-8"))[0]
    assert hook["files"] == _GATED.pattern
    for name in ("results/a.yaml", "p/results/2026/b.YML", "p/results/c.csv", "results/d.xlsx", "assets.csv",
                 "p/instruments.yaml", "loopledger.toml"):
        assert _GATED.search(name), name
    for name in ("README.md", "results/notes.txt", "notes/assets.csv.bak", "x/assets.csv/y"):
        assert not _GATED.search(name), name


def test_check_reads_nul_separated_names_and_keeps_only_evidence(tmp_path):
    """`--paths-from` takes `git diff -z` output as it is: a name with a newline-free accent and a space is
    one path, README.md and other files are left out, and each path is checked in its own folder."""
    a = write_evidence(tmp_path / "a", {"x é.yaml": result_yaml(as_found=good_points(0.01))})
    b = write_evidence(tmp_path / "b", {"y.yaml": result_yaml(asset=CT_ASSET["asset"], as_found=good_points())})
    names = b"\0".join([b"a/results/x \xc3\xa9.yaml", b"README.md", b"b/results/y.yaml", b"b/notes.txt", b""])
    (tmp_path / "list").write_bytes(names)
    done = subprocess.run([sys.executable, "-m", "loopledger", "check", "--paths-from", "list"], cwd=tmp_path,
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    summaries = [ln for ln in done.stdout.splitlines() if ln.startswith("loopledger check:")]
    assert summaries == ["loopledger check: a/ 1 file(s), 0 failing, 0 invalid",
                         "loopledger check: b/ 1 file(s), 0 failing, 0 invalid"]
    assert a.is_dir() and b.is_dir()
