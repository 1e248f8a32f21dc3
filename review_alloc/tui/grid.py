"""Filling a DataTable with columns sized from the data, before anything is drawn.

Columns get explicit widths measured here rather than by the table on idle: a table drawn
between being filled and its next idle (a tab being shown, a focus change) would otherwise keep
lines cut at the header widths.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text
from textual.widgets import DataTable

WIDEST = 48
"""No column is drawn wider than this; longer text is cut."""


def cell_text(value: object) -> str:
    """The plain text of a cell."""
    return value.plain if isinstance(value, Text) else str(value)


def fill_table(
    table: DataTable,
    names: Sequence[str],
    rows: Sequence[Sequence[object]],
    measure: Sequence[Sequence[object]] | None = None,
) -> None:
    """Replace the rows of `table`; size columns to fit `measure` (default: `rows`)."""
    widths = [len(n) for n in names]
    for cells in rows if measure is None else measure:
        for k, c in enumerate(cells):
            size = len(cell_text(c))
            if size > widths[k]:
                widths[k] = min(size, WIDEST)
    current = [(c.label.plain, c.width, c.auto_width) for c in table.ordered_columns]
    wanted = [(n, w, False) for n, w in zip(names, widths, strict=True)]
    if current != wanted:
        table.clear(columns=True)
        for name, width in zip(names, widths, strict=True):
            table.add_column(name, width=width, key=name)
    else:
        table.clear()
    table.add_rows(rows)
