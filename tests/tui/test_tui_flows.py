"""The chair's flows, driven through the same app the command line starts."""

from __future__ import annotations

import json
import shutil
import threading
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path

from textual.widgets import Input, Static, TabbedContent

from review_alloc.model import load_session
from review_alloc.plan import conflict_pairs, find_gaps, make_plan, plan_summary
from review_alloc.tui import ReviewAllocApp, make_app
from review_alloc.tui.dialogs import Confirm, Form, HelpScreen
from review_alloc.tui.entity_views import PaperView, ReviewerView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.records import ConflictView, HistoryView
from review_alloc.workspace.files import DEMO_FILE, demo_session_path

SIZE = (120, 40)
REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]


async def plan(app: ReviewAllocApp, pilot) -> None:
    """Press r and wait for the worker and the redraw."""
    await pilot.press("r")
    await app.workers.wait_for_complete()
    await pilot.pause()


def bar_text(app: ReviewAllocApp) -> str:
    """The session bar as plain text."""
    return str(app.query_one("#bar", Static).render())


async def test_no_arguments_opens_a_copy_of_the_demo(private_data_folder: Path) -> None:
    shipped = (REPO / "sample_sessions" / "workshop.json").read_bytes()
    app = make_app()
    assert app.workspace.path == private_data_folder / "review-alloc" / DEMO_FILE
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert "Harbourlight" in bar_text(app)
        assert "no plan yet" in bar_text(app)
        # Nothing changed, so quitting does not ask.
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert not isinstance(app.screen, Confirm)
    assert app.return_code == 0
    # The sample shipped with the program is never the file being edited.
    assert (REPO / "sample_sessions" / "workshop.json").read_bytes() == shipped
    assert demo_session_path() == app.workspace.path


async def test_plan_runs_in_a_worker_and_is_checked(new_app: Factory) -> None:
    app = new_app()
    before = app.workspace.session
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        session = app.workspace.session
        assert session.plan is not None and session.plan.checked
        # The app shows the planner's own result, made from the session as it was.
        assert session.plan.assignments == make_plan(before).plan.assignments
        conflicted = conflict_pairs(session).reason_of()
        rid, pid = session.reviewer_index(), session.paper_index()
        assert not any(
            (rid[a.reviewer], pid[a.paper]) in conflicted for a in session.plan.assignments
        )
        summary = plan_summary(session, session.plan)
        overview = str(app.query_one("#figures", Static).render())
        assert f"{summary['coverage']} of {summary['demand']}" in overview
        assert "UNSAVED" in bar_text(app)
        assert [e.number for e in app.query_one(HistoryView).entries] == [1]


async def test_cancelled_plan_is_discarded(new_app: Factory) -> None:
    release = threading.Event()
    app = new_app()
    # A clock that waits holds the worker before it solves, so the cancel comes first.
    app.clock = lambda: (release.wait(10), datetime(2026, 1, 5, tzinfo=UTC))[1]
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("r")
        assert app.planning
        assert app.query_one("#planning").display
        await pilot.press("escape")
        assert not app.planning
        release.set()
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert app.workspace.session.plan is None
        assert not app.workspace.dirty


async def test_filter_papers(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("2", "slash")
        assert isinstance(app.focused, Input)
        await pilot.press(*"buoy")
        await pilot.pause(0.3)
        view = app.query_one(PaperView)
        shown = view.visible_keys()
        session = app.workspace.session
        expected = [
            p.id
            for p in session.papers
            if any("buoy" in t for t in p.topics) or "buoy" in p.title.lower()
        ]
        assert shown == expected and shown
        await pilot.press("enter")
        table = view.query_one(".main", RowTable)
        assert app.focused is table
        # "Mean" is the seventh column; sorting it twice puts the highest first.
        view.set_filter("")
        view.sort_by(6)
        view.sort_by(6)
        await pilot.pause()
        means = [float(table.row_at(k)[6]) for k in range(table.row_count)]
        assert means == sorted(means, reverse=True) and len(means) == 40
        # A click on the "Has" heading (second column, after the five-letter ids) sorts by it.
        await pilot.click(table, offset=(9, 0))
        await pilot.pause()
        assert table.columns[1] == "Has"
        has = [int(table.row_at(k)[1]) for k in range(table.row_count)]
        assert has == sorted(has)


async def test_open_a_paper_shows_its_reviewers_and_why_others_are_unused(
    new_app: Factory,
) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("2", "down", "enter")
        view = app.query_one(PaperView)
        pairs = view.query_one(".pairs", RowTable)
        assert app.focused is pairs
        session = app.workspace.session
        paper = session.papers[1].id
        assigned = {a.reviewer for a in session.plan.assignments if a.paper == paper}
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        assert {r[0] for r in rows if r[2].startswith("assigned")} == assigned
        others = [r[2] for r in rows if not r[2].startswith("assigned")]
        assert others and all(
            s.startswith(("conflict", "cap full", "paper already", "eligible", "blocked"))
            for s in others
        )
        # Conflicted candidates show the reason recorded for them.
        declared = {(c.reviewer, c.paper) for c in session.conflicts}
        for r in rows:
            if (r[0], paper) in declared:
                assert r[2].startswith("conflict: declared")


async def test_pin_and_block(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("2", "enter")
        view = app.query_one(PaperView)
        pairs = view.query_one(".pairs", RowTable)
        paper = app.workspace.session.papers[0].id
        # The first row is an assigned reviewer: block it and it leaves the plan at once.
        first = pairs.row_at(0)[0]
        await pilot.press("b")
        await pilot.pause()
        s = app.workspace.session
        assert any(b.reviewer == first and b.paper == paper for b in s.blocks)
        assert not any(a.reviewer == first and a.paper == paper for a in s.plan.assignments)
        assert "STALE" in bar_text(app)
        # Pin the first eligible candidate.
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        target = next(k for k, r in enumerate(rows) if r[2].startswith(("eligible", "cap full")))
        pairs.move_cursor(target)
        await pilot.press("p")
        await pilot.pause()
        s = app.workspace.session
        assert any(p.reviewer == rows[target][0] and p.paper == paper for p in s.pins)
        # A conflicted pair cannot be pinned; the refusal names the reason.
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        conflicted = [k for k, r in enumerate(rows) if r[2].startswith("conflict")]
        if conflicted:
            pairs.move_cursor(conflicted[0])
            before = len(app.workspace.session.pins)
            await pilot.press("p")
            await pilot.pause()
            assert len(app.workspace.session.pins) == before
        await plan(app, pilot)
        s = app.workspace.session
        assert any(a.reviewer == rows[target][0] and a.paper == paper for a in s.plan.assignments)


async def test_withdraw_replan_diff_and_undo(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("3")
        await pilot.pause()
        view = app.query_one(ReviewerView)
        gone = view.visible_keys()[0]
        held = {a.paper for a in app.workspace.session.plan.assignments if a.reviewer == gone}
        assert held
        await pilot.press("w")
        await pilot.pause()
        # w asks first, with the reviewer named, and wants a reason; escape changes nothing.
        form = app.screen
        assert isinstance(form, Form) and gone in form.title_text
        await pilot.press("escape")
        await pilot.pause()
        assert not app.workspace.session.reviewers[0].withdrawn
        await pilot.press("w")
        await pilot.pause()
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, Form) and not app.workspace.session.reviewers[0].withdrawn
        assert isinstance(app.focused, Input) and app.focused.id == "field-reason"
        await pilot.press(*"on leave", "enter")
        for _ in range(40):  # a loaded machine may take a few frames to close the form
            await pilot.pause(0.05)
            if not isinstance(app.screen, Form):
                break
        assert not isinstance(app.screen, Form), str(app.screen.query_one(".problems").render())
        s = app.workspace.session
        assert s.reviewers[0].withdrawn
        assert s.events[-1].action == "withdraw-reviewer" and s.events[-1].reason == "on leave"
        assert not any(a.reviewer == gone for a in s.plan.assignments)
        assert "withdrawn" in view.query_one(".main", RowTable).row_at(0)[5]
        await plan(app, pilot)
        await pilot.press("6")
        await pilot.pause()
        history = app.query_one(HistoryView)
        assert [e.number for e in history.entries] == [1, 2]
        log = history.query_one(".events", RowTable)
        assert any(f"withdraw-reviewer {gone}" in r[1] and "on leave" in r[1]
                   for r in map(log.row_at, range(log.row_count)))
        # The diff lists the withdrawn reviewer with every paper they lost, and nothing new.
        rows = {row[0]: row for row in history.diff_rows()}
        assert rows[gone][1] == "-" and set(rows[gone][2].split()) == held
        # The diff the Workspace computes is the one shown.
        diff = app.workspace.diff(1, 2)
        assert set(rows) == set(diff.by_reviewer)
        # Mark revision 2 as the base and look at revision 1: the same pairs, the other way.
        table = history.query_one(".revisions", RowTable)
        await pilot.press("m")
        table.move_cursor(0)
        await pilot.pause()
        rows = {row[0]: row for row in history.diff_rows()}
        assert set(rows[gone][1].split()) == held and rows[gone][2] == "-"
        # Back a revision: plan 1 and its data (the reviewer active again).
        await pilot.press("ctrl+z")
        await pilot.pause()
        s = app.workspace.session
        assert s.revision == 1
        assert not s.reviewers[0].withdrawn
        assert any(a.reviewer == gone for a in s.plan.assignments)
        # Forward again (ctrl+y): revision 2, the reviewer withdrawn again, as it was made.
        await pilot.press("ctrl+y")
        await pilot.pause()
        s = app.workspace.session
        assert s.revision == 2 and s.reviewers[0].withdrawn
        assert s.plan.model_dump_json() == app.workspace.plan_of(2).model_dump_json()
        assert "plan current (revision 2)" in bar_text(app)
        # u and f in History do the same.
        await pilot.press("u")
        await pilot.pause()
        assert app.workspace.session.revision == 1
        await pilot.press("f")
        await pilot.pause()
        assert app.workspace.session.revision == 2
        assert log.row_at(0)[1].startswith("redo 2")
        await pilot.press("f")
        await pilot.pause()
        assert app.workspace.session.revision == 2


async def test_save_and_reload(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "workshop.json"
    shutil.copy(REPO / "sample_sessions" / "workshop.json", path)
    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        assert "UNSAVED" in bar_text(app)
        await pilot.press("ctrl+s")
        await pilot.pause()
        assert not app.workspace.dirty
        assert "UNSAVED" not in bar_text(app)
        saved = app.workspace.session.plan
    assert load_session(path).plan == saved
    again = new_app(path)
    async with again.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert "plan current (revision 1)" in bar_text(again)
        assert again.workspace.plan_of(again.workspace.session.revision) == saved
        assert [e.number for e in again.query_one(HistoryView).entries] == [1]
    json.loads(path.read_text())


async def test_quit_asks_when_there_are_unsaved_changes(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert isinstance(app.screen, Confirm)
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, Confirm)
        await pilot.press("ctrl+q")
        await pilot.pause()
        await pilot.click("#yes")
        await pilot.pause()
    assert app.return_code == 0


async def test_change_a_cap_through_the_form(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("3", "e")
        await pilot.pause()
        assert isinstance(app.screen, Form)
        field = app.screen.query_one("#field-cap", Input)
        field.value = "-4"
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, Form)
        assert "negative" in str(app.screen.query_one(".problems", Static).render())
        field.value = "2"
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, Form)
        assert app.workspace.session.reviewers[0].cap == 2
        # The form's hint: an empty line keeps the current value (the floor changes alone).
        await pilot.press("e")
        await pilot.pause()
        app.screen.query_one("#field-cap", Input).value = ""
        app.screen.query_one("#field-floor", Input).value = "1"
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, Form)
        assert app.workspace.session.reviewers[0].cap == 2
        assert app.workspace.session.reviewers[0].floor == 1


async def test_declare_a_conflict(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        s = app.workspace.session
        pair = next((a.reviewer, a.paper) for a in s.plan.assignments)
        await pilot.press("4")
        await pilot.pause()
        view = app.query_one(ConflictView)
        before = len(view.shown_pairs())
        await pilot.press("a")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        form.query_one("#field-reviewer", Input).value = pair[0]
        form.query_one("#field-paper", Input).value = pair[1]
        form.query_one("#field-reason", Input).value = "shared grant"
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, Form)
        assert pair in view.shown_pairs() and len(view.shown_pairs()) == before + 1
        assert pair not in {(a.reviewer, a.paper) for a in app.workspace.session.plan.assignments}


async def test_help_lists_every_key_and_the_palette_has_our_commands(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        text = str(app.screen.query_one("#help-text", Static).render())
        for binding in app.BINDINGS:
            assert binding.description in text or binding.key == "escape"
        for word in ("Pin/unpin", "Block/unblock", "Add conflict", "Mark base", "ctrl+p"):
            assert word in text
        await pilot.press("escape")
        assert not isinstance(app.screen, HelpScreen)
        names = [name for name, _, _ in app.palette_commands()]
        assert {"Plan now", "Plan fresh", "Save session", "Undo"} <= set(names)
        await pilot.press("ctrl+p")
        await pilot.pause()
        await pilot.press(*"plan now")
        await pilot.pause(0.5)
        await pilot.press("enter")
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert app.workspace.session.plan is not None


async def test_panel_says_proposal(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "panel.json"
    shutil.copy(REPO / "sample_sessions" / "panel.json", path)
    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        labels = [str(t.label) for t in app.query_one(TabbedContent).query("Tab")]
        assert "2 Proposals" in labels
        assert "proposals" in str(app.query_one("#figures", Static).render())


async def test_import_dialog_reports_rows_and_opens_the_session(
    new_app: Factory, tmp_path: Path
) -> None:
    csv = REPO / "sample_sessions" / "workshop-csv"
    bad = tmp_path / "papers.csv"
    bad.write_text("paper_id,title,topics,reviews,min_reviews\nX1,A,t,zero,\n")
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        form.query_one("#field-papers", Input).value = str(bad)
        form.query_one("#field-reviewers", Input).value = str(csv / "reviewers.csv")
        form.query_one("#field-target", Input).value = str(tmp_path / "new.json")
        await pilot.click("#ok")
        await pilot.pause()
        problems = str(form.query_one(".problems", Static).render())
        assert "papers.csv: line 2" in problems and "reviews" in problems
        assert not (tmp_path / "new.json").exists()
        form.query_one("#field-papers", Input).value = str(csv / "papers.csv")
        form.query_one("#field-conflicts", Input).value = str(csv / "conflicts.csv")
        form.query_one("#field-scores", Input).value = str(csv / "scores.csv")
        form.query_one("#field-target", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, Form), str(form.query_one(".problems", Static).render())
        assert app.workspace.path == tmp_path / "new.json"
        assert len(app.workspace.session.papers) == 40
        assert load_session(tmp_path / "new.json").name == "new"


async def test_usable_at_80_by_24(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await plan(app, pilot)
        for key in "123456":
            await pilot.press(key)
            await pilot.pause()
        await pilot.press("2")
        await pilot.pause()
        view = app.query_one(PaperView)
        assert view.query_one(".main", RowTable).region.height >= 5
        assert view.query_one(".pairs", RowTable).region.height >= 3
        assert app.screen.query_one("Footer").region.y == 23


async def test_conference_sample_filters_fast(new_app: Factory, tmp_path: Path) -> None:
    import time

    path = tmp_path / "conference.json"
    shutil.copy(REPO / "sample_sessions" / "conference.json", path)
    app = new_app(path)
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.press("2")
        await pilot.pause()
        view = app.query_one(PaperView)
        assert len(view.visible_keys()) == 1500
        started = time.perf_counter()
        view.set_filter("below min")
        await pilot.pause()
        took = time.perf_counter() - started
        shown = view.visible_keys()
        gaps = find_gaps(app.workspace.session, app.workspace.session.plan)
        assert shown == [g.paper for g in gaps if g.missing_required > 0]
        # Generous bound for a loaded test machine; interactively it is far below this.
        assert took < 1.5
        started = time.perf_counter()
        await pilot.press("end", "pageup", "home")
        await pilot.pause()
        assert time.perf_counter() - started < 1.5


async def test_mouse_tabs_rows_and_buttons(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await pilot.click("#--content-tab-reviewers")
        await pilot.pause()
        assert app.query_one(TabbedContent).active == "reviewers"
        view = app.query_one(ReviewerView)
        table = view.query_one(".main", RowTable)
        # Row 3 on screen is the third reviewer (line 0 is the heading).
        await pilot.click(table, offset=(2, 3))
        await pilot.pause()
        assert table.cursor_row == 2
        head = str(view.query_one(".detail-head", Static).render())
        assert view.visible_keys()[2] in head
        # A second click on the same row opens its pair list.
        await pilot.click(table, offset=(2, 3))
        await pilot.pause()
        assert app.focused is view.query_one(".pairs", RowTable)


async def test_undo_asks_before_dropping_unplanned_changes(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        await plan(app, pilot)
        await plan(app, pilot)
        assert app.workspace.session.revision == 2
        await pilot.press("3", "w")
        await pilot.pause()
        await pilot.press(*"sick", "enter")
        await pilot.pause()
        assert app.workspace.session.reviewers[0].withdrawn
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert isinstance(app.screen, Confirm)
        await pilot.press("escape")
        await pilot.pause()
        assert app.workspace.session.reviewers[0].withdrawn
        # Dropping the change returns to revision 2 as it was.
        await pilot.press("ctrl+z")
        await pilot.pause()
        await pilot.click("#yes")
        await pilot.pause()
        assert app.workspace.session.revision == 2
        assert not app.workspace.session.reviewers[0].withdrawn
        # Without changes, undo goes back to the revision before, without asking.
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert not isinstance(app.screen, Confirm)
        assert app.workspace.session.revision == 1
        # At the first revision there is nothing earlier to go back to.
        await pilot.press("ctrl+z")
        await pilot.pause()
        assert app.workspace.session.revision == 1


async def test_gaps_and_raising_a_full_cap_from_one(new_app: Factory) -> None:
    app = new_app()
    async with app.run_test(size=SIZE) as pilot:
        # Lower every cap so the workshop cannot be covered, then plan.
        ws = app.workspace
        for r in ws.session.reviewers:
            ws.set_reviewer(r.id, cap=3, floor=0)
        await plan(app, pilot)
        placed = ws.session.plan.figures.coverage
        await pilot.press("5")
        await pilot.pause()
        view = app.query_one("#gaps-view", PaperView)
        gaps = find_gaps(ws.session, ws.session.plan)
        assert gaps and set(view.visible_keys()) == {g.paper for g in gaps}
        head = str(view.query_one(".detail-head", Static).render())
        assert "To close it" in head
        await pilot.press("enter")
        pairs = view.query_one(".pairs", RowTable)
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        full = next(k for k, r in enumerate(rows) if r[2].startswith("cap full"))
        pairs.move_cursor(full)
        await pilot.press("c")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, Form)
        form.query_one("#field-cap", Input).value = "9"
        await pilot.press("enter")
        await pilot.pause()
        reviewer = rows[full][0]
        assert ws.session.reviewers[ws.session.reviewer_index()[reviewer]].cap == 9
        await plan(app, pilot)
        assert ws.session.plan.figures.coverage > placed


async def test_a_cold_solver_cache_is_announced_once(
    new_app: Factory, monkeypatch
) -> None:
    import review_alloc.flow.compile as kernels

    ready = {"value": False}
    warmed: list[bool] = []

    def fake_prepare(announce: Callable[[bool], None] | None = None) -> bool:
        # Only the first call finds the cache cold, and only then is anything announced.
        warmed.append(True)
        cold = not ready["value"]
        if cold and announce is not None:
            announce(True)
        ready["value"] = True
        return cold

    monkeypatch.setattr(kernels, "prepare", fake_prepare)
    for expected in (1, 0):
        app = new_app()
        async with app.run_test(size=SIZE) as pilot:
            await app.workers.wait_for_complete()
            await pilot.pause()
            shown = [n.message for n in app._notifications if "Preparing the solver" in n.message]
            assert len(shown) == expected
    assert len(warmed) == 2
