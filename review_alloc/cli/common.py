"""What every command shares: exit codes, the caution, argument types, JSON and plan output."""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING, Any

from review_alloc.model.limits import MAX_COUNT

if TYPE_CHECKING:
    from review_alloc.model import Session

EXIT_OK, EXIT_INPUT, EXIT_USAGE, EXIT_CHECK = 0, 1, 2, 3
EXIT_INTERRUPTED = 130
"""The shell's convention for a command stopped by Ctrl-C (128 + SIGINT)."""


class UsageError(Exception):
    """Options that do not go together; `main` shows the sub-command's usage and exits 2."""


def caution() -> str:
    """The caution every plan report ends with (from the planner's one list of cautions).

    Imported when needed: importing the planner loads the solver (numba, scipy), which
    `--help`, `--version` and `schema` must not wait for."""
    from review_alloc.plan.cautions import PLAN_CAUTION

    return PLAN_CAUTION


def positive(text: str) -> int:
    """argparse type: a whole number >= 1."""
    value = whole(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number >= 1")
    return value


def whole(text: str) -> int:
    """argparse type: a whole number >= 0."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text!r} is negative; it must be >= 0")
    if value > MAX_COUNT:
        raise argparse.ArgumentTypeError(f"{text!r} is above {MAX_COUNT}, the most a count may be")
    return value


def write_json(payload: dict[str, Any]) -> None:
    """Print one JSON object on standard output (and nothing else goes there)."""
    sys.stdout.write(json.dumps(payload, indent=2, ensure_ascii=False) + "\n")


def session_file(args: argparse.Namespace) -> str | None:
    """The session file a command reads or writes, as given (None for `demo` and `schema`)."""
    path = getattr(args, "session", None) or getattr(args, "output", None)
    return None if path is None else str(path)


def emit_json(args: argparse.Namespace, payload: dict[str, Any]) -> None:
    """Print a command's result as its one JSON object: every command's object starts with
    `command`, `ok` (true) and `file` (the session file, or null), then its own keys; a
    session's name is under `session`."""
    write_json({"command": args.command, "ok": True, "file": session_file(args), **payload})


def emit_failure(args: argparse.Namespace | None, command: str | None, code: int,
                 lines: list[str]) -> None:
    """The JSON object of a failed command: `ok` false, its exit code and its messages (the
    same lines go to standard error), so a script reads one object either way."""
    write_json(
        {
            "command": command,
            "ok": False,
            "file": session_file(args) if args is not None else None,
            "exit": code,
            "errors": lines,
        }
    )


def add_output_options(parser: argparse.ArgumentParser) -> None:
    """`--force` and `--bom` for a command that writes a CSV file."""
    parser.add_argument(
        "--force",
        action="store_true",
        help="replace an existing file (a session file is never replaced)",
    )
    parser.add_argument(
        "--bom",
        action="store_true",
        help="start the CSV with a UTF-8 byte-order mark (for spreadsheets that need one)",
    )


def prepare_solver() -> None:
    """Compile the kernels on a cold machine, saying so once on standard error."""
    from review_alloc.workspace import prepare_solver as prepare

    prepare(lambda line: print(line, file=sys.stderr))


def _verdict(summary: dict[str, Any]) -> str:
    if not summary["checked"]:
        return "NOT checked"
    if not summary.get("optimality", {}).get("proven", True):
        return "checked; optimal within the bound shown below"
    return "checked, optimal"


def summary_lines(session: Session, summary: dict[str, Any], source: str) -> list[str]:
    """The short plain-text report of a plan summary."""
    word = session.noun
    pct = 100.0 * summary["required_coverage"] / max(summary["required_demand"], 1)
    lines = [
        f"{session.name}: plan {_verdict(summary)}",
        f"  {word}s {summary['papers']}, reviewers {summary['reviewers']}, "
        f"assignments {len(summary['assignments'])}",
        f"  required reviews {summary['required_coverage']} / {summary['required_demand']} "
        f"({pct:.1f}%)",
        f"  all reviews      {summary['coverage']} / {summary['demand']}",
        f"  reviewer floors  {summary['floors_met']} / {summary['floors_demand']}",
        f"  total score      {summary['total_score']:.2f} (mean {summary['mean_score']:.3f})",
        f"  load             min {summary['load']['min']}, max {summary['load']['max']}, "
        f"mean {summary['load']['mean']:.2f}",
    ]
    gaps = summary["gaps"]
    if gaps:
        missing = sum(g["missing"] for g in gaps)
        lines.append(
            f"  gaps: {len(gaps)} {word}s short of reviews ({missing} reviews missing); "
            f"see `review-alloc explain {source}`"
        )
    else:
        lines.append(f"  gaps: none, every {word} has all its reviews")
    if summary["overloads"]:
        lines.append(f"  overloads: {len(summary['overloads'])} reviewers above cap")
    if summary["underloads"]:
        lines.append(f"  below floor: {len(summary['underloads'])} reviewers")
    lines.append(caution())
    return lines


def validation_message(error: ValueError) -> str:
    """One line from a pydantic ValidationError (or any ValueError)."""
    errors = getattr(error, "errors", None)
    if callable(errors):
        return "; ".join(
            f"{'.'.join(str(x) for x in e['loc']) or 'policy'}: {e['msg']}" for e in errors()
        )
    return str(error)
