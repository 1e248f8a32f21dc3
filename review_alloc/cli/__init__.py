"""The `review-alloc` command line.

Exit codes: 0 success, 1 bad input (the message names file, line and field), 2 bad usage
(with the sub-command's own usage line), 3 the independent checker rejected a plan (which is
then withheld) or an internal error, 130 interrupted (Ctrl-C; saves are atomic, so no file is
left half-written). Each module of this package registers its own sub-commands; `main` only
dispatches.

Nothing here imports the planner at start: `--help`, `--version` and `schema` answer without
loading numba or scipy (the commands import the workspace when they run).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from review_alloc import __version__
from review_alloc.cli import app, basic, changes, explain, scoring
from review_alloc.cli.common import (
    EXIT_CHECK,
    EXIT_INPUT,
    EXIT_INTERRUPTED,
    EXIT_USAGE,
    UsageError,
)
from review_alloc.model import InputError

_MODULES = (basic, explain, changes, scoring, app)
_DEFAULT_COMMAND = "app"


def build_parser() -> tuple[argparse.ArgumentParser, dict]:
    """The parser of every sub-command and the handlers by command name."""
    parser = argparse.ArgumentParser(
        prog="review-alloc",
        description="Plan reviewer assignments exactly: coverage first, then fit. "
        "Without a command (at a terminal), open the app on the demo workshop.",
    )
    parser.add_argument("--version", action="version", version=f"review-alloc {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    handlers: dict = {}
    for module in _MODULES:
        handlers.update(module.register(sub))
    return parser, handlers


def _parse(
    parser: argparse.ArgumentParser, argv: Sequence[str] | None
) -> tuple[argparse.Namespace, argparse.ArgumentParser]:
    """The arguments and the parser of their sub-command; an unknown option is refused by the
    sub-command's own parser (argparse leaves it to the top level, whose usage says less)."""
    args, extra = parser.parse_known_args(argv)
    own = _subparser(parser, args.command)
    if extra:
        own.error(f"unrecognized arguments: {' '.join(extra)}")
    return args, own


def _subparser(parser: argparse.ArgumentParser, command: str | None) -> argparse.ArgumentParser:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction) and command in action.choices:
            return action.choices[command]
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code."""
    parser, handlers = build_parser()
    args, own = _parse(parser, argv)
    if args.command is None and not (sys.stdin.isatty() and sys.stdout.isatty()):
        # Without a terminal the app could only wait for keys that never come.
        parser.print_help(sys.stderr)
        print(
            "\nreview-alloc: no command given and no terminal for the app; name a command",
            file=sys.stderr,
        )
        return EXIT_USAGE
    try:
        return handlers[args.command or _DEFAULT_COMMAND](args)
    except UsageError as error:
        own.print_usage(sys.stderr)
        print(f"{own.prog}: error: {error}", file=sys.stderr)
        return EXIT_USAGE
    except InputError as error:
        for line in error.lines:
            print(f"error: {line}", file=sys.stderr)
        return EXIT_INPUT
    except BrokenPipeError:
        # The reader (`head`, a pager) stopped early; that is not an error of ours.
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        from review_alloc.workspace import files_written

        written = files_written()
        print(
            "interrupted: "
            + (
                f"{', '.join(map(str, written))} written in full before the interruption"
                if written
                else "no file was changed"
            ),
            file=sys.stderr,
        )
        return EXIT_INTERRUPTED
    except OSError as error:
        where = f"{error.filename}: " if error.filename else ""
        print(f"error: {where}{error.strerror or error}", file=sys.stderr)
        return EXIT_INPUT
    except Exception as error:  # the last line of defence: a user never sees a traceback
        # The planner is imported only by the commands that plan, so its error class is
        # looked up only when one of them failed.
        errors = sys.modules.get("review_alloc.plan.errors")
        if errors is not None and isinstance(error, errors.PlanCheckError):
            print(f"internal error, plan withheld: {error}", file=sys.stderr)
            return EXIT_CHECK
        print(
            f"internal error ({type(error).__name__}: {error}); no file was left half-written "
            "(saves are atomic); please report this with the command that caused it",
            file=sys.stderr,
        )
        return EXIT_CHECK
