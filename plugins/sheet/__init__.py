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
from loopledger.plugins.sheet import fill
from loopledger.plugins.sheet.plan import default_plan, sheet_data


def _sheet_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("asset", help="the asset's id in assets.csv")
    parser.add_argument("--evidence", type=Path, default=Path("."),
                        help="the evidence folder (default: the current folder)")
    parser.add_argument("--shunt", type=float, metavar="OHM", help="planned shunt resistance in ohms "
                        "(reads volts across it); default: the rig of the asset's latest test")
    parser.add_argument("--method", help="planned reading method (direct, shunt, display, counts or a plugin's); "
                        "default: that of the latest test")
    parser.add_argument("--meter", metavar="ID", help="planned meter (an id in instruments.yaml)")
    parser.add_argument("--source", metavar="ID", help="planned source (an id in instruments.yaml)")
    parser.add_argument("--connection", choices=["standalone", "in-loop"], help="planned connection")
    parser.add_argument("--rule", help="decision rule, overriding loopledger.toml")
    parser.add_argument("--html", type=Path, metavar="FILE", help="also write the printable page to FILE")
    parser.add_argument("--fill", type=Path, metavar="FILE", help="also write a result file to fill in on site: "
                        ".xlsx, .csv or .yaml by the suffix (readings blank; put it in results/ once filled)")


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
    for role in ("meter", "source"):
        ident = getattr(args, role)
        if ident and ident not in ctx.instruments.index:
            raise ConfigError(absent(role, ident, ctx.rejected_instruments, args.evidence / "instruments.yaml"))
    if args.fill is not None and args.fill.suffix.lower() not in fill.FORMATS:
        raise ConfigError(f"--fill '{args.fill}': name a file ending in {', '.join(fill.FORMATS)}")
    if args.method is not None and args.method not in ctx.methods:
        raise ConfigError(f"--method '{args.method}' is not a reading method (known: {', '.join(sorted(ctx.methods))})")
    if args.method == "shunt" and args.shunt is None:
        raise ConfigError("--method shunt needs --shunt OHM (the planned shunt's resistance)")
    if args.shunt is not None and not args.shunt > 0:
        raise ConfigError("--shunt must be a resistance in ohms greater than zero")
    plan = default_plan(ctx, args.asset, test_table(ctx))
    if args.method is not None:
        plan.update(method=args.method, shunt_ohm=None, shunt=None)
    if args.shunt is not None:
        plan.update(method="shunt", shunt_ohm=float(args.shunt), shunt=None)
    for role in ("meter", "source"):
        if getattr(args, role):
            plan[role] = getattr(args, role)
    if args.connection:
        plan["connection"] = args.connection
    sheet = sheet_data(ctx, args.asset, plan)
    from loopledger.terminal import VisibleLines

    VisibleLines(sys.stdout).write(sheet_text(sheet))  # ids and units quote the registers: shown inert
    if args.html:
        from loopledger.output import write_bytes

        page = environment().get_template("sheet.html").render(
            sheet=sheet, root="", asset_page="", page_rel="sheet.html", as_of=ctx.as_of.isoformat(),
            cautions=CAUTIONS, page_cautions=sheet["cautions"], rule=sheet.get("rule", ""),
            inline_css=importlib.resources.files("loopledger.site").joinpath("static/style.css").read_text("utf-8"))
        write_bytes(args.html, page.encode("utf-8"))
        sys.stdout.write(f"Printable sheet: {args.html}\n")
    if args.fill is not None:
        from loopledger.output import write_bytes

        write_bytes(args.fill, fill.fill_file(sheet, args.fill.suffix.lower(), ctx.as_of))
        sys.stdout.write(f"Result file to fill in: {args.fill} (put it in results/ once the readings are typed)\n")
    return 0


def sheet_text(sheet: dict[str, Any]) -> str:
    """The sheet as plain text for the terminal: the cautions first, then the asset, the rig and the points."""
    a, plan = sheet["asset"], sheet["plan"]
    unit = sheet.get("unit", "")
    lines = [f"Test sheet for {a['asset']}: {a.get('description') or ''}", "",
             "Before you connect anything:", *(f"  ! {c}" for c in sheet.get("cautions", [])), ""]
    source = sheet.get("source")
    lines += [f"  input {_g(a.get('input_min'))} … {_g(a.get('input_max'))} {a.get('input_unit')} at the terminals, "
              f"output {_g(a.get('output_min'))} … {_g(a.get('output_max'))} {unit}, accuracy {a.get('accuracy')}, "
              f"rule '{sheet.get('rule', '')}'",
              f"  planned rig: method {plan.get('method')}, source "
              + (source["id"] + "".join(f" ({t})" for t in [", ".join(
                  t for t in (source.get("description"), source.get("range") and f"range {source['range']}") if t)]
                  if t) if source else "(not named: add --source ID)")
              + f", meter {plan.get('meter') or '(not named)'}, "
              f"shunt {_num(plan.get('shunt_ohm'), 3) + ' Ω' if plan.get('shunt_ohm') else '(none)'}, "
              f"{plan.get('connection')}", ""]
    rows = sheet["rows"]
    read = sheet.get("read_unit")
    wu = read or unit
    primary = any("primary" in r for r in rows)
    head = f"{'input %':>8} {'inject':>12}" + (f" {'primary':>14}" if primary else "")
    head += f" {'expect':>10} {'accept from':>11} {'to':>10}" + (f" {'output ' + unit:>10}" if read else "")
    head += f" {'U ' + unit:>9} {'TUR':>6}"
    if rows:
        lines.append(head + f"   (read in {wu}" + (", volts across the shunt" if read == "V" and
                                                    plan.get("method") == "shunt" else "") + ")")
    for r in rows:
        line = f"{_num(r['input_pct'], 1):>8} {_num(r['input'], 4) + ' ' + (r['input_unit'] or ''):>12}"
        if primary:
            line += f" {(_g(r['primary']) + ' ' + (r.get('primary_unit') or '')) if 'primary' in r else '':>14}"
        if read:
            line += f" {_num(r.get('read_expected')):>10} {_num(r.get('read_low')):>11} {_num(r.get('read_high')):>10}"
            line += f" {_num(r['expected']):>10}"
        else:
            line += f" {_num(r['expected']):>10} {_num(r['low']):>11} {_num(r['high']):>10}"
        line += f" {_num(r.get('U')) if r.get('U') is not None else '—':>9}"
        line += f" {_num(r.get('tur'), 3) if r.get('tur') is not None else '—':>6}"
        lines.append(line)
    why = next((r["u_problem"] for r in rows if r.get("u_problem")), None)
    if why:
        lines.append(f"  U of the planned rig is not known at every point: {why}.")
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
    notes = sheet.get("notes", [])
    return "\n".join(lines + ([""] if notes else []) + ["Note: " + n for n in notes]) + "\n"


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("sheet", "print the test points and pass windows to take to site for one asset",
                    _sheet_arguments, _sheet_run)]
