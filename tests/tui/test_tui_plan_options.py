"""Plan options in the app: a randomised plan (probability cap, seed) and the fairest plan,
their cautions, and each pair's probability in the paper and reviewer details."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

from textual.widgets import Input, Static

from review_alloc.plan.cautions import FAIR_CAUTION, RANDOM_CAUTION
from review_alloc.plan.randomized import redraw
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.entity_views import PaperView, ReviewerView
from review_alloc.tui.grid import RowTable
from review_alloc.tui.planopts import PlanOptions, read_choice

REPO = Path(__file__).resolve().parents[2]
Factory = Callable[..., ReviewAllocApp]


async def settle(app: ReviewAllocApp, pilot) -> None:
    """Wait for every worker and for the messages they posted."""
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


def test_the_dialog_reads_its_fields() -> None:
    assert read_choice("optimal", "x", "y", False)[0] is not None
    choice, problems = read_choice("randomised", "0.25", "12", True)
    assert problems == [] and choice is not None
    assert (choice.max_probability, choice.seed, choice.fresh) == (0.25, 12, True)
    for cap in ("0", "1.5", "nan", "half"):
        assert read_choice("randomised", cap, "", False)[0] is None
    assert read_choice("randomised", "0.5", "-1", False)[1] == ["seed: -1 must be 0 or more"]


async def test_randomised_then_fairest_then_optimal(new_app: Factory, tmp_path: Path) -> None:
    path = tmp_path / "workshop.json"
    shutil.copy(REPO / "sample_sessions" / "workshop.json", path)
    app = new_app(path)
    async with app.run_test(size=(120, 36)) as pilot:
        await pilot.press("o")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, PlanOptions)
        # The radio set has the focus: down moves to 'randomised', enter picks it.
        await pilot.press("down", "enter")
        await pilot.pause()
        assert dialog.chosen_mode() == "randomised"
        assert RANDOM_CAUTION[:40] in str(dialog.query_one(".plan-caution", Static).render())
        dialog.query_one("#plan-cap", Input).value = "0.5"
        dialog.query_one("#plan-seed", Input).value = "7"
        await pilot.click("#ok")
        await settle(app, pilot)
        s = app.workspace.session
        draw = s.plan.draw
        assert draw is not None and (draw.max_probability, draw.seed) == (0.5, 7)
        # The draw can be repeated from what the plan stores (plan.randomized.redraw).
        assert set(redraw(s, draw)) == {
            (a.reviewer, a.paper) for a in s.plan.assignments
        }
        overview = str(app.query_one("#figures", Static).render())
        assert "randomised: each pair at most 0.5" in overview and "seed" in overview
        assert RANDOM_CAUTION[:40] in str(app.query_one("#caution", Static).render())

        # The paper's detail shows each pair's probability, from the stored draw.
        await pilot.press("2")
        await pilot.pause()
        view = app.query_one(PaperView)
        pairs = view.query_one(".pairs", RowTable)
        paper = s.papers[s.paper_index()[view.visible_keys()[0]]]
        table = draw.probabilities
        i = s.paper_index()[paper.id]
        chance = {
            s.reviewers[int(j)].id: float(v)
            for j, p, v in zip(table.reviewer, table.paper, table.value, strict=True)
            if p == i
        }
        rows = [pairs.row_at(k) for k in range(pairs.row_count)]
        assert rows and all(len(r) == 5 for r in rows)
        for row in rows:
            assert row[2] == f"{chance.get(row[0], 0.0):.3f}"
        await pilot.press("3")
        await pilot.pause()
        rview = app.query_one(ReviewerView)
        assert rview.query_one(".pairs", RowTable).row_at(0)[2] != ""

        # r keeps the plan randomised, with the same cap and seed.
        await pilot.press("r")
        await settle(app, pilot)
        again = app.workspace.session.plan.draw
        assert again is not None and (again.max_probability, again.seed) == (0.5, 7)

        await pilot.press("o")
        await pilot.pause()
        # The dialog starts on the plan's own kind (randomised, cap and seed filled in).
        assert app.screen.chosen_mode() == "randomised"
        assert app.screen.query_one("#plan-seed", Input).value == "7"
        await pilot.press("down", "enter")
        await pilot.pause()
        assert app.screen.chosen_mode() == "fairest"
        await pilot.click("#ok")
        await settle(app, pilot)
        plan = app.workspace.session.plan
        assert plan.draw is None and plan.fairness is not None
        # The Overview is redrawn when shown.
        await pilot.press("1")
        await pilot.pause()
        assert FAIR_CAUTION[:40] in str(app.query_one("#caution", Static).render())
        assert "fairest" in str(app.query_one("#figures", Static).render())

        await pilot.press("o")
        await pilot.pause()
        await pilot.press("up", "up", "enter")
        await pilot.pause()
        assert app.screen.chosen_mode() == "optimal"
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, PlanOptions)
        assert app.workspace.session.plan.fairness is not None  # escape planned nothing
        await pilot.press("o", "up", "up", "enter")
        await pilot.click("#ok")
        await settle(app, pilot)
        plan = app.workspace.session.plan
        assert plan.draw is None and plan.fairness is None
        assert "plan kind" not in str(app.query_one("#figures", Static).render())
