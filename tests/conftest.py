from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

import pluggy
import pytest
from loopledger import runner
from loopledger.context import RunContext
from loopledger.host import get_plugin_manager

# every run in the suite, in this process and in the CLI's subprocesses, checks the point table against the
# stage contracts (loopledger.schemas.stages) after each stage
os.environ.setdefault("LOOPLEDGER_CHECK_CONTRACTS", "1")


@pytest.fixture
def pm() -> pluggy.PluginManager:
    """A fresh plugin manager with the built-ins only (no entry-point autoloading)."""
    return get_plugin_manager(autoload=False)


@pytest.fixture
def run_folder(pm: pluggy.PluginManager) -> Callable[..., RunContext]:
    """Run every judging stage over an evidence folder and return the context."""

    def go(evidence: Path, **overrides: object) -> RunContext:
        return runner.run(runner.RunOptions(evidence, overrides=dict(overrides) or None), pm)

    return go
