"""The `review-alloc` command line.

Exit codes: 0 success, 1 bad input (the message names file, line and field), 2 bad usage,
3 the independent checker rejected a plan (which is then withheld) or an internal error,
130 interrupted (Ctrl-C; saves are atomic, so no file is left half-written). Each module of
this package registers its own sub-commands; `main` only dispatches.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from review_alloc.cli import app, basic, changes, explain
from review_alloc.cli.common import EXIT_CHECK, EXIT_INPUT, EXIT_INTERRUPTED
from review_alloc.model import InputError

_MODULES = (basic, explain, changes, app)
_DEFAULT_COMMAND = "app"


def build_parser() -> tuple[argparse.ArgumentParser, dict]:
    """The parser of every sub-command and the handlers by command name."""
    parser = argparse.ArgumentParser(
        prog="review-alloc",
        description="Plan reviewer assignments exactly: coverage first, then fit.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    handlers: dict = {}
    for module in _MODULES:
        handlers.update(module.register(sub))
    return parser, handlers


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code."""
    from review_alloc.plan import PlanCheckError

    parser, handlers = build_parser()
    args = parser.parse_args(argv)
    try:
        return handlers[args.command or _DEFAULT_COMMAND](args)
    except InputError as error:
        for line in error.lines:
            print(f"error: {line}", file=sys.stderr)
        return EXIT_INPUT
    except BrokenPipeError:
        # The reader (`head`, a pager) stopped early; that is not an error of ours.
        sys.stderr.close()
        return 0
    except PlanCheckError as error:
        print(f"internal error, plan withheld: {error}", file=sys.stderr)
        return EXIT_CHECK
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
        print(
            f"internal error ({type(error).__name__}: {error}); no file was left half-written "
            "(saves are atomic); please report this with the command that caused it",
            file=sys.stderr,
        )
        return EXIT_CHECK
