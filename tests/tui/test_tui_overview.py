"""The Overview's charts: full width, topics worst first with whole names, by keyboard."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from review_alloc.model import save_session
from review_alloc.samples import workshop
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.overview import Chart, Overview, topic_rows

Factory = Callable[..., ReviewAllocApp]


def test_topics_worst_first() -> None:
    rows = topic_rows(
        [("alpha", 10, 10), ("beta", 3, 9), ("gamma", 5, 6), ("delta", 2, 7), ("eps", 1, 7)]
    )
    # Largest shortfall first; at equal shortfall the larger share missing (eps: 6 of 7).
    assert [r[0] for r in rows] == ["eps", "beta", "delta", "gamma", "alpha"]
    assert rows[1][3] == "3/9  SHORT 6" and rows[-1][3] == "10/10"


async def test_overview_charts_at_80_by_24(new_app: Factory, tmp_path: Path) -> None:
    session = workshop()
    # Low caps leave some topics short, so there is a worst topic to find.
    session = session.model_copy(
        update={
            "reviewers": [r.model_copy(update={"cap": 3, "floor": 0}) for r in session.reviewers]
        }
    )
    path = tmp_path / "tight.json"
    save_session(session, path)
    app = new_app(path)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("r")
        await app.workers.wait_for_complete()
        await pilot.press("2", "1")
        await pilot.pause()
        overview = app.query_one(Overview)
        assert app.focused is overview
        chart = app.query_one("#chart-topic", Chart)
        # Full width: the chart spans the Overview (less its padding and scroll bar).
        assert chart.region.width >= overview.region.width - 4
        coverage = app.facts.topic_coverage()
        worst = max(coverage, key=lambda t: (t[2] - t[1], -len(t[0])))
        assert worst[2] > worst[1]
        lines = str(chart.render()).splitlines()
        assert lines[1].startswith(worst[0] + " ") and "SHORT" in lines[1]
        # Every topic name is whole, and each line fits the chart.
        for topic, *_ in coverage:
            assert any(line.startswith(topic + " ") for line in lines[1:])
        assert all(len(line) <= chart.content_size.width for line in lines)
        # The worst topic is on screen without scrolling.
        assert chart.region.y + 2 < app.size.height - 1
        # The keyboard scrolls the Overview.
        await pilot.press("pagedown")
        await pilot.pause()
        assert overview.scroll_y > 0
