"""Every hook is documented where it is declared, named in DEVELOPERS.md, and exercised by a test."""

from __future__ import annotations

import inspect
from pathlib import Path

from loopledger import hookspecs

ROOT = Path(__file__).resolve().parents[2]
HOOKS = sorted(name for name, fn in vars(hookspecs).items() if name.startswith("ll_") and inspect.isfunction(fn))


def test_every_hook_has_a_docstring():
    assert HOOKS, "no hooks found"
    undocumented = [h for h in HOOKS if len(inspect.getdoc(getattr(hookspecs, h)) or "") < 20]
    assert undocumented == []


def test_every_hook_is_named_in_the_developer_guide():
    guide = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    assert [h for h in HOOKS if h not in guide] == []


def test_every_hook_has_a_built_in_implementation(pm):
    unimplemented = [h for h in HOOKS if not getattr(pm.hook, h).get_hookimpls()]
    assert unimplemented == []
