"""`explain` (why papers are short, and the smallest fixes) and `whatif` (try a change)."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from review_alloc.cli.common import CAUTION, EXIT_OK, EXIT_USAGE, emit_json, noun, whole
from review_alloc.model import Session, load_session, save_session

if TYPE_CHECKING:
    from review_alloc.plan.whatif import WhatIf

Handler = Callable[[argparse.Namespace], int]

_LISTED = 12
FIX_CHOICES = ("raise-caps", "recruit")


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
        help="apply the fix `explain` suggests: raised caps, or recruits per topic",
    )
    p.add_argument("--accept", action="store_true", help="save the changed session and its plan")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    return {"explain": _cmd_explain, "whatif": _cmd_whatif}


def _cmd_explain(args: argparse.Namespace) -> int:
    from review_alloc.plan.explain_report import explain_session

    session = load_session(args.session)
    report = explain_session(session)
    if args.json:
        emit_json(report)
    else:
        print("\n".join(explain_lines(session, report, str(args.session))))
    return EXIT_OK


def explain_lines(session: Session, report: dict[str, Any], source: str) -> list[str]:
    """The short plain-text explanation."""
    word = noun(session)
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
            f"  {word}s: {_listed(papers)}",
            f"  eligible reviewers: {_listed(group['reviewers'])}",
            f"  cause: {group['cause']}",
        ]
    if gaps:
        lines += ["", f"Gaps ({word}: assigned/reviews, missing):"]
        for g in gaps[:_LISTED]:
            below = f", {g['missing_required']} below the minimum" if g["missing_required"] else ""
            lines.append(
                f"  {g['paper']}  {g['assigned']}/{g['reviews']}, missing {g['missing']}{below}"
            )
        if len(gaps) > _LISTED:
            lines.append(f"  ... and {len(gaps) - _LISTED} more (see --json)")
    for key, label, sign in (("overloads", "Above cap", "+"), ("underloads", "Below floor", "")):
        if report[key]:
            lines += ["", f"{label}:"]
            lines += [
                f"  {x['reviewer']} {x['name']}: load {x['load']}, cap {x['cap']}, "
                f"floor {x['floor']} ({sign}{x['excess']})"
                for x in report[key][:_LISTED]
            ]
    fixes = report["fixes"]
    if gaps:
        lines += ["", "Smallest fixes (computed exactly):"]
        lines += _cap_lines(fixes["raise_caps"], source)
        lines += _recruit_lines(fixes["recruit"], source, word)
        losses = fixes["conflicts_and_blocks"]["pairs"]
        if losses:
            lines.append("  Conflicts and blocks that keep reviews away (information only):")
            for x in losses[:_LISTED]:
                gain = f"{x['gain']}" if x["exact"] else f"at least {x['gain']}"
                lines.append(
                    f"    {x['reviewer']} ({x['kind']}): {_listed(x['papers'])}; "
                    f"allowing them would add {gain}"
                )
    lines += ["", *report["cautions"], CAUTION]
    return lines


def _cap_lines(fix: dict[str, Any], source: str) -> list[str]:
    if not fix["raises"]:
        return ["  a) raising caps cannot add any review"]
    lines = [
        f"  a) raise caps by {fix['total']} in total (coverage {fix['coverage_before']} -> "
        f"{fix['coverage_after']} of {fix['demand']}):"
    ]
    lines += [
        f"     {r['reviewer']} {r['name']}: cap {r['cap']} -> {r['new_cap']} (+{r['raise_by']})"
        for r in fix["raises"][:_LISTED]
    ]
    if len(fix["raises"]) > _LISTED:
        lines.append(f"     ... and {len(fix['raises']) - _LISTED} more")
    for u in fix["unclosable"][:_LISTED]:
        lines.append(f"     cannot close {u['paper']} this way: {u['reason']}")
    lines.append(f"     try it: review-alloc whatif {source} --apply-fix raise-caps")
    return lines


def _recruit_lines(fix: dict[str, Any], source: str, word: str) -> list[str]:
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
    for u in fix["unclosable"][:_LISTED]:
        lines.append(f"     cannot close {u['paper']} this way: {u['reason']}")
    lines.append(f"     try it: review-alloc whatif {source} --apply-fix recruit")
    return lines


def _listed(ids: list[str] | tuple[str, ...]) -> str:
    shown = ", ".join(ids[:_LISTED])
    return shown + (f" ... ({len(ids)} in all)" if len(ids) > _LISTED else "")


def _cmd_whatif(args: argparse.Namespace) -> int:
    from review_alloc.plan.explain import coverage_network
    from review_alloc.plan.fixes import raise_caps_fix, recruit_fix
    from review_alloc.plan.whatif import (
        add_recruits,
        allow_overload,
        apply_cap_fix,
        apply_recruit_fix,
        raise_caps,
        what_if,
    )

    if not (args.raise_cap or args.add_reviewers or args.apply_fix) and args.allow_overload is None:
        print(
            "error: whatif: give at least one change (--raise-cap, --add-reviewers, "
            "--allow-overload or --apply-fix)",
            file=sys.stderr,
        )
        return EXIT_USAGE
    original = load_session(args.session)
    changed = original
    changes: list[str] = []
    for fix_name in dict.fromkeys(args.apply_fix):
        cov = coverage_network(changed, "reviews")
        if fix_name == "raise-caps":
            fix = raise_caps_fix(cov)
            changed = apply_cap_fix(changed, fix)
            changes += [f"raise cap of {r.reviewer} by {r.raise_by}" for r in fix.raises]
        else:
            recruits = recruit_fix(cov)
            changed = apply_recruit_fix(changed, recruits)
            changes += [f"add {n.recruits} reviewers in '{n.topic}'" for n in recruits.needs]
    if args.raise_cap:
        raises: dict[str, int] = {}
        for rid, n in args.raise_cap:
            raises[rid] = raises.get(rid, 0) + n
        changed = raise_caps(changed, raises, label="--raise-cap")
        changes += [f"raise cap of {rid} by {n}" for rid, n in raises.items()]
    if args.add_reviewers:
        counts: dict[str, int] = {}
        for topic, n in args.add_reviewers:
            counts[topic] = counts.get(topic, 0) + n
        changed = add_recruits(changed, counts, label="--add-reviewers")
        changes += [f"add {n} reviewers in '{topic}'" for topic, n in counts.items()]
    if args.allow_overload is not None:
        changed = allow_overload(changed, args.allow_overload)
        changes.append(f"allow up to {args.allow_overload} papers above cap for everyone")
    result = what_if(original, changed, tuple(changes))
    if args.accept:
        save_session(result.session, args.session)
    known = {r.id for r in original.reviewers}
    added = [r.id for r in result.session.reviewers if r.id not in known]
    payload = whatif_payload(result, added=added, accepted=args.accept)
    if args.json:
        emit_json(payload)
    else:
        print("\n".join(whatif_lines(original, payload, str(args.session))))
    return EXIT_OK


def whatif_payload(result: WhatIf, *, added: list[str], accepted: bool) -> dict[str, Any]:
    """The JSON object of `whatif`."""
    from dataclasses import asdict

    from review_alloc.plan.report import load_issues

    over, under = load_issues(result.session, result.after)
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
        "accepted": accepted,
    }


def whatif_lines(session: Session, payload: dict[str, Any], source: str) -> list[str]:
    """The short plain-text what-if report."""
    word = noun(session)
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
    if payload["accepted"]:
        lines.append(f"  saved to {source} with its new plan")
    else:
        lines.append(f"  {source} is unchanged; add --accept to save this change and its plan")
    lines.append(CAUTION)
    return lines
