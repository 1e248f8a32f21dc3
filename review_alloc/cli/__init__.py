"""The `review-alloc` command line.

Exit codes: 0 success, 1 bad input (the message names file, line and field), 2 bad usage
(with the sub-command's own usage line), 3 the independent checker rejected a plan (which is
then withheld) or an internal error, 130 interrupted (Ctrl-C; saves are atomic, so no file is
left half-written). Each module of this package registers its own sub-commands; `main` only
dispatches.

Nothing here imports the planner at start: `--help`, `--version`, `schema`, `history`, `diff`,
`export` and `notify` answer without loading numba or scipy (the commands import the workspace
when they run, and the workspace imports the solver only to solve).

`--json` (every command but `open`): one JSON object on standard output, starting with
`command`, `ok` and `file`; a failure is one too (`ok` false, `exit`, `errors`), its messages
also on standard error.
"""

from __future__ import annotations

import argparse
import gc
import sys
from collections.abc import Callable, Sequence
from typing import NoReturn

from review_alloc import __version__
from review_alloc.cli import app, basic, changes, explain, scoring
from review_alloc.cli.common import (
    EXIT_CHECK,
    EXIT_INPUT,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_USAGE,
    UsageError,
    emit_failure,
)
from review_alloc.model.errors import InputError

_MODULES = (basic, explain, changes, scoring, app)
_DEFAULT_COMMAND = "app"


class _ParseError(Exception):
    """A usage error argparse found, raised instead of exiting so that `main` can answer it
    like every other usage error (and in JSON when asked)."""

    def __init__(self, parser: argparse.ArgumentParser, message: str) -> None:
        super().__init__(message)
        self.parser = parser


class _Parser(argparse.ArgumentParser):
    """argparse's parser, whose usage errors reach `main` instead of exiting at once."""

    def error(self, message: str) -> NoReturn:
        """Raise the usage error for `main` to report."""
        raise _ParseError(self, message)


def build_parser() -> tuple[argparse.ArgumentParser, dict]:
    """The parser of every sub-command and the handlers by command name."""
    parser = _Parser(
        prog="review-alloc",
        description="Plan reviewer assignments exactly: coverage first, then fit. "
        "Without a command (at a terminal), open the app on the demo workshop. Every command "
        "takes --json (except `open`, the app): one JSON object on standard output, success "
        "or failure alike.",
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


def _command_word(parser: argparse.ArgumentParser) -> str | None:
    """The sub-command a parser belongs to (None for the top level)."""
    word = parser.prog.removeprefix("review-alloc").strip()
    return word or None


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code. Without `argv` (the program itself, reading
    `sys.argv`) the process ends right after, and `_ending` prepares that."""
    try:
        return _main(list(sys.argv[1:] if argv is None else argv))
    finally:
        if argv is None:
            _ending()


def _ending() -> None:
    """Freeze every object left, so that the interpreter's final collection skips them: it
    would walk all that start-up made (modules, document models, the session), a fifth of a
    small command's time, only to free memory the process gives back as it ends. Files are
    closed and saves finished by then; atexit handlers and flushes still run."""
    gc.freeze()


def _main(words: list[str]) -> int:
    parser, handlers = build_parser()
    try:
        args, own = _parse(parser, words)
    except _ParseError as error:
        error.parser.print_usage(sys.stderr)
        print(f"{error.parser.prog}: error: {error}", file=sys.stderr)
        if "--json" in words:
            emit_failure(None, _command_word(error.parser), EXIT_USAGE, [str(error)])
        raise SystemExit(EXIT_USAGE) from None
    if args.command is None and not (sys.stdin.isatty() and sys.stdout.isatty()):
        # Without a terminal the app could only wait for keys that never come.
        parser.print_help(sys.stderr)
        print(
            "\nreview-alloc: no command given and no terminal for the app; name a command",
            file=sys.stderr,
        )
        return EXIT_USAGE
    code, lines = _run(handlers[args.command or _DEFAULT_COMMAND], args, own)
    if code != EXIT_OK and getattr(args, "json", False):
        emit_failure(args, args.command, code, lines)
    return code


def _run(
    handler: Callable[[argparse.Namespace], int],
    args: argparse.Namespace,
    own: argparse.ArgumentParser,
) -> tuple[int, list[str]]:
    """Run a handler; return its exit code and, on failure, the lines said on standard error."""
    try:
        return handler(args), []
    except UsageError as error:
        own.print_usage(sys.stderr)
        print(f"{own.prog}: error: {error}", file=sys.stderr)
        return EXIT_USAGE, [str(error)]
    except InputError as error:
        for line in error.lines:
            print(f"error: {line}", file=sys.stderr)
        return EXIT_INPUT, list(error.lines)
    except BrokenPipeError:
        # The reader (`head`, a pager) stopped early; that is not an error of ours.
        sys.stderr.close()
        return EXIT_OK, []
    except KeyboardInterrupt:
        from review_alloc.workspace import files_written

        written = files_written()
        line = "interrupted: " + (
            f"{', '.join(map(str, written))} written in full before the interruption"
            if written
            else "no file was changed"
        )
        print(line, file=sys.stderr)
        return EXIT_INTERRUPTED, [line]
    except OSError as error:
        where = f"{error.filename}: " if error.filename else ""
        line = f"error: {where}{error.strerror or error}"
        print(line, file=sys.stderr)
        return EXIT_INPUT, [line.removeprefix("error: ")]
    except Exception as error:  # the last line of defence: a user never sees a traceback
        # The planner is imported only by the commands that plan, so its error class is
        # looked up only when one of them failed.
        errors = sys.modules.get("review_alloc.plan.errors")
        if errors is not None and isinstance(error, errors.PlanCheckError):
            line = f"internal error, plan withheld: {error}"
        else:
            line = (
                f"internal error ({type(error).__name__}: {error}); no file was left "
                "half-written (saves are atomic); please report this with the command that "
                "caused it"
            )
        print(line, file=sys.stderr)
        return EXIT_CHECK, [line]
