"""The row cursor is drawn on every row, odd or even, and the keys act on the row it shows."""

from __future__ import annotations

from collections.abc import Callable

from rich.style import Style

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.entity_views import PaperView
from review_alloc.tui.grid import CURSOR_MARK, RowTable

Factory = Callable[..., ReviewAllocApp]


def _line(table: RowTable, row: int) -> tuple[str, set[Style]]:
    """The text and the segment styles of the screen line that shows `row`."""
    y = row - int(table.scroll_offset.y) + 1
    strip = table.render_line(y)
    return strip.text, {s.style for s in strip if s.style is not None and s.text.strip()}


def _backgrounds(styles: set[Style]) -> set[object]:
    return {s.bgcolor for s in styles}


async def test_cursor_shows_on_odd_and_even_rows(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("2")
        await pilot.pause()
        view = app.query_one(PaperView)
        table = view.query_one(".main", RowTable)
        assert table.has_focus
        cursor_bg = table.get_component_rich_style("rowtable--cursor").bgcolor
        odd_bg = table.get_component_rich_style("rowtable--odd").bgcolor
        assert cursor_bg is not None and odd_bg is not None and cursor_bg != odd_bg
        for row in (0, 1, 2, 3):
            table.move_cursor(row)
            await pilot.pause()
            text, styles = _line(table, row)
            # Every visible cell of the cursor row is drawn on the cursor colour, odd or even.
            assert _backgrounds(styles) == {cursor_bg}, (row, styles)
            assert text.startswith(CURSOR_MARK)
            # The neighbour keeps its own shade and has no mark.
            other = row + 1
            text, styles = _line(table, other)
            assert not text.startswith(CURSOR_MARK)
            assert cursor_bg not in _backgrounds(styles)
            if other % 2:
                assert _backgrounds(styles) == {odd_bg}
