"""The first commands: import, plan, explain (gaps), export, schema, demo."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path

from review_alloc.cli.common import (
    CAUTION,
    EXIT_OK,
    emit_json,
    noun,
    positive,
    solve,
    summary_lines,
    validation_message,
    whole,
)
from review_alloc.model import InputError, Policy, load_session, save_session

Handler = Callable[[argparse.Namespace], int]


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add this module's sub-commands; return their handlers by name."""
    p = sub.add_parser("import", help="build a session file from CSV files")
    p.add_argument("--papers", required=True, type=Path, help="papers CSV")
    p.add_argument("--reviewers", required=True, type=Path, help="reviewers CSV")
    p.add_argument("--conflicts", type=Path, help="declared conflicts CSV")
    p.add_argument("--scores", type=Path, help="scores CSV (reviewer_id,paper_id,score)")
    p.add_argument("--reviews", type=positive, help="reviews wanted per paper (default 3)")
    p.add_argument("--min-reviews", type=whole, help="reviews each paper must get (default 2)")
    p.add_argument("--cap", type=whole, help="most papers per reviewer (default 6)")
    p.add_argument("--floor", type=whole, help="fewest papers per reviewer (default 0)")
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
    p.add_argument(
        "--fresh", action="store_true", help="ignore the earlier plan (keep none of its pairs)"
    )
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
    return {
        "import": _cmd_import,
        "plan": _cmd_plan,
        "explain": _cmd_explain,
        "export": _cmd_export,
        "schema": _cmd_schema,
        "demo": _cmd_demo,
    }


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
        raise InputError([f"options: {validation_message(error)}"]) from None
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
        f"{args.output}: {len(session.papers)} {noun(session)}s, {len(session.reviewers)} "
        f"reviewers, {len(session.conflicts)} declared conflicts, {len(session.scores)} scores"
    )
    return EXIT_OK


def _cmd_plan(args: argparse.Namespace) -> int:
    from review_alloc.flow import kernels_ready
    from review_alloc.plan import plan_summary
    from review_alloc.workspace import Workspace

    # Through the Workspace so that the plan keeps earlier pairs and becomes a revision.
    ws = Workspace.open(args.session)
    if not kernels_ready():
        print("Preparing the solver (first run on this machine)...", file=sys.stderr)
    ws.solve(fresh=args.fresh)
    ws.save()
    session = ws.session
    summary = plan_summary(session, session.plan)
    revision = ws.revisions[-1]
    summary["revision"] = revision.number
    summary["kept"] = revision.kept
    if args.json:
        emit_json(summary)
    else:
        lines = summary_lines(session, summary, str(args.session))
        if revision.kept is not None:
            lines.insert(
                1,
                f"  revision {revision.number}: kept {revision.kept} of the "
                f"{revision.parent_pairs} pairs of revision {revision.parent}"
                + (" (fresh plan)" if revision.fresh else ""),
            )
        print("\n".join(lines))
    return EXIT_OK


def _cmd_demo(args: argparse.Namespace) -> int:
    from review_alloc.plan import plan_summary
    from review_alloc.samples import workshop

    session = solve(workshop())
    summary = plan_summary(session, session.plan)
    if getattr(args, "json", False):
        emit_json(summary)
    else:
        print("\n".join(summary_lines(session, summary, "SESSION")))
    return EXIT_OK


def _cmd_explain(args: argparse.Namespace) -> int:
    from dataclasses import asdict

    from review_alloc.plan import find_gaps

    session = load_session(args.session)
    if session.plan is None:
        session = solve(session)
    gaps = find_gaps(session, session.plan)
    if args.json:
        emit_json({"session": session.name, "gaps": [asdict(g) for g in gaps]})
        return EXIT_OK
    word = noun(session)
    if not gaps:
        print(f"{session.name}: no gaps; every {word} has all its reviews.")
    else:
        print(f"{session.name}: {len(gaps)} {word}s short of reviews")
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

    emit_json(session_json_schema())
    return EXIT_OK
