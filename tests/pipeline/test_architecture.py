"""The house rules that keep loopledger easy to carry on, checked on the source tree itself.

- The engine (pipeline/) imports no plugin module except through the built-in list (host.py).
- The example site plugin imports nothing of loopledger's but ``loopledger.api``.
- Every name the public API lists exists, and the stages' shared values are written only by their owners.
- BUILTIN lists the stage packages in run order, and no module is too long to read in one sitting.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest
from loopledger import api, keys
from loopledger.plugins import BUILTIN
from loopledger.runner import STAGES

ROOT = Path(__file__).resolve().parents[2]


def _imports(path: Path) -> list[tuple[int, str]]:
    """(line, module) for every import in a file, ``from a import b`` giving ``a.b`` as well as ``a``."""
    out: list[tuple[int, str]] = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.append((node.lineno, node.module))
            out += [(node.lineno, f"{node.module}.{alias.name}") for alias in node.names]
    return out


def test_the_engine_imports_no_plugin_module():
    found = []
    for path in sorted((ROOT / "pipeline").rglob("*.py")):
        for line, module in _imports(path):
            if module.startswith("loopledger.plugins") and module not in ("loopledger.plugins",
                                                                          "loopledger.plugins.BUILTIN"):
                found.append(f"{path.relative_to(ROOT)}:{line} imports {module}")
    assert found == []


def test_a_planted_plugin_import_in_the_engine_would_be_caught(tmp_path):
    """The check above reads imports the way they are written, including inside functions."""
    planted = tmp_path / "x.py"
    planted.write_text("def f():\n    from loopledger.plugins.judge import tolerance\n", encoding="utf-8")
    assert (2, "loopledger.plugins.judge.tolerance") in _imports(planted)


def test_the_example_plugins_import_only_the_public_api():
    found = []
    for path in sorted((ROOT / "plugins" / "examples").rglob("*.py")):
        for line, module in _imports(path):
            if module.split(".")[0] == "loopledger" and not (module == "loopledger.api"
                                                               or module.startswith("loopledger.api.")):
                found.append(f"{path.relative_to(ROOT)}:{line} imports {module}")
    assert found == []
    assert any((ROOT / "plugins" / "examples").rglob("plugin.py")), "the example plugin is missing"


def test_the_public_api_lists_what_it_has():
    missing = [name for name in api.__all__ if not hasattr(api, name)]
    assert missing == []
    assert sorted(api.__all__) == sorted(set(api.__all__))


def test_builtin_lists_the_stage_packages_in_run_order():
    order = ["read", "check", "signals", "measure", "uncertainty", "judge", "analyse", "history", "export",
             "handbook"]
    firsts = list(dict.fromkeys(name.split(".")[0] for name in BUILTIN))
    assert firsts[:len(order)] == order
    # the stage hooks run in the order the packages are listed (read has no stage hook of its own)
    assert list(STAGES) == ["check", "expected", "measured", "uncertainty", "judge", "analyse", "history"]


def test_every_shared_value_is_written_only_by_its_owner(pm):
    """``ctx.stash[keys.X] = ...`` appears only in the module of the plugin that owns X (the engine's keys
    in pipeline/); the exported-column lists are appended to by every stage and are not counted."""
    owners = {name: plugin.__name__ for name, plugin in pm.list_name_plugin()}
    writes = re.compile(r"stash\[keys\.([A-Z_]+)\]\s*=(?!=)")
    wrong = []
    for path in sorted((ROOT / "plugins").rglob("*.py")) + sorted((ROOT / "pipeline").rglob("*.py")):
        for match in writes.finditer(path.read_text(encoding="utf-8")):
            key = getattr(keys, match.group(1))
            module = ".".join(path.relative_to(ROOT).with_suffix("").parts)
            module = module.replace("pipeline", "loopledger", 1).replace("plugins", "loopledger.plugins", 1)
            module = module.removesuffix(".__init__")
            expected = "loopledger" if key.owner == "engine" else owners[key.owner]
            inside = module == expected or module.startswith(expected + ".")  # a plugin package's own modules
            if not (inside and (key.owner == "engine") != module.startswith("loopledger.plugins")):
                wrong.append(f"{path.relative_to(ROOT)} writes {key} owned by {expected}")
    assert wrong == []
    assert {k.owner for k in keys.ALL} - {"engine"} <= set(owners), "a key names an owner that is not a plugin"


@pytest.mark.parametrize("folder", ["pipeline", "plugins", "schemas"])
def test_no_module_is_too_long_to_read_in_one_sitting(folder):
    long = {str(p.relative_to(ROOT)): n for p in sorted((ROOT / folder).rglob("*.py"))
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > 450}
    assert long == {}
