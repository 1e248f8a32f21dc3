"""What-if scenarios side by side: keep several previews, compare their figures in one table,
accept one (one recorded change, one revision)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from textual.widgets import Input

from review_alloc.model import save_session
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import Form
from review_alloc.tui.gapfix import ExplainView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.scenarios import ScenarioScreen, parse_pairs
from tests.plan.test_explain_groups import topic_session

Factory = Callable[..., ReviewAllocApp]


async def settle(app: ReviewAllocApp, pilot) -> None:
    """Wait for every worker and for the messages they posted."""
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


def test_parse_pairs() -> None:
    assert parse_pairs("R1=2, lake ice = 3, R1=1", "x") == ({"R1": 3, "lake ice": 3}, [])
    assert parse_pairs("", "x") == ({}, [])
    assert parse_pairs("R1", "raise caps")[1] == ["raise caps: 'R1' is not of the form NAME=N"]
    assert parse_pairs("R1=0", "x")[1] == ["x: 'R1=0': the number must be 1 or more"]


async def test_keep_compare_and_accept_one(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "venue.json"
    save_session(topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (6, 6, 6)}), path)
    app = new_app(path)
    async with app.run_test(size=(120, 36)) as pilot:
        await pilot.press("r")
        await settle(app, pilot)
        await pilot.press("c")  # nothing kept yet: a warning, no screen
        await pilot.pause()
        await pilot.press("5", "x")
        await settle(app, pilot)
        view = app.query_one(ExplainView)
        fixes = view.query_one(".fixes", RowTable)
        fixes.focus()
        for key in ("raise-caps-min", "recruit-min"):
            assert view.choose_fix(key)
            await pilot.press("v")
            await settle(app, pilot)
            await pilot.press("k")
            await pilot.pause()
        await pilot.press("k")  # the same preview twice is kept once
        await pilot.pause()
        assert len(app.scenarios) == 2
        # A what-if typed in: everyone may take two papers above cap.
        await pilot.press("n")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        form.query_one("#field-overload", Input).value = "2"
        await pilot.click("#ok")
        await settle(app, pilot)
        assert len(app.scenarios) == 3
        kept = list(app.scenarios)
        assert kept[2].changes == ("allow up to 2 papers above cap for everyone",)

        await pilot.press("c")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, ScenarioScreen)
        rows = screen.table_rows()
        assert [r[0] for r in rows] == ["as it is", "S1", "S2", "S3"]
        b = kept[0].before.figures
        assert rows[0][1] == f"{b.required_coverage}/{b.required_demand}"
        assert rows[0][2] == f"{b.coverage}/{b.demand}"
        for row, w in zip(rows[1:], kept, strict=True):
            a = w.after.figures
            assert row[1] == f"{a.required_coverage}/{a.required_demand}"
            assert row[2] == f"{a.coverage}/{a.demand}"
            assert row[3] == f"{a.total_score:.2f}"
            assert row[4] == str(len(w.gaps_after))
            assert row[6] == str(len(w.moves.added) + len(w.moves.removed))
            assert row[7] == str(len(w.to_tell()))
            assert row[8] == str(len(w.recruits()))
        assert rows[2][8] != "0"  # the recruit scenario adds people
        # Drop S3, then accept S2 (the recruits to the minimum).
        await pilot.press("down", "down", "d")
        await pilot.pause()
        assert [r[0] for r in screen.table_rows()] == ["as it is", "S1", "S2"]
        assert len(app.scenarios) == 2 and screen.chosen() == 1
        await pilot.press("a")
        await settle(app, pilot)
        s = app.workspace.session
        assert s.events[-2].action == "accept-fix" and s.events[-2].subject == "recruit-min"
        assert s.plan.figures == kept[1].after.figures
        assert app.scenarios == []
