"""Write a session's data back out as the CSV files that `import_csv` reads.

Cells are spreadsheet-safe (`io.cells`); the importer removes the quote `safe_cell` adds, so
the files read back to the same session. A session whose scores a recipe made (it holds
`signals`) is written with its abstracts, profiles and keywords, its given scores as
scores.csv and its bids as bids.csv, so that importing the files makes the scores again.
"""

from __future__ import annotations

from pathlib import Path

from review_alloc.io.cells import csv_text
from review_alloc.model import BID_LEVELS, ScoreTable, Session, atomic_write_text

_BID_WORDS = {float(level): word for word, level in BID_LEVELS.items()}


def _number(value: int | None) -> str:
    return "" if value is None else str(value)


def write_session_csv(session: Session, folder: Path, *, bom: bool = False) -> list[Path]:
    """Write papers.csv, reviewers.csv, conflicts.csv and scores.csv (and bids.csv for a
    session with signals) into `folder` (with a UTF-8 byte-order mark each when `bom`)."""
    folder.mkdir(parents=True, exist_ok=True)
    signals = session.signals
    texts = signals is not None
    papers = csv_text(
        ["paper_id", "title", "topics", "reviews", "min_reviews", "authors", "institutions"]
        + (["abstract", "keywords"] if texts else []),
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
            + ([p.abstract, ";".join(p.keywords)] if texts else [])
            for p in session.papers
        ],
        bom=bom,
    )
    reviewers = csv_text(
        ["reviewer_id", "name", "email", "institution", "topics", "cap", "floor", "senior"]
        + (["profile", "keywords"] if texts else []),
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
            + ([r.profile, ";".join(r.keywords)] if texts else [])
            for r in session.reviewers
        ],
        bom=bom,
    )
    conflicts = csv_text(
        ["reviewer_id", "paper_id", "reason"],
        [[c.reviewer, c.paper, c.reason] for c in session.conflicts],
        bom=bom,
    )
    table = session.scores if signals is None else signals.expertise
    scores = csv_text(["reviewer_id", "paper_id", "score"], _rows(session, table), bom=bom)
    files = [
        ("papers", papers),
        ("reviewers", reviewers),
        ("conflicts", conflicts),
        ("scores", scores),
    ]
    if signals is not None:
        bids = [
            [r, p, _BID_WORDS.get(float(level), float(level))]
            for r, p, level in _rows(session, signals.bids)
        ]
        files.append(("bids", csv_text(["reviewer_id", "paper_id", "bid"], bids, bom=bom)))
    written = []
    for stem, text in files:
        path = folder / f"{stem}.csv"
        atomic_write_text(path, text)
        written.append(path)
    return written


def _rows(session: Session, table: ScoreTable) -> list[list[str | float]]:
    return [
        [session.reviewers[j].id, session.papers[i].id, float(v)]
        for j, i, v in zip(
            table.reviewer.tolist(), table.paper.tolist(), table.value.tolist(), strict=True
        )
    ]
