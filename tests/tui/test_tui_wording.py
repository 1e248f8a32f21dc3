"""A grant panel says 'proposal' on every tab, and no state is told by colour alone."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from textual.widgets import Button, Checkbox, Input, Static

from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import Confirm, Form
from review_alloc.tui.entity_views import PaperView
from review_alloc.tui.gapfix import ExplainView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.records import ConflictView, HistoryView

REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]


async def test_panel_says_proposal_on_every_tab(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "panel.json"
    shutil.copy(REPO / "sample_sessions" / "panel.json", path)
    app = new_app(path)
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("4")
        await pilot.pause()
        conflicts = app.query_one(ConflictView)
        assert conflicts.query_one(RowTable).columns[:2] == ["Reviewer", "Proposal"]
        assert "proposal" in conflicts.query_one(Input).placeholder
        # Withdraw a proposal (with its reason) and plan again: History says proposal.
        await pilot.press("2")
        await pilot.pause()
        await pilot.press("w", *"late", "enter")
        await pilot.pause()
        gone = app.query_one(PaperView).visible_keys()[0]
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("6")
        await pilot.pause()
        history = app.query_one(HistoryView)
        assert history.query_one(".diff", RowTable).columns == [
            "Reviewer",
            "Proposals added",
            "Proposals removed",
        ]
        log = history.query_one(".events", RowTable)
        lines = [log.row_at(k)[1] for k in range(log.row_count)]
        assert any(line.startswith(f"withdraw-proposal {gone}") for line in lines)
        assert not any("paper" in line for line in lines)
        # The Gaps tab's groups and its hint.
        await pilot.press("5", "x")
        await app.workers.wait_for_complete()
        await pilot.pause()
        explain = app.query_one(ExplainView)
        assert "Proposals" in explain.query_one(".groups", RowTable).columns
        assert "Papers" not in explain.query_one(".groups", RowTable).columns
        assert "back to the short proposals" in str(app.query_one("#gaps-hint", Static).render())


async def test_import_panel_switch_says_its_state(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        box = form.query_one("#panel", Checkbox)
        off = str(box.label)
        assert "NO" in off
        box.value = True
        await pilot.pause()
        on = str(box.label)
        assert "YES" in on and on != off
        box.value = False
        await pilot.pause()
        assert str(box.label) == off


async def test_quit_dialog_names_only_what_works(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("ctrl+q")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, Confirm)
        text = " ".join(str(s.render()) for s in dialog.query(Static) if not isinstance(s, Button))
        buttons = {str(b.label) for b in dialog.query(Button)}
        assert buttons == {"Quit without saving", "Stay"}
        assert "Stay" in text and "escape" in text and "y:" in text
        assert "No goes back" not in text
        # escape stays, as the hint says.
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, Confirm)
        await pilot.press("ctrl+q")
        await pilot.pause()
        await pilot.press("y")
        await pilot.pause()
    assert app.return_code == 0
