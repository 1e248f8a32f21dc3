"""Other systems' column names: which column of a chair's file holds which of our fields.

A conference system may call the paper id "Submission ID" and the title "Paper Title". The
chair maps them once (`import --column papers.paper_id="Submission ID"`, or in the app's import
dialog); the mapping is kept in the session, so a re-import of newer files needs no retyping.
A mapping is, per kind of file, our field -> the file's column name (case and surrounding
spaces do not matter).
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping

from review_alloc.io.reading import FileProblems, FileSpec, is_blank, open_source, records
from review_alloc.io.score_rows import SCORES
from review_alloc.io.signals import BIDS
from review_alloc.io.sources import ReadOptions
from review_alloc.io.tables import CONFLICTS, PAPERS, REVIEWERS
from review_alloc.model import InputError

FILE_KINDS: dict[str, FileSpec] = {
    s.kind: s for s in (PAPERS, REVIEWERS, CONFLICTS, SCORES, BIDS)
}
"""Each kind of input file and its columns (our field names)."""

ColumnMap = dict[str, dict[str, str]]
"""Kind of file -> our field -> the file's column name."""


def import_fields() -> dict[str, tuple[str, ...]]:
    """Our fields per kind of file, required first: the choices a mapping picks from."""
    return {kind: spec.columns for kind, spec in FILE_KINDS.items()}


def parse_column(text: str) -> tuple[str, str, str]:
    """`KIND.FIELD=COLUMN` as (kind, field, column); an `InputError` says what is wrong."""
    left, eq, column = text.partition("=")
    kind, dot, name = left.strip().partition(".")
    kind, name, column = kind.strip().lower(), name.strip().lower(), column.strip()
    where = f"--column {text!r}"
    if not eq or not dot or not column:
        raise InputError([f"{where}: expected KIND.FIELD=COLUMN, e.g. papers.title=Paper Title"])
    spec = FILE_KINDS.get(kind)
    if spec is None:
        kinds = ", ".join(FILE_KINDS)
        raise InputError([f"{where}: {kind!r} is not a kind of file; use {kinds}"])
    if name not in spec.columns:
        fields = ", ".join(spec.columns)
        raise InputError([f"{where}: {kind} files have no field {name!r}; use {fields}"])
    return kind, name, column


def column_map(
    items: Iterable[str], base: Mapping[str, Mapping[str, str]] | None = None
) -> ColumnMap:
    """The mapping `base` (a session's stored one) with the `KIND.FIELD=COLUMN` items laid
    over it, field by field; checked with `map_problems`."""
    out: ColumnMap = {kind: dict(fields) for kind, fields in (base or {}).items()}
    for item in items:
        kind, name, column = parse_column(item)
        out.setdefault(kind, {})[name] = column
    problems = map_problems(out)
    if problems:
        raise InputError(problems)
    return {kind: fields for kind, fields in out.items() if fields}


def map_problems(columns: Mapping[str, Mapping[str, str]]) -> list[str]:
    """What is wrong with a mapping: unknown kinds or fields, one column given to two fields."""
    problems: list[str] = []
    for kind, fields in columns.items():
        spec = FILE_KINDS.get(kind)
        if spec is None:
            problems.append(f"columns: {kind!r} is not a kind of file")
            continue
        taken: dict[str, str] = {}
        for name, column in fields.items():
            if name not in spec.columns:
                problems.append(f"columns: {kind} files have no field {name!r}")
            folded = column.strip().lower()
            if folded in taken:
                problems.append(
                    f"columns: {kind} column {column!r} is given to both {taken[folded]!r} "
                    f"and {name!r}"
                )
            taken[folded] = name
    return problems


def header_names(
    path: str | os.PathLike[str],
    kind: str,
    *,
    sheet: str | None = None,
    encoding: str | None = None,
) -> list[str]:
    """The column names of a file's header row (its first non-blank row), as written, for a
    chair choosing a mapping; an `InputError` names the file when it cannot be read."""
    spec = FILE_KINDS[kind]
    problems = FileProblems(str(path))
    source = open_source(path, spec, ReadOptions(sheet=sheet, encoding=encoding), problems)
    if source is not None:
        for _, row in records(source, problems):
            if not is_blank(row):
                return [cell.strip() for cell in row]
        problems.add("the file is empty; its first row should name the columns")
    raise InputError(problems.lines())
