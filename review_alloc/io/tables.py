"""Row-by-row import of the papers, reviewers and conflicts files."""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, TypeVar

from pydantic import BaseModel, ValidationError

from review_alloc.io.reading import (
    CellError,
    FileProblems,
    FileSpec,
    Header,
    data_rows,
    email,
    emails,
    listing,
    open_table,
    whole_number,
    yes_no,
)
from review_alloc.io.sources import ReadOptions
from review_alloc.model import Conflict, Paper, Policy, Reviewer, matched_text_problem

PAPERS = FileSpec(
    "papers",
    ("paper_id",),
    (
        "title",
        "topics",
        "reviews",
        "min_reviews",
        "authors",
        "institutions",
        "abstract",
        "keywords",
    ),
    frozenset({"paper_id", "topics", "authors", "institutions", "keywords"}),
)
REVIEWERS = FileSpec(
    "reviewers",
    ("reviewer_id",),
    ("name", "email", "institution", "topics", "cap", "floor", "senior", "profile", "keywords"),
    frozenset({"reviewer_id", "email", "institution", "topics", "keywords"}),
)
CONFLICTS = FileSpec(
    "conflicts", ("reviewer_id", "paper_id"), ("reason",), frozenset({"reviewer_id", "paper_id"})
)

_PAPER_COLUMN = {"id": "paper_id"}
_REVIEWER_COLUMN = {"id": "reviewer_id"}

T = TypeVar("T")
M = TypeVar("M", bound=BaseModel)


@dataclass
class Entities:
    """Papers or reviewers read from a file: the models, id positions and source lines."""

    items: list[Any] = field(default_factory=list)
    index: dict[str, int] = field(default_factory=dict)
    lines: list[int] = field(default_factory=list)


@dataclass
class _Row:
    """One data row being read: its cells, and whether every cell so far was good."""

    header: Header
    cells: list[str]
    line: int
    problems: FileProblems
    matched: frozenset[str]
    good: bool = True
    refused: set[str] = field(default_factory=set)

    def text(self, column: str) -> str:
        """The cell; one of a matched column is refused (once) for an invisible character."""
        text = self.header.cell(self.cells, column)
        if column in self.matched and column not in self.refused:
            problem = matched_text_problem(text)
            if problem is not None:
                self.refused.add(column)
                self.fail(column, problem)
        return text

    def read(self, column: str, parse: Callable[[str], T]) -> T | None:
        text = self.text(column)
        if column in self.refused:
            return None
        try:
            return parse(text)
        except CellError as error:
            self.problems.add(str(error), line=self.line, column=column)
            self.good = False
            return None

    def fail(self, column: str | None, message: str) -> None:
        self.problems.add(message, line=self.line, column=column)
        self.good = False


def _build(row: _Row, model: type[M], columns: dict[str, str], values: dict[str, Any]) -> M | None:
    # Our cell checks come first and say more; this only catches what the model adds.
    try:
        return model(**values)
    except ValidationError as error:
        for item in error.errors(include_url=False):
            name = str(item["loc"][0]) if item["loc"] else None
            message = str(item["msg"]).removeprefix("Value error, ")
            row.fail(columns.get(name, name) if name else None, message)
        return None


def _register(row: _Row, found: Entities, column: str, noun: str) -> str | None:
    key = row.text(column)
    if not key:
        row.fail(column, f"empty; every {noun} needs an id")
        return None
    if key in found.index:
        first = found.lines[found.index[key]]
        row.fail(column, f"duplicate of line {first} ({key!r})")
        return None
    found.index[key] = len(found.lines)
    found.lines.append(row.line)
    return key


def _read_counted(
    row: _Row, problems: FileProblems, column: str, least: int
) -> tuple[int | None, bool]:
    """A whole-number cell (>= `least`) and whether it was read without a problem."""
    before = problems.count
    value = row.read(column, lambda t: whole_number(t, least))
    return value, problems.count == before


def _check_lower_limit(
    row: _Row,
    lower_name: str,
    lower: int | None,
    upper_name: str,
    upper: int | None,
    policy_upper: int,
) -> None:
    """Refuse a lower limit (min_reviews, floor) above its upper one (reviews, cap)."""
    if lower is None:
        return
    most = policy_upper if upper is None else upper
    if lower > most:
        whose = "" if upper is not None else " (the policy's)"
        row.fail(lower_name, f"{lower} exceeds {upper_name} {most}{whose}")


def read_papers(
    path: str | os.PathLike[str], policy: Policy, options: ReadOptions, problems: FileProblems
) -> Entities | None:
    """Papers in file order; None when the file cannot be read at all."""
    opened = open_table(path, PAPERS, options, problems)
    if opened is None:
        return None
    header, rows, _ = opened
    found = Entities()
    for line, cells in data_rows(rows, header, problems):
        row = _Row(header, cells, line, problems, PAPERS.matched)
        key = _register(row, found, "paper_id", "paper")
        reviews, reviews_read = _read_counted(row, problems, "reviews", 1)
        minimum = row.read("min_reviews", lambda t: whole_number(t, 0))
        values = {
            "id": key,
            "title": row.text("title"),
            "topics": listing(row.text("topics")),
            "reviews": reviews,
            "min_reviews": minimum,
            "authors": row.read("authors", emails),
            "institutions": listing(row.text("institutions")),
            "abstract": row.text("abstract"),
            "keywords": listing(row.text("keywords")),
        }
        if reviews_read:
            _check_lower_limit(row, "min_reviews", minimum, "reviews", reviews, policy.reviews)
        if row.good and key is not None:
            paper = _build(row, Paper, _PAPER_COLUMN, values)
            if paper is not None:
                found.items.append(paper)
    if not found.lines and not problems:
        problems.add("no papers: the file has a header but no rows")
    return found


def read_reviewers(
    path: str | os.PathLike[str], policy: Policy, options: ReadOptions, problems: FileProblems
) -> Entities | None:
    """Reviewers in file order; None when the file cannot be read at all."""
    opened = open_table(path, REVIEWERS, options, problems)
    if opened is None:
        return None
    header, rows, _ = opened
    found = Entities()
    for line, cells in data_rows(rows, header, problems):
        row = _Row(header, cells, line, problems, REVIEWERS.matched)
        key = _register(row, found, "reviewer_id", "reviewer")
        cap, cap_read = _read_counted(row, problems, "cap", 0)
        floor = row.read("floor", lambda t: whole_number(t, 0))
        values = {
            "id": key,
            "name": row.text("name"),
            "email": row.read("email", email),
            "institution": row.text("institution"),
            "topics": listing(row.text("topics")),
            "cap": cap,
            "floor": floor,
            "senior": row.read("senior", yes_no) or False,
            "profile": row.text("profile"),
            "keywords": listing(row.text("keywords")),
        }
        if cap_read:
            _check_lower_limit(row, "floor", floor, "cap", cap, policy.cap)
        if row.good and key is not None:
            reviewer = _build(row, Reviewer, _REVIEWER_COLUMN, values)
            if reviewer is not None:
                found.items.append(reviewer)
    if not found.lines and not problems:
        problems.add("no reviewers: the file has a header but no rows")
    return found


def _known(row: _Row, column: str, noun: str, index: dict[str, int] | None) -> str | None:
    key = row.text(column)
    if column in row.refused:
        return None
    if not key:
        row.fail(column, f"empty; every row needs a {noun} id")
        return None
    if index is not None and key not in index:
        # Reported once with its count of rows: a misspelt id recurs on every row it has.
        row.problems.add_once(key, f"unknown {noun} {key!r}", row.line, column)
        row.good = False
        return None
    return key


@dataclass
class ConflictRows:
    """Declared conflicts in file order, with the line each came from."""

    items: list[Conflict] = field(default_factory=list)
    lines: list[int] = field(default_factory=list)


def read_conflicts(
    path: str | os.PathLike[str],
    options: ReadOptions,
    reviewers: dict[str, int] | None,
    papers: dict[str, int] | None,
    problems: FileProblems,
) -> ConflictRows:
    """Declared conflicts; ids are checked against the given maps (None skips that check)."""
    found = ConflictRows()
    opened = open_table(path, CONFLICTS, options, problems)
    if opened is None:
        return found
    header, rows, _ = opened
    first: dict[tuple[str, str], int] = {}
    for line, cells in data_rows(rows, header, problems):
        row = _Row(header, cells, line, problems, CONFLICTS.matched)
        reviewer = _known(row, "reviewer_id", "reviewer", reviewers)
        paper = _known(row, "paper_id", "paper", papers)
        if reviewer is None or paper is None:
            continue
        pair = (reviewer, paper)
        if pair in first:
            row.fail(None, f"duplicate pair ({reviewer}, {paper}), first on line {first[pair]}")
            continue
        first[pair] = line
        conflict = _build(
            row,
            Conflict,
            {"reviewer": "reviewer_id", "paper": "paper_id"},
            {"reviewer": reviewer, "paper": paper, "reason": row.text("reason") or "declared"},
        )
        if conflict is not None:
            found.items.append(conflict)
            found.lines.append(line)
    return found
