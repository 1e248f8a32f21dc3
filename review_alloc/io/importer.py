"""`import_csv`: papers, reviewers, conflicts and scores files into one validated session."""

from __future__ import annotations

import codecs
import os
import re
from collections.abc import Mapping
from pathlib import Path

from pydantic import ValidationError

from review_alloc.io.columns import map_problems
from review_alloc.io.reading import FileProblems
from review_alloc.io.score_rows import read_scores
from review_alloc.io.signals import read_bids
from review_alloc.io.sources import ReadOptions
from review_alloc.io.tables import read_conflicts, read_papers, read_reviewers
from review_alloc.model import InputError, Policy, ScoreRecipe, ScoreTable, Session, Signals

_KINDS = ("conference", "panel")
_PATH = re.compile(r"(papers|reviewers|conflicts)\.(\d+)(?:\.(\w+))?: (.*)")


def import_csv(
    papers: str | os.PathLike[str],
    reviewers: str | os.PathLike[str],
    conflicts: str | os.PathLike[str] | None = None,
    scores: str | os.PathLike[str] | None = None,
    *,
    policy: Policy | None = None,
    ignore_extra: bool = False,
    name: str | None = None,
    kind: str = "conference",
    sheet: str | None = None,
    encoding: str | None = None,
    columns: Mapping[str, Mapping[str, str]] | None = None,
    bids: str | os.PathLike[str] | None = None,
    recipe: ScoreRecipe | None = None,
) -> Session:
    """Read the CSV files into a session; raises `InputError` listing every problem found.

    Problems are collected across all files (up to 20 per file), each naming the file, line and
    column. Ids in the conflicts and scores files must name papers and reviewers of the other
    two files. Any file may be a workbook (.xlsx, .ods: the first sheet, or `sheet`); a CSV
    file may use `,` `;` or tab and be UTF-8 or UTF-16 with a BOM, or in `encoding`.
    `columns` maps our fields to other names the files use (`io.columns`); the session keeps
    it. Nothing is written.

    When the papers or reviewers carry abstracts, profiles or keywords, or a bids file is
    given, the scores are made by the score recipe (`recipe`, else the policy's, else the
    default one; see `model.signals`) from those signals and the scores file as given.
    """
    if kind not in _KINDS:
        raise InputError([f"kind: {kind!r} is not one of {', '.join(_KINDS)}"])
    if encoding is not None:
        try:
            codecs.lookup(encoding)
        except LookupError:
            raise InputError(
                [f"encoding: unknown encoding {encoding!r} (try utf-8, cp1252 or latin-1)"]
            ) from None
    policy = policy if policy is not None else Policy()
    mapping = {kind: dict(fields) for kind, fields in (columns or {}).items() if fields}
    problems = map_problems(mapping)
    if problems:
        raise InputError(problems)
    options = ReadOptions(
        ignore_extra=ignore_extra, sheet=sheet, encoding=encoding, columns=mapping
    )
    paper_problems = FileProblems(str(papers))
    reviewer_problems = FileProblems(str(reviewers))
    conflict_problems = FileProblems(str(conflicts)) if conflicts is not None else None
    score_problems = FileProblems(str(scores)) if scores is not None else None
    bid_problems = FileProblems(str(bids)) if bids is not None else None

    paper_rows = read_papers(papers, policy, options, paper_problems)
    reviewer_rows = read_reviewers(reviewers, policy, options, reviewer_problems)
    # Ids are checked across files only against a file that was read to its end.
    paper_at = None if paper_rows is None or paper_problems.stopped else paper_rows.index
    reviewer_at = (
        None if reviewer_rows is None or reviewer_problems.stopped else reviewer_rows.index
    )
    conflict_rows = (
        read_conflicts(conflicts, options, reviewer_at, paper_at, conflict_problems)
        if conflicts is not None and conflict_problems is not None
        else None
    )
    table = (
        read_scores(scores, options, reviewer_at, paper_at, score_problems)
        if scores is not None and score_problems is not None
        else ScoreTable.empty()
    )
    bid_table = (
        read_bids(bids, options, reviewer_at, paper_at, bid_problems)
        if bids is not None and bid_problems is not None
        else ScoreTable.empty()
    )

    every = [paper_problems, reviewer_problems, conflict_problems, score_problems, bid_problems]
    lines = [line for found in every if found is not None for line in found.lines()]
    if lines:
        raise InputError(lines)
    assert paper_rows is not None and reviewer_rows is not None and table is not None
    assert bid_table is not None

    sources = {
        "papers": (str(papers), paper_rows.lines),
        "reviewers": (str(reviewers), reviewer_rows.lines),
        "conflicts": (str(conflicts), conflict_rows.lines if conflict_rows else []),
    }
    try:
        session = Session(
            name=name or _default_name(papers),
            kind=kind,
            policy=policy,
            papers=paper_rows.items,
            reviewers=reviewer_rows.items,
            conflicts=conflict_rows.items if conflict_rows else [],
            scores=table,
            import_columns=mapping,
        )
    except ValidationError as error:
        raise InputError(_session_lines(error, sources)) from None
    # Imported here: reading files must not load the planner (numba, scipy, scikit-learn).
    from review_alloc.plan.recipe import has_signals, recipe_scores

    signals = Signals(expertise=table, bids=bid_table)
    if not has_signals(session, signals):
        return session
    # The recipe's table replaces the given scores; they stay in `signals` as its expertise.
    chosen = recipe or policy.recipe or ScoreRecipe()
    return session.model_copy(
        update={
            "policy": policy.model_copy(update={"recipe": chosen}),
            "signals": signals,
            "scores": recipe_scores(session, chosen, signals),
        }
    )


def _default_name(papers: str | os.PathLike[str]) -> str:
    return Path(papers).resolve().parent.name or "session"


def _session_lines(error: ValidationError, sources: dict[str, tuple[str, list[int]]]) -> list[str]:
    # The file checks above mirror the session's rules; this maps anything the session still
    # refuses back to a file and line where it can.
    lines: list[str] = []
    for item in error.errors(include_url=False):
        message = str(item["msg"]).removeprefix("Value error, ")
        where = ".".join(str(part) for part in item["loc"])
        for part in message.split("\n"):
            text = f"{where}: {part}" if where else part
            lines.append(_place(text, sources))
    return lines[:20]


def _place(text: str, sources: dict[str, tuple[str, list[int]]]) -> str:
    found = _PATH.fullmatch(text)
    if found is None:
        return f"import: {text}"
    field, position, attribute, message = found.groups()
    source, file_lines = sources[field]
    k = int(position)
    if k >= len(file_lines):
        return f"import: {text}"
    column = {"id": f"{field[:-1]}_id", "reviewer": "reviewer_id", "paper": "paper_id"}.get(
        attribute or "", attribute
    )
    where = f"line {file_lines[k]}: " + (f"column {column!r}: " if column else "")
    return f"{source}: {where}{message}"
