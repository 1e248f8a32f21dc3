"""The Gaps tab's shortfall groups and fixes: explain, preview a fix on a copy, accept, re-plan."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from review_alloc.model import load_session
from review_alloc.plan import find_gaps
from review_alloc.plan.explain import coverage_network, shortfall_groups
from review_alloc.plan.fixes import raise_caps_fix
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.gapfix import ExplainView
from review_alloc.tui.grid import RowTable

SIZE = (120, 40)
REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]
TOPIC = "hardware verification"


async def settle(app: ReviewAllocApp, pilot) -> None:
    """Wait for every worker and for the messages they posted."""
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


async def test_groups_preview_and_accept_the_cap_raise(new_app: Factory, tmp_path: Path) -> None:
    shipped = REPO / "sample_sessions" / "conference.json"
    before_bytes = shipped.read_bytes()
    path = tmp_path / "conference.json"
    shutil.copy(shipped, path)
    # The numbers the view must show come from the plan layer itself, computed here.
    session = load_session(path)
    cov = coverage_network(session, "reviews")
    expected = next(g for g in shortfall_groups(cov) if g.topics[0] == TOPIC)
    cap_fix = raise_caps_fix(cov)
    assert cap_fix.raises and cap_fix.coverage_after == cap_fix.demand

    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        await settle(app, pilot)
        assert find_gaps(app.workspace.session, app.workspace.session.plan)
        await pilot.press("5", "x")
        await settle(app, pilot)
        view = app.query_one(ExplainView)
        assert view.display and view.explanation is not None
        # 'all 1' is the reviews tier's first group (the CLI's reviews-1).
        rows = [r for r in view.group_rows() if r[0].startswith("all ") and r[1] == TOPIC]
        assert len(rows) == 1
        papers, eligible, needed, available, short = (int(c) for c in rows[0][2:7])
        assert papers == len(expected.papers)
        assert eligible == len(expected.reviewers)
        assert (needed, available, short) == (
            expected.needed,
            expected.available,
            expected.shortfall,
        )
        detail = view.detail_text()
        assert expected.cause[:40] in detail
        assert "never overridden" in detail and "asks more of a person" in detail

        # Preview on a copy: the workspace stays as it was.
        planned = app.workspace.session
        assert view.choose_fix("raise-caps")
        view.query_one(".fixes", RowTable).focus()
        await pilot.press("v")
        await settle(app, pilot)
        assert view.preview is not None and not view.preview.gaps_after
        assert app.workspace.session is planned
        assert f"cap {cap_fix.raises[0].cap} -> {cap_fix.raises[0].new_cap}" in view.detail_text()
        assert "papers short: " in view.detail_text()

        # Accepting goes through the Workspace: one recorded change (however many caps it
        # raises) and one revision whose plan is the one previewed; one undo takes both back.
        events = len(planned.events)
        revisions = len(app.workspace.revisions)
        previewed = view.preview.after.figures
        await pilot.press("a")
        await settle(app, pilot)
        ws = app.workspace
        s = ws.session
        assert ws.dirty
        assert [e.action for e in s.events[events:]] == ["accept-fix", "plan"]
        accepted = s.events[events]
        for r in cap_fix.raises:
            assert f"raise cap of {r.reviewer} by {r.raise_by}" in accepted.detail
            assert s.reviewer_cap(s.reviewer_index()[r.reviewer]) == r.new_cap
        assert len(ws.revisions) == revisions + 1 and s.plan.figures == previewed
        assert not ws.data_changed_since_plan()
        assert not find_gaps(s, s.plan)
        assert s.plan.figures.coverage == cap_fix.demand
        # The new plan is explained again: nothing short now.
        await settle(app, pilot)
        assert view.explanation is not None and view.explanation.session is s
        assert not view.explanation.groups
        await pilot.press("ctrl+z")
        await settle(app, pilot)
        back = ws.session
        assert back.revision == planned.revision
        assert [r.cap for r in back.reviewers] == [r.cap for r in planned.reviewers]
        assert back.plan == planned.plan
    assert shipped.read_bytes() == before_bytes


async def test_conflicts_are_information_only_and_recruits_are_added(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(80, 24)) as pilot:
        ws = app.workspace
        first = ws.session.papers[0].id
        # One paper wants a review from everyone, and one of them has a declared conflict:
        # no cap raise helps, the conflict keeps a review away, a recruit closes the gap.
        conflicted = ws.session.reviewers[0].id
        ws.declare_conflict(conflicted, first, "co-author of an invented paper")
        ws.set_paper(first, reviews=len(ws.session.reviewers))
        await pilot.press("r")
        await settle(app, pilot)
        await pilot.press("5")
        await pilot.click("#gaps-hint")
        await settle(app, pilot)
        view = app.query_one(ExplainView)
        assert view.display and view.explanation is not None and view.explanation.groups
        # Usable at 80x24: both tables and some of the detail are on screen.
        assert view.query_one(".groups", RowTable).region.height >= 3
        assert view.query_one(".explain-detail").region.height >= 3
        fixes = view.query_one(".fixes", RowTable)
        fixes.focus()
        kinds = [view.chosen_fix()]
        for _ in range(fixes.row_count - 1):
            await pilot.press("down")
            kinds.append(view.chosen_fix())
        assert "raise-caps" not in kinds and "recruit" in kinds and None in kinds
        losses = view.explanation.losses
        assert any(x.reviewer == conflicted and x.kind == "conflict" for x in losses)
        fixes.move_cursor(kinds.index(None))
        await pilot.pause()
        assert "Information only, not a fix" in view.detail_text()
        session = ws.session
        await pilot.press("a", "v")
        await settle(app, pilot)
        assert ws.session is session and view.preview is None

        fixes.move_cursor(kinds.index("recruit"))
        await pilot.press("a")
        await settle(app, pilot)
        s = ws.session
        assert [e.action for e in s.events[-2:]] == ["accept-fix", "plan"]
        added = [r.id for r in s.reviewers if r.id not in session.reviewer_index()]
        assert added and all(rid.startswith("NEW-") for rid in added)
        assert "reviewers in '" in s.events[-2].detail
        # The conflict stands: the new plan never pairs the conflicted reviewer with the paper.
        assert (conflicted, first) not in {(a.reviewer, a.paper) for a in s.plan.assignments}
        assert not find_gaps(s, s.plan)
        await pilot.press("x")
        await pilot.pause()
        assert not view.display


async def test_an_empty_gap_list_says_why_in_words(new_app: Factory, tmp_path: Path) -> None:
    from textual.widgets import Static

    from review_alloc.tui.entity_views import GapView

    path = tmp_path / "panel.json"
    shutil.copy(REPO / "sample_sessions" / "panel.json", path)
    app = new_app(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("5")
        await settle(app, pilot)
        view = app.query_one(GapView)
        head = str(view.query_one(".detail-head", Static).render())
        assert view.query_one(".main", RowTable).row_count == 0
        assert "No plan yet: press r" in head
