"""``loopledger synth``: the invented fleet the benchmark runs on must be evidence the pipeline accepts.

Self-consistency checks of our own generator (no outside source): every file it writes passes the schema
check, the same seed writes the same bytes, and a span of years the schema check would refuse is refused
up front rather than written as a fleet of invalid files.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

from loopledger import runner
from loopledger.cli import main
from loopledger.host import get_plugin_manager


def _digest(folder: Path) -> str:
    h = hashlib.sha256()
    for path in sorted(p for p in folder.rglob("*") if p.is_file()):
        h.update(path.relative_to(folder).as_posix().encode() + b"\0" + path.read_bytes())
    return h.hexdigest()


def test_an_invented_fleet_is_valid_evidence_and_the_same_for_the_same_seed(tmp_path):
    assert main(["synth", "--assets", "6", "--years", "3", str(tmp_path / "a")]) == 0
    assert main(["synth", "--assets", "6", "--years", "3", str(tmp_path / "b")]) == 0
    assert _digest(tmp_path / "a") == _digest(tmp_path / "b")
    ctx = runner.run(runner.RunOptions(tmp_path / "a"), get_plugin_manager())
    assert len(ctx.tests) == 18 and ctx.tests["asset"].nunique() == 6
    assert [f.format() for f in ctx.findings if f.severity == "error"] == []
    assert set(ctx.tests["verdict"]) <= {"pass", "adjusted", "fail"}


def test_years_the_schema_check_would_refuse_are_refused(tmp_path, capsys):
    # 100 years back from 2025 starts in 1926, before the earliest date the schema check takes as real
    assert main(["synth", "--assets", "2", "--years", "100", str(tmp_path / "old")]) == 3
    assert "between 1950 and last year" in capsys.readouterr().err
    assert not (tmp_path / "old").exists()
