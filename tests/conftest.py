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


@pytest.fixture(autouse=True, scope="session")
def _cache_key_folder(tmp_path_factory: pytest.TempPathFactory) -> None:
    """The cache key (loopledger.cache.seal) lives in a folder of the test session, not the user's own
    cache directory; subprocesses inherit it through the environment."""
    import os

    os.environ["LOOPLEDGER_KEY_DIR"] = str(tmp_path_factory.mktemp("cache-key"))


@pytest.fixture
def parse_calls(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """Every YAML result file actually parsed (not served from the cache)."""
    calls: list[str] = []
    from loopledger.plugins.read import read_yaml

    original = read_yaml.parse

    def counting(text: str, rel: str):  # type: ignore[no-untyped-def]
        calls.append(rel)
        return original(text, rel)

    monkeypatch.setattr(read_yaml, "parse", counting)
    return calls
