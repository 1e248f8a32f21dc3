"""Opening one input file as rows of text cells: CSV as spreadsheets save it, or a workbook.

CSV: the bytes are decoded as UTF-8 (a byte-order mark allowed) or, when they start with a
UTF-16 byte-order mark, as UTF-16; any other encoding only when the chair names it
(`encoding`), since guessing one would silently change the letters of names and ids. The
separator is sniffed among comma, semicolon and tab from the header row: the one that splits
it into the most known column names wins (spreadsheets in locales whose decimal mark is a
comma save with `;`). In a `;` file a number may use a decimal comma.

Workbooks (.xlsx, .xlsm, .xls, .ods) are read with python-calamine: the first sheet, or the one
named by `sheet`. Every cell becomes the text a CSV cell would hold: a number typed in a cell
gives its digits (`3`, not `3.0`), a true/false cell `true`/`false`, a date its ISO form.
Rows and columns keep the sheet's own numbers, so a message says `row 7` and column `C`.
"""

from __future__ import annotations

import csv
import datetime
import io
import os
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path

from review_alloc.model.text import nfc

WORKBOOK_SUFFIXES = frozenset({".xlsx", ".xlsm", ".xls", ".ods"})
SEPARATORS = (",", ";", "\t")
_ZIP = b"PK\x03\x04"
_OLE = b"\xd0\xcf\x11\xe0"


@dataclass(frozen=True)
class ReadOptions:
    """How the chair asked for the input files to be read."""

    ignore_extra: bool = False
    sheet: str | None = None
    """The sheet of a workbook to read (None: the first)."""
    encoding: str | None = None
    """The text encoding of a CSV file that is neither UTF-8 nor UTF-16 with a BOM."""
    columns: Mapping[str, Mapping[str, str]] = field(default_factory=dict)
    """Kind of file -> our field -> the file's own name for that column (`io.columns`)."""


def separator_name(separator: str) -> str:
    """How a message names a separator: `','`, `';'` or `tab`."""
    return "tab" if separator == "\t" else repr(separator)


def column_letter(index: int) -> str:
    """The spreadsheet letter of a 0-based column index (0 → A, 26 → AA)."""
    letters = ""
    index += 1
    while index:
        index, rest = divmod(index - 1, 26)
        letters = chr(ord("A") + rest) + letters
    return letters


@dataclass
class Source:
    """One input file opened for reading: CSV text with its separator, or a sheet's cells."""

    text: str | None = None
    separator: str = ","
    sheet: str | None = None
    cells: list[list[str]] | None = None
    """A workbook sheet's rows as text, from row 1 (None for CSV)."""

    @property
    def is_workbook(self) -> bool:
        """Whether the rows come from a workbook sheet."""
        return self.cells is not None

    @property
    def decimal_comma(self) -> bool:
        """Whether numbers may be written with a decimal comma (`;` files)."""
        return self.separator == ";"

    def csv_reader(self) -> Iterator[list[str]]:
        """A strict csv reader over the text, with the sniffed separator."""
        assert self.text is not None
        return csv.reader(io.StringIO(self.text), delimiter=self.separator, strict=True)


def is_workbook_file(path: str | os.PathLike[str], head: bytes) -> bool:
    """Whether a file is a workbook: by its suffix, or by a zip or OLE start (a saved
    workbook renamed .csv is still a workbook)."""
    return Path(path).suffix.lower() in WORKBOOK_SUFFIXES or head.startswith((_ZIP, _OLE))


def decode(data: bytes, encoding: str | None) -> tuple[str | None, str, int | None]:
    """(text, "", None) or (None, why not, the line where it failed) for a CSV file's bytes."""
    if data.startswith(b"\xef\xbb\xbf"):
        return _decoded(data[3:], "utf-8")
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return _decoded(data, "utf-16")
    if encoding is not None:
        return _decoded(data, encoding)
    return _decoded(data, "utf-8")


def _decoded(data: bytes, encoding: str) -> tuple[str | None, str, int | None]:
    try:
        return nfc(data.decode(encoding)), "", None
    except LookupError:
        return None, f"unknown encoding {encoding!r} (try utf-8, cp1252 or latin-1)", None
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        byte = f"byte 0x{data[error.start]:02x} at byte offset {error.start}"
        if encoding == "utf-8":
            return (
                None,
                f"not UTF-8 text ({byte}); save the file as UTF-8 (or UTF-16 with a "
                "byte-order mark), or name its encoding with --encoding (for example "
                "--encoding cp1252); other encodings are read only when named",
                line,
            )
        return None, f"not {encoding} text ({byte})", line


def sniff_separator(text: str, known: frozenset[str]) -> str:
    """The separator of a CSV text: the one whose header row holds the most known column
    names, then the one that splits the header into the most cells; a comma on a tie."""
    header = ""
    for raw in io.StringIO(text):
        if raw.strip(" \t\r\n,;"):
            header = raw
            break
    best, best_key = ",", (-1, -1)
    for separator in SEPARATORS:
        try:
            row = next(csv.reader([header], delimiter=separator), [])
        except csv.Error:
            continue
        names = sum(1 for cell in row if cell.strip().lower() in known)
        key = (names, len(row))
        if key > best_key:
            best, best_key = separator, key
    return best


def workbook_cell(value: object) -> str:
    """The text of one workbook cell, as a CSV cell would hold it."""
    if isinstance(value, str):
        return nfc(value)
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, datetime.date | datetime.time):
        return value.isoformat()
    if value is None:
        return ""
    return str(value)


def read_workbook(path: str | os.PathLike[str], sheet: str | None) -> tuple[Source | None, str]:
    """(the sheet as a Source, "") or (None, why not)."""
    from python_calamine import CalamineWorkbook

    try:
        book = CalamineWorkbook.from_path(os.fspath(path))
    except Exception as error:  # calamine raises its own several kinds for a broken file
        return None, f"cannot read it as a workbook ({type(error).__name__}: {error})"
    names = list(book.sheet_names)
    if not names:
        return None, "the workbook has no sheets"
    name = names[0] if sheet is None else sheet
    if name not in names:
        listed = ", ".join(repr(n) for n in names)
        return None, f"no sheet named {sheet!r}; its sheets are {listed}"
    try:
        rows = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
    except Exception as error:
        return None, f"sheet {name!r}: cannot read it ({type(error).__name__}: {error})"
    cells = [[workbook_cell(value) for value in row] for row in rows]
    return Source(sheet=name, cells=cells), ""
