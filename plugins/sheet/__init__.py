"""The ``sheet`` command: the test points and pass windows to take to site for one asset.

The plan is made by :mod:`.plan`, which runs the stages' own functions (the signal type's expected value,
the MPE, the decision rule) on the planned points, so the terminal sheet, the printable page and the
handbook's ``sheets/`` pages agree.
"""

from __future__ import annotations

import argparse
import importlib.resources
import sys
from pathlib import Path
from typing import Any

from loopledger.contracts import Command
from loopledger.hookspecs import hookimpl
from loopledger.plugins.handbook.blocks import num as _num
from loopledger.plugins.handbook.fleet_pages import CAUTIONS, test_table
from loopledger.plugins.handbook.render import _g, environment
from loopledger.plugins.sheet.plan import default_plan, sheet_data


def _sheet_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("asset", help="the asset's id in assets.csv")
    parser.add_argument("--evidence", type=Path, default=Path("."),
                        help="the evidence folder (default: the current folder)")
    parser.add_argument("--shunt", type=float, metavar="OHM", help="planned shunt resistance in ohms "
                        "(reads volts across it); default: the rig of the asset's latest test")
    parser.add_argument("--meter", metavar="ID", help="planned meter (an id in instruments.yaml)")
    parser.add_argument("--connection", choices=["standalone", "in-loop"], help="planned connection")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    parser.add_argument("--html", type=Path, metavar="FILE", help="also write the printable page to FILE")


def _sheet_run(args: argparse.Namespace) -> int:
    from loopledger import runner
    from loopledger.commands.run import overrides
    from loopledger.config import ConfigError
    from loopledger.host import get_plugin_manager
    from loopledger.registry import absent

    # made from what the handbook's sheet page is made from, so a plugin's sheet blocks see the same here
    ctx = runner.run(runner.RunOptions(args.evidence, overrides=overrides(args)), get_plugin_manager()).page_view()
    if args.asset not in ctx.assets.index:
        raise ConfigError(absent("asset", args.asset, ctx.rejected_assets, args.evidence / "assets.csv"))
    if args.meter and args.meter not in ctx.instruments.index:
        raise ConfigError(absent("meter", args.meter, ctx.rejected_instruments, args.evidence / "instruments.yaml"))
    if args.shunt is not None and not args.shunt > 0:
        raise ConfigError("--shunt must be a resistance in ohms greater than zero")
    plan = default_plan(ctx, args.asset, test_table(ctx))
    if args.shunt is not None:
        plan.update(method="shunt", shunt_ohm=float(args.shunt))
    if args.meter:
        plan["meter"] = args.meter
    if args.connection:
        plan["connection"] = args.connection
    sheet = sheet_data(ctx, args.asset, plan)
    from loopledger.terminal import VisibleLines

    VisibleLines(sys.stdout).write(sheet_text(sheet))  # ids and units quote the registers: shown inert
    if args.html:
        from loopledger.output import write_bytes

        page = environment().get_template("sheet.html").render(
            sheet=sheet, root="", asset_page="", page_rel="sheet.html", as_of=ctx.as_of.isoformat(),
            cautions=CAUTIONS, rule=sheet.get("rule", ""),
            inline_css=importlib.resources.files("loopledger.site").joinpath("static/style.css").read_text("utf-8"))
        write_bytes(args.html, page.encode("utf-8"))
        sys.stdout.write(f"Printable sheet: {args.html}\n")
    return 0


def sheet_text(sheet: dict[str, Any]) -> str:
    """The sheet as plain text for the terminal."""
    a, plan = sheet["asset"], sheet["plan"]
    unit = sheet.get("unit", "")
    lines = [f"Test sheet for {a['asset']}: {a.get('description') or ''}",
             f"  input {_g(a.get('input_min'))} … {_g(a.get('input_max'))} {a.get('input_unit')}, output "
             f"{_g(a.get('output_min'))} … {_g(a.get('output_max'))} {unit}, accuracy {a.get('accuracy')}, "
             f"rule '{sheet.get('rule', '')}'",
             f"  planned rig: method {plan.get('method')}, meter {plan.get('meter') or '(not named)'}, "
             f"shunt {_num(plan.get('shunt_ohm'), 3) + ' Ω' if plan.get('shunt_ohm') else '(none)'}, "
             f"{plan.get('connection')}", ""]
    volts = any("v_expected" in r for r in sheet["rows"])
    primary = any("primary" in r for r in sheet["rows"])
    head = f"{'input %':>8} {'input':>12}" + (f" {'primary':>10}" if primary else "")
    head += f" {'expected':>10} {'pass from':>10} {'to':>10}"
    head += f" {'V expected':>11} {'V from':>9} {'V to':>9}" if volts else ""
    lines.append(head + f"   ({unit}{', volts across the shunt' if volts else ''})")
    for r in sheet["rows"]:
        line = f"{_num(r['input_pct'], 1):>8} {_num(r['input'], 4) + ' ' + (r['input_unit'] or ''):>12}"
        line += f" {r['primary']:>10g}" if primary and r.get("primary") is not None else (" " * 11 if primary else "")
        line += f" {_num(r['expected']):>10} {_num(r['low']):>10} {_num(r['high']):>10}"
        if volts:
            line += f" {_num(r.get('v_expected')):>11} {_num(r.get('v_low')):>9} {_num(r.get('v_high')):>9}"
        lines.append(line)
    for s in sheet.get("sections", []):
        lines += ["", s["title"] + ":"]
        if s["kind"] == "facts":
            lines += [f"  {label}: {value}" for label, value in s["rows"]]
        elif s["kind"] == "table":
            lines += ["  " + " | ".join(str(c) for c in s["columns"])]
            lines += ["  " + " | ".join(str(v) for v in row) for row in s["rows"]]
        elif s["kind"] == "text":
            lines.append("  " + s["text"])
    if not sheet.get("sections"):
        lines += ["", "Burden check: no plugin offered one for this rig; check the loop by hand."]
    lines += ["", *("Note: " + n for n in sheet.get("notes", [])), "", "Cautions:"]
    lines += [f"  - {c}" for c in CAUTIONS]
    return "\n".join(lines) + "\n"


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("sheet", "print the test points and pass windows to take to site for one asset",
                    _sheet_arguments, _sheet_run)]
