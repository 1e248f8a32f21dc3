"""Write a session's data back out as the four CSV files that `import_csv` reads."""

from __future__ import annotations

import csv
import io
from pathlib import Path

from review_alloc.model import Session, atomic_write_text


def _table(header: list[str], rows: list[list[object]]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()


def _number(value: int | None) -> str:
    return "" if value is None else str(value)


def write_session_csv(session: Session, folder: Path) -> list[Path]:
    """Write papers.csv, reviewers.csv, conflicts.csv and scores.csv into `folder`."""
    folder.mkdir(parents=True, exist_ok=True)
    papers = _table(
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
    )
    reviewers = _table(
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
    )
    conflicts = _table(
        ["reviewer_id", "paper_id", "reason"],
        [[c.reviewer, c.paper, c.reason] for c in session.conflicts],
    )
    table = session.scores
    scores = _table(
        ["reviewer_id", "paper_id", "score"],
        [
            [session.reviewers[j].id, session.papers[i].id, repr(float(v))]
            for j, i, v in zip(
                table.reviewer.tolist(), table.paper.tolist(), table.value.tolist(), strict=True
            )
        ],
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
