"""Reading CSV files for import: decoding, the header, records with their line numbers, cells.

Every problem is reported as `"<file>: line N: column 'c': <what is wrong>"` (the header is
line 1); a file keeps at most `MAX_LINES_PER_FILE` messages and counts the rest.

Text is read as the session stores it (`model.text`): the whole file is NFC-normalised, so ids
match across files whatever form an editor wrote; the cells of matched columns (ids, e-mail
addresses, institutions, topics) are refused when they hold an invisible or control
character; free text (titles, names, reasons) is cleaned by the document models. Counts are
whole numbers up to `MAX_COUNT`, scores finite numbers up to `MAX_SCORE`. A cell that
`io.cells.safe_cell` marked with a leading quote is read back without it.

Files are opened by `io.sources` (CSV in UTF-8 or UTF-16 with its separator sniffed, or a
workbook sheet); a workbook's problems are placed by sheet, row and column letter
(`"<file>: sheet 'S': row N: column 'c' (C): ..."`), and the same text rules apply to its cells.
"""

from __future__ import annotations

import csv
import math
import os
import re
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path

from review_alloc.io.cells import unmarked_cell
from review_alloc.io.sources import (
    ReadOptions,
    Source,
    column_letter,
    decode,
    is_workbook_file,
    read_workbook,
    separator_name,
    sniff_separator,
)
from review_alloc.model import (
    MAX_COUNT,
    MAX_LINES_PER_FILE,
    MAX_SCORE,
    MAX_TEXT_CHARS,
)
from review_alloc.model.base import check_email

_WHOLE = re.compile(r"\+?[0-9]+")
_TRUE = frozenset({"yes", "y", "true", "1"})
_FALSE = frozenset({"no", "n", "false", "0"})


class CellError(ValueError):
    """A cell that cannot be read; the message says why, without file or line."""


_REPEAT_LINES_SHOWN = 5
"""How many line numbers a cause reported once lists before saying how many more."""


@dataclass
class _Repeat:
    """One cause reported once: where its message is kept (None: beyond the limit) and every
    line it was found on."""

    index: int | None
    lines: list[int]


@dataclass
class FileProblems:
    """The problems found in one file: the first few messages and a count of all of them."""

    source: str
    limit: int = MAX_LINES_PER_FILE
    kept: list[str] = field(default_factory=list)
    count: int = 0
    stopped: bool = False
    """True when reading stopped part-way, so the ids read so far are not the whole file."""
    sheet: str | None = None
    """The workbook sheet being read (None for CSV): places then say sheet, row and letter."""
    letters: dict[str, str] = field(default_factory=dict)
    """The column letter of each known column of a workbook sheet."""
    repeats: dict[tuple[str | None, str], _Repeat] = field(default_factory=dict)
    """Causes that may recur on many rows (an unknown id), each reported once."""

    def add_once(self, cause: str, message: str, line: int, column: str | None) -> None:
        """Record a problem whose one cause may recur on many rows (a misspelt or duplicated
        id): the first row gives the message, later rows only add to its count, so one cause
        does not push other problems out of the lines shown."""
        seen = self.repeats.get((column, cause))
        if seen is not None:
            seen.lines.append(line)
            return
        at = len(self.kept) if len(self.kept) < self.limit else None
        self.add(message, line=line, column=column)
        self.repeats[(column, cause)] = _Repeat(at, [line])

    def add(self, message: str, line: int | None = None, column: str | None = None) -> None:
        """Record a problem at a line or row (and column) of this file."""
        self.count += 1
        if len(self.kept) < self.limit:
            unit = "line" if self.sheet is None else "row"
            letter = self.letters.get(column or "")
            place = "".join(
                [
                    f"sheet {self.sheet!r}: " if self.sheet is not None else "",
                    f"{unit} {line}: " if line is not None else "",
                    f"column {column!r}" if column is not None else "",
                    f" ({letter})" if column is not None and letter else "",
                    ": " if column is not None else "",
                ]
            )
            self.kept.append(f"{self.source}: {place}{message}")

    def lines(self) -> list[str]:
        """The kept messages, then `... and N more errors in <file>` when some were left out."""
        kept = list(self.kept)
        unit = "line" if self.sheet is None else "row"
        for seen in self.repeats.values():
            n = len(seen.lines)
            if seen.index is not None and n > 1:
                shown = ", ".join(str(x) for x in seen.lines[:_REPEAT_LINES_SHOWN])
                more = f" and {n - _REPEAT_LINES_SHOWN} more" if n > _REPEAT_LINES_SHOWN else ""
                kept[seen.index] += f" (on {n} rows: {unit}s {shown}{more})"
        rest = self.count - len(self.kept)
        if rest <= 0:
            return kept
        noun = "error" if rest == 1 else "errors"
        return [*kept, f"... and {rest} more {noun} in {self.source}"]

    def __bool__(self) -> bool:
        return self.count > 0


@dataclass(frozen=True)
class FileSpec:
    """The columns of one kind of input file."""

    kind: str
    required: tuple[str, ...]
    optional: tuple[str, ...]
    matched: frozenset[str] = frozenset()
    """Columns whose text rules compare (ids, e-mail, institutions, topics): invisible and
    control characters are refused there (see `model.text`)."""

    @property
    def columns(self) -> tuple[str, ...]:
        """Every known column, required first."""
        return self.required + self.optional


@dataclass(frozen=True)
class Header:
    """Where each known column sits in a row, and how many cells a row must have."""

    position: dict[str, int]
    width: int
    separator: str | None = ","
    """The CSV separator (None for a workbook sheet, whose rows need no fixed width)."""
    unnamed: tuple[int, ...] = ()
    """A workbook's columns without a name, which must stay empty."""

    def cell(self, row: list[str], column: str) -> str:
        """The stripped cell of `column` (without a `safe_cell` quote), or "" when the file has
        no such column."""
        at = self.position.get(column)
        return "" if at is None else unmarked_cell(row[at].strip())


def shown(text: str, limit: int = 40) -> str:
    """`repr(text)`, cut short for a message when the cell is long."""
    return repr(text) if len(text) <= limit else f"{text[:limit]!r}... ({len(text)} characters)"


def open_source(
    path: str | os.PathLike[str], spec: FileSpec, options: ReadOptions, problems: FileProblems
) -> Source | None:
    """The file opened as CSV text or a workbook sheet, or None after recording why not."""
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        problems.add("no such file")
        return None
    except IsADirectoryError:
        problems.add("is a folder, not a CSV file or workbook")
        return None
    except OSError as error:
        problems.add(f"cannot read ({error.strerror or error})")
        return None
    if is_workbook_file(path, data[:8]):
        source, why = read_workbook(path, options.sheet)
        if source is None:
            problems.add(why)
            return None
        problems.sheet = source.sheet
        return source
    text, why, line = decode(data, options.encoding)
    if text is None:
        problems.add(why, line=line)
        return None
    theirs = {column.strip().lower() for column in options.columns.get(spec.kind, {}).values()}
    return Source(text=text, separator=sniff_separator(text, frozenset(spec.columns) | theirs))


def records(source: Source, problems: FileProblems) -> Iterator[tuple[int, list[str]]]:
    """(line or row where the record starts, cells) for every record, blank ones included.

    Malformed quoting ends a CSV file with one message, since later line breaks cannot be
    trusted.
    """
    if source.cells is not None:
        yield from enumerate(source.cells, start=1)
        return
    reader = source.csv_reader()
    end = 0
    while True:
        start = end + 1
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error as error:
            message = _csv_message(str(error))
            problems.add(f"{message} (separator {separator_name(source.separator)})", line=start)
            problems.stopped = True
            return
        end = reader.line_num
        yield start, row


def _csv_message(text: str) -> str:
    if text.startswith("unexpected end of data"):
        return 'a quoted cell is not closed before the end of the file (check the " marks)'
    if text.startswith("field larger than field limit"):
        return (
            f"a cell holds more than {csv.field_size_limit():,} characters; an abstract or "
            f"profile may hold at most {MAX_TEXT_CHARS:,}"
        )
    if "expected after" in text:
        return f"malformed quoting ({text}); a quote inside a quoted cell must be doubled"
    return f"malformed CSV ({text})"


def is_blank(row: list[str]) -> bool:
    """True for an empty record or one whose cells are all blank (spreadsheets write these)."""
    return all(not cell.strip() for cell in row)


def read_header(
    row: list[str],
    spec: FileSpec,
    ignore_extra: bool,
    problems: FileProblems,
    line: int = 1,
    separator: str | None = ",",
    columns: Mapping[str, str] | None = None,
) -> Header | None:
    """Match the header row against the spec; None (with messages) when it cannot be used.

    `separator` is the CSV file's (named in the messages); None reads a workbook sheet's
    header, whose empty cells are columns that must stay empty rather than errors. `columns`
    maps our fields to the file's own column names (another system's export)."""
    names = [cell.strip().lower() for cell in row]
    if columns:
        theirs = {column.strip().lower(): name for name, column in columns.items()}
        absent = [
            f"{name}={column!r}"
            for name, column in columns.items()
            if column.strip().lower() not in names
        ]
        if absent:
            problems.add(
                f"the column mapping names columns this file does not have "
                f"({', '.join(absent)}); its header has {', '.join(map(repr, row))}",
                line=line,
            )
            return None
        names = [theirs.get(name, name) for name in names]
    known = set(spec.columns)
    split = "" if separator is None else f" (separator {separator_name(separator)})"
    if not any(name in known for name in names):
        shown_cells = [cell for cell in row if cell.strip()] if separator is None else row
        found = ", ".join(repr(cell) for cell in shown_cells[:4]) + (
            ", ..." if len(shown_cells) > 4 else ""
        )
        problems.add(
            f"no header row{split}: the first row must name the columns "
            f"({', '.join(spec.columns)}); found {found}",
            line=line,
        )
        return None
    position: dict[str, int] = {}
    unnamed: list[int] = []
    usable = True
    for at, name in enumerate(names):
        if name in position:
            problems.add(
                f"column {name!r} appears twice (cells {position[name] + 1} and {at + 1})",
                line=line,
            )
            usable = False
        elif name in known:
            position[name] = at
        elif separator is None and not name:
            unnamed.append(at)
        elif not ignore_extra:
            if name:
                problems.add(
                    f"unknown column {name!r}{split}; known columns are "
                    f"{', '.join(spec.columns)} (--ignore-extra skips unknown columns)",
                    line=line,
                )
            else:
                problems.add(
                    f"cell {at + 1} of the header is empty; every column needs a name "
                    "(--ignore-extra skips unnamed columns)",
                    line=line,
                )
            usable = False
    missing = [name for name in spec.required if name not in position]
    if missing:
        plural = "s" if len(missing) > 1 else ""
        problems.add(
            f"missing required column{plural} {', '.join(repr(m) for m in missing)}{split}",
            line=line,
        )
        usable = False
    if separator is None:
        problems.letters = {name: column_letter(at) for name, at in position.items()}
    return Header(position, len(row), separator, tuple(unnamed)) if usable else None


def whole_number(text: str, minimum: int, maximum: int = MAX_COUNT) -> int | None:
    """An optional whole number from `minimum` to `maximum`; "" gives None."""
    if not text:
        return None
    if not _WHOLE.fullmatch(text):
        raise CellError(f"{shown(text)} is not a whole number >= {minimum}")
    # Compared as digits first: Python refuses to convert very long digit strings at all.
    digits = text.lstrip("+").lstrip("0") or "0"
    if len(digits) > len(str(maximum)) or int(digits) > maximum:
        raise CellError(f"{shown(text)} is above {maximum}, the most a count may be")
    if int(digits) < minimum:
        raise CellError(f"{text!r} is not a whole number >= {minimum}")
    return int(digits)


def yes_no(text: str) -> bool | None:
    """An optional yes/no flag (also true/false, y/n, 1/0, any case); "" gives None."""
    if not text:
        return None
    folded = text.lower()
    if folded in _TRUE:
        return True
    if folded in _FALSE:
        return False
    raise CellError(f"{shown(text)} is not yes or no (true/false, y/n and 1/0 work too)")


def listing(text: str) -> list[str]:
    """A `;`-separated list; blank entries are dropped."""
    return [part.strip() for part in text.split(";") if part.strip()]


def emails(text: str) -> list[str]:
    """A `;`-separated list of e-mail addresses, lower-cased."""
    return [email(part) for part in listing(text)]


def email(text: str) -> str:
    """One e-mail address, lower-cased; "" stays ""."""
    if not text:
        return ""
    try:
        return check_email(text)
    except ValueError as error:
        raise CellError(str(error)) from None


def decimal(text: str) -> str:
    """A number written with a decimal comma (`0,75`, as `;` files do) in the form `float`
    reads; other text is returned as it is."""
    if "," in text and "." not in text and text.count(",") == 1:
        return text.replace(",", ".")
    return text


def score(text: str, decimal_comma: bool = False) -> float:
    """A score: a finite number from 0 to `MAX_SCORE` (a decimal comma allowed if asked)."""
    try:
        value = float(decimal(text) if decimal_comma else text)
    except ValueError:
        raise CellError(
            f"{shown(text)} is not a number >= 0" if text else "empty; every row needs a score"
        ) from None
    if not math.isfinite(value):
        raise CellError(f"{text!r} is not a finite number")
    if value < 0:
        raise CellError(f"{text!r} is not a number >= 0")
    if value > MAX_SCORE:
        raise CellError(f"{shown(text)} is above {MAX_SCORE:g}, the highest score allowed")
    return value


def open_table(
    path: str | os.PathLike[str], spec: FileSpec, options: ReadOptions, problems: FileProblems
) -> tuple[Header, Iterator[tuple[int, list[str]]], Source] | None:
    """Read a file up to its header: (header, the remaining records, the source), or None."""
    source = open_source(path, spec, options, problems)
    if source is None:
        return None
    rows = records(source, problems)
    separator = None if source.is_workbook else source.separator
    for line, row in rows:
        if is_blank(row):
            continue
        header = read_header(
            row,
            spec,
            options.ignore_extra,
            problems,
            line,
            separator,
            columns=options.columns.get(spec.kind, {}),
        )
        return (header, rows, source) if header is not None else None
    if not problems:
        what = "the sheet" if source.is_workbook else "the file"
        problems.add(
            f"{what} is empty; the first row must name the columns ({', '.join(spec.columns)})"
        )
    return None


def data_rows(
    rows: Iterator[tuple[int, list[str]]], header: Header, problems: FileProblems
) -> Iterator[tuple[int, list[str]]]:
    """The non-blank records after the header that fit it: as many cells as the header (CSV),
    or nothing outside the named columns (a workbook sheet, whose rows are padded)."""
    for line, row in rows:
        if is_blank(row):
            continue
        if header.separator is None:
            stray = [at for at in header.unnamed if at < len(row) and row[at].strip()]
            stray += [at for at in range(header.width, len(row)) if row[at].strip()]
            if stray:
                problems.add(
                    f"a value in column {column_letter(stray[0])}, which has no name in the "
                    "header row; name the column or clear the cell",
                    line=line,
                )
                continue
            if len(row) < header.width:
                row = row + [""] * (header.width - len(row))
            yield line, row
            continue
        if len(row) != header.width:
            problems.add(
                f"{len(row)} cells, but the header has {header.width} "
                f"(separator {separator_name(header.separator)})",
                line=line,
            )
            continue
        yield line, row
