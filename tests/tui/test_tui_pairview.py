"""The app's pair view shows what `review-alloc pair` prints, for the pair under the cursor."""

from __future__ import annotations

from collections.abc import Callable

from textual.widgets import Static

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.entity_views import PaperView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.pairview import PairView

Factory = Callable[..., ReviewAllocApp]


async def test_o_opens_the_pair_under_the_cursor_with_its_score_parts(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("l")  # no pair list on the overview: a warning, no view
        await pilot.pause()
        assert not isinstance(app.screen, PairView)
        await pilot.press("2", "enter")
        await pilot.pause()
        view = app.query_one(PaperView)
        pairs = view.query_one(".pairs", RowTable)
        pairs.move_cursor(row=1)
        chosen = view.selected_pair()
        assert chosen is not None
        await pilot.press("l")
        await pilot.pause()
        assert isinstance(app.screen, PairView)
        s = app.workspace.session
        expected = app.workspace.pair_report(
            s.reviewers[chosen.reviewer].id, s.papers[chosen.paper].id
        ).lines()
        shown = str(app.screen.query_one("#pair-report", Static).render())
        assert shown.splitlines() == expected
        # The demo is scored by the recipe: the four parts are shown with their weights.
        assert any(line.strip().startswith("text ") for line in expected)
        assert any(line.strip().startswith("bid ") for line in expected)
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, PairView)


def test_the_help_lists_l_with_the_pair_lists_it_acts_on(new_app: Factory) -> None:
    sections = dict(new_app().key_sections())
    assert "l" not in [key for key, _ in sections["Everywhere"]]
    assert "l" in [key for key, _ in sections["Papers, Reviewers, Gaps"]]
