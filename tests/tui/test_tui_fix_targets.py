"""The Gaps tab offers fixes for both targets, each with its cost; a preview says how many pairs
move and whom to tell."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from review_alloc.model import save_session
from review_alloc.plan.fixes import fix_menu
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.gapfix import ExplainView
from review_alloc.tui.grid import RowTable
from tests.plan.test_explain_groups import topic_session

Factory = Callable[..., ReviewAllocApp]


async def settle(app: ReviewAllocApp, pilot) -> None:
    """Wait for every worker and for the messages they posted."""
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


async def test_both_targets_with_cost_and_whom_to_tell(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    session = topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)})
    save_session(session, path)
    # The figures the view must show, from the plan layer itself (checked against HiGHS in
    # tests/plan/test_fix_targets.py).
    menu = fix_menu(session)
    low, full = menu.get("raise-caps-min"), menu.get("raise-caps")
    assert low.caps < full.caps
    app = new_app(path)
    async with app.run_test(size=(120, 36)) as pilot:
        await pilot.press("r")
        await settle(app, pilot)
        await pilot.press("5", "x")
        await settle(app, pilot)
        view = app.query_one(ExplainView)
        fixes = view.query_one(".fixes", RowTable)
        rows = [fixes.row_at(k) for k in range(fixes.row_count)]
        low_cost = f"{low.people} reviewers asked, caps +{low.caps}"
        assert rows[0][:2] == ["minimum: raise caps", low_cost]
        assert ["full: raise caps", f"{full.people} reviewers asked, caps +{full.caps}"] in [
            r[:2] for r in rows
        ]
        assert any(r[0] == "minimum: recruit" for r in rows)
        fixes.focus()
        assert view.chosen_fix() == "raise-caps-min"
        await pilot.pause()
        assert "reaches every paper at its minimum" in view.detail_text()
        await pilot.press("v")
        await settle(app, pilot)
        preview = view.preview
        assert preview is not None and preview.moves is not None
        after = preview.after.figures
        assert after.required_coverage == after.required_demand
        told = preview.to_tell()
        raised = {r.reviewer for r in low.caps_fix.raises}
        assert raised <= set(told)
        text = view.detail_text()
        moved = len(preview.moves.added) + len(preview.moves.removed)
        assert f"pairs moved: {moved}" in text
        assert f"reviewers to tell: {len(told)}" in text
        await pilot.press("a")
        await settle(app, pilot)
        s = app.workspace.session
        assert s.events[-2].action == "accept-fix" and s.events[-2].subject == "raise-caps-min"
        assert s.plan.figures.required_coverage == s.plan.figures.required_demand
