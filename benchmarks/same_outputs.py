"""Capture everything a user sees, so two versions of loopledger can be compared byte for byte.

    python benchmarks/same_outputs.py capture DIR [--loopledger PATH] [--assets N]
    python benchmarks/same_outputs.py compare BEFORE AFTER

``capture`` runs, with the given ``loopledger`` executable (default: the one beside this Python):

- ``run`` on the demo (sample_results/) under the rules ``simple`` and ``guarded``: terminal output,
  exit code, ``data/`` and ``handbook/``;
- ``synth`` of a fleet (200 assets x 10 years = 2,000 files by default), then ``run`` (tables, handbook)
  and ``check`` on it;
- ``explain``, ``sheet`` (text and ``--html``), ``loop``, ``impacted`` and ``plugins``.

Each output goes to a file under DIR; ``compare`` lists every file that differs or exists on one side
only and exits 1 if any does. Absolute paths of the work folders are replaced by a placeholder, so two
captures made in different folders compare equal. This is the check that a restructuring changed nothing
a user sees (not a test of correctness: both sides can be wrong together).
"""

from __future__ import annotations

import argparse
import filecmp
import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "sample_results"


def _sh(cmd: list[str], cwd: Path, work: Path) -> str:
    """Run one command; its output with the work folder's path made neutral, and its exit code."""
    env = dict(os.environ, COLUMNS="120", NO_COLOR="1", TERM="dumb")
    proc = subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True, timeout=1800)
    text = proc.stdout + proc.stderr + f"\n[exit code {proc.returncode}]\n"
    return text.replace(str(work), "<WORK>").replace(str(ROOT), "<ROOT>")


def _neutral_tree(tree: Path, work: Path) -> None:
    """Replace the work folder's absolute path inside every text file of ``tree`` (pages name OUT)."""
    for path in tree.rglob("*"):
        if path.is_file() and path.suffix in {".html", ".csv", ".json", ".txt", ".md", ".svg"}:
            text = path.read_text(encoding="utf-8", errors="surrogateescape")
            if str(work) in text or str(ROOT) in text:
                path.write_text(text.replace(str(work), "<WORK>").replace(str(ROOT), "<ROOT>"),
                                encoding="utf-8", errors="surrogateescape")


def capture(dest: Path, exe: str, assets: int) -> None:
    dest.mkdir(parents=True, exist_ok=True)
    work = Path(tempfile.mkdtemp(prefix="ll-same-"))
    try:
        demo = work / "demo"
        shutil.copytree(DEMO, demo)
        for rule in ("simple", "guarded"):
            out = work / f"out-{rule}"
            (dest / f"demo-run-{rule}.txt").write_text(
                _sh([exe, "run", str(demo), "--out", str(out), "--rule", rule, "--no-cache"], work, work))
            for part in ("data", "handbook"):
                shutil.copytree(out / part, dest / f"demo-{rule}" / part)
        first = sorted((demo / "results").rglob("*.yaml"))
        texts = {
            "check-demo": [exe, "check", str(demo)],
            "plugins": [exe, "plugins"],
            "explain-first": [exe, "explain", str(first[0]), "--evidence", str(demo)],
            "explain-last": [exe, "explain", str(first[-1]), "--evidence", str(demo)],
            "explain-guarded": [exe, "explain", str(first[-1]), "--evidence", str(demo), "--rule", "guarded"],
        }
        assets_ids = [line.split(",", 1)[0] for line in (demo / "assets.csv").read_text().splitlines()[1:]]
        for asset in assets_ids:
            texts[f"sheet-{asset}"] = [exe, "sheet", asset, "--evidence", str(demo),
                                       "--html", str(work / f"sheet-{asset}.html")]
            texts[f"loop-{asset}"] = [exe, "loop", asset, "--evidence", str(demo)]
        import yaml

        for inst in yaml.safe_load((demo / "instruments.yaml").read_text()) or {}:
            texts[f"impacted-{inst}"] = [exe, "impacted", str(inst), "--evidence", str(demo)]
        fleet = work / "fleet"
        texts["synth"] = [exe, "synth", "--assets", str(assets), "--years", "10", str(fleet)]
        for name, cmd in texts.items():
            (dest / f"{name}.txt").write_text(_sh(cmd, demo, work))
        for html in work.glob("sheet-*.html"):
            shutil.copy(html, dest / html.name)
        (dest / "fleet-check.txt").write_text(_sh([exe, "check", str(fleet)], work, work))
        (dest / "fleet-run.txt").write_text(
            _sh([exe, "run", str(fleet), "--out", str(work / "fleet-out")], work, work))
        for part in ("data", "handbook"):
            shutil.copytree(work / "fleet-out" / part, dest / "fleet" / part)
        _neutral_tree(dest, work)
    finally:
        shutil.rmtree(work, ignore_errors=True)


def compare(before: Path, after: Path) -> int:
    differ: list[str] = []

    def walk(cmp: filecmp.dircmp[str], rel: str) -> None:
        differ.extend(f"only before: {rel}{n}" for n in cmp.left_only)
        differ.extend(f"only after:  {rel}{n}" for n in cmp.right_only)
        # filecmp's shallow check trusts equal stat signatures; compare contents
        _, mismatch, errors = filecmp.cmpfiles(cmp.left, cmp.right, cmp.common_files, shallow=False)
        differ.extend(f"differs:     {rel}{n}" for n in mismatch + errors)
        for name, sub in cmp.subdirs.items():
            walk(sub, f"{rel}{name}/")

    walk(filecmp.dircmp(before, after), "")
    for line in differ:
        print(line)
    print(f"{len(differ)} difference(s)")
    return 1 if differ else 0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = parser.add_subparsers(dest="cmd", required=True)
    cap = sub.add_parser("capture")
    cap.add_argument("dest", type=Path)
    cap.add_argument("--loopledger", default=str(Path(sys.executable).with_name("loopledger")))
    cap.add_argument("--assets", type=int, default=200)
    cmp = sub.add_parser("compare")
    cmp.add_argument("before", type=Path)
    cmp.add_argument("after", type=Path)
    args = parser.parse_args()
    if args.cmd == "capture":
        capture(args.dest, args.loopledger, args.assets)
        return 0
    return compare(args.before, args.after)


if __name__ == "__main__":
    raise SystemExit(main())
