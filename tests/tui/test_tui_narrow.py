"""Nothing a chair needs is cut off: the file name at 80x24, every reason in full."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from textual.widgets import Static

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.entity_views import PaperView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.records import ConflictView

REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]


def _on_screen(app: ReviewAllocApp, widget: Static) -> str:
    """The widget's text, after checking that all of it lies inside the screen."""
    region = widget.region
    assert region.height > 0 and region.bottom <= app.size.height and region.right <= app.size.width
    return str(widget.render()).replace("\n", " ")


async def test_bar_keeps_the_file_name_at_80_columns(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "conference-copy.json"
    shutil.copy(REPO / "sample_sessions" / "workshop.json", path)
    app = new_app(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.pause()
        bar = str(app.query_one("#bar", Static).render())
        assert len(bar) <= 80 and bar.rstrip().endswith("conference-copy.json")
        assert "UNSAVED" in bar and "plan current" in bar
        # A long session name gives way before the file name does.
        long_name = app.workspace.session.model_copy(update={"name": "N" * 70})
        app.workspace.session = long_name
        text = app.bar_text(80).plain
        assert len(text) <= 80 and text.endswith("conference-copy.json") and "…" in text


async def test_reasons_shown_in_full_at_80_by_24(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("4")
        await pilot.pause()
        view = app.query_one(ConflictView)
        table = view.query_one(RowTable)
        reasons = app.facts.conflict_reason
        rid, pid = app.workspace.session.reviewer_index(), app.workspace.session.paper_index()
        shown = view.shown_pairs()
        longest = max(
            range(len(shown)), key=lambda k: len(reasons[rid[shown[k][0]], pid[shown[k][1]]])
        )
        table.move_cursor(longest)
        await pilot.pause()
        reviewer, paper = view.shown_pairs()[longest]
        note = _on_screen(app, view.query_one(".conflict-note", Static))
        assert reasons[rid[reviewer], pid[paper]] in note and reviewer in note and paper in note
        # The Reasons column itself is inside the screen.
        assert table.columns.index("Reasons") == 3
        # A paper's detail shows the whole standing of the pair under the pair cursor.
        await pilot.press("2", "enter")
        await pilot.pause()
        papers = app.query_one(PaperView)
        pairs = papers.query_one(".pairs", RowTable)
        for row in range(pairs.row_count):
            pairs.move_cursor(row)
            await pilot.pause()
            pair = papers.selected_pair()
            assert pair is not None
            assert pair.status in _on_screen(app, papers.query_one(".pair-note", Static))


async def test_import_form_buttons_reachable_at_80_by_24(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("i")
        await pilot.pause()
        assert app.focused is not None and app.focused.id == "field-papers"
        # Tab goes field by field (the form's body is no stop) down to the buttons.
        for _ in range(6):
            await pilot.press("tab")
        await pilot.pause()
        focused = app.focused
        assert focused is not None and focused.id == "ok"
        region = focused.region
        assert region.height > 0 and region.bottom <= app.size.height
