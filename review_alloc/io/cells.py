"""Spreadsheet-safe CSV cells, written in one place for every CSV this program writes.

A spreadsheet that opens a CSV file runs a cell that begins with `=`, `+`, `-` or `@` as a
formula, and one that begins with a tab or carriage return may be read as one too; a title
such as `=HYPERLINK(...)` would then act when the chair opens the export. Following the OWASP
guidance on CSV injection, such a text cell is written with a single quote in front, which
spreadsheets show as a text marker. Numbers are written as numbers (never quoted, never
prefixed), so scores stay numbers in a spreadsheet.

So that a file written here and read back by the importer keeps its values, the quote is
added whenever the text after its leading quotes begins with one of those characters, and
`unmarked_cell` removes exactly one quote from such a cell: the mapping is one to one.

Cells are quoted as RFC 4180 says (a cell holding a comma, a double quote, a carriage return
or a line feed is enclosed in double quotes, its quotes doubled), so that a row never splits;
Python's csv writer leaves a lone carriage return unquoted when lines end in a line feed.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Sequence

from review_alloc.model import atomic_write_bytes

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
"""First characters that make a spreadsheet treat a text cell as a formula (OWASP)."""

_QUOTE_WHEN = (",", '"', "\r", "\n")
_BOM = "\ufeff"

Cell = str | int | float


def _marked(text: str) -> bool:
    return text.lstrip("'").startswith(FORMULA_STARTS)


def safe_cell(value: Cell) -> Cell:
    """A cell value that no spreadsheet runs as a formula: text that could start one gets a
    leading single quote; numbers are returned unchanged (a float must be finite)."""
    if isinstance(value, bool):
        raise TypeError("write a flag as text (yes/no), not as a bool")
    if isinstance(value, int | float):
        if isinstance(value, float) and not math.isfinite(value):
            raise ValueError(f"a number cell must be finite, not {value!r}")
        return value
    return f"'{value}" if _marked(value) else value


def unmarked_cell(text: str) -> str:
    """The value `safe_cell` protected: one leading quote less when it marks a formula start."""
    return text[1:] if text.startswith("'") and _marked(text) else text


def _field(value: Cell) -> str:
    cell = safe_cell(value)
    if isinstance(cell, float):
        return repr(cell)
    if isinstance(cell, int):
        return str(cell)
    if any(mark in cell for mark in _QUOTE_WHEN):
        return '"' + cell.replace('"', '""') + '"'
    return cell


def csv_text(header: Sequence[str], rows: Iterable[Sequence[Cell]], *, bom: bool = False) -> str:
    """A whole CSV document of safe cells, lines ending in a line feed, optionally with a BOM.

    Some spreadsheets read a CSV file as UTF-8 only when it starts with a byte-order mark
    (`bom=True`); the importer accepts such files.
    """
    lines = [",".join(_field(cell) for cell in header)]
    lines.extend(",".join(_field(cell) for cell in row) for row in rows)
    return (_BOM if bom else "") + "\n".join(lines) + "\n"


def write_csv(
    path: str | os.PathLike[str],
    header: Sequence[str],
    rows: Iterable[Sequence[Cell]],
    *,
    bom: bool = False,
) -> None:
    """Write `csv_text(header, rows, bom=bom)` to `path` atomically, as UTF-8."""
    atomic_write_bytes(path, csv_text(header, rows, bom=bom).encode("utf-8"))
