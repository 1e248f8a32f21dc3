"""The app's explanation made in a worker process: the same answer as the workspace gives in
process, tied to the caller's own snapshot; the worker ends with the app, and so does the
app's hold on the garbage collector."""

from __future__ import annotations

import gc
from collections.abc import Callable
from pathlib import Path

import pytest

from review_alloc.model import save_session
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.gapfix import ExplainView
from review_alloc.workspace import Workspace
from review_alloc.workspace.offsite import OffsiteClosed, OffsiteExplainer
from tests.plan.test_explain_groups import topic_session

Factory = Callable[..., ReviewAllocApp]


def test_the_worker_answers_as_the_workspace_does() -> None:
    session = topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)})
    workspace = Workspace(session)
    workspace.solve()
    snapshot = workspace.session
    here = workspace.explain(snapshot)
    menu_here = workspace.fixes(snapshot, here)
    offsite = OffsiteExplainer()
    offsite.prepare()
    try:
        there, menu_there = offsite.explain(snapshot)
    finally:
        offsite.close()
    # The answer refers to the caller's snapshot itself, as a thread's answer would.
    assert there.session is snapshot and menu_there.session is snapshot
    assert there.groups == here.groups and there.groups
    assert (there.shortfall, there.best, there.demand, there.exact) == (
        here.shortfall,
        here.best,
        here.demand,
        here.exact,
    )
    assert there.caps.raises == here.caps.raises
    assert [(f.key, f.people, f.caps, f.coverage_after) for f in menu_there.fixes] == [
        (f.key, f.people, f.caps, f.coverage_after) for f in menu_here.fixes
    ]


def test_a_closed_service_refuses_at_once() -> None:
    session = topic_session({"quantum sensing": (4, 3, 4)})
    offsite = OffsiteExplainer()
    offsite.close()
    with pytest.raises(OffsiteClosed):
        offsite.explain(session)


async def test_the_app_explains_offsite_and_lets_go_at_exit(
    new_app: Factory, tmp_path: Path
) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    app = new_app(path)
    async with app.run_test(size=(120, 36)) as pilot:
        app.workspace.solve()
        app._refresh_all()
        # While the app runs, the settled objects are set aside from full collections.
        assert gc.get_freeze_count() > 0
        await pilot.press("5", "x")
        for _ in range(20):
            await app.workers.wait_for_complete()
            await pilot.pause(0.1)
            if app.query_one(ExplainView).explanation is not None:
                break
        view = app.query_one(ExplainView)
        assert view.explanation is not None and view.explanation.session is app.workspace.session
        assert view.menu is not None and "shortfall group" in view.state
        offsite = app._offsite
    assert offsite._pool is None and offsite._closed
    assert gc.get_freeze_count() == 0
