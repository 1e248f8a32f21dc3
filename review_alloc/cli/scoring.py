"""The score recipe on the command line: `score` (make the scores anew from the signals, as one
recorded change) and `pair` (one pair explained: rules, standing, each part of its score)."""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from review_alloc.cli.common import EXIT_OK, emit_json, positive
from review_alloc.model.errors import InputError
from review_alloc.model.parts import PART_NAMES
from review_alloc.model.text import nfc

if TYPE_CHECKING:
    from review_alloc.workspace import Workspace

Handler = Callable[[argparse.Namespace], int]


def weights(text: str) -> dict[str, float]:
    """argparse type: `part=weight` entries separated by commas (`text=2,bid=0.5`)."""
    out: dict[str, float] = {}
    for entry in text.split(","):
        if not entry.strip():
            continue
        name, eq, value = entry.partition("=")
        name = name.strip().lower()
        if not eq or name not in PART_NAMES:
            raise argparse.ArgumentTypeError(
                f"{entry.strip()!r}: expected part=weight with a part among "
                f"{', '.join(PART_NAMES)}"
            )
        try:
            number = float(value)
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{entry.strip()!r}: {value!r} is not a number"
            ) from None
        if not math.isfinite(number) or number < 0:
            raise argparse.ArgumentTypeError(f"{entry.strip()!r}: a weight is a number >= 0")
        out[name] = number
    return out


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add this module's sub-commands; return their handlers by name."""
    p = sub.add_parser(
        "score",
        help="make the scores anew from abstracts, profiles, topics and bids",
        description="Make the session's score table anew with the score recipe: per pair "
        "expertise (the scores file) + text similarity + topic overlap + bid, each times its "
        "weight, never below 0; per paper the best --top reviewers by text and topic, plus "
        "every pair with a given score or a bid. Recorded as one change (undo takes it back).",
    )
    p.add_argument("session", type=Path)
    p.add_argument(
        "--weights",
        type=weights,
        metavar="PART=W,...",
        help="weights to change, e.g. text=2,bid=0.5 (parts: " + ", ".join(PART_NAMES) + ")",
    )
    p.add_argument("--top", type=positive, help="reviewers kept per paper (default 150)")
    p.add_argument("--reason", default="", help="why (kept in the session's history)")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser(
        "pair",
        help="one pair explained: every rule, the plan, each part of its score",
    )
    p.add_argument("session", type=Path)
    p.add_argument("--reviewer", required=True, metavar="ID", type=nfc)
    p.add_argument("--paper", required=True, metavar="ID", type=nfc)
    p.add_argument("--json", action="store_true", help="print one JSON object")
    return {"score": _cmd_score, "pair": _cmd_pair}


def _cmd_score(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    with Workspace.editing(args.session) as ws:
        rows = ws.rescore(args.weights, args.top, args.reason)
        ws.save()
        recipe = ws.session.policy.recipe
        assert recipe is not None
        if args.json:
            emit_json(
                args, {"session": ws.session.name, "scores": rows, "recipe": recipe.model_dump()}
            )
        else:
            shown = ", ".join(f"{k} {v:g}" for k, v in recipe.weights().items())
            print(f"{args.session}: {rows} scores made by the recipe ({shown}; top {recipe.top})")
            if ws.session.plan is not None:
                print("the plan is stale until the next `review-alloc plan`")
    return EXIT_OK


def _cmd_pair(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    ws = Workspace.open(args.session)
    report = ws.pair_report(args.reviewer, args.paper)
    if args.json:
        emit_json(args, {"session": ws.session.name, **report.to_json()})
    else:
        print("\n".join(report.lines()))
    return EXIT_OK


def export_parts(ws: Workspace, args: argparse.Namespace) -> int:
    """`export --parts`: each assigned pair with the parts of its score, as CSV."""
    if args.target == "-":
        sys.stdout.write(ws.parts_text(bom=args.bom))
        return EXIT_OK
    target = Path(args.target)
    if target.suffix.lower() != ".csv":
        raise InputError([f"{target}: --parts writes a CSV file; name it FILE.csv"])
    rows = ws.export_parts(target, force=args.force, bom=args.bom)
    if args.json:
        emit_json(
            args,
            {"session": ws.session.name, "to": str(target), "format": "csv-parts", "pairs": rows},
        )
    else:
        print(f"{target}: {rows} assigned pairs with the parts of their scores")
    return EXIT_OK
