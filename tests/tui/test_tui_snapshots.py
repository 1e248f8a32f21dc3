"""A few screens compared with reviewed snapshots (fixed size, fixed clock, no toasts).

Update after reviewing the new screens: `pytest tests/tui --snapshot-update`.
"""

from __future__ import annotations

from collections.abc import Callable

from textual.pilot import Pilot

from review_alloc.tui import ReviewAllocApp

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
