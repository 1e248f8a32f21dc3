"""The first commands: import, plan, export, schema, demo."""

from __future__ import annotations

import argparse
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
    prepare_solver,
    summary_lines,
    validation_message,
    whole,
    write_json,
)
from review_alloc.cli.progress import Steps, progress
from review_alloc.model.errors import InputError

if TYPE_CHECKING:
    from review_alloc.workspace import Workspace

Handler = Callable[[argparse.Namespace], int]


def register(sub: argparse._SubParsersAction) -> dict[str, Handler]:
    """Add this module's sub-commands; return their handlers by name."""
    p = sub.add_parser(
        "import",
        help="build a session file from CSV files or workbooks (.xlsx, .ods)",
        description="Build a session file from CSV files or workbooks. A CSV file may separate "
        "its cells with ',' ';' or tab (a ';' file may use decimal commas) and be UTF-8 or "
        "UTF-16 with a byte-order mark; a workbook is read from its first sheet.",
    )
    p.add_argument("--papers", required=True, type=Path, help="papers CSV or workbook")
    p.add_argument("--reviewers", required=True, type=Path, help="reviewers CSV or workbook")
    p.add_argument("--conflicts", type=Path, help="declared conflicts CSV or workbook")
    p.add_argument(
        "--scores", type=Path, help="scores CSV or workbook (reviewer_id, paper_id, score)"
    )
    p.add_argument("--bids", type=Path, help="bids CSV or workbook (reviewer_id, paper_id, bid)")
    p.add_argument(
        "--sheet", metavar="NAME", help="read this sheet of each workbook (default: the first)"
    )
    p.add_argument(
        "--encoding",
        metavar="NAME",
        help="the text encoding of CSV files that are neither UTF-8 nor UTF-16 with a "
        "byte-order mark (for example cp1252)",
    )
    p.add_argument("--reviews", type=positive, help="reviews wanted per paper (default 3)")
    p.add_argument("--min-reviews", type=whole, help="reviews each paper must get (default 2)")
    p.add_argument("--cap", type=whole, help="most papers per reviewer (default 6)")
    p.add_argument("--floor", type=whole, help="fewest papers per reviewer (default 0)")
    p.add_argument(
        "--unscored",
        choices=("zero", "exclude"),
        help="a pair without a score row: eligible with score 0, or not eligible",
    )
    add_rule_flags(p)
    p.add_argument(
        "--column",
        action="append",
        default=[],
        metavar="KIND.FIELD=COLUMN",
        help="read our FIELD from the file's COLUMN, for files another system wrote (repeat; "
        "e.g. papers.paper_id='Submission ID'); kept in the session, so a re-import with "
        "--force onto it needs none of them again",
    )
    p.add_argument("--ignore-extra", action="store_true", help="ignore unknown CSV columns")
    p.add_argument("--name", help="session name (default: the output file's stem)")
    p.add_argument("--panel", action="store_true", help="a grant panel: say 'proposal'")
    p.add_argument("--force", action="store_true", help="replace an existing session file")
    p.add_argument("-o", "--output", required=True, type=Path, help="session file to write")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser("plan", help="make the optimal plan and save it in the session")
    p.add_argument("session", type=Path)
    p.add_argument(
        "--fresh", action="store_true", help="ignore the earlier plan (keep none of its pairs)"
    )
    p.add_argument(
        "--max-probability",
        type=_probability_or_off,
        metavar="Q",
        help="draw the plan at random, each reviewer-paper pair with probability at most Q "
        "(0 < Q <= 1); a later plan stays randomised until 'off'",
    )
    p.add_argument(
        "--seed", type=whole, help="the random draw's seed (default: a new one, stored)"
    )
    p.add_argument(
        "--fair",
        action="store_true",
        help="maximise the lowest total score of any paper, then the total score",
    )
    p.add_argument("--json", action="store_true", help="print one JSON object")
    add_rule_flags(p)

    p = sub.add_parser(
        "export",
        help="write the plan as CSV or as a workbook (.xlsx)",
        description="Write the plan: FILE.csv has one row per assignment (with a lead column); "
        "FILE.xlsx is a workbook with sheets by paper (the lead marked), by reviewer (load, cap, "
        "floor), the papers short of reviews, and a summary.",
    )
    p.add_argument("session", type=Path)
    p.add_argument(
        "--to",
        required=True,
        dest="target",
        metavar="FILE",
        help="FILE.csv or FILE.xlsx to write ('-': CSV on standard output)",
    )
    p.add_argument(
        "--by",
        choices=("paper", "reviewer"),
        default="paper",
        help="the CSV's row order (a workbook has both)",
    )
    p.add_argument(
        "--parts", action="store_true", help="CSV of each assigned pair's score parts instead"
    )
    add_output_options(p)
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser(
        "report",
        help="write the committee's report: one self-contained HTML page",
        description="Write one HTML page a committee can read and print: headline figures, "
        "coverage per topic, reviewers' load, scores, gaps with their shortfall groups and "
        "fixes, conflicts by reason, the revisions and who must be told, and the cautions. "
        "It holds its styles and charts inline and fetches nothing.",
    )
    p.add_argument("session", type=Path)
    p.add_argument("--to", required=True, dest="target", type=Path, metavar="FILE.html")
    p.add_argument(
        "--force",
        action="store_true",
        help="replace an existing file (a session file is never replaced)",
    )
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = sub.add_parser(
        "schema",
        help="print the session document's JSON Schema",
        description="Print the session document's JSON Schema. The schema is itself the one "
        "JSON object printed, with or without --json.",
    )
    p.add_argument("--json", action="store_true", help="the same JSON Schema (for scripts)")
    p = sub.add_parser("demo", help="plan the built-in demo session and print its summary")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    return {
        "import": _cmd_import,
        "plan": _cmd_plan,
        "export": _cmd_export,
        "report": _cmd_report,
        "schema": _cmd_schema,
        "demo": _cmd_demo,
    }


def _count_or_off(text: str) -> int:
    """argparse type: a whole number >= 0, where 0 (or 'off') turns the rule off."""
    return 0 if text.strip().lower() == "off" else whole(text)


def _probability_or_off(text: str) -> float:
    """argparse type: a probability above 0 and at most 1, or 'off' (returned as 0)."""
    if text.strip().lower() == "off":
        return 0.0
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0 < value <= 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be above 0 and at most 1, or 'off'")
    return value


def _score_or_off(text: str) -> float:
    """argparse type: a score >= 0, or 'off' (returned as -1) to turn the rule off."""
    if text.strip().lower() == "off":
        return -1.0
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not value >= 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} must be a finite number >= 0")
    return value


def add_rule_flags(p: argparse.ArgumentParser) -> None:
    """The policy's chair rules as options; given ones are saved into the session's policy."""
    g = p.add_argument_group("chair rules (saved into the session's policy)")
    g.add_argument("--senior-min", type=whole, help="senior reviewers wanted per paper (0: off)")
    g.add_argument(
        "--senior-hard",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="make the senior rule hard (fail if unmet) instead of a tier",
    )
    g.add_argument(
        "--max-per-institution",
        type=_count_or_off,
        help="most reviewers of one institution per paper (0 or 'off': no limit)",
    )
    g.add_argument(
        "--require-shared-topic",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="only pairs that share a topic are eligible",
    )
    g.add_argument(
        "--min-score", type=_score_or_off, help="pairs scoring below this are not eligible ('off')"
    )
    g.add_argument(
        "--balance", type=_score_or_off, help="load-balance strength, score units (0: off)"
    )
    g.add_argument(
        "--bottleneck",
        action=argparse.BooleanOptionalAction,
        default=None,
        help=(
            "after coverage (and seniors), maximise the lowest score among the assigned pairs "
            "that are not pinned (a pinned pair may score lower), then floors and total score"
        ),
    )
    g.add_argument("--max-leads", type=whole, help="most papers one reviewer leads (0: no leads)")


def rule_overrides(args: argparse.Namespace) -> dict[str, object]:
    """Policy fields set by the chair-rule options that were given."""
    out: dict[str, object] = {}
    for key in ("senior_min", "senior_hard", "require_shared_topic", "bottleneck", "max_leads"):
        if getattr(args, key, None) is not None:
            out[key] = getattr(args, key)
    if getattr(args, "max_per_institution", None) is not None:
        out["max_per_institution"] = args.max_per_institution or None
    if getattr(args, "min_score", None) is not None:
        out["min_score"] = None if args.min_score < 0 else args.min_score
    if getattr(args, "balance", None) is not None:
        out["balance"] = max(args.balance, 0.0)
    return out


def rule_lines(summary: dict[str, object], noun: str = "paper") -> list[str]:
    """Plain-text lines on the chair rules of a plan summary (`noun`: "paper" or "proposal")."""
    lines: list[str] = []
    seniors = summary["seniors"]
    rules = summary["rules"]
    load = summary["load"]
    if rules["senior_min"] or seniors["wanted"]:
        lines.append(
            f"  seniors          {seniors['met']} / {seniors['wanted']}"
            + (f", {len(seniors['short'])} {noun}s short" if seniors["short"] else "")
        )
    if rules["max_per_institution"] is not None:
        inst = summary["institutions"]
        lines.append(
            f"  institutions     at most {inst['most_on_one_paper']} per {noun} "
            f"(limit {rules['max_per_institution']})"
        )
    leads = summary["leads"]
    if rules["max_leads"]:
        lines.append(
            f"  leads            {leads['picked']} picked, {leads['senior_leads']} senior, "
            f"{len(leads['no_senior_lead'])} {noun}s without a senior lead"
        )
    if "before" in load:
        b = load["before"]
        lines.append(
            f"  load spread      {load['spread']} (min {load['min']}, max {load['max']}); "
            f"without balance {b['spread']} (min {b['min']}, max {b['max']})"
        )
    if summary["bottleneck"] is not None:
        lines.append(
            f"  bottleneck       lowest unpinned score {summary['lowest_unpinned_score']} "
            f"(raised first); lowest assigned score {summary['lowest_score']}"
        )
    if not summary["optimality"]["proven"]:
        bound = summary["optimality"]["bound"]
        lines.append(
            "  optimality       within a relaxation bound (institution and senior rules "
            f"cross): objective score at most {bound['score']}"
        )
    return lines


def _cmd_import(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    if args.output.exists() and not args.force:
        raise InputError([f"{args.output}: already exists; add --force to replace it"])
    overrides = {
        key: getattr(args, key)
        for key in ("reviews", "min_reviews", "cap", "floor", "unscored")
        if getattr(args, key) is not None
    }
    overrides.update(rule_overrides(args))
    stored = _stored_columns(args.output) if args.force else {}
    columns = Workspace.column_map(args.column, stored)
    from review_alloc.model import Policy

    try:
        policy = Policy(**overrides)
    except ValueError as error:
        raise InputError([f"options: {validation_message(error)}"]) from None
    with progress(f"reading {args.papers.name} and the other files", json_output=args.json):
        workspace = Workspace.import_csv(
            args.output,
            args.papers,
            args.reviewers,
            args.conflicts,
            args.scores,
            policy=policy,
            ignore_extra=args.ignore_extra,
            name=args.name,
            kind="panel" if args.panel else "conference",
            replace=args.force,
            sheet=args.sheet,
            encoding=args.encoding,
            columns=columns,
            bids=args.bids,
        )
    session = workspace.session
    if args.json:
        emit_json(
            args,
            {
                "session": session.name,
                "kind": session.kind,
                "papers": len(session.papers),
                "reviewers": len(session.reviewers),
                "conflicts": len(session.conflicts),
                "scores": len(session.scores),
                "columns": session.import_columns,
                "recipe": session.policy.recipe is not None,
            },
        )
        return EXIT_OK
    print(
        f"{args.output}: {len(session.papers)} {session.noun}s, {len(session.reviewers)} "
        f"reviewers, {len(session.conflicts)} declared conflicts, {len(session.scores)} scores"
        + (" (made by the score recipe)" if session.policy.recipe is not None else "")
    )
    if session.import_columns:
        mapped = ", ".join(
            f"{kind}.{name} from {column!r}"
            for kind, fields in session.import_columns.items()
            for name, column in fields.items()
        )
        kept = " (kept from the earlier session)" if stored and not args.column else ""
        print(f"  columns: {mapped}{kept}")
    return EXIT_OK


def _stored_columns(path: Path) -> dict[str, dict[str, str]]:
    """The column mapping of the session a re-import replaces (none when it is no session)."""
    from review_alloc.model import load_session

    if not path.is_file():
        return {}
    try:
        return load_session(path).import_columns
    except (InputError, OSError, ValueError):
        # The file is replaced either way (--force); a broken one simply has no mapping.
        return {}


def _cmd_plan(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    # Through the Workspace so that the plan keeps earlier pairs and becomes a revision; the
    # file stays locked while planning, so a change made meanwhile waits instead of being lost.
    with (
        progress(f"opening {args.session.name}", json_output=args.json) as steps,
        Workspace.editing(args.session) as ws,
    ):
        _make_plan(ws, args, steps)
    return _plan_report(ws, args)


def _make_plan(ws: Workspace, args: argparse.Namespace, steps: Steps) -> None:
    """Plan and save, telling `steps` what is under way (nothing is printed here)."""
    changes = rule_overrides(args)
    if changes:
        ws.set_policy(changes, reason="plan options")
    steps.step("preparing the solver")
    prepare_solver()
    q = getattr(args, "max_probability", None)
    s = ws.session
    head = f"planning {len(s.papers)} {s.noun}s and {len(s.reviewers)} reviewers"
    steps.step(head)
    ws.solve(
        fresh=args.fresh,
        max_probability=q or None,
        seed=getattr(args, "seed", None),
        fair=getattr(args, "fair", False),
        plain=q == 0.0,
        progress=lambda text: steps.step(f"{head}: {text}"),
    )
    steps.step(f"saving {args.session.name}")
    ws.save()


def _plan_report(ws: Workspace, args: argparse.Namespace) -> int:
    """Print the saved plan's summary, as text or as JSON."""
    session = ws.session
    summary = ws.summary()
    revision = ws.revisions[-1]
    if args.json:
        emit_json(args, summary)
    else:
        lines = summary_lines(session, summary, str(args.session))
        if revision.kept is not None:
            lines.insert(
                1,
                f"  revision {revision.number}: kept {revision.kept} of the "
                f"{revision.parent_pairs} pairs of revision {revision.parent}"
                + (" (fresh plan)" if revision.fresh else ""),
            )
        if "claim" in summary["optimality"] and summary["checked"]:
            lines[0] = f"{session.name}: plan checked; {summary['optimality']['claim']}"
        extra = [*rule_lines(summary, session.noun), *random_lines(summary), *fair_lines(summary)]
        print("\n".join([*lines[:-1], *extra, lines[-1]]))
    return EXIT_OK


_SIDE_BY_SIDE = (
    ("required reviews", "required_coverage"),
    ("all reviews", "coverage"),
    ("reviewer floors", "floors_met"),
    ("total score", "total_score"),
)


def _columns(heads: tuple[str, ...], figures: list[dict[str, float] | None]) -> list[str]:
    """The plan figures of several plans side by side, one line per figure."""
    lines = ["  " + " " * 17 + "".join(f"{h:>12}" for h in heads)]
    for label, key in _SIDE_BY_SIDE:
        cells = "".join(
            f"{'-' if f is None else format(f[key], '.2f'):>12}" for f in figures
        )
        lines.append(f"    {label:<15}{cells}")
    return lines


def random_lines(summary: dict[str, object]) -> list[str]:
    """Plain-text lines on a randomised plan: cap, seed, its figures beside the plain plan's."""
    r = summary.get("randomised")
    if not isinstance(r, dict):
        return []
    lines = [
        f"  randomised       each pair at most {r['max_probability']:g} (seed {r['seed']}, "
        f"probabilities in steps of 1/{r['scale']}"
        + ("; earlier draw's pairs kept" if r["kept_earlier"] else "")
        + ")",
        f"    drawn by {r['method']}",
        *_columns(("this draw", "expected", "plain plan"), [r["drawn"], r["expected"], r["plain"]]),
    ]
    if r["expected_score_given_up"] is not None:
        lines.append(
            f"    expected score given up for the cap: {r['expected_score_given_up']:.2f}"
        )
    lines.append(f"    {r['certified']}")
    lines.append(str(r["caution"]))
    return lines


def fair_lines(summary: dict[str, object]) -> list[str]:
    """Plain-text lines on the fairest plan: the worst-off papers, the bound, the plain plan."""
    f = summary.get("fairness")
    if not isinstance(f, dict):
        return []
    how = "proven optimal" if f["exact"] else f"bound {f['bound']:.2f}, gap {f['gap_to_bound']:.2f}"
    lines = [
        f"  fairest plan     lowest paper total {f['lowest_paper_score']:.2f} ({how}); "
        f"plain plan's lowest {f['plain_lowest_paper_score']:.2f}",
        f"    by {f['method']}",
        f"    worst off: {', '.join(f['worst_papers']) or 'none'}",
        *_columns(("fairest", "plain plan"), [f["fair"], f["plain"]]),
        str(f["caution"]),
    ]
    return lines


def _cmd_demo(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    ws = Workspace.demo()
    prepare_solver()
    ws.solve(fresh=True)
    session = ws.session
    summary = ws.summary()
    if getattr(args, "json", False):
        emit_json(args, summary)
    else:
        print("\n".join(summary_lines(session, summary, "SESSION")))
    return EXIT_OK


def _cmd_export(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    if args.target == "-" and args.json:
        raise UsageError("--json prints the result on standard output; give --to a file")
    ws = Workspace.open(args.session)
    if args.parts:
        from review_alloc.cli.scoring import export_parts

        return export_parts(ws, args)
    if args.target == "-":
        sys.stdout.write(ws.export_text(args.by, bom=args.bom))
        return EXIT_OK
    target = Path(args.target)
    rows = ws.export(target, by=args.by, force=args.force, bom=args.bom)
    workbook = target.suffix.lower() == ".xlsx"
    if args.json:
        emit_json(
            args,
            {
                "session": ws.session.name,
                "to": str(target),
                "format": "xlsx" if workbook else "csv",
                "by": None if workbook else args.by,
                "assignments": rows,
            },
        )
    elif workbook:
        print(f"{target}: workbook with {rows} assignments (by paper, by reviewer, short, summary)")
    else:
        print(f"{target}: {rows} assignments, one row each, by {args.by}")
    return EXIT_OK


def _cmd_report(args: argparse.Namespace) -> int:
    from review_alloc.workspace import Workspace

    with progress(f"opening {args.session.name}", json_output=args.json) as steps:
        ws = Workspace.open(args.session)
        steps.step("gathering the figures, gaps and fixes, and writing the page")
        data = ws.write_report(args.target, force=args.force)
    gaps = len(data.summary["gaps"])
    if args.json:
        emit_json(
            args,
            {
                "session": data.name,
                "to": str(args.target),
                "assignments": len(data.summary["assignments"]),
                "gaps": gaps,
            },
        )
        return EXIT_OK
    print(
        f"{args.target}: report on {data.name}, {len(data.summary['assignments'])} assignments, "
        f"{gaps} {data.noun}s short of reviews"
    )
    return EXIT_OK


def _cmd_schema(args: argparse.Namespace) -> int:
    from review_alloc.model import session_json_schema

    # The schema is the result itself (a validator reads it as it is), so it carries none of
    # the keys the other commands' objects start with.
    write_json(session_json_schema())
    return EXIT_OK
