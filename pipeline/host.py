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
    for dotted in BUILTIN:
        pm.register(importlib.import_module(f"loopledger.plugins.{dotted}"), name=dotted.rsplit(".", 1)[-1])
    if autoload:
        try:
            pm.load_setuptools_entrypoints(ENTRY_POINT_GROUP)
        except Exception as exc:  # an installed plugin that does not import: name it, do not call it our bug
            from loopledger.config import ConfigError

            raise ConfigError(f"the installed plugin {_failing_entry_point()} could not be loaded "
                              f"({type(exc).__name__}: {exc}); put it right or uninstall it") from exc
    for plugin in extra:
        pm.register(plugin)
    pm.check_pending()
    return pm


def _failing_entry_point() -> str:
    """``name = module`` of the first entry point in our group that does not load (for the message)."""
    import importlib.metadata

    for ep in importlib.metadata.entry_points(group=ENTRY_POINT_GROUP):
        try:
            ep.load()
        except Exception:
            return f"'{ep.name} = {ep.value}'"
    return "(one of the 'loopledger' entry points)"
