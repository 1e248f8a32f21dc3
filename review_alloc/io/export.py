"""Exports of a session's plan as CSV, one row per assignment (spreadsheet-safe cells)."""

from __future__ import annotations

import os
from typing import Literal

from review_alloc.io.cells import Cell, write_csv
from review_alloc.model import InputError, Session

_PAPER_COLUMNS = (
    "paper_id",
    "title",
    "reviewer_id",
    "reviewer_name",
    "reviewer_email",
    "score",
    "lead",
)
_REVIEWER_COLUMNS = (
    "reviewer_id",
    "reviewer_name",
    "reviewer_email",
    "paper_id",
    "title",
    "score",
    "lead",
)


def plan_table(
    session: Session, by: Literal["paper", "reviewer"] = "paper"
) -> tuple[tuple[str, ...], list[tuple[Cell, ...]]]:
    """(header, rows) of the session's plan, one row per assignment, sorted by paper or reviewer;
    `lead` is `yes` on the row of the reviewer who leads the paper's discussion, else `no`.

    Raises `InputError` when the session has no plan.
    """
    if by not in ("paper", "reviewer"):
        raise ValueError(f"by must be 'paper' or 'reviewer', not {by!r}")
    if session.plan is None:
        raise InputError([f"{session.name}: plan: the session has no plan to export; plan first"])
    papers = {p.id: p for p in session.papers}
    reviewers = {r.id: r for r in session.reviewers}
    rows: list[tuple[tuple[str, str], tuple[Cell, ...]]] = []
    for a in session.plan.assignments:
        paper, reviewer = papers[a.paper], reviewers[a.reviewer]
        p_cells = (paper.id, paper.title)
        r_cells = (reviewer.id, reviewer.name, reviewer.email)
        score = float(a.score)
        lead = "yes" if a.lead else "no"
        if by == "paper":
            rows.append(((paper.id, reviewer.id), (*p_cells, *r_cells, score, lead)))
        else:
            rows.append(((reviewer.id, paper.id), (*r_cells, *p_cells, score, lead)))
    rows.sort(key=lambda item: item[0])
    header = _PAPER_COLUMNS if by == "paper" else _REVIEWER_COLUMNS
    return header, [cells for _, cells in rows]


def export_plan_csv(
    session: Session,
    path: str | os.PathLike[str],
    by: Literal["paper", "reviewer"] = "paper",
    *,
    bom: bool = False,
) -> int:
    """Write the session's plan to `path` (atomically), sorted by paper or by reviewer id.

    Text cells go through `io.cells.safe_cell` (no cell starts a formula), scores are written
    as numbers; `bom` starts the file with a UTF-8 byte-order mark for spreadsheets that need
    one. Returns the number of rows written, not counting the header. Raises `InputError` when
    the session has no plan or the file cannot be written.
    """
    header, rows = plan_table(session, by)
    write_table(path, header, rows, bom=bom)
    return len(rows)


def write_table(
    path: str | os.PathLike[str],
    header: tuple[str, ...],
    rows: list[tuple[Cell, ...]],
    *,
    bom: bool = False,
) -> None:
    """Write a table as a spreadsheet-safe CSV file, atomically; InputError when it cannot."""
    try:
        write_csv(path, header, rows, bom=bom)
    except OSError as error:
        raise InputError([f"{path}: cannot write ({error.strerror or error})"]) from None
