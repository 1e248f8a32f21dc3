"""`explain` (why papers are short, and the smallest fixes) and `whatif` (try a change)."""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from review_alloc.cli.common import EXIT_OK, UsageError, caution, emit_json, positive, whole

if TYPE_CHECKING:
    from review_alloc.model import Session
    from review_alloc.plan.whatif import WhatIf
    from review_alloc.workspace import ChangeSet, Workspace

Handler = Callable[[argparse.Namespace], int]

FIX_CHOICES = ("raise-caps-min", "recruit-min", "raise-caps", "recruit")
"""The fixes `whatif --apply-fix` takes: to every paper's minimum (-min), or to full coverage."""


def name_and_count(text: str) -> tuple[str, int]:
    """argparse type: `NAME=N` with N a whole number >= 1 (the name may itself contain '=')."""
    name, eq, amount = text.rpartition("=")
    if not eq or not name.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not of the form NAME=N")
    try:
        value = int(amount)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: {amount!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: the number must be >= 1")
    return name.strip(), value


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add `explain` and `whatif`; return their handlers by name."""
    p = sub.add_parser(
        "explain",
        help="say why papers are short of reviews and the smallest changes that fix it",
    )
    p.add_argument("session", type=Path)
    p.add_argument(
        "--limit",
        type=positive,
        metavar="N",
        help="list at most N items of each list (default: every gap, reviewer and fix)",
    )
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser(
        "whatif",
        help="plan a changed copy of the session; the file is unchanged unless --accept",
    )
    p.add_argument("session", type=Path)
    p.add_argument(
        "--raise-cap",
        action="append",
        default=[],
        type=name_and_count,
        metavar="REVIEWER=N",
        help="raise this reviewer's cap by N (repeatable)",
    )
    p.add_argument(
        "--add-reviewers",
        action="append",
        default=[],
        type=name_and_count,
        metavar="TOPIC=N",
        help="add N new reviewers in this topic, at the policy's cap (repeatable)",
    )
    p.add_argument(
        "--allow-overload",
        type=whole,
        metavar="N",
        help="let every reviewer take up to N papers above cap when coverage needs it",
    )
    p.add_argument(
        "--apply-fix",
        action="append",
        default=[],
        choices=FIX_CHOICES,
        help="apply a computed fix: raised caps or recruits per topic, reaching every paper's "
        "minimum (raise-caps-min, recruit-min) or every paper's full reviews (raise-caps, "
        "recruit)",
    )
    p.add_argument("--accept", action="store_true", help="save the changed session and its plan")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    return {"explain": _cmd_explain, "whatif": _cmd_whatif}


def _cmd_explain(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    session = ws.session
    report = ws.explain_report()
    if args.json:
        emit_json(args, report)
    else:
        print("\n".join(explain_lines(session, report, str(args.session), args.limit)))
    return EXIT_OK


def _target_lines(targets: list[dict[str, Any]], source: str, word: str) -> list[str]:
    """One line per fix and target, the minimum first, with its cost in people and caps."""
    if not targets:
        return []
    aim = {
        "minimum": f"every {word} at its minimum (required reviews)",
        "full": f"every {word} fully reviewed",
    }
    lines = ["", "Fixes by target (each computed exactly; cost in people and caps):"]
    for t in targets:
        if t["kind"] == "raise-caps":
            cost = f"ask {t['people']} reviewers to take {t['caps']} more in all"
        else:
            cost = f"recruit {t['people']} new reviewers, no cap raised"
        reach = "reached" if t["reaches"] else "as near as it can get"
        lines.append(
            f"  {aim[t['target']]}: {cost} ({t['coverage_before']} -> {t['coverage_after']} "
            f"of {t['demand']}, {reach}); try it: review-alloc whatif {source} "
            f"--apply-fix {t['key']}"
        )
    return lines


class _Names:
    """Ids with the name or title beside them, and lists cut at the chair's `--limit`."""

    def __init__(self, session: Session, limit: int | None) -> None:
        self.titles = {p.id: p.title for p in session.papers}
        self.names = {r.id: r.name for r in session.reviewers}
        self.limit = limit

    def paper(self, paper: str) -> str:
        """`P12 "Title"` (the id alone when there is no title)."""
        title = self.titles.get(paper, "")
        return f'{paper} "{title}"' if title else paper

    def reviewer(self, reviewer: str) -> str:
        """`R7 Name` (the id alone when there is no name)."""
        name = self.names.get(reviewer, "")
        return f"{reviewer} {name}" if name else reviewer

    def cut(self, items: list[Any]) -> tuple[list[Any], str | None]:
        """The items to show, and the line that says how many were left out (or None)."""
        if self.limit is None or len(items) <= self.limit:
            return list(items), None
        rest = len(items) - self.limit
        return list(items[: self.limit]), f"... and {rest} more (drop --limit to see all)"

    def listed(self, ids: list[str], show: Callable[[str], str]) -> str:
        """The ids on one line, each with its name or title, cut at the limit."""
        shown, more = self.cut(ids)
        text = "; ".join(show(x) for x in shown)
        return text + (f" ... ({len(ids)} in all)" if more else "")


def explain_lines(
    session: Session, report: dict[str, Any], source: str, limit: int | None = None
) -> list[str]:
    """The plain-text explanation: every gap, group and fix (at most `limit` of each list),
    each id with its title or name beside it."""
    word = session.noun
    names = _Names(session, limit)
    gaps = report["gaps"]
    lines: list[str] = []
    if not gaps:
        lines.append(f"{session.name}: no gaps; every {word} has all its reviews.")
    else:
        missing = sum(g["missing"] for g in gaps)
        below = sum(g["missing_required"] for g in gaps)
        lines.append(
            f"{session.name}: {len(gaps)} {word}s short of reviews ({missing} reviews missing, "
            f"{below} of them below the minimum)"
        )
    tier_words = {"reviews": "all reviews", "min_reviews": "required reviews"}
    for group in report["groups"]:
        papers = group["papers"]
        topic = f" in '{group['topics'][0]}'" if group["topics"] else ""
        lines += [
            "",
            f"Shortfall group {group['id']} ({tier_words[group['tier']]}): {len(papers)} "
            f"{word}s{topic}",
            f"  needed {group['needed']}, available {group['available']}, "
            f"shortfall {group['shortfall']}",
            f"  {word}s: {names.listed(papers, names.paper)}",
            f"  eligible reviewers: {names.listed(group['reviewers'], names.reviewer)}",
            f"  cause: {group['cause']}",
        ]
    if gaps:
        lines += ["", f"Gaps ({word}: assigned/reviews, missing):"]
        shown, more = names.cut(gaps)
        for g in shown:
            below = f", {g['missing_required']} below the minimum" if g["missing_required"] else ""
            lines.append(
                f"  {names.paper(g['paper'])}  {g['assigned']}/{g['reviews']}, "
                f"missing {g['missing']}{below}"
            )
        lines += [f"  {more}"] if more else []
    for key, label, sign in (("overloads", "Above cap", "+"), ("underloads", "Below floor", "")):
        if report[key]:
            lines += ["", f"{label}:"]
            shown, more = names.cut(report[key])
            lines += [
                f"  {x['reviewer']} {x['name']}: load {x['load']}, cap {x['cap']}, "
                f"floor {x['floor']} ({sign}{x['excess']})"
                for x in shown
            ]
            lines += [f"  {more}"] if more else []
    fixes = report["fixes"]
    if gaps:
        lines += _target_lines(report.get("targets", []), source, word)
        lines += ["", "Smallest fixes (computed exactly):"]
        if not fixes.get("coverage_after_exact", True):
            lines.append(
                "  (the senior rule ranks above all reviews, so the coverage after each fix "
                "is at most the figure shown; `whatif` shows what a re-plan reaches)"
            )
        lines += _cap_lines(fixes["raise_caps"], source, names)
        lines += _recruit_lines(fixes["recruit"], source, word, names)
        losses = fixes["conflicts_and_blocks"]["pairs"]
        if losses:
            lines.append("  Conflicts and blocks that keep reviews away (information only):")
            shown, more = names.cut(losses)
            for x in shown:
                gain = f"{x['gain']}" if x["exact"] else f"at least {x['gain']}"
                lines.append(
                    f"    {names.reviewer(x['reviewer'])} ({x['kind']}): "
                    f"{names.listed(x['papers'], names.paper)}; allowing them would add {gain}"
                )
            lines += [f"    {more}"] if more else []
    lines += ["", *report["cautions"], caution()]
    return lines


def _cap_lines(fix: dict[str, Any], source: str, names: _Names) -> list[str]:
    if not fix["raises"]:
        return ["  a) raising caps cannot add any review"]
    lines = [
        f"  a) raise caps by {fix['total']} in total (coverage {fix['coverage_before']} -> "
        f"{fix['coverage_after']} of {fix['demand']}):"
    ]
    shown, more = names.cut(fix["raises"])
    lines += [
        f"     {r['reviewer']} {r['name']}: cap {r['cap']} -> {r['new_cap']} (+{r['raise_by']})"
        for r in shown
    ]
    lines += [f"     {more}"] if more else []
    lines += _unclosable(fix["unclosable"], names)
    lines.append(f"     try it: review-alloc whatif {source} --apply-fix raise-caps")
    return lines


def _unclosable(items: list[dict[str, Any]], names: _Names) -> list[str]:
    shown, more = names.cut(items)
    lines = [f"     cannot close {names.paper(u['paper'])} this way: {u['reason']}" for u in shown]
    return lines + ([f"     {more}"] if more else [])


def _recruit_lines(fix: dict[str, Any], source: str, word: str, names: _Names) -> list[str]:
    if fix["note"] and not fix["needs"]:
        return [f"  b) recruits: not computed; {fix['note']}"]
    if not fix["needs"]:
        return ["  b) recruiting cannot add any review"]
    lines = [
        f"  b) recruit {fix['total']} reviewers (coverage {fix['coverage_before']} -> "
        f"{fix['coverage_after']} of {fix['demand']}), assuming each takes up to "
        f"{fix['recruit_cap']} {word}s:"
    ]
    lines += [f"     {n['profile']}" for n in fix["needs"]]
    if fix["note"]:
        lines.append(f"     note: {fix['note']}")
    lines += _unclosable(fix["unclosable"], names)
    lines.append(f"     try it: review-alloc whatif {source} --apply-fix recruit")
    return lines


def _cmd_whatif(args: argparse.Namespace) -> int:
    from review_alloc.workspace import ChangeSet, Workspace

    changes = ChangeSet(
        fixes=tuple(args.apply_fix),
        raise_caps=_summed(args.raise_cap),
        add_reviewers=_summed(args.add_reviewers),
        allow_overload=args.allow_overload,
        labels={"raise_caps": "--raise-cap", "add_reviewers": "--add-reviewers"},
    )
    if changes.is_empty():
        raise UsageError(
            "give at least one change (--raise-cap, --add-reviewers, --allow-overload or "
            "--apply-fix)"
        )
    with Workspace.editing(args.session) as ws:
        return _whatif_in(ws, changes, args)


def _whatif_in(ws: Workspace, changes: ChangeSet, args: argparse.Namespace) -> int:
    original = ws.session
    result = ws.what_if(changes)
    revision = None
    if args.accept:
        # One recorded change and one revision; `undo` takes both back.
        revision = ws.accept(result, reason="whatif --accept", action="accept-whatif")
        ws.save()
    known = {r.id for r in original.reviewers}
    added = [r.id for r in result.session.reviewers if r.id not in known]
    payload = whatif_payload(result, added=added, accepted=args.accept, revision=revision)
    if args.json:
        emit_json(args, payload)
    else:
        print("\n".join(whatif_lines(original, payload, str(args.session))))
    return EXIT_OK


def _summed(pairs: list[tuple[str, int]]) -> dict[str, int]:
    """NAME=N options added up by name, in the order first given."""
    out: dict[str, int] = {}
    for name, n in pairs:
        out[name] = out.get(name, 0) + n
    return out


def whatif_payload(
    result: WhatIf, *, added: list[str], accepted: bool, revision: int | None = None
) -> dict[str, Any]:
    """The JSON object of `whatif`."""
    from dataclasses import asdict

    over, under = result.overloads, result.underloads
    return {
        "session": result.session.name,
        "changes": list(result.changes),
        "before": result.before.figures.model_dump(),
        "after": result.after.figures.model_dump(),
        "gaps_before": [asdict(g) for g in result.gaps_before],
        "gaps_after": [asdict(g) for g in result.gaps_after],
        "overloads": [asdict(x) for x in over],
        "underloads": [asdict(x) for x in under],
        "new_reviewers": added,
        "moves": _moves(result),
        "accepted": accepted,
        "revision": revision,
    }


def _moves(result: WhatIf) -> dict[str, Any] | None:
    """Pairs that move from the earlier plan and the reviewers to tell (None: no plan yet)."""
    moves = result.moves
    if moves is None:
        return None
    people = {r.id: r for r in result.session.reviewers}
    return {
        "added": [{"reviewer": r, "paper": p} for r, p in moves.added],
        "removed": [{"reviewer": r, "paper": p} for r, p in moves.removed],
        "to_tell": [
            {
                "reviewer": rid,
                "name": people[rid].name,
                "email": people[rid].email,
                **moves.by_reviewer[rid].to_json(),
            }
            for rid in result.to_tell()
        ],
    }


def moves_lines(payload: dict[str, Any], limit: int = 12) -> list[str]:
    """How many pairs move and whom to tell, in a few lines."""
    moves = payload["moves"]
    if moves is None:
        return ["  pairs moved: none yet (no plan has been made, so nobody has been told)"]
    tell = moves["to_tell"]
    lines = [
        f"  pairs moved: {len(moves['added']) + len(moves['removed'])} "
        f"(+{len(moves['added'])} / -{len(moves['removed'])} against the current plan)",
        f"  reviewers to tell: {len(tell)}"
        + (f", and {len(payload['new_reviewers'])} new reviewers to find"
           if payload["new_reviewers"] else ""),
    ]
    for x in tell[:limit]:
        name = f" {x['name']}" if x["name"] else ""
        change = ", ".join(
            [f"+{p}" for p in x["added"]] + [f"-{p}" for p in x["removed"]]
        )
        lines.append(f"    {x['reviewer']}{name}: {change}")
    if len(tell) > limit:
        lines.append(f"    ... and {len(tell) - limit} more (--json lists them all)")
    return lines


def whatif_lines(session: Session, payload: dict[str, Any], source: str) -> list[str]:
    """The short plain-text what-if report."""
    word = session.noun
    b, a = payload["before"], payload["after"]
    lines = [f"{session.name}: what if"]
    lines += [f"  - {c}" for c in payload["changes"]] or ["  (no change)"]
    lines += [
        f"  required reviews {b['required_coverage']} -> {a['required_coverage']} "
        f"of {a['required_demand']}",
        f"  all reviews      {b['coverage']} -> {a['coverage']} of {a['demand']}",
        f"  total score      {b['total_score']:.2f} -> {a['total_score']:.2f}",
        f"  {word}s short of reviews: {len(payload['gaps_before'])} -> "
        f"{len(payload['gaps_after'])}",
    ]
    if payload["overloads"]:
        lines.append(f"  reviewers above cap: {len(payload['overloads'])}")
    lines += moves_lines(payload)
    if payload["accepted"]:
        lines.append(
            f"  saved to {source} as revision {payload['revision']} with its new plan "
            f"(review-alloc undo {source} takes it back)"
        )
    else:
        lines.append(f"  {source} is unchanged; add --accept to save this change and its plan")
    lines.append(caution())
    return lines
