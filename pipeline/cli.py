"""The ``loopledger`` command: subcommands, one top-level error handler, exit codes.

Exit codes: 0 every file valid and every test passed; 1 a test failed; 2 a
file was invalid (the rest were still processed and published); 3 a usage or
configuration error; 4 an internal error (a bug in loopledger or a plugin:
please report it with the traceback).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from typing import TYPE_CHECKING

from loopledger import __version__
from loopledger.terminal import visible

if TYPE_CHECKING:
    from loopledger.cache.store import Cache

EXIT_USAGE = 3
EXIT_INTERNAL = 4


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # type: ignore[override]
        self.print_usage(sys.stderr)
        sys.stderr.write(f"loopledger: error: {visible(message)}\n")
        raise SystemExit(EXIT_USAGE)


def build_parser() -> tuple[argparse.ArgumentParser, dict[str, object]]:
    from loopledger.commands import check, run
    from loopledger.host import get_plugin_manager

    parser = _Parser(prog="loopledger", description="Judge transducer test results and publish the evidence.")
    parser.add_argument("--version", action="version", version=f"loopledger {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    runners: dict[str, object] = {}
    for name, module, text in (("run", run, "judge an evidence folder, write data/ and the handbook"),
                               ("check", check, "judge named result files; print path:line: messages")):
        module.add_arguments(sub.add_parser(name, help=text, description=text))
        runners[name] = module.main
    for commands in get_plugin_manager().hook.ll_cli_commands():
        for command in commands or []:
            p = sub.add_parser(command.name, help=command.help, description=command.help)
            command.add_arguments(p)
            runners[command.name] = command.run
    return parser, runners


class _Quiet(argparse.ArgumentParser):
    """A parser for the no-change check that never prints: any problem defers to the full parser."""

    def error(self, message: str) -> None:  # type: ignore[override]
        raise ValueError(message)


def replay(argv: list[str]) -> tuple[int | None, Cache | None]:
    """Answer ``run`` / ``check`` from the incremental cache when nothing changed (no heavy imports).

    Returns (exit code, None) when the cache answered; (None, the cache it looked at) when something
    changed, so the full run need not scan the evidence folder again; (None, None) when there is no
    cache or anything is unusual.
    """
    from loopledger.commands import check, run

    if not argv or argv[0] not in ("run", "check") or any(a in ("-h", "--help") for a in argv):
        return None, None
    module = run if argv[0] == "run" else check
    parser = _Quiet(prog="loopledger", add_help=False)
    module.add_arguments(parser)
    try:
        args = parser.parse_args(argv[1:])
        return module.replay(args)
    except Exception:  # a usage or configuration problem: the full path reports it properly
        return None, None


def main(argv: Sequence[str] | None = None) -> int:
    from loopledger.config import ConfigError
    from loopledger.lock import LockHeld

    argv = list(sys.argv[1:] if argv is None else argv)
    try:
        code, looked = replay(argv)
    except KeyboardInterrupt:
        return 130
    if code is not None:
        return code
    try:
        parser, runners = build_parser()  # loads the installed plugins, for their subcommands
    except ConfigError as exc:
        sys.stderr.write(f"loopledger: configuration error: {visible(str(exc))}\n")
        return EXIT_USAGE
    args = parser.parse_args(argv)
    args.looked = looked  # the cache the quick path already compared with the evidence folder
    if not args.command:
        parser.print_help()
        return EXIT_USAGE
    try:
        return int(runners[args.command](args))  # type: ignore[operator]
    except ConfigError as exc:
        sys.stderr.write(f"loopledger: configuration error: {visible(str(exc))}\n")
        return EXIT_USAGE
    except LockHeld as exc:
        sys.stderr.write(f"loopledger: {exc}\n")
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("loopledger: interrupted; outputs already written are whole, the rest were not "
                         "replaced\n")
        return 130
    except BrokenPipeError:  # output piped into e.g. `head`, which stopped reading
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except Exception as exc:
        import traceback

        reported = getattr(exc, "reported", False)  # a forked job's error was printed where it happened
        if isinstance(exc, OSError) or getattr(exc, "os_error", False):  # the disk, not a bug
            if not reported:
                from loopledger.output import file_problem

                sys.stderr.write(visible(file_problem(exc)) + "\n")
            sys.stderr.write("loopledger: the run could not finish; outputs already in place were not replaced\n")
            return EXIT_INTERNAL
        if not reported:
            traceback.print_exc()
        sys.stderr.write("loopledger: internal error (a bug, not a problem with your evidence); "
                         "outputs already in place were not replaced\n")
        return EXIT_INTERNAL


if __name__ == "__main__":
    raise SystemExit(main())
