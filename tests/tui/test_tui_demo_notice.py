"""What the command line did to the demo copy (replaced, or kept beside a new one) is said in
the app too, where the chair looks; the terminal's line is hidden behind the app's screen."""

from __future__ import annotations

from review_alloc.tui import make_app
from tests.tui.conftest import FIXED_TIME


async def test_the_demo_notice_is_shown_when_the_app_opens() -> None:
    note = "your demo copy has changes, so this version's demo was written beside it"
    app = make_app(None, clock=lambda: FIXED_TIME, notice=note)
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        shown = [n.message for n in app._notifications]
        assert note in shown


async def test_no_notice_without_one() -> None:
    app = make_app(None, clock=lambda: FIXED_TIME)
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        assert all(n.title != "The demo session" for n in app._notifications)
