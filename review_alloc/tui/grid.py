"""`RowTable`: a read-only table that draws only the rows on screen.

Textual's DataTable measures every cell of every row each time it is filled, which costs over a
second for the 1,500-paper sample; the views here refill on every filter keystroke and every
change. This table takes the column widths from the data once (a simple length count), keeps the
rows as given, and renders only the lines in view, so filling and scrolling stay instant.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual import events
from textual.binding import Binding
from textual.geometry import Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip
from textual.widgets import Input

WIDEST = 48
"""No column is drawn wider than this; longer text is cut."""
GAP = 2
"""Spaces between columns."""
CURSOR_MARK = "▶"
"""Drawn in the cursor row's left margin, so the cursor shows without colour."""


def cell_text(value: object) -> str:
    """The plain text of a cell."""
    return value.plain if isinstance(value, Text) else str(value)


class RowTable(ScrollView, can_focus=True):
    """Rows of cells under a fixed header line, one cursor row, sized to the data."""

    BINDINGS = [
        Binding("up", "move(-1)", "Up", show=False),
        Binding("down", "move(1)", "Down", show=False),
        Binding("pageup", "page(-1)", "Page up", show=False),
        Binding("pagedown", "page(1)", "Page down", show=False),
        Binding("home", "jump(0)", "First row", show=False),
        Binding("end", "jump(-1)", "Last row", show=False),
        Binding("enter", "choose", "Open", show=False),
    ]

    COMPONENT_CLASSES = {
        "rowtable--header",
        "rowtable--cursor",
        "rowtable--cursor-blurred",
        "rowtable--odd",
    }

    DEFAULT_CSS = """
    RowTable {
        background: $surface;
    }
    RowTable > .rowtable--header {
        text-style: bold;
        background: $panel;
        color: $text;
    }
    RowTable > .rowtable--cursor {
        background: $accent;
        color: $text;
    }
    RowTable > .rowtable--cursor-blurred {
        background: $accent 35%;
    }
    RowTable > .rowtable--odd {
        background: $surface-lighten-1;
    }
    """

    cursor_row: reactive[int] = reactive(0, always_update=True)

    @dataclass
    class Highlighted(Message):
        """The cursor moved to `row`."""

        table: RowTable
        row: int

        @property
        def control(self) -> RowTable:
            """The table that sent it (so `@on(..., selector)` can match)."""
            return self.table

    @dataclass
    class Chosen(Message):
        """Enter was pressed on `row`, or it was clicked while under the cursor."""

        table: RowTable
        row: int

        @property
        def control(self) -> RowTable:
            """The table that sent it."""
            return self.table

    @dataclass
    class HeaderClicked(Message):
        """A column heading was clicked."""

        table: RowTable
        column: int

        @property
        def control(self) -> RowTable:
            """The table that sent it."""
            return self.table

    def __init__(self, *, classes: str | None = None, id: str | None = None) -> None:
        super().__init__(classes=classes, id=id)
        self._names: list[str] = []
        self._widths: list[int] = []
        self._rows: list[Sequence[object]] = []
        self._lines: dict[int, Strip] = {}

    # -- data -----------------------------------------------------------------------------

    @property
    def row_count(self) -> int:
        """How many rows the table holds."""
        return len(self._rows)

    @property
    def columns(self) -> list[str]:
        """The column headings."""
        return list(self._names)

    def row_at(self, row: int) -> list[str]:
        """The plain text of one row's cells."""
        return [cell_text(c) for c in self._rows[row]]

    def fill(
        self,
        names: Sequence[str],
        rows: Sequence[Sequence[object]],
        measure: Sequence[Sequence[object]] | None = None,
        *,
        cursor: int = 0,
        widest: int = WIDEST,
        limits: Mapping[int, int] | None = None,
    ) -> None:
        """Show `rows` under `names`; widths fit `measure` (default `rows`), capped at `widest`
        and, for the columns in `limits`, at their own width."""
        widths = [len(n) for n in names]
        caps = [min(widest, (limits or {}).get(k, widest)) for k in range(len(names))]
        for cells in rows if measure is None else measure:
            for k, c in enumerate(cells):
                size = len(cell_text(c))
                if size > widths[k]:
                    widths[k] = min(size, caps[k])
        self._names, self._widths, self._rows = list(names), widths, list(rows)
        self._lines.clear()
        total = sum(widths) + GAP * len(widths)
        self.virtual_size = Size(total, len(self._rows) + 1)
        self.cursor_row = max(0, min(cursor, len(self._rows) - 1))
        self.refresh()

    # -- drawing --------------------------------------------------------------------------

    def _line_text(self, cells: Sequence[object]) -> Text:
        out = Text(no_wrap=True, end="")
        for width, cell in zip(self._widths, cells, strict=False):
            text = cell.copy() if isinstance(cell, Text) else Text(str(cell))
            text.truncate(width, overflow="ellipsis", pad=True)
            out.append(" " * (GAP // 2))
            out.append_text(text)
            out.append(" " * (GAP - GAP // 2))
        return out

    def _strip(self, text: Text) -> Strip:
        segments = list(text.render(self.app.console))
        return Strip([s for s in segments if s.text != "\n"])

    def render_line(self, y: int) -> Strip:
        """One screen line: the header at the top, else the row scrolled into that place."""
        width = self.scrollable_content_region.width
        scroll_x, scroll_y = int(self.scroll_offset.x), int(self.scroll_offset.y)
        if y == 0:
            style = self.get_component_rich_style("rowtable--header")
            line = self._strip(self._line_text(self._names)).apply_style(style)
            return line.crop_extend(scroll_x, scroll_x + width, style)
        row = scroll_y + y - 1
        base = self.rich_style
        if row >= len(self._rows):
            return Strip([Segment(" " * width, base)])
        line = self._lines.get(row)
        if line is None:
            # Cached without any row colour: the odd-row shade and the cursor are both laid
            # under the cells' own styles when drawn, so neither hides the other.
            line = self._strip(self._line_text(self._rows[row]))
            self._lines[row] = line
        if row == self.cursor_row:
            name = "rowtable--cursor" if self.has_focus else "rowtable--cursor-blurred"
            style = self.get_component_rich_style(name)
            # A mark in the first cell's margin shows the cursor without colour too.
            line = Strip([Segment(CURSOR_MARK), *line.crop(1, line.cell_length)]).apply_style(
                style
            )
            return line.crop_extend(scroll_x, scroll_x + width, style)
        if row % 2:
            style = self.get_component_rich_style("rowtable--odd")
            return line.apply_style(style).crop_extend(scroll_x, scroll_x + width, style)
        return line.crop_extend(scroll_x, scroll_x + width, base + Style())

    # -- cursor ---------------------------------------------------------------------------

    def watch_cursor_row(self, row: int) -> None:
        """Keep the cursor row in view and tell the parent."""
        body = max(self.scrollable_content_region.height - 1, 1)
        top = int(self.scroll_offset.y)
        if row < top:
            self.scroll_to(y=row, animate=False, immediate=True)
        elif row >= top + body:
            self.scroll_to(y=row - body + 1, animate=False, immediate=True)
        self.refresh()
        if self._rows:
            self.post_message(self.Highlighted(self, row))

    def move_cursor(self, row: int) -> None:
        """Put the cursor on `row` (clamped to the rows there are)."""
        if self._rows:
            self.cursor_row = max(0, min(row, len(self._rows) - 1))

    def action_move(self, step: int) -> None:
        """Move the cursor by `step` rows."""
        self.move_cursor(self.cursor_row + step)

    def action_page(self, direction: int) -> None:
        """Move the cursor by one screen of rows."""
        body = max(self.scrollable_content_region.height - 2, 1)
        self.move_cursor(self.cursor_row + direction * body)

    def action_jump(self, row: int) -> None:
        """Go to the first row (0) or the last (-1)."""
        self.move_cursor(len(self._rows) - 1 if row < 0 else row)

    def action_choose(self) -> None:
        """Open the row under the cursor."""
        if self._rows:
            self.post_message(self.Chosen(self, self.cursor_row))

    def on_focus(self) -> None:
        """Redraw the cursor in its focused colour."""
        self.refresh()

    def on_blur(self) -> None:
        """Redraw the cursor in its resting colour."""
        self.refresh()

    def on_click(self, event: events.Click) -> None:
        """A click on a heading sorts; on a row it moves the cursor, twice opens it."""
        offset = event.get_content_offset(self)
        if offset is None:
            return
        if offset.y == 0:
            x = offset.x + int(self.scroll_offset.x)
            edge = 0
            for k, width in enumerate(self._widths):
                edge += width + GAP
                if x < edge:
                    self.post_message(self.HeaderClicked(self, k))
                    return
            return
        row = int(self.scroll_offset.y) + offset.y - 1
        if 0 <= row < len(self._rows):
            if row == self.cursor_row or event.chain > 1:
                self.cursor_row = row
                self.post_message(self.Chosen(self, row))
            else:
                self.cursor_row = row


class FilterInput(Input):
    """A view's filter line; escape leaves it for the table below (the filter stays applied),
    so digits and letters are keys again."""

    BINDINGS = [Binding("escape", "leave", "Back to the table", show=False)]

    @dataclass
    class Left(Message):
        """Escape was pressed in the filter line."""

        field: FilterInput

        @property
        def control(self) -> FilterInput:
            """The filter line that sent it."""
            return self.field

    def action_leave(self) -> None:
        """Hand the focus back; the view redraws and focuses its table."""
        self.post_message(self.Left(self))
