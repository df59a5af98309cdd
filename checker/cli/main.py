"""Command line: ``deliverycheck measure|check|profiles ...``.

``main(argv) -> int`` is the one place that maps exceptions to exit codes and
prints them. Each subcommand lives in ``checker/cli/<name>.py`` with
``add_parser(subparsers)`` and ``run(args, out, err) -> int``.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback
from typing import TextIO

from checker.dsp.heap import keep_freed_memory
from checker.dsp.threads import claim_process
from checker.model.errors import EXIT_INTERRUPTED, EXIT_UNCHECKED, EXIT_USAGE, CheckerError
from checker.model.names import for_terminal
from checker.model.version import __version__

# The command line owns its process: library pools run one thread (checker/dsp/threads.py),
# freed memory stays for the next file (checker/dsp/heap.py).
claim_process()
keep_freed_memory()

#: Subcommand modules under checker.cli, in help order.
COMMANDS = ("measure", "check", "profiles")


class _Parser(argparse.ArgumentParser):
    def error(self, message: str):  # argparse would sys.exit(2) itself; raise instead
        raise _ArgError(f"{self.prog}: {message}")


class _ArgError(Exception):
    pass


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="deliverycheck",
        description="Check a batch of audio deliverables against a delivery profile.",
    )
    parser.add_argument("--version", action="version", version=f"deliverycheck {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        module = importlib.import_module(f"checker.cli.{name}")
        p = module.add_parser(sub)
        p.set_defaults(_run=module.run)
    return parser


#: Library parameter -> the flag that sets it (UsageError.parameter).
FLAG_FOR_PARAMETER = {
    "jobs": "--jobs",
    "timeout_s": "--timeout-s",
    "cluster": "--cluster",
    "mix": "--mix",
    "layout": "--layout",
}


def in_flag_words(exc: Exception) -> str:
    """The message with a library parameter's name replaced by the command-line flag."""
    text = str(exc)
    parameter = getattr(exc, "parameter", None)
    flag = FLAG_FOR_PARAMETER.get(parameter or "")
    if flag and text.startswith(f"{parameter}:"):
        return flag + text[len(parameter) :]
    if flag and text.startswith(f"{parameter} "):  # "layout 'X Y': ..."
        return f"{flag}: {text}"
    return text


def main(
    argv: list[str] | None = None, out: TextIO | None = None, err: TextIO | None = None
) -> int:
    out = out or sys.stdout
    err = err or sys.stderr
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except _ArgError as exc:
        print(for_terminal(str(exc)), file=err)
        print("try: deliverycheck --help", file=err)
        return EXIT_USAGE
    if not getattr(args, "_run", None):
        parser.print_help(err)
        return EXIT_USAGE
    try:
        return int(args._run(args, out, err))
    except CheckerError as exc:
        if args.debug:
            traceback.print_exc(file=err)
        print(for_terminal(f"deliverycheck: {in_flag_words(exc)}"), file=err)
        return exc.exit_code
    except KeyboardInterrupt:
        print("deliverycheck: interrupted", file=err)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a bug: say so plainly
        if args.debug:
            traceback.print_exc(file=err)
        print(
            for_terminal(
                f"deliverycheck: internal error: {type(exc).__name__}: {exc} "
                "(run with --debug for details)"
            ),
            file=err,
        )
        return EXIT_UNCHECKED


def main_entry() -> None:
    sys.exit(main())
