"""Subcommand ``loopledger plugins``: the loaded plugins, what each brings and the hooks it implements."""

from __future__ import annotations

import argparse
import sys
from typing import Any

import pluggy
from loopledger.contracts import Command
from loopledger.hookspecs import hookimpl

#: hooks that hand the engine named things, and how the listing labels them
PROVIDERS = (("ll_signal_types", "signal types"), ("ll_reading_methods", "reading methods"),
             ("ll_decision_rules", "decision rules"), ("ll_cli_commands", "commands"))


def describe(pm: pluggy.PluginManager) -> list[dict[str, Any]]:
    """One entry per registered plugin: name, distribution, hooks, and the named things it provides."""
    dists = {id(plugin): f"{dist.project_name} {dist.version}" for plugin, dist in pm.list_plugin_distinfo()}
    out: list[dict[str, Any]] = []
    for name, plugin in pm.list_name_plugin():
        if plugin is None:
            continue
        hooks = sorted(caller.name for caller in pm.get_hookcallers(plugin) or [])
        entry: dict[str, Any] = {"name": name, "dist": dists.get(id(plugin), "built-in"), "hooks": hooks}
        for hook, label in PROVIDERS:
            if hook in hooks:
                entry[label] = list(getattr(plugin, hook)() or [])
        for hook in ("ll_registry_keys",):  # named in a loop, as the providers above, for mypy's sake
            if hook in hooks:
                entry["registry keys"] = getattr(plugin, hook)() or {}
        out.append(entry)
    return out


def render(entries: list[dict[str, Any]]) -> str:
    lines: list[str] = []
    for entry in entries:
        lines.append(f"{entry['name']}  ({entry['dist']})")
        lines.append(f"  hooks: {', '.join(entry['hooks'])}")
        for item in entry.get("signal types", []):
            lines.append(f"  signal type {item.name}: {item.description}")
            if getattr(item, "input_units", ()):
                lines.append(f"    input_unit: of the kind of {' or '.join(item.input_units)}")
            for col, meaning in item.asset_columns.items():
                lines.append(f"    assets.csv column {col}: {meaning}")
        for file, names in entry.get("registry keys", {}).items():
            what = "column" if file.endswith(".csv") else "key"
            lines += [f"  {file} {what} {name}: {meaning}" for name, meaning in names.items()]
        for label in ("reading methods", "decision rules"):
            for item in entry.get(label, []):
                lines.append(f"  {label[:-1]} {item.name}: {item.description}")
        for item in entry.get("commands", []):
            lines.append(f"  command {item.name}: {item.help}")
    return "\n".join(lines) + "\n"


def _add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--signals", action="store_true", help="list only the signal types")


def _run(args: argparse.Namespace) -> int:
    from loopledger.host import get_plugin_manager

    entries = describe(get_plugin_manager())
    if args.signals:
        for entry in entries:
            for item in entry.get("signal types", []):
                sys.stdout.write(f"{item.name}\t{entry['name']}\t{item.description}\n")
        return 0
    sys.stdout.write(render(entries))
    return 0


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("plugins", "list the loaded plugins, their signal types and the hooks each implements",
                    _add_arguments, _run)]
