"""Who leads each paper is shown in Papers, in a paper's detail and in a reviewer's detail."""

from __future__ import annotations

from collections.abc import Callable

from textual.widgets import Static

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.entity_views import PaperView, ReviewerView
from review_alloc.tui.grid import RowTable

Factory = Callable[..., ReviewAllocApp]


async def test_leads_shown_in_tables_and_details(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("2")
        await pilot.pause()
        s = app.workspace.session
        leads = {a.paper: a.reviewer for a in s.plan.assignments if a.lead}
        assert leads
        view = app.query_one(PaperView)
        table = view.query_one(".main", RowTable)
        column = table.columns.index("Lead")
        shown = {table.row_at(k)[0]: table.row_at(k)[column] for k in range(table.row_count)}
        assert shown == {p.id: leads.get(p.id, "-") for p in s.papers}
        paper = view.visible_keys()[0]
        head = str(view.query_one(".detail-head", Static).render())
        lead = leads[paper]
        assert f"lead: {lead} " in head
        pairs = view.query_one(".pairs", RowTable)
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        marked = [r[0] for r in rows if "lead" in r[2]]
        assert marked == [lead]
        await pilot.press("3")
        await pilot.pause()
        reviewers = app.query_one(ReviewerView)
        assert reviewers.select(lead)
        await pilot.pause()
        head = str(reviewers.query_one(".detail-head", Static).render())
        mine = [p.id for p in s.papers if leads.get(p.id) == lead]
        assert f"leads {len(mine)}: {', '.join(mine[:12])}" in head
        table = reviewers.query_one(".main", RowTable)
        row = table.row_at(reviewers.visible_keys().index(lead))
        assert row[table.columns.index("Leads")] == str(len(mine))
