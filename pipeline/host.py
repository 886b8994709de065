"""The plugin manager factory: specifications, built-in plugins, then installed ones."""

from __future__ import annotations

import importlib

import pluggy
from loopledger import hookspecs

ENTRY_POINT_GROUP = "loopledger"


def get_plugin_manager(*, autoload: bool = True, extra: tuple[object, ...] = ()) -> pluggy.PluginManager:
    """A fresh manager per run (tests get their own).

    Built-in plugins are registered with the same ``register`` call a
    third-party plugin goes through; installed plugins come from the
    ``loopledger`` entry-point group unless ``autoload`` is False.
    """
    from loopledger.plugins import BUILTIN

    pm = pluggy.PluginManager(ENTRY_POINT_GROUP)
    pm.add_hookspecs(hookspecs)
    for name in BUILTIN:
        pm.register(importlib.import_module(f"loopledger.plugins.{name}"), name=name)
    if autoload:
        pm.load_setuptools_entrypoints(ENTRY_POINT_GROUP)
    for plugin in extra:
        pm.register(plugin)
    pm.check_pending()
    return pm
