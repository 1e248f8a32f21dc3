"""The app and a session file that another program saved meanwhile: nothing is lost."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from review_alloc.model import load_session, save_session
from review_alloc.samples import workshop
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import Confirm, Form
from review_alloc.workspace import Workspace

SIZE = (120, 36)
Factory = Callable[..., ReviewAllocApp]


async def _settle(app: ReviewAllocApp, pilot) -> None:
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


async def test_saving_over_a_newer_file_offers_reload_and_redo(
    new_app: Factory, tmp_path: Path
) -> None:
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        mine = app.workspace.session.reviewers[1].id
        app.workspace.set_reviewer(mine, cap=9, reason="agreed by phone")
        theirs = Workspace.open(path)
        gone = theirs.session.reviewers[0].id
        theirs.withdraw_reviewer(gone, "saved from another terminal")
        theirs.save()
        before = path.read_bytes()
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert isinstance(app.screen, Confirm) and "changed on disk" in app.screen.question
        assert path.read_bytes() == before, "never written over silently"
        await pilot.press("y")
        await _settle(app, pilot)
        s = app.workspace.session
        assert s.reviewers[0].withdrawn and s.reviewer_cap(1) == 9
        await pilot.press("ctrl+s")
        await pilot.pause()
    saved = load_session(path)
    assert saved.reviewers[0].withdrawn and saved.reviewer_cap(1) == 9


async def test_or_the_chair_saves_under_another_name(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(workshop(), path)
    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        app.workspace.set_reviewer(app.workspace.session.reviewers[1].id, cap=9)
        theirs = Workspace.open(path)
        theirs.withdraw_reviewer(theirs.session.reviewers[0].id)
        theirs.save()
        await pilot.press("ctrl+s")
        await pilot.pause()
        await pilot.press("escape")  # "no": save under another name
        await pilot.pause()
        assert isinstance(app.screen, Form)
        copy = tmp_path / "venue-mine.json"
        assert app.screen.query("Input").first().value == str(copy)
        await pilot.press("enter")
        await pilot.pause()
    assert load_session(copy).reviewer_cap(1) == 9 and not load_session(copy).reviewers[0].withdrawn
    assert load_session(path).reviewers[0].withdrawn
