"""Late changes and history: withdraw, reinstate, pin, block, conflict, set, add, and the
history, diff, undo, redo and notify commands.

Each change opens the session through a `Workspace`, applies one change (refused with a reason,
exit 1, when a hard rule forbids it), and saves atomically; a refused or interrupted command
leaves the file as it was.
"""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from review_alloc.cli.common import (
    EXIT_OK,
    UsageError,
    add_output_options,
    emit_json,
    positive,
    whole,
)
from review_alloc.model.errors import InputError
from review_alloc.model.text import nfc

if TYPE_CHECKING:
    from review_alloc.model import Paper, Reviewer
    from review_alloc.workspace import Workspace

Handler = Callable[[argparse.Namespace], int]


def _pair_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("session", type=Path)
    p.add_argument("--reviewer", required=True, metavar="ID", type=nfc)
    p.add_argument("--paper", required=True, metavar="ID", type=nfc)
    p.add_argument("--reason", default="", help="why (kept in the session's history)")
    p.add_argument("--json", action="store_true", help="print one JSON object")


def _one_of_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("session", type=Path)
    who = p.add_mutually_exclusive_group(required=True)
    who.add_argument("--reviewer", metavar="ID", type=nfc)
    who.add_argument("--paper", metavar="ID", type=nfc)
    p.add_argument("--reason", default="", help="why (kept in the session's history)")
    p.add_argument("--json", action="store_true", help="print one JSON object")


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add this module's sub-commands; return their handlers by name."""
    _one_of_options(sub.add_parser("withdraw", help="withdraw a reviewer or a paper"))
    _one_of_options(sub.add_parser("reinstate", help="bring back a withdrawn reviewer or paper"))
    for name, text in (
        ("pin", "make a pair stay in every later plan"),
        ("unpin", "release a pinned pair"),
        ("block", "keep a pair out of every later plan"),
        ("unblock", "allow a blocked pair again"),
        ("conflict", "declare a conflict of interest (the pair leaves the plan at once)"),
    ):
        _pair_options(sub.add_parser(name, help=text))

    p = sub.add_parser("set", help="change a reviewer's cap or floor, or a paper's reviews")
    _one_of_options(p)
    p.add_argument("--cap", type=whole, help="most papers for the reviewer")
    p.add_argument("--floor", type=whole, help="fewest papers for the reviewer")
    p.add_argument("--reviews", type=positive, help="reviews wanted for the paper")
    p.add_argument("--min-reviews", type=whole, help="reviews the paper must get")

    p = sub.add_parser("add-reviewer", help="add a new reviewer")
    p.add_argument("session", type=Path)
    p.add_argument("--id", required=True, dest="entity_id", metavar="ID")
    p.add_argument("--name", default="")
    p.add_argument("--email", default="")
    p.add_argument("--institution", default="")
    p.add_argument("--topics", default="", help="';'-separated")
    p.add_argument("--cap", type=whole)
    p.add_argument("--floor", type=whole)
    p.add_argument("--senior", action="store_true")
    p.add_argument(
        "--score", action="append", default=[], metavar="PAPER=VALUE", help="a fit score (repeat)"
    )
    p.add_argument("--reason", default="")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("add-paper", help="add a new paper")
    p.add_argument("session", type=Path)
    p.add_argument("--id", required=True, dest="entity_id", metavar="ID")
    p.add_argument("--title", default="")
    p.add_argument("--topics", default="", help="';'-separated")
    p.add_argument("--authors", default="", help="authors' e-mail addresses, ';'-separated")
    p.add_argument("--institutions", default="", help="';'-separated")
    p.add_argument("--reviews", type=positive)
    p.add_argument("--min-reviews", type=whole)
    p.add_argument(
        "--score",
        action="append",
        default=[],
        metavar="REVIEWER=VALUE",
        help="a fit score (repeat)",
    )
    p.add_argument("--reason", default="")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("history", help="list the plan revisions and the changes between them")
    p.add_argument("session", type=Path)
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("diff", help="what changed between two revisions (default: the last two)")
    p.add_argument("session", type=Path)
    p.add_argument("old", nargs="?", type=positive, metavar="A")
    p.add_argument("new", nargs="?", type=positive, metavar="B")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("undo", help="go back to the previous revision: its plan and its data")
    p.add_argument("session", type=Path)
    p.add_argument("--reason", default="")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("redo", help="go forward again to the revision the last undo left")
    p.add_argument("session", type=Path)
    p.add_argument("--reason", default="")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("notify", help="write who to tell about changed assignments (CSV)")
    p.add_argument("session", type=Path)
    p.add_argument("--since", required=True, type=positive, metavar="REV")
    p.add_argument(
        "--to", required=True, dest="target", metavar="FILE.csv", help="'-': standard output"
    )
    add_output_options(p)
    p.add_argument("--json", action="store_true", help="print one JSON object")
    handlers: dict[str, Handler] = {
        "withdraw": _cmd_withdraw,
        "reinstate": _cmd_reinstate,
        "pin": _pair_command("pin"),
        "unpin": _pair_command("unpin"),
        "block": _pair_command("block"),
        "unblock": _pair_command("unblock"),
        "conflict": _pair_command("declare_conflict"),
        "set": _cmd_set,
        "add-reviewer": _cmd_add_reviewer,
        "add-paper": _cmd_add_paper,
        "history": _cmd_history,
        "diff": _cmd_diff,
        "undo": _cmd_undo,
        "redo": _cmd_redo,
        "notify": _cmd_notify,
    }
    return {name: _naming_session(handler) for name, handler in handlers.items()}


def _naming_session(handler: Handler) -> Handler:
    """The handler, with every refused change's lines naming the session file it concerns."""

    def run(args: argparse.Namespace) -> int:
        # The workspace loads the solver, so it is imported only when a command runs.
        from review_alloc.workspace import session_lock

        try:
            # Held from load to save: a second writer waits, then changes the newer file.
            with session_lock(args.session, required=False):
                return handler(args)
        except InputError as error:
            where = str(args.session)
            lines = [line if line.startswith(where) else f"{where}: {line}" for line in error.lines]
            raise InputError(lines) from None

    run.__doc__ = handler.__doc__
    return run


def _finish(ws: Workspace, args: argparse.Namespace, before: int | None) -> int:
    """Save, then report the recorded event and how many assignments left the plan."""
    ws.save()
    event = ws.session.events[-1]
    plan = ws.session.plan
    after = len(plan.assignments) if plan is not None else None
    dropped = before - after if before is not None and after is not None else 0
    if args.json:
        emit_json(
            args,
            {
                "session": ws.session.name,
                "event": event.model_dump(mode="json"),
                "assignments_removed": dropped,
                "revision": ws.session.revision,
            }
        )
    else:
        line = f"{args.session}: {event.describe()}"
        if dropped:
            line += f"; {dropped} assignments left the plan (plan again to fill the gaps)"
        print(line)
    return EXIT_OK


def _open(args: argparse.Namespace) -> tuple[Workspace, int | None]:
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    plan = ws.session.plan
    return ws, (len(plan.assignments) if plan is not None else None)


def _cmd_withdraw(args: argparse.Namespace) -> int:
    ws, before = _open(args)
    if args.reviewer is not None:
        ws.withdraw_reviewer(args.reviewer, args.reason)
    else:
        ws.withdraw_paper(args.paper, args.reason)
    return _finish(ws, args, before)


def _cmd_reinstate(args: argparse.Namespace) -> int:
    ws, before = _open(args)
    if args.reviewer is not None:
        ws.reinstate_reviewer(args.reviewer, args.reason)
    else:
        ws.reinstate_paper(args.paper, args.reason)
    return _finish(ws, args, before)


def _pair_command(method: str) -> Handler:
    def run(args: argparse.Namespace) -> int:
        ws, before = _open(args)
        if method == "declare_conflict":
            ws.declare_conflict(args.reviewer, args.paper, args.reason or "declared")
        else:
            getattr(ws, method)(args.reviewer, args.paper, args.reason)
        return _finish(ws, args, before)

    run.__doc__ = f"Run the {method} change on one pair."
    return run


def _cmd_set(args: argparse.Namespace) -> int:
    if args.reviewer is not None:
        if args.reviews is not None or args.min_reviews is not None:
            raise UsageError("--reviews and --min-reviews apply to a paper, not a reviewer")
        if args.cap is None and args.floor is None:
            raise UsageError("give --cap or --floor (or both) for the reviewer")
        ws, before = _open(args)
        ws.set_reviewer(args.reviewer, cap=args.cap, floor=args.floor, reason=args.reason)
    else:
        if args.cap is not None or args.floor is not None:
            raise UsageError("--cap and --floor apply to a reviewer, not a paper")
        if args.reviews is None and args.min_reviews is None:
            raise UsageError("give --reviews or --min-reviews (or both) for the paper")
        ws, before = _open(args)
        ws.set_paper(
            args.paper, reviews=args.reviews, min_reviews=args.min_reviews, reason=args.reason
        )
    return _finish(ws, args, before)


def _split(text: str) -> list[str]:
    return [part.strip() for part in text.split(";") if part.strip()]


def _scores(items: list[str]) -> dict[str, float]:
    """`ID=VALUE` options as a dict; a bad one is an InputError naming it."""
    found: dict[str, float] = {}
    for item in items:
        key, eq, text = item.partition("=")
        try:
            value = float(text)
        except ValueError:
            value = math.nan
        if not eq or not key.strip() or not math.isfinite(value) or value < 0:
            raise InputError([f"--score {item!r}: expected ID=VALUE with a number >= 0"])
        if key.strip() in found:
            raise InputError([f"--score {item!r}: {key.strip()} is scored twice"])
        found[key.strip()] = value
    return found


def _entity(cls: type[Reviewer] | type[Paper], fields: dict[str, object]) -> Reviewer | Paper:
    try:
        return cls.model_validate(fields)
    except ValueError as error:
        lines = [
            f"--{'.'.join(str(x) for x in e['loc']).replace('_', '-')}: {e['msg']}"
            for e in getattr(error, "errors", list)()
        ]
        raise InputError(lines or [str(error)]) from None


def _cmd_add_reviewer(args: argparse.Namespace) -> int:
    fields: dict[str, object] = {
        "id": args.entity_id,
        "name": args.name,
        "email": args.email,
        "institution": args.institution,
        "topics": _split(args.topics),
        "cap": args.cap,
        "floor": args.floor,
        "senior": args.senior,
    }
    from review_alloc.model import Reviewer

    reviewer = _entity(Reviewer, fields)
    scores = _scores(args.score)
    ws, before = _open(args)
    ws.add_reviewer(reviewer, args.reason, scores=scores)
    return _finish(ws, args, before)


def _cmd_add_paper(args: argparse.Namespace) -> int:
    fields: dict[str, object] = {
        "id": args.entity_id,
        "title": args.title,
        "topics": _split(args.topics),
        "authors": _split(args.authors),
        "institutions": _split(args.institutions),
        "reviews": args.reviews,
        "min_reviews": args.min_reviews,
    }
    from review_alloc.model import Paper

    paper = _entity(Paper, fields)
    scores = _scores(args.score)
    ws, before = _open(args)
    ws.add_paper(paper, args.reason, scores=scores)
    return _finish(ws, args, before)


def _cmd_history(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    entries = ws.history()
    if args.json:
        emit_json(args, {"session": ws.session.name, "revisions": [e.to_json() for e in entries]})
        return EXIT_OK
    if not entries:
        print(f"{ws.session.name}: no revisions yet; `review-alloc plan {args.session}` makes one")
        return EXIT_OK
    print(f"{ws.session.name}: {len(entries)} revisions")
    for e in entries:
        f = e.figures
        mark = "*" if e.current else " "
        origin = "fresh" if e.fresh else (f"from {e.parent}" if e.parent else "first")
        kept = f", kept {e.kept}/{e.parent_pairs}" if e.kept is not None else ""
        print(
            f"{mark} {e.number:>3}  {e.created_at:%Y-%m-%d %H:%M:%S}  {origin}{kept}; coverage "
            f"{f.coverage}/{f.demand}, required {f.required_coverage}/{f.required_demand}, "
            f"score {f.total_score:.2f}"
        )
        for line in e.changes:
            print(f"        {line}")
    print("(* marks the current revision)")
    return EXIT_OK


def _cmd_diff(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    change = ws.diff(args.old, args.new)
    if args.json:
        emit_json(args, {"session": ws.session.name, **change.to_json()})
        return EXIT_OK
    print(
        f"{ws.session.name}: revision {change.old} -> {change.new}: {change.old_pairs} -> "
        f"{change.new_pairs} assignments, kept {change.kept}, added {len(change.added)}, "
        f"removed {len(change.removed)}"
    )
    names = {r.id: r.name for r in ws.session.reviewers}
    titles = {p.id: p.title for p in ws.session.papers}

    def person(who: str) -> str:
        return f"{who} {names[who]}" if names.get(who) else who

    def paper(what: str) -> str:
        return f'{what} "{titles[what]}"' if titles.get(what) else what

    if change.by_reviewer:
        print("by reviewer:")
        for who, c in change.by_reviewer.items():
            print(f"  {person(who)}:")
            _print_changes(c.added, c.removed, paper)
    if change.by_paper:
        print(f"by {ws.noun}:")
        for what, c in change.by_paper.items():
            print(f"  {paper(what)}:")
            _print_changes(c.added, c.removed, person)
    return EXIT_OK


def _print_changes(
    added: list[str], removed: list[str], show: Callable[[str], str]
) -> None:
    """One line per id gained (`+`) or lost (`-`), with its name or title."""
    for x in added:
        print(f"    + {show(x)}")
    for x in removed:
        print(f"    - {show(x)}")


def _cmd_undo(args: argparse.Namespace) -> int:
    return _step(args, forward=False)


def _cmd_redo(args: argparse.Namespace) -> int:
    return _step(args, forward=True)


def _step(args: argparse.Namespace, *, forward: bool) -> int:
    """`undo` or `redo`: one step through the revisions, saved, said in words or JSON."""
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    left = ws.session.revision
    target = ws.redo(args.reason) if forward else ws.undo(args.reason)
    ws.save()
    if args.json:
        emit_json(args, {"session": ws.session.name, "from": left, "revision": target})
    else:
        way = "forward" if forward else "back"
        print(f"{args.session}: {way} to revision {target} (plan and data) from revision {left}")
    return EXIT_OK


def _cmd_notify(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    if args.target == "-" and args.json:
        raise UsageError("--json prints the result on standard output; give --to a file")
    ws = Workspace.open(args.session)
    if args.target == "-":
        sys.stdout.write(ws.notify_text(args.since, bom=args.bom))
        return EXIT_OK
    target = Path(args.target)
    count = ws.write_notices(args.since, target, force=args.force, bom=args.bom)
    _, rows = ws.notify_table(args.since)
    if args.json:
        emit_json(
            args,
            {
                "session": ws.session.name,
                "since": args.since,
                "revision": ws.session.revision,
                "to": str(target),
                "reviewers": [row[0] for row in rows],
            }
        )
    else:
        print(
            f"{target}: {count} reviewers to tell about changes from revision "
            f"{args.since} to {ws.session.revision}"
        )
    return EXIT_OK
