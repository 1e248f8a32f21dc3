"""A recruit placeholder becomes the real person from the Reviewers tab (n)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from textual.widgets import Input, Static

from review_alloc.model import save_session
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import Form
from review_alloc.tui.entity_views import ID_WIDTH, ReviewerView
from review_alloc.tui.grid import RowTable
from review_alloc.workspace import ChangeSet
from tests.plan.test_explain_groups import topic_session

Factory = Callable[..., ReviewAllocApp]


async def settle(app: ReviewAllocApp, pilot) -> None:
    """Wait for every worker and for the messages they posted."""
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


async def test_name_a_recruit(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    app = new_app(path)
    async with app.run_test(size=(80, 24)) as pilot:
        ws = app.workspace
        ws.solve()
        ws.accept(ws.what_if(ChangeSet(fixes=("recruit-min",))))
        app._refresh_all()
        placeholder = ws.recruit_placeholders()[0]
        await pilot.press("3")
        await pilot.pause()
        view = app.query_one(ReviewerView)
        # On a person, n says what it is for and changes nothing.
        assert view.select(ws.session.reviewers[0].id)
        await pilot.press("n")
        await pilot.pause()
        assert not isinstance(app.screen, Form)
        assert view.select(placeholder)
        await pilot.pause()
        head = str(view.query_one(".detail-head", Static).render())
        assert "recruit placeholder" in head
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        # Starts in the name field: typing goes there.
        await pilot.press(*"Oda Brennvik")
        form.query_one("#field-id", Input).value = "R-BRENN"
        form.query_one("#field-email", Input).value = "oda@lindmark.example"
        form.query_one("#field-institution", Input).value = "Lindmark Institute"
        events = len(ws.session.events)
        await pilot.click("#ok")
        await settle(app, pilot)
        assert not isinstance(app.screen, Form)
        s = ws.session
        assert len(s.events) == events + 1 and s.events[-1].subject == "R-BRENN"
        assert s.events[-1].reason == "recruited for the fix"
        person = s.reviewers[s.reviewer_index()["R-BRENN"]]
        assert (person.name, person.email, person.institution) == (
            "Oda Brennvik",
            "oda@lindmark.example",
            "Lindmark Institute",
        )
        assert view.visible_keys()[view.query_one(".main").cursor_row] == "R-BRENN"
        assert "recruit placeholder" not in str(view.query_one(".detail-head", Static).render())


async def test_a_long_placeholder_id_keeps_the_id_column_narrow(
    new_app: Factory, tmp_path: Path
) -> None:
    path = tmp_path / "venue.json"
    topic = "quantum sensing and very long topic names of the field"
    save_session(topic_session({topic: (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    app = new_app(path)
    async with app.run_test(size=(80, 24)) as pilot:
        ws = app.workspace
        ws.solve()
        ws.accept(ws.what_if(ChangeSet(fixes=("recruit-min",))))
        app._refresh_all()
        placeholder = ws.recruit_placeholders()[0]
        assert len(placeholder) > ID_WIDTH
        await pilot.press("3")
        await pilot.pause()
        view = app.query_one(ReviewerView)
        table = view.query_one(".main", RowTable)
        # The column stays at its cap; the row shows the id cut with an ellipsis.
        assert table.columns[0] == "Id"
        assert view.select(placeholder)
        await pilot.pause()
        y = table.cursor_row - int(table.scroll_offset.y) + 1
        line = "".join(s.text for s in table.render_line(y))
        assert placeholder not in line and placeholder[: ID_WIDTH - 1] + "…" in line
        # The detail pane has the whole id.
        head = str(view.query_one(".detail-head", Static).render())
        assert placeholder in head
