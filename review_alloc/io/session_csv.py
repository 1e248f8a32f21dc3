"""Write a session's data back out as the four CSV files that `import_csv` reads.

Cells are spreadsheet-safe (`io.cells`); the importer removes the quote `safe_cell` adds, so
the files read back to the same session.
"""

from __future__ import annotations

from pathlib import Path

from review_alloc.io.cells import csv_text
from review_alloc.model import Session, atomic_write_text


def _number(value: int | None) -> str:
    return "" if value is None else str(value)


def write_session_csv(session: Session, folder: Path, *, bom: bool = False) -> list[Path]:
    """Write papers.csv, reviewers.csv, conflicts.csv and scores.csv into `folder` (with a
    UTF-8 byte-order mark each when `bom`)."""
    folder.mkdir(parents=True, exist_ok=True)
    papers = csv_text(
        ["paper_id", "title", "topics", "reviews", "min_reviews", "authors", "institutions"],
        [
            [
                p.id,
                p.title,
                ";".join(p.topics),
                _number(p.reviews),
                _number(p.min_reviews),
                ";".join(p.authors),
                ";".join(p.institutions),
            ]
            for p in session.papers
        ],
        bom=bom,
    )
    reviewers = csv_text(
        ["reviewer_id", "name", "email", "institution", "topics", "cap", "floor", "senior"],
        [
            [
                r.id,
                r.name,
                r.email,
                r.institution,
                ";".join(r.topics),
                _number(r.cap),
                _number(r.floor),
                "yes" if r.senior else "no",
            ]
            for r in session.reviewers
        ],
        bom=bom,
    )
    conflicts = csv_text(
        ["reviewer_id", "paper_id", "reason"],
        [[c.reviewer, c.paper, c.reason] for c in session.conflicts],
        bom=bom,
    )
    table = session.scores
    scores = csv_text(
        ["reviewer_id", "paper_id", "score"],
        [
            [session.reviewers[j].id, session.papers[i].id, float(v)]
            for j, i, v in zip(
                table.reviewer.tolist(), table.paper.tolist(), table.value.tolist(), strict=True
            )
        ],
        bom=bom,
    )
    written = []
    for stem, text in (
        ("papers", papers),
        ("reviewers", reviewers),
        ("conflicts", conflicts),
        ("scores", scores),
    ):
        path = folder / f"{stem}.csv"
        atomic_write_text(path, text)
        written.append(path)
    return written
