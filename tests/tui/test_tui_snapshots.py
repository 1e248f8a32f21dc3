"""A few screens compared with reviewed snapshots (fixed size, fixed clock, no toasts).

Update after reviewing the new screens: `pytest tests/tui --snapshot-update`.
"""

from __future__ import annotations

from collections.abc import Callable

from textual.pilot import Pilot

from review_alloc.tui import ReviewAllocApp
from tests.tui.conftest import FIXED_TIME

Factory = Callable[..., ReviewAllocApp]


async def _planned(pilot: Pilot) -> None:
    await pilot.press("r")
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()
    pilot.app.clear_notifications()
    await pilot.pause()


def test_first_screen(snap_compare, new_app: Factory) -> None:
    assert snap_compare(new_app(), terminal_size=(120, 40))


def test_overview_after_a_plan(snap_compare, new_app: Factory) -> None:
    assert snap_compare(new_app(), terminal_size=(120, 40), run_before=_planned)


def test_papers_at_80_by_24(snap_compare, new_app: Factory) -> None:
    async def run_before(pilot: Pilot) -> None:
        await _planned(pilot)
        await pilot.press("2", "down", "down")
        await pilot.pause()

    assert snap_compare(new_app(), terminal_size=(80, 24), run_before=run_before)


def test_help_screen(snap_compare, new_app: Factory) -> None:
    assert snap_compare(new_app(), terminal_size=(100, 40), press=["question_mark"])


def test_plan_options_at_80_by_24(snap_compare, new_app: Factory) -> None:
    # The chosen kind shows by its mark (●), not by colour alone; the caution under it.
    assert snap_compare(new_app(), terminal_size=(80, 24), press=["o", "down", "enter"])


def test_overview_of_a_randomised_plan(snap_compare, new_app: Factory) -> None:
    async def run_before(pilot: Pilot) -> None:
        app = pilot.app
        assert isinstance(app, ReviewAllocApp)
        app.workspace.solve(max_probability=0.5, seed=7, now=FIXED_TIME)
        app._refresh_all()
        await pilot.pause()

    assert snap_compare(new_app(), terminal_size=(120, 36), run_before=run_before)
