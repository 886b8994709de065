"""The ``loopledger loop`` command: a planned rig's loop burden from the registry alone, before the visit.

The figures are the burden stage's (:mod:`loopledger.plugins.analyse.burden`) for one planned rig.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from loopledger import quantities as q
from loopledger.context import RunContext
from loopledger.contracts import Command
from loopledger.hookspecs import hookimpl
from loopledger.plugins.analyse.burden import analyse, plan_rigs, summary, term_rows

# --- `loopledger loop` ----------------------------------------------------------------

def _add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("asset", help="the asset id in assets.csv")
    rig = parser.add_mutually_exclusive_group()
    rig.add_argument("--shunt", metavar="OHM",
                     help="read across a shunt: its resistance (100, '100 ohm') or its id in instruments.yaml")
    rig.add_argument("--meter", metavar="ID", help="read on this meter's milliamp range (id in instruments.yaml)")
    parser.add_argument("--in-loop", dest="in_loop", action="store_true",
                        help="the receiver input and the cable stay in the loop")
    parser.add_argument("--ambient", type=float, default=20.0, metavar="C",
                        help="ambient temperature for the cable, °C (default 20)")
    parser.add_argument("--evidence", type=Path, help="the evidence folder (default: nearest parent with assets.csv)")


def _shunt_plan(ctx: RunContext, text: str) -> tuple[float | None, str | None]:
    if text in ctx.instruments.index:
        return None, text
    try:
        return float(text), None
    except ValueError:
        pass
    try:
        return q.to_float(text, "ohm"), None
    except ValueError as exc:
        from loopledger.config import ConfigError

        raise ConfigError(f"--shunt '{text}' is neither a resistance nor a shunt in instruments.yaml") from exc


def _run(args: argparse.Namespace, out: Callable[[str], Any] | None = None) -> int:
    from loopledger import runner
    from loopledger.commands.check import find_evidence
    from loopledger.config import ConfigError
    from loopledger.host import get_plugin_manager
    from loopledger.registry import absent
    from loopledger.terminal import VisibleLines

    out = out or VisibleLines(sys.stdout).write  # ids and units quote the registers: shown inert
    evidence = args.evidence or find_evidence([Path.cwd()])
    ctx = runner.prepare(runner.RunOptions(evidence), get_plugin_manager())
    if args.asset not in ctx.assets.index:
        raise ConfigError(absent("asset", args.asset, ctx.rejected_assets, evidence / "assets.csv"))
    if args.meter and args.meter not in ctx.instruments.index:
        raise ConfigError(absent("meter", args.meter, ctx.rejected_instruments, evidence / "instruments.yaml"))
    shunt_ohm, shunt_id = _shunt_plan(ctx, args.shunt) if args.shunt else (None, None)
    plan = {"method": "shunt" if args.shunt else "direct" if args.meter else "display", "shunt_ohm": shunt_ohm,
            "shunt": shunt_id, "meter": args.meter, "connection": "in-loop" if args.in_loop else "standalone",
            "ambient_c": args.ambient}
    row = next(analyse(ctx, plan_rigs({args.asset: plan})).itertuples())
    rig = (f"shunt {args.shunt}" if args.shunt else f"meter {args.meter}" if args.meter
           else "no instrument in series")
    out(f"Loop burden of {args.asset}: {rig}, {plan['connection']}, {args.ambient:g} °C\n")
    rows = term_rows(row)
    width = max(len(label) for label, _ in rows)
    for label, value in rows:
        out(f"  {label:<{width}}  {value}\n")
    if row.burden_status != "unknown":
        words = summary(row, with_fixes=False) if row.burden_status != "ok" else "the output can drive this loop"
        out(f"{row.burden_status}: {words}\n")
    return {"ok": 0, "low-margin": 0, "exceeds": 1}.get(row.burden_status, 2)


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("loop", "check a planned test rig's loop burden from the registry alone",
                    _add_arguments, _run)]
