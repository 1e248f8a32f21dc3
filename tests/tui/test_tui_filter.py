"""The filter line: escape leaves it for the table, and a new session starts unfiltered."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from textual.widgets import Checkbox, Input, TabbedContent

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import Form
from review_alloc.tui.entity_views import PaperView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.records import ConflictView

REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]


async def test_escape_leaves_the_filter_and_digits_switch_tabs(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("2", "slash", "b", "u", "o", "y")
        await pilot.pause()
        view = app.query_one(PaperView)
        assert isinstance(app.focused, Input)
        await pilot.press("escape")
        await pilot.pause()
        # Back on the table, with the filter applied at once (no wait for the pause).
        assert app.focused is view.query_one(".main", RowTable)
        assert view.query_one(".filter", Input).value == "buoy"
        assert 0 < len(view.visible_keys()) < len(app.workspace.session.papers)
        await pilot.press("4")
        await pilot.pause()
        assert app.query_one(TabbedContent).active == "conflicts"
        assert view.query_one(".filter", Input).value == "buoy"
        # The same in Conflicts.
        conflicts = app.query_one(ConflictView)
        await pilot.press("slash", "x", "escape")
        await pilot.pause()
        assert app.focused is conflicts.query_one(RowTable)
        await pilot.press("3")
        await pilot.pause()
        assert app.query_one(TabbedContent).active == "reviewers"


async def test_a_new_import_starts_without_the_old_filters(
    new_app: Factory, tmp_path: Path
) -> None:
    csv = REPO / "sample_sessions" / "workshop-csv"
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("2", "slash", "n", "o", "t", "h", "i", "n", "g", "escape")
        await pilot.press("4", "slash", "z", "z", "escape")
        await pilot.pause()
        assert app.query_one(PaperView).visible_keys() == []
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        for name, file in (
            ("papers", "papers.csv"),
            ("reviewers", "reviewers.csv"),
            ("conflicts", "conflicts.csv"),
            ("scores", "scores.csv"),
        ):
            form.query_one(f"#field-{name}", Input).value = str(csv / file)
        form.query_one("#field-target", Input).value = str(tmp_path / "grant.json")
        form.query_one("#panel", Checkbox).value = True
        await pilot.click("#ok")
        await pilot.pause()
        assert not isinstance(app.screen, Form)
        assert app.workspace.session.kind == "panel"
        papers = app.query_one(PaperView)
        assert papers.query_one(".filter", Input).value == ""
        assert len(papers.visible_keys()) == 40
        conflicts = app.query_one(ConflictView)
        assert conflicts.query_one(Input).value == ""
        assert conflicts.shown_pairs()
        labels = [str(t.label) for t in app.query_one(TabbedContent).query("Tab")]
        assert "2 Proposals" in labels
