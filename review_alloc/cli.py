"""The `review-alloc` command line: import, plan, explain, export, schema.

Exit codes: 0 success, 1 bad input (the message names file, line and field), 2 bad usage,
3 an internal check failed (the plan is withheld).
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from review_alloc.model import InputError, Policy, Session, load_session, save_session

CAUTION = (
    "A plan is advice to the chair: check it against the venue's conflict-of-interest policy "
    "before any assignment goes out."
)

EXIT_OK, EXIT_INPUT, EXIT_USAGE, EXIT_CHECK = 0, 1, 2, 3


def _positive(text: str) -> int:
    value = _whole(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number >= 1")
    return value


def _whole(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text!r} is negative; it must be >= 0")
    return value


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of every sub-command."""
    parser = argparse.ArgumentParser(
        prog="review-alloc",
        description="Plan reviewer assignments exactly: coverage first, then fit.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("import", help="build a session file from CSV files")
    p.add_argument("--papers", required=True, type=Path, help="papers CSV")
    p.add_argument("--reviewers", required=True, type=Path, help="reviewers CSV")
    p.add_argument("--conflicts", type=Path, help="declared conflicts CSV")
    p.add_argument("--scores", type=Path, help="scores CSV (reviewer_id,paper_id,score)")
    p.add_argument("--reviews", type=_positive, help="reviews wanted per paper (default 3)")
    p.add_argument("--min-reviews", type=_whole, help="reviews each paper must get (default 2)")
    p.add_argument("--cap", type=_whole, help="most papers per reviewer (default 6)")
    p.add_argument("--floor", type=_whole, help="fewest papers per reviewer (default 0)")
    p.add_argument(
        "--unscored",
        choices=("zero", "exclude"),
        help="a pair without a score row: eligible with score 0, or not eligible",
    )
    p.add_argument("--ignore-extra", action="store_true", help="ignore unknown CSV columns")
    p.add_argument("--name", help="session name (default: the output file's stem)")
    p.add_argument("--panel", action="store_true", help="a grant panel: say 'proposal'")
    p.add_argument("--force", action="store_true", help="replace an existing session file")
    p.add_argument("-o", "--output", required=True, type=Path, help="session file to write")

    p = sub.add_parser("plan", help="make the optimal plan and save it in the session")
    p.add_argument("session", type=Path)
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("explain", help="list the papers short of reviews")
    p.add_argument("session", type=Path)
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("export", help="write the plan as CSV")
    p.add_argument("session", type=Path)
    p.add_argument("--to", required=True, type=Path, dest="target", help="CSV file to write")
    p.add_argument("--by", choices=("paper", "reviewer"), default="paper")

    sub.add_parser("schema", help="print the session document's JSON Schema")
    p = sub.add_parser("demo", help="plan the built-in demo session and print its summary")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    return parser


def _emit_json(payload: dict[str, Any]) -> None:
    sys.stdout.write(json.dumps(payload, indent=2, ensure_ascii=False) + "\n")


def _solve(session: Session) -> Session:
    """Plan the session and return it with the new plan in place."""
    from review_alloc.flow import kernels_ready
    from review_alloc.plan import make_plan

    if not kernels_ready():
        print("Preparing the solver (first run on this machine)...", file=sys.stderr)
    outcome = make_plan(session)
    return session.model_copy(update={"plan": outcome.plan})


def _summary_lines(session: Session, summary: dict[str, Any], source: str) -> list[str]:
    noun = "proposal" if session.kind == "panel" else "paper"
    pct = 100.0 * summary["required_coverage"] / max(summary["required_demand"], 1)
    lines = [
        f"{session.name}: plan {'checked, optimal' if summary['checked'] else 'NOT checked'}",
        f"  {noun}s {summary['papers']}, reviewers {summary['reviewers']}, "
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
            f"  gaps: {len(gaps)} {noun}s short of reviews ({missing} reviews missing); "
            f"see `review-alloc explain {source}`"
        )
    else:
        lines.append(f"  gaps: none, every {noun} has all its reviews")
    if summary["overloads"]:
        lines.append(f"  overloads: {len(summary['overloads'])} reviewers above cap")
    if summary["underloads"]:
        lines.append(f"  below floor: {len(summary['underloads'])} reviewers")
    lines.append(CAUTION)
    return lines


def _cmd_import(args: argparse.Namespace) -> int:
    from review_alloc.io import import_csv

    if args.output.exists() and not args.force:
        raise InputError([f"{args.output}: already exists; add --force to replace it"])
    overrides = {
        key: getattr(args, key)
        for key in ("reviews", "min_reviews", "cap", "floor", "unscored")
        if getattr(args, key) is not None
    }
    try:
        policy = Policy(**overrides)
    except ValueError as error:
        raise InputError([f"options: {_first_message(error)}"]) from None
    session = import_csv(
        args.papers,
        args.reviewers,
        args.conflicts,
        args.scores,
        policy=policy,
        ignore_extra=args.ignore_extra,
        name=args.name or args.output.stem,
        kind="panel" if args.panel else "conference",
    )
    save_session(session, args.output)
    print(
        f"{args.output}: {len(session.papers)} papers, {len(session.reviewers)} reviewers, "
        f"{len(session.conflicts)} declared conflicts, {len(session.scores)} scores"
    )
    return EXIT_OK


def _first_message(error: ValueError) -> str:
    errors = getattr(error, "errors", None)
    if callable(errors):
        return "; ".join(
            f"{'.'.join(str(x) for x in e['loc']) or 'policy'}: {e['msg']}" for e in errors()
        )
    return str(error)


def _cmd_plan(args: argparse.Namespace) -> int:
    from review_alloc.plan import plan_summary

    session = _solve(load_session(args.session))
    save_session(session, args.session)
    summary = plan_summary(session, session.plan)
    if args.json:
        _emit_json(summary)
    else:
        print("\n".join(_summary_lines(session, summary, str(args.session))))
    return EXIT_OK


def _cmd_demo(args: argparse.Namespace) -> int:
    from review_alloc.plan import plan_summary
    from review_alloc.samples import workshop

    session = _solve(workshop())
    summary = plan_summary(session, session.plan)
    if getattr(args, "json", False):
        _emit_json(summary)
    else:
        print("\n".join(_summary_lines(session, summary, "SESSION")))
    return EXIT_OK


def _cmd_explain(args: argparse.Namespace) -> int:
    from review_alloc.plan import find_gaps

    session = load_session(args.session)
    if session.plan is None:
        session = _solve(session)
    gaps = find_gaps(session, session.plan)
    if args.json:
        _emit_json(
            {
                "session": session.name,
                "gaps": [
                    {
                        "paper": g.paper,
                        "title": g.title,
                        "assigned": g.assigned,
                        "reviews": g.reviews,
                        "min_reviews": g.min_reviews,
                        "missing": g.missing,
                        "missing_required": g.missing_required,
                    }
                    for g in gaps
                ],
            }
        )
        return EXIT_OK
    noun = "proposal" if session.kind == "panel" else "paper"
    if not gaps:
        print(f"{session.name}: no gaps; every {noun} has all its reviews.")
    else:
        print(f"{session.name}: {len(gaps)} {noun}s short of reviews")
        for g in gaps:
            need = f", {g.missing_required} below the minimum" if g.missing_required else ""
            print(f"  {g.paper}  {g.assigned}/{g.reviews} reviews, missing {g.missing}{need}")
    print(CAUTION)
    return EXIT_OK


def _cmd_export(args: argparse.Namespace) -> int:
    from review_alloc.io import export_plan_csv

    session = load_session(args.session)
    rows = export_plan_csv(session, args.target, by=args.by)
    print(f"{args.target}: {rows} assignments, one row each, by {args.by}")
    return EXIT_OK


def _cmd_schema(args: argparse.Namespace) -> int:
    from review_alloc.model import session_json_schema

    _emit_json(session_json_schema())
    return EXIT_OK


COMMANDS: dict[str, Callable[[argparse.Namespace], int]] = {
    "import": _cmd_import,
    "plan": _cmd_plan,
    "explain": _cmd_explain,
    "export": _cmd_export,
    "schema": _cmd_schema,
    "demo": _cmd_demo,
}


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code (0 ok, 1 bad input, 2 bad usage, 3 check failed)."""
    from review_alloc.plan import PlanCheckError

    args = build_parser().parse_args(argv)
    command = args.command or "demo"
    try:
        return COMMANDS[command](args)
    except InputError as error:
        for line in error.lines:
            print(f"error: {line}", file=sys.stderr)
        return EXIT_INPUT
    except PlanCheckError as error:
        print(f"internal error, plan withheld: {error}", file=sys.stderr)
        return EXIT_CHECK


if __name__ == "__main__":
    sys.exit(main())
